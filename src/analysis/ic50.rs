//! Dose-response analysis of one compound: IC50 with its interval, pIC50,
//! Hill coefficient, asymptotes, and quality flags; plate normalisation and
//! Z′.
//!
//! **Model.** Four-parameter logistic (DESIGN §4; [`Logistic`]),
//! y = lower + (upper − lower)/(1 + (x/IC50)^h), fitted on ln IC50, rows at
//! x = 0 included. With a known total enzyme concentration, Morrison's
//! tight-binding equation instead ([`Morrison`]), giving the apparent Ki
//! directly and IC50 = Ki,app + Et/2 (Copeland 2013).
//!
//! **Intervals.** By default Wald on ln IC50: exp(ln IC50 ± t(df)·SE(ln IC50)),
//! SE from the covariance s²(JᵀJ)⁻¹. It costs nothing beyond the fit, which
//! matters at a million curves; profile-likelihood intervals (the engine's
//! [`profile`]) are an option, several refits per end. Hill and the
//! asymptotes get Wald intervals on their own scale.
//!
//! **Qualifier.** When the fitted IC50 lies above the highest tested
//! concentration the result is `>` that concentration; below the lowest
//! positive one, `<` it. The bound is the reported value: the data say no
//! more than that. pIC50 = −log10(IC50 in mol/L); for a bound, the pIC50
//! bound runs the other way (`> x` in IC50 is `< p` in pIC50).
//!
//! **Flags** (stable codes; every threshold is an option, the defaults are
//! common practice, not from a single source):
//!
//! | code | when |
//! |---|---|
//! | `ic50-above-range` | IC50 above the top concentration (qualifier `>`) |
//! | `ic50-below-range` | IC50 below the lowest positive concentration (qualifier `<`) |
//! | `hill-steep` | \|h\| above `hill_steep` (2), IC50 within range |
//! | `hill-shallow` | \|h\| below `hill_shallow` (0.5), IC50 within range |
//! | `partial-inhibition` | lower/upper above `partial_above` (0.2): activity left at saturating inhibitor, response measured from zero |
//! | `no-inhibition` | fitted inhibition at the top concentration, 1 − y(top)/upper, below `min_inhibition` (0.2) |
//! | `poor-fit` | R² below `min_r2` (0.8); not raised with `no-inhibition` (R² means nothing for a flat curve) |
//! | `too-few-points` | fewer than `min_concentrations` (6) distinct concentrations |
//! | `not-converged` | the minimiser did not stop at a minimum |
//! | `hill-fixed` | the free fit was degenerate (no transition in range); refitted with h = 1 to place the IC50 |
//! | `tight-binding-titration` | Morrison: Ki,app below Et/10 — the curve mostly measures Et |
//! | `plate-z-prime-low` | a plate the compound sits on has Z′ below the limit (0.5) |
//! | `carried-varies` | a carried column has different values within the compound |
//!
//! **Z′** (Zhang, Chung & Oldenburg, J. Biomol. Screen. 4, 67–73, 1999):
//! Z′ = 1 − 3(σ₊ + σ₋)/|μ₊ − μ₋| over a plate's uninhibited (+) and
//! inhibited (−) control wells; below 0.5 the assay window is too narrow for
//! reliable single measurements (their classification; 0.5 is the usual
//! acceptance limit). % activity = 100·(y − μ₋)/(μ₊ − μ₋).

use serde::Serialize;
use serde::ser::SerializeMap;

use crate::error::{Error, Result};
use crate::fit::intervals::{Bound, Interval, profile, t_quantile};
use crate::fit::{Data, Fit, FitSettings, Model, Scale, fit_small};
use crate::models::{Dose, Logistic, Morrison};
use crate::report::Param;
use crate::units::{ConcUnit, Qualifier, p_value};

/// One compound's dose-response rows, concentrations in the reporting unit.
#[derive(Debug, Clone)]
pub struct Curve {
    /// Compound identifier as written.
    pub compound: String,
    /// Where the rows came from, e.g. `lines 5-16`.
    pub origin: String,
    /// Inhibitor concentrations (0 allowed).
    pub x: Vec<f64>,
    /// Responses (raw, or % activity after normalisation).
    pub y: Vec<f64>,
    /// Other columns, one value per compound.
    pub carried: Carried,
    /// Flags found while reading (plate quality, varying carried values).
    pub read_flags: Vec<&'static str>,
}

impl Curve {
    /// `compound 'KX-101' (lines 5-16)`, for messages.
    pub fn group(&self) -> String {
        format!("compound '{}' ({})", self.compound, self.origin)
    }
}

/// Carried columns in header order, serialised as a JSON object.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Carried(pub Vec<(String, String)>);

impl Serialize for Carried {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut map = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

/// How intervals are computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum IntervalMethod {
    /// Wald on ln IC50 (fast; the default).
    Wald,
    /// Profile likelihood for IC50 (or Ki,app): several refits per end.
    Profile,
}

/// Flag thresholds; the defaults are common practice.
#[derive(Debug, Clone, Copy)]
pub struct Thresholds {
    /// |h| above this is `hill-steep`.
    pub hill_steep: f64,
    /// |h| below this is `hill-shallow`.
    pub hill_shallow: f64,
    /// lower/upper above this is `partial-inhibition`.
    pub partial_above: f64,
    /// Inhibition at the top concentration below this fraction is `no-inhibition`.
    pub min_inhibition: f64,
    /// R² below this is `poor-fit`.
    pub min_r2: f64,
    /// Fewer distinct concentrations than this is `too-few-points`.
    pub min_concentrations: usize,
    /// Z′ below this is `plate-z-prime-low`.
    pub min_z_prime: f64,
}

impl Default for Thresholds {
    fn default() -> Self {
        Thresholds {
            hill_steep: 2.0,
            hill_shallow: 0.5,
            partial_above: 0.2,
            min_inhibition: 0.2,
            min_r2: 0.8,
            min_concentrations: 6,
            min_z_prime: 0.5,
        }
    }
}

/// How to analyse.
#[derive(Debug, Clone)]
pub struct Options {
    /// Hold the lower asymptote here (response units).
    pub fix_lower: Option<f64>,
    /// Hold the upper asymptote here (response units).
    pub fix_upper: Option<f64>,
    /// Total enzyme, in the reporting unit: fit Morrison instead of the logistic.
    pub enzyme: Option<f64>,
    /// The unit of concentrations and IC50.
    pub unit: ConcUnit,
    /// The unit of the response and the asymptotes (`%` after normalisation), if known.
    pub response_unit: Option<String>,
    /// Confidence level, e.g. 0.95.
    pub confidence: f64,
    /// Interval method for IC50.
    pub intervals: IntervalMethod,
    /// Flag thresholds.
    pub thresholds: Thresholds,
    /// Minimiser settings.
    pub settings: FitSettings,
}

/// Everything reported for one compound (the JSON "C" of the issue).
#[derive(Debug, Clone, Serialize)]
pub struct Ic50Result {
    /// Compound identifier.
    pub compound: String,
    /// Number of rows fitted.
    pub n: usize,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
    /// `=`, or `>` / `<` when IC50 is beyond the tested range (then `ic50.value` is the bound).
    pub qualifier: Qualifier,
    /// IC50 in the input's concentration unit.
    pub ic50: Param,
    /// −log10(IC50 / M); a bound in the reversed direction when the qualifier is.
    pub pic50: f64,
    /// Hill coefficient (null for the Morrison model, which has none).
    pub hill: Option<Param>,
    /// Asymptote at zero concentration (response units).
    pub upper: Param,
    /// Asymptote at saturating concentration (response units).
    pub lower: Param,
    /// Residual standard deviation √(SSE/df); null when df = 0.
    pub residual_sd: f64,
    /// R².
    pub r2: f64,
    /// Flag codes (see the module docs).
    pub flags: Vec<&'static str>,
    /// Carried columns, verbatim.
    pub carried: Carried,
    /// `logistic` or `morrison`.
    pub model: &'static str,
    /// Apparent Ki (Morrison only), in the concentration unit.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ki_app: Option<Param>,
    /// The fitted parameter vector in the model's own order, even when the
    /// reported IC50 is a bound; for drawing the curve, not for export.
    #[serde(skip)]
    pub fitted: Vec<f64>,
}

/// Fits one compound.
pub fn analyse(curve: &Curve, options: &Options) -> Result<Ic50Result> {
    match options.enzyme {
        Some(et) => analyse_morrison(curve, et, options),
        None => analyse_logistic(curve, options),
    }
}

/// The tested range: (distinct concentrations, smallest positive, largest).
fn tested_range(x: &[f64]) -> (usize, f64, f64) {
    let mut sorted = x.to_vec();
    sorted.sort_by(f64::total_cmp);
    sorted.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs());
    let min_pos = sorted.iter().copied().find(|v| *v > 0.0).unwrap_or(f64::NAN);
    (sorted.len(), min_pos, sorted.last().copied().unwrap_or(f64::NAN))
}

/// Rejects curves no fit can use.
fn check(curve: &Curve, n_free: usize) -> Result<(usize, f64, f64)> {
    let fail = |problem: String, expected: String| Error::Data { group: curve.group(), problem, expected };
    let (levels, min_pos, max) = tested_range(&curve.x);
    if levels < 2 {
        return Err(fail(
            format!("only one concentration ({})", crate::io::output::sig(max, 4)),
            "a dose-response curve needs several concentrations (8–10 spanning the IC50 is common practice)".into(),
        ));
    }
    if levels < n_free.min(4) || curve.y.len() <= n_free || !min_pos.is_finite() {
        return Err(fail(
            format!("{} rows at {levels} concentrations", curve.y.len()),
            format!(
                "fitting {n_free} parameters needs at least {} rows at {} or more concentrations, some above zero",
                n_free + 1,
                n_free.min(4)
            ),
        ));
    }
    let (lo, hi) = curve.y.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    if hi - lo <= 1e-12 * hi.abs().max(lo.abs()) {
        return Err(fail(
            format!("all {} responses are equal ({})", curve.y.len(), crate::io::output::sig(hi, 6)),
            "there is no dose-response to fit; check the response column".into(),
        ));
    }
    Ok((levels, min_pos, max))
}

/// Fits from the model's first (data-driven) start; the other starts are
/// tried only when that fit is doubtful, so a clean curve costs one run.
fn fit_curve<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    fixed: &[Option<f64>],
    settings: &FitSettings,
    plausible: impl Fn(&Fit) -> bool,
) -> Fit {
    let starts = model.starts(data);
    let first = fit_small(model, data, &starts[..1.min(starts.len())], fixed, settings);
    if starts.len() <= 1 || (first.converged() && plausible(&first)) {
        return first;
    }
    let rest = fit_small(model, data, &starts[1..], fixed, settings);
    if rest.sse < first.sse || (!first.sse.is_finite() && rest.sse.is_finite()) { rest } else { first }
}

fn analyse_logistic(curve: &Curve, options: &Options) -> Result<Ic50Result> {
    let fixed = [None, None, options.fix_lower, options.fix_upper];
    let n_free = fixed.iter().filter(|f| f.is_none()).count();
    let (levels, min_pos, max) = check(curve, n_free)?;
    let data = Data::unweighted(curve.x.iter().map(|x| Dose::new(*x)).collect(), curve.y.clone());
    let t = &options.thresholds;
    let model = Logistic;
    let plausible =
        |f: &Fit| f.r2 >= t.min_r2 && f.theta[Logistic::IC50] > min_pos * 1e-3 && f.theta[Logistic::IC50] < max * 1e3;
    let mut fit = fit_curve(&model, &data, &fixed, &options.settings, plausible);
    let both_free = options.fix_lower.is_none() && options.fix_upper.is_none();
    if both_free && fit.theta[Logistic::HILL] < 0.0 {
        mirror(&mut fit);
    }
    let mut flags = Vec::new();
    if !determined(&fit, &curve.y) {
        // The first start may have slid into a degenerate valley another start avoids.
        let all = fit_small(&model, &data, &model.starts(&data), &fixed, &options.settings);
        if all.converged() && determined(&all, &curve.y) {
            fit = all;
        }
    }
    if both_free && fit.theta[Logistic::HILL] < 0.0 {
        mirror(&mut fit);
    }
    if !determined(&fit, &curve.y) {
        // No transition inside the tested range: the slope is not determined and
        // the free fit degenerates (h → 0, an asymptote running away). Hold h = 1
        // (common practice) so that the IC50 can at least be placed, and say so.
        let held = [None, Some(1.0), options.fix_lower, options.fix_upper];
        fit = fit_curve(&model, &data, &held, &options.settings, plausible);
        flags.push("hill-fixed");
    }
    let (ic50, hill, lower, upper) = (fit.theta[0], fit.theta[1], fit.theta[2], fit.theta[3]);
    let top_effect = if upper > 0.0 { 1.0 - model.value(&fit.theta, &Dose::new(max)) / upper } else { 0.0 };
    let qualifier = range_flags(ic50, min_pos, max, top_effect < t.min_inhibition, &mut flags);
    if qualifier == Qualifier::Equal && !fit.fixed[Logistic::HILL] {
        if hill.abs() > t.hill_steep {
            flags.push("hill-steep");
        }
        if hill.abs() < t.hill_shallow {
            flags.push("hill-shallow");
        }
        if options.fix_lower.is_none() && upper > 0.0 && lower / upper > t.partial_above {
            flags.push("partial-inhibition");
        }
    }
    common_flags(&fit, levels, t, curve, &mut flags);
    let ic50_param = ic50_param(&model, &data, &fit, Logistic::IC50, qualifier, min_pos, max, 0.0, options);
    let wald_linear = |j: usize, flag: &str| match fit.fixed[j] {
        true => Param { unit: options.response_unit.clone(), ..fixed_param(fit.theta[j], flag) },
        false => Param::new(
            fit.theta[j],
            fit.se[j],
            wald(&fit, j, Scale::Linear, options.confidence),
            "wald",
            options.response_unit.clone(),
        ),
    };
    Ok(Ic50Result {
        compound: curve.compound.clone(),
        n: fit.n,
        converged: fit.converged(),
        qualifier,
        pic50: p_value(options.unit.to_molar(ic50_param.value)),
        ic50: ic50_param,
        hill: Some(match fit.fixed[Logistic::HILL] {
            true => fixed_param(hill, "kimech: not determined by the data (flag hill-fixed)"),
            false => {
                Param::new(hill, fit.se[1], wald(&fit, Logistic::HILL, Scale::Linear, options.confidence), "wald", None)
            }
        }),
        upper: wald_linear(Logistic::UPPER, "--fix-upper"),
        lower: wald_linear(Logistic::LOWER, "--fix-lower"),
        residual_sd: fit.residual_sd,
        r2: fit.r2,
        flags,
        carried: curve.carried.clone(),
        model: "logistic",
        ki_app: None,
        fitted: fit.theta.clone(),
    })
}

/// Whether a free 4PL fit is a curve the data determine: a Hill coefficient
/// of at least 0.05 and asymptotes within one response span of the observed
/// responses. Degenerate fits (h → 0: a step at zero dose; an asymptote at
/// −700) fail this. A very steep fit passes: its IC50 is still placed
/// between two tested concentrations, and it is flagged `hill-steep`.
fn determined(fit: &Fit, y: &[f64]) -> bool {
    let (lo, hi) = y.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    let span = hi - lo;
    let h = fit.theta[Logistic::HILL].abs();
    let inside = |v: f64| v >= lo - span && v <= hi + span;
    fit.fixed[Logistic::HILL] || (h >= 0.05 && inside(fit.theta[Logistic::LOWER]) && inside(fit.theta[Logistic::UPPER]))
}

/// (IC50, h, lower, upper) and (IC50, −h, upper, lower) are the same curve;
/// report the one with h > 0 so that `upper` is the response at zero dose.
fn mirror(fit: &mut Fit) {
    fit.theta[Logistic::HILL] = -fit.theta[Logistic::HILL];
    fit.theta.swap(Logistic::LOWER, Logistic::UPPER);
    fit.se.swap(Logistic::LOWER, Logistic::UPPER);
    if let Some(cov) = fit.covariance.as_mut() {
        // Free order is ic50, hill, lower, upper: negate hill's row and column, swap the last two.
        for k in 0..cov.nrows() {
            cov[(1, k)] = -cov[(1, k)];
        }
        for k in 0..cov.nrows() {
            cov[(k, 1)] = -cov[(k, 1)];
        }
        cov.swap_rows(2, 3);
        cov.swap_columns(2, 3);
    }
}

/// The Wald interval of parameter `j`: θ ± t·SE, or for a log-scale
/// parameter exp(ln θ ± t·SE/θ) (the engine's `wald`, with the t quantile
/// looked up once per degrees of freedom: computing it is a third of the
/// cost of a 10-point fit).
fn wald(fit: &Fit, j: usize, scale: Scale, confidence: f64) -> Interval {
    let (Some(se), Some(t)) = (fit.se[j], cached_t(confidence, fit.df)) else {
        return Interval { low: Bound::NotDetermined, high: Bound::NotDetermined };
    };
    let value = fit.theta[j];
    match scale {
        Scale::Linear => Interval { low: Bound::At(value - t * se), high: Bound::At(value + t * se) },
        Scale::Log => {
            let half = t * se / value;
            Interval { low: Bound::At(value * (-half).exp()), high: Bound::At(value * half.exp()) }
        }
    }
}

fn cached_t(confidence: f64, df: usize) -> Option<f64> {
    thread_local! {
        static CACHE: std::cell::RefCell<Vec<(f64, usize, Option<f64>)>> = const { std::cell::RefCell::new(Vec::new()) };
    }
    CACHE.with(|c| {
        let mut c = c.borrow_mut();
        if let Some(hit) = c.iter().find(|(conf, d, _)| *d == df && conf.to_bits() == confidence.to_bits()) {
            return hit.2;
        }
        let t = t_quantile(confidence, df);
        if c.len() < 256 {
            c.push((confidence, df, t));
        }
        t
    })
}

/// Minimiser settings for dose-response curves: relative tolerances of
/// 1e-10 on SSE and parameters (IC50 to about ten digits, far inside any
/// assay's precision) instead of the engine's 1e-15, which at a million
/// curves costs iterations that change nothing that is reported.
pub fn screening_settings() -> FitSettings {
    FitSettings { ftol: 1e-10, xtol: 1e-10, gtol: 1e-12, patience: 200, polish: false }
}

fn fixed_param(value: f64, flag: &str) -> Param {
    Param {
        value,
        se: None,
        low: None,
        high: None,
        unit: None,
        interval: "fixed",
        note: Some(format!("held fixed by {flag}")),
    }
}

/// The qualifier from where the IC50 falls, with its flag.
fn range_flags(ic50: f64, min_pos: f64, max: f64, no_inhibition: bool, flags: &mut Vec<&'static str>) -> Qualifier {
    if no_inhibition {
        flags.push("no-inhibition");
    }
    if no_inhibition || ic50 > max || ic50.is_nan() {
        flags.push("ic50-above-range");
        Qualifier::Greater
    } else if ic50 < min_pos {
        flags.push("ic50-below-range");
        Qualifier::Less
    } else {
        Qualifier::Equal
    }
}

/// Flags every model shares. R² says nothing about a flat curve (there is
/// no variance to explain), so `poor-fit` is not raised with `no-inhibition`.
fn common_flags(fit: &Fit, levels: usize, t: &Thresholds, curve: &Curve, flags: &mut Vec<&'static str>) {
    let flat = flags.contains(&"no-inhibition");
    if !flat && (fit.r2 < t.min_r2 || fit.r2.is_nan()) {
        flags.push("poor-fit");
    }
    if levels < t.min_concentrations {
        flags.push("too-few-points");
    }
    if !fit.converged() {
        flags.push("not-converged");
    }
    flags.extend(curve.read_flags.iter().copied());
}

/// IC50 (or Ki,app for Morrison, `offset` = Et/2 between them) as reported:
/// the bound when out of range, else the estimate with its interval.
#[allow(clippy::too_many_arguments)]
fn ic50_param<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    fit: &Fit,
    j: usize,
    qualifier: Qualifier,
    min_pos: f64,
    max: f64,
    offset: f64,
    options: &Options,
) -> Param {
    let unit = Some(options.unit.symbol().to_string());
    let fitted = fit.theta[j] + offset;
    let bound = |value: f64, words: &str| Param {
        value,
        se: None,
        low: None,
        high: None,
        unit: unit.clone(),
        interval: "bound",
        note: Some(format!(
            "IC50 {words} tested concentration; the value is that concentration, a bound (fitted value {} {})",
            crate::io::output::sig(fitted, 4),
            options.unit
        )),
    };
    match qualifier {
        Qualifier::Greater => bound(max, "above the highest"),
        Qualifier::Less => bound(min_pos, "below the lowest positive"),
        _ => {
            let (interval, method) = match options.intervals {
                IntervalMethod::Profile if fit.converged() => {
                    (profile(model, data, fit, j, options.confidence, &options.settings), "profile")
                }
                _ => (wald(fit, j, Scale::Log, options.confidence), "wald-log"),
            };
            let shift = |b: Bound| match b {
                Bound::At(v) => Bound::At(v + offset),
                other => other,
            };
            let interval = Interval { low: shift(interval.low), high: shift(interval.high) };
            Param::new(fitted, fit.se[j], interval, method, unit)
        }
    }
}

fn analyse_morrison(curve: &Curve, et: f64, options: &Options) -> Result<Ic50Result> {
    let fixed = [None, options.fix_upper];
    let n_free = fixed.iter().filter(|f| f.is_none()).count();
    let (levels, min_pos, max) = check(curve, n_free)?;
    let data = Data::unweighted(curve.x.clone(), curve.y.clone());
    let t = &options.thresholds;
    let model = Morrison { et };
    let fit = fit_curve(&model, &data, &fixed, &options.settings, |f| f.r2 >= t.min_r2);
    let (k, upper) = (fit.theta[Morrison::KI_APP], fit.theta[Morrison::UPPER]);
    let top_effect = if upper > 0.0 { 1.0 - model.value(&fit.theta, &max) / upper } else { 0.0 };
    let mut flags = Vec::new();
    let qualifier = range_flags(k + et / 2.0, min_pos, max, top_effect < t.min_inhibition, &mut flags);
    if qualifier == Qualifier::Equal && k < et / 10.0 {
        flags.push("tight-binding-titration");
    }
    common_flags(&fit, levels, t, curve, &mut flags);
    let ic50 = ic50_param(&model, &data, &fit, Morrison::KI_APP, qualifier, min_pos, max, et / 2.0, options);
    let unit = Some(options.unit.symbol().to_string());
    let ki_app = match qualifier {
        Qualifier::Equal => ic50.scaled(1.0, unit.clone()).shifted(-et / 2.0),
        _ => Param { value: ic50.value - et / 2.0, ..ic50.clone() },
    };
    let upper_p = match fit.fixed[Morrison::UPPER] {
        true => Param { unit: options.response_unit.clone(), ..fixed_param(upper, "--fix-upper") },
        false => Param::new(
            upper,
            fit.se[1],
            wald(&fit, 1, Scale::Linear, options.confidence),
            "wald",
            options.response_unit.clone(),
        ),
    };
    let mut lower = Param { unit: options.response_unit.clone(), ..fixed_param(0.0, "the Morrison model") };
    lower.note = Some("zero by the Morrison model (complete inhibition at saturating inhibitor)".into());
    Ok(Ic50Result {
        compound: curve.compound.clone(),
        n: fit.n,
        converged: fit.converged(),
        qualifier,
        pic50: p_value(options.unit.to_molar(ic50.value)),
        ic50,
        hill: None,
        upper: upper_p,
        lower,
        residual_sd: fit.residual_sd,
        r2: fit.r2,
        flags,
        carried: curve.carried.clone(),
        model: "morrison",
        ki_app: Some(ki_app),
        fitted: fit.theta.clone(),
    })
}

trait Shift {
    fn shifted(self, by: f64) -> Self;
}

impl Shift for Param {
    /// The same parameter moved by a constant (Ki,app = IC50 − Et/2).
    fn shifted(self, by: f64) -> Param {
        Param { value: self.value + by, low: self.low.map(|v| v + by), high: self.high.map(|v| v + by), ..self }
    }
}

/// Running mean and variance of control wells (Welford), mergeable.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Wells {
    /// Number of wells.
    pub n: usize,
    mean: f64,
    m2: f64,
}

impl Wells {
    /// Adds one well.
    pub fn add(&mut self, y: f64) {
        self.n += 1;
        let d = y - self.mean;
        self.mean += d / self.n as f64;
        self.m2 += d * (y - self.mean);
    }

    /// Mean signal (NaN when empty).
    pub fn mean(&self) -> f64 {
        if self.n == 0 { f64::NAN } else { self.mean }
    }

    /// Sample standard deviation (NaN with fewer than two wells).
    pub fn sd(&self) -> f64 {
        if self.n < 2 { f64::NAN } else { (self.m2 / (self.n - 1) as f64).sqrt() }
    }
}

/// One plate's control wells and the quality derived from them.
#[derive(Debug, Clone, Serialize)]
pub struct PlateQc {
    /// Plate identifier (empty when the input has no plate column).
    pub plate: String,
    /// Uninhibited (full-activity) wells.
    pub uninhibited_n: usize,
    /// Their mean signal.
    pub uninhibited_mean: f64,
    /// Their SD.
    pub uninhibited_sd: f64,
    /// Inhibited (zero-activity) wells.
    pub inhibited_n: usize,
    /// Their mean signal.
    pub inhibited_mean: f64,
    /// Their SD.
    pub inhibited_sd: f64,
    /// Z′ (Zhang, Chung & Oldenburg 1999); null without two wells of each kind.
    pub z_prime: f64,
    /// `plate-z-prime-low` when Z′ is below the limit.
    pub flags: Vec<&'static str>,
}

impl PlateQc {
    /// Z′ and its flag from the two kinds of control well.
    pub fn new(plate: &str, uninhibited: &Wells, inhibited: &Wells, min_z_prime: f64) -> PlateQc {
        let z = z_prime(uninhibited, inhibited);
        PlateQc {
            plate: plate.to_string(),
            uninhibited_n: uninhibited.n,
            uninhibited_mean: uninhibited.mean(),
            uninhibited_sd: uninhibited.sd(),
            inhibited_n: inhibited.n,
            inhibited_mean: inhibited.mean(),
            inhibited_sd: inhibited.sd(),
            z_prime: z,
            flags: if z < min_z_prime { vec!["plate-z-prime-low"] } else { Vec::new() },
        }
    }

    /// % activity of a raw signal: 100·(y − μ₋)/(μ₊ − μ₋); `None` when a kind of control is missing or the window is zero.
    pub fn percent_activity(&self, y: f64) -> Option<f64> {
        let window = self.uninhibited_mean - self.inhibited_mean;
        (self.uninhibited_n > 0 && self.inhibited_n > 0 && window != 0.0 && window.is_finite())
            .then(|| 100.0 * (y - self.inhibited_mean) / window)
    }
}

/// Z′ = 1 − 3(σ₊ + σ₋)/|μ₊ − μ₋| (Zhang, Chung & Oldenburg 1999).
pub fn z_prime(uninhibited: &Wells, inhibited: &Wells) -> f64 {
    1.0 - 3.0 * (uninhibited.sd() + inhibited.sd()) / (uninhibited.mean() - inhibited.mean()).abs()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Zhang, Chung & Oldenburg (1999), eq. for Z′, by hand: μ₊ = 100,
    /// σ₊ = 5, μ₋ = 10, σ₋ = 3 → 1 − 3·8/90 = 0.7333….
    #[test]
    fn z_prime_by_hand() {
        let (mut u, mut i) = (Wells::default(), Wells::default());
        for y in [95.0, 105.0, 95.0, 105.0] {
            u.add(y);
        }
        for y in [7.0, 13.0, 7.0, 13.0] {
            i.add(y);
        }
        // sample SD of ±5 four times is 5·√(4/3).
        let (su, si) = (5.0 * (4.0f64 / 3.0).sqrt(), 3.0 * (4.0f64 / 3.0).sqrt());
        let expected = 1.0 - 3.0 * (su + si) / 90.0;
        assert!((z_prime(&u, &i) - expected).abs() < 1e-12);
        let qc = PlateQc::new("P1", &u, &i, 0.5);
        assert!((qc.percent_activity(55.0).unwrap() - 50.0).abs() < 1e-12);
    }
}
