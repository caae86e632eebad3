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
//! **Calls** (issue 9; DESIGN §5: from the data, not from the asymptotes
//! alone). Each curve gets one [`Call`], and the IC50's qualifier follows:
//! 1. *Flat?* The extra-sum-of-squares F test of a flat line (the mean)
//!    against the fitted curve (Bates & Watts 1988; the nested test `mode`
//!    uses). p ≥ `flat_alpha` (0.05): no significant dose-response. For %
//!    activity a flat line below 50 % is `complete` (`<` lowest: every well
//!    already inhibited); otherwise `inactive` (`>` highest).
//! 2. *Too little?* Fitted inhibition at the highest concentration below
//!    `min_inhibition` (20 %, of 100 % for % activity, of the fitted upper
//!    asymptote for raw signal): `inactive` (`>`).
//! 3. *Where does the curve cross half?* Half is 50 % for % activity (judged
//!    against the control levels) and half-way between the fitted asymptotes
//!    for raw signal. Below half already at the lowest positive
//!    concentration: `complete` (`<`). Still above half at the highest:
//!    `weak` (`>`), or `partial` (`>`) when the curve visibly levels off
//!    (90 % of its own effect inside the range) above half. Otherwise a
//!    `full` curve (`=`), or `partial` (`=`, flag `partial-inhibition`) when
//!    the fitted lower asymptote is above `partial_above` (20 %) of the full
//!    activity. The reported IC50 is the curve's own midpoint (relative
//!    IC50); if that lies outside the range the bound is reported instead.
//!
//! For % activity the asymptotes must stay in a plausible window (upper
//! 70–130 %, lower −30–100 %, all options): a fitted asymptote outside it
//! is held at its control level (100 % or 0 %), the curve refitted, and
//! the flag `upper-outside-window` / `lower-outside-window` raised.
//!
//! **Held slope.** When no transition inside the range determines h (the
//! free fit degenerates) h is held at 1 (common practice) and flagged
//! `hill-fixed`; an in-range IC50 is then approximate (`~`, with a note why),
//! never exact.
//!
//! **Aberrant wells.** The Bonferroni test on externally studentized
//! residuals (Cook & Weisberg, *Residuals and Influence in Regression*,
//! 1982, §2.2): leverages from the model linearised at the optimum; the
//! worst well is marked when |t| > t(1 − α/(2n); df − 1), α = `outlier_alpha`
//! (0.01 per curve), then the curve is refitted without it and tested again,
//! up to `max_outliers` (2) wells (`too-many-outliers` when more would go).
//! It needs only the fit's covariance, so a clean curve costs no refit.
//! Marked wells are listed in every output (`outliers`), flagged
//! `outlier-excluded` (or `outlier-flagged` with [`OutlierMode::Flag`]);
//! [`OutlierMode::Keep`] is plain least squares on every well.
//!
//! pIC50 = −log10(IC50 in mol/L); for a bound, the pIC50 bound runs the
//! other way (`> x` in IC50 is `< p` in pIC50).
//!
//! **Flags** (stable codes; every threshold is an option, the defaults are
//! common practice, not from a single source):
//!
//! | code | when |
//! |---|---|
//! | `ic50-above-range` | call puts the IC50 above the top concentration (qualifier `>`) |
//! | `ic50-below-range` | call puts the IC50 below the lowest positive concentration (qualifier `<`) |
//! | `hill-steep` | \|h\| above `hill_steep` (2), IC50 within range |
//! | `hill-shallow` | \|h\| below `hill_shallow` (0.5), IC50 within range |
//! | `partial-inhibition` | call `partial`: the curve levels off well above zero activity |
//! | `no-inhibition` | call `inactive`: flat line not rejected, or too little inhibition at the top |
//! | `poor-fit` | R² below `min_r2` (0.8); not raised with `no-inhibition` (R² means nothing for a flat curve) |
//! | `too-few-points` | fewer than `min_concentrations` (6) distinct concentrations |
//! | `not-converged` | the minimiser did not stop at a minimum |
//! | `hill-fixed` | the free fit was degenerate; refitted with h = 1 (IC50 `~` or a bound) |
//! | `upper-outside-window` | % activity: fitted upper asymptote outside its window; held at 100 % |
//! | `lower-outside-window` | % activity: fitted lower asymptote outside its window; held at 0 % |
//! | `outlier-excluded` | wells marked by the outlier rule were left out (listed in `outliers`) |
//! | `outlier-flagged` | wells marked by the outlier rule are listed but still fitted |
//! | `too-many-outliers` | the rule would mark more than `max_outliers` wells |
//! | `tight-binding-titration` | Morrison: Ki,app below Et/10 — the curve mostly measures Et |
//! | `plate-z-prime-low` | a plate the compound sits on has Z′ below the limit (0.5) |
//! | `carried-varies` | a carried column has different values within the compound |
//!
//! **Z′** (Zhang, Chung & Oldenburg, J. Biomol. Screen. 4, 67–73, 1999):
//! Z′ = 1 − 3(σ₊ + σ₋)/|μ₊ − μ₋| over a plate's uninhibited (+) and
//! inhibited (−) control wells; below 0.5 the assay window is too narrow for
//! reliable single measurements (their classification; 0.5 is the usual
//! acceptance limit). % activity = 100·(y − μ₋)/(μ₊ − μ₋).

mod projected;

use crate::report::Code;
use serde::Serialize;
use serde::ser::SerializeMap;

use crate::error::{Error, Result};
use crate::fit::intervals::{Bound, Interval, profile, t_quantile};
use crate::fit::{Data, Fit, FitSettings, Model, Scale, fit_small};
use crate::models::{Dose, Logistic, LogisticAt, Morrison};
use crate::report::Param;
use crate::units::{ConcUnit, Qualifier, p_value};
use projected::fit_logistic_projected;

/// One compound's dose-response rows, concentrations in the reporting unit.
#[derive(Debug, Clone)]
pub struct Curve {
    /// Compound identifier as written.
    pub compound: String,
    /// Where the wells came from, for messages and to name an excluded well.
    pub location: Location,
    /// Inhibitor concentrations (0 allowed).
    pub x: Vec<f64>,
    /// Responses (raw, or % activity after normalisation).
    pub y: Vec<f64>,
    /// Other columns, one value per compound.
    pub carried: Carried,
    /// Flags found while reading (plate quality, varying carried values).
    pub read_flags: Vec<Code>,
}

impl Curve {
    /// `compound 'KX-101' (lines 5-16)`, for messages.
    pub fn group(&self) -> String {
        format!("compound '{}' ({})", crate::report::short_id(&self.compound), self.location.span())
    }
}

/// Where a curve's wells came from. The reader fills it: the tidy-table
/// reader with the input's line numbers; a reader without lines (a plate
/// layout, a file of another standard) describes the span its own way and
/// leaves `lines` empty, and an excluded well is then listed without a line.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Location {
    /// The input, as named on the command line (shared by every curve of a file).
    pub file: std::sync::Arc<str>,
    /// The first and last input line of the curve's rows, which messages
    /// name (`plate.csv, lines 5-16`, see [`Location::span`]); `None` when the
    /// curve was not read from lines and `file` describes it. Only a message
    /// needs the text, so it is made only then.
    pub rows: Option<(u64, u64)>,
    /// The input line of each well, in the order of `x` and `y` (empty when unknown).
    pub lines: Vec<u64>,
}

impl Location {
    /// A curve that was not read from an input (a test, a simulation): `span` names it.
    pub fn described(span: &str) -> Location {
        Location { file: std::sync::Arc::from(span), rows: None, lines: Vec::new() }
    }

    /// The curve's place in the input, for messages: `plate.csv, lines 5-16`
    /// (`plate.csv, line 5` for one row), or the description of a curve not
    /// read from lines.
    pub fn span(&self) -> String {
        match self.rows {
            Some((first, last)) => format!("{}, {}", self.file, crate::report::line_span(first, last)),
            None => self.file.to_string(),
        }
    }

    /// The file and the wells' lines, as every output row names them (the
    /// file name shared, not copied).
    pub fn origin(&self) -> crate::report::Origin {
        crate::report::Origin::shared(self.file.clone(), self.lines.iter().copied())
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
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
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
    /// Level of the extra-sum-of-squares F test of the flat line against
    /// the logistic: p at or above it is "no significant inhibition".
    pub flat_alpha: f64,
    /// Family-wise level of the outlier rule (Bonferroni over the wells).
    pub outlier_alpha: f64,
    /// Most wells one curve may lose to the outlier rule.
    pub max_outliers: usize,
    /// % activity only: plausible window of the fitted upper asymptote.
    pub upper_window: (f64, f64),
    /// % activity only: plausible window of the fitted lower asymptote.
    pub lower_window: (f64, f64),
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
            flat_alpha: 0.05,
            outlier_alpha: 0.01,
            max_outliers: 2,
            upper_window: (70.0, 130.0),
            lower_window: (-30.0, 100.0),
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
    /// The response is % activity (after normalisation, or a `(%)` header):
    /// calls are judged against 100 % and 0 %.
    pub percent: bool,
    /// What to do with wells the outlier rule marks.
    pub outliers: OutlierMode,
}

/// What to do with wells the outlier rule marks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutlierMode {
    /// Refit without them and list them (the default).
    Exclude,
    /// List them, but fit every well.
    Flag,
    /// No outlier rule: plain least squares on every well.
    Keep,
}

/// What the data show about a curve, decided by the rules in the module
/// docs; the IC50's qualifier follows from it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Call {
    /// The curve crosses half activity inside the tested range (`=`).
    Full,
    /// It levels off well above zero activity (flag `partial-inhibition`).
    Partial,
    /// Inhibition is already complete at the lowest concentration (`<`).
    Complete,
    /// Inhibition starts but does not reach half within the range (`>`).
    Weak,
    /// No significant inhibition: a flat line does as well (`>`).
    Inactive,
}

impl Call {
    /// The word used in tables and CSV.
    pub fn word(self) -> &'static str {
        match self {
            Call::Full => "full",
            Call::Partial => "partial",
            Call::Complete => "complete",
            Call::Weak => "weak",
            Call::Inactive => "inactive",
        }
    }
}

/// A well the outlier rule marked.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Outlier {
    /// Input line (null when the curve did not come from a file).
    pub line: Option<u64>,
    /// Its concentration, in the reporting unit.
    pub concentration: f64,
    /// Its response, as fitted (% activity after normalisation).
    pub response: f64,
}

/// Everything reported for one compound (the JSON "C" of the issue).
#[derive(Debug, Clone, Serialize)]
pub struct Ic50Result {
    /// Compound identifier.
    pub compound: String,
    /// Where the wells came from (`file:2-21`): the input and the wells' lines.
    pub source: crate::report::Origin,
    /// Confidence level of every interval of this result.
    pub confidence: f64,
    /// Number of rows fitted.
    pub n: usize,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
    /// What the data show (full, partial, complete, weak, inactive).
    pub call: Call,
    /// The call's rule in words, with its numbers (written out when shown).
    pub reason: Reason,
    /// `=`; `>` / `<` when the call puts the IC50 beyond the tested range
    /// (then `ic50.value` is the bound); `~` when the Hill coefficient was held.
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
    pub flags: Vec<Code>,
    /// Wells the outlier rule marked: excluded from the fit (`--outliers
    /// exclude`) or only listed (`flag`).
    pub outliers: Vec<Outlier>,
    /// p of the extra-sum-of-squares F test of a flat line against the fitted
    /// curve (null when it cannot be formed).
    pub flat_p: Option<f64>,
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

/// The result's compound, source and carried columns, copied from the curve.
fn names_of(curve: &Curve) -> (String, crate::report::Origin, Carried) {
    (curve.compound.clone(), curve.location.origin(), curve.carried.clone())
}

/// The tested range: (distinct concentrations, smallest positive, largest).
///
/// A curve of a few dozen wells is sorted on the stack, and not at all when
/// its concentrations come in order (either way, as dilution series do):
/// values equal under `total_cmp` are the same bits, so the order found is
/// the one sorting gives.
fn tested_range(x: &[f64]) -> (usize, f64, f64) {
    // A dilution series comes in order: read in place, ascending or descending.
    if x.is_sorted_by(|a, b| a.total_cmp(b).is_le()) {
        return range_of_sorted(x.iter().copied());
    }
    if x.is_sorted_by(|a, b| a.total_cmp(b).is_ge()) {
        return range_of_sorted(x.iter().rev().copied());
    }
    let mut stack = [0.0; 32];
    let mut heap;
    let sorted: &mut [f64] = match stack.get_mut(..x.len()) {
        Some(s) => {
            s.copy_from_slice(x);
            s
        }
        None => {
            heap = x.to_vec();
            &mut heap
        }
    };
    sorted.sort_by(f64::total_cmp);
    range_of_sorted(sorted.iter().copied())
}

/// [`tested_range`] of values in ascending order: a value within 1e-12
/// (relative) of the last one kept is the same concentration.
fn range_of_sorted(sorted: impl Iterator<Item = f64>) -> (usize, f64, f64) {
    let (mut levels, mut min_pos, mut last) = (0, f64::NAN, None::<f64>);
    for v in sorted {
        if let Some(kept) = last
            && (v - kept).abs() <= 1e-12 * kept.abs()
        {
            continue;
        }
        levels += 1;
        if v > 0.0 && min_pos.is_nan() {
            min_pos = v;
        }
        last = Some(v);
    }
    (levels, min_pos, last.unwrap_or(f64::NAN))
}

/// Rejects curves no fit can use; returns the tested range ([`tested_range`])
/// and the smallest and largest response, which the fit needs again.
fn check(curve: &Curve, n_free: usize) -> Result<(usize, f64, f64, (f64, f64))> {
    let fail = |problem: String, expected: String| Error::Data { group: curve.group(), problem, expected };
    let (levels, min_pos, max) = tested_range(&curve.x);
    if levels < 2 {
        return Err(fail(
            format!("only one concentration ({})", crate::units::sig(max, 4)),
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
    let (lo, hi) = crate::fit::span_of(&curve.y);
    if hi - lo <= 1e-12 * hi.abs().max(lo.abs()) {
        return Err(fail(
            format!(
                "all {} responses are equal ({}): a flat line determines neither the IC50 nor the Hill slope, nor a second asymptote",
                curve.y.len(),
                crate::units::sig(hi, 6)
            ),
            "there is no dose-response to fit; check the response column".into(),
        ));
    }
    if let Some(problem) = crate::fit::out_of_range_in((lo, hi), "responses") {
        return Err(fail(
            format!("{problem}: the IC50, Hill slope and asymptotes cannot be determined"),
            "rescale the response column (a power of ten changes only the asymptotes)".into(),
        ));
    }
    Ok((levels, min_pos, max, (lo, hi)))
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
    let (levels, min_pos, max, y_span) = check(curve, n_free)?;
    let t = &options.thresholds;
    let model = Logistic;
    let mut pass = exclude_outliers(curve.y.len(), n_free, options, |kept| {
        let y = subset(&curve.y, kept);
        let y_span = if kept.len() == curve.y.len() { y_span } else { crate::fit::span_of(&y) };
        let lf = fit_logistic(&subset(&curve.x, kept), &y, y_span, options, min_pos, max);
        // The model at the fit's θ (its ln IC50 taken once), for the outlier
        // rule and, at the final fit, for the shape of the curve.
        let at = LogisticAt::new(&lf.fit.theta);
        let worst = match options.outliers {
            OutlierMode::Keep => None,
            _ => worst_well(&at, &lf.data, &lf.fit, t.outlier_alpha),
        };
        ((lf, at), worst)
    });
    let (LogisticFit { fit, data, hill_held, window_flags }, at) = &pass.result;
    let hill_held = *hill_held;
    let mut flags = Vec::new();
    if hill_held {
        flags.push(Code::HillFixed);
    }
    flags.extend(window_flags.iter().copied());
    let (ic50, hill, lower, upper) = (fit.theta[0], fit.theta[1], fit.theta[2], fit.theta[3]);
    // The ends of the range are wells of the curve, whose doses (and their
    // ln x) the fit already holds — unless the outlier rule dropped one.
    let dose = |x: f64| data.x.iter().find(|d| d.x.to_bits() == x.to_bits()).copied().unwrap_or_else(|| Dose::new(x));
    let shape = Shape {
        y_low: at.value(&fit.theta, &dose(min_pos)),
        y_high: at.value(&fit.theta, &dose(max)),
        upper,
        lower,
        lower_known: fit.fixed[Logistic::LOWER],
        ic50,
        plateau_reached: hill > 0.0 && ic50 * 9f64.powf(1.0 / hill) <= max,
    };
    let flat_p = flat_test(&data.y, fit);
    let verdict = decide(&shape, flat_p, &data.y, options, min_pos, max);
    let qualifier = verdict.apply(hill_held, &mut flags);
    if qualifier == Qualifier::Equal && !fit.fixed[Logistic::HILL] {
        if hill.abs() > t.hill_steep {
            flags.push(Code::HillSteep);
        }
        if hill.abs() < t.hill_shallow {
            flags.push(Code::HillShallow);
        }
    }
    pass.flags(&mut flags);
    common_flags(fit, levels, t, curve, &mut flags);
    // A steep curve pins its IC50 between two tested concentrations; the Wald
    // interval on ln IC50 is then too narrow (95 % intervals covered 90 % of
    // steep simulated curves), so a steep curve gets the profile-likelihood
    // interval whatever --intervals says. Few curves are steep, so this
    // costs little.
    let steep = qualifier == Qualifier::Equal && !fit.fixed[Logistic::HILL] && hill.abs() > t.hill_steep;
    let profiled;
    let interval_options = if steep && options.intervals == IntervalMethod::Wald {
        profiled = Options { intervals: IntervalMethod::Profile, ..options.clone() };
        &profiled
    } else {
        options
    };
    // The kernel profiles a free fit's IC50 itself (one-dimensional refits);
    // the engine's profile stays the reference and the fallback.
    // The Wald intervals' t quantile, looked up once for every parameter.
    let t_fit = cached_t(options.confidence, fit.df);
    let profiled_here = match interval_options.intervals {
        IntervalMethod::Profile if qualifier == Qualifier::Equal && fit.converged() => {
            projected::profile_ic50(data, fit, options.confidence)
        }
        _ => None,
    };
    let mut ic50_param = ic50_param(
        &model,
        data,
        fit,
        Logistic::IC50,
        qualifier,
        min_pos,
        max,
        (0.0, profiled_here, t_fit),
        interval_options,
    );
    if qualifier == Qualifier::About {
        ic50_param.note = Some(HELD_SLOPE.into());
    }
    let wald_linear = |j: usize, flag: &str| match fit.fixed[j] {
        true => Param { unit: options.response_unit.clone(), ..fixed_param(fit.theta[j], flag) },
        false => Param::new(
            fit.theta[j],
            fit.se[j],
            wald(fit, j, Scale::Linear, t_fit),
            "wald",
            options.response_unit.clone(),
        ),
    };
    let held_by = |option: &'static str, flag: Code| {
        if flags.contains(&flag) { "the plausible window (the free fit fell outside it)" } else { option }
    };
    let mut hill = match fit.fixed[Logistic::HILL] {
        true => fixed_param(hill, "kimech: not determined by the data (flag hill-fixed)"),
        false => Param::new(hill, fit.se[1], wald(fit, Logistic::HILL, Scale::Linear, t_fit), "wald", None),
    };
    let mut upper = wald_linear(Logistic::UPPER, held_by("--fix-upper", Code::UpperOutsideWindow));
    let mut lower = wald_linear(Logistic::LOWER, held_by("--fix-lower", Code::LowerOutsideWindow));
    explain_missing_se(fit, qualifier, [&mut ic50_param, &mut hill, &mut upper, &mut lower]);
    let outliers = pass.listed(curve);
    let (compound, source, carried) = names_of(curve);
    // Built where it is returned, once every part is known: no copy of the whole.
    Ok(Ic50Result {
        compound,
        source,
        confidence: options.confidence,
        n: fit.n,
        converged: fit.converged(),
        call: verdict.call,
        reason: verdict.reason,
        qualifier,
        pic50: p_value(options.unit.to_molar(ic50_param.value)),
        ic50: ic50_param,
        hill: Some(hill),
        upper,
        lower,
        residual_sd: fit.residual_sd,
        r2: fit.r2,
        flags,
        outliers,
        flat_p,
        carried,
        model: "logistic",
        ki_app: None,
        fitted: std::mem::take(&mut pass.result.0.fit.theta),
    })
}

/// A free parameter of a logistic fit without a standard error gets a
/// note naming it and why: the residuals are zero (nothing to scale the
/// covariance by; the Hill slope of a curve that steps between two
/// concentrations is not determined) or the information matrix JᵀJ is
/// singular at the fit (the data do not fix that parameter). The
/// parameters in the model's order: IC50, Hill slope, lower, upper.
fn explain_missing_se(fit: &Fit, qualifier: Qualifier, [ic50, hill, upper, lower]: [&mut Param; 4]) {
    let span = (upper.value - lower.value).abs();
    let why = if fit.residual_sd <= 1e-12 * span || fit.sse < f64::MIN_POSITIVE {
        "the curve passes through every well exactly (zero residuals), so no scatter is left to measure its uncertainty by; a curve that steps between two concentrations fixes neither its Hill slope nor its IC50 inside that step"
    } else {
        "the information matrix is singular at the fit: the data do not fix this parameter"
    };
    let explain = |param: &mut Param, name: &str, j: usize| {
        if !fit.fixed[j] && param.se.is_none() && param.interval != "bound" {
            let text = format!("{name} standard error not determined: {why}");
            param.note = Some(match param.note.take() {
                Some(n) => format!("{n}; {text}"),
                None => text,
            });
        }
    };
    if qualifier == Qualifier::Equal && ic50.interval == "wald-log" {
        explain(ic50, "IC50", Logistic::IC50);
    }
    explain(hill, "Hill slope", Logistic::HILL);
    explain(upper, "upper asymptote", Logistic::UPPER);
    explain(lower, "lower asymptote", Logistic::LOWER);
}

/// Why an IC50 from a fit with the Hill coefficient held is approximate.
const HELD_SLOPE: &str = "approximate (~): no transition inside the tested range determines the Hill coefficient, so it was held at 1 (common practice); the IC50 and its interval lean on that assumption, and a free slope could put it elsewhere";

/// A logistic fit on some wells, as the outlier rule needs it.
struct LogisticFit {
    fit: Fit,
    data: Data<Dose>,
    /// The Hill coefficient was held at 1 (the free fit was degenerate).
    hill_held: bool,
    /// `upper-outside-window` / `lower-outside-window` when an asymptote was held for that reason.
    window_flags: Vec<Code>,
}

/// The values of `v` at the indices `kept` (ascending, as
/// [`exclude_outliers`] keeps them): `v` itself, not a copy, when every
/// well is kept.
fn subset<'v>(v: &'v [f64], kept: &[usize]) -> std::borrow::Cow<'v, [f64]> {
    match kept.len() == v.len() {
        true => std::borrow::Cow::Borrowed(v),
        false => std::borrow::Cow::Owned(kept.iter().map(|&i| v[i]).collect()),
    }
}

/// The logistic fit of one set of wells: the free fit (with its fallbacks
/// and, when degenerate, h held at 1), then, for % activity, an asymptote
/// outside its plausible window held at its control level (100 % or 0 %)
/// and the curve refitted. `y_span` is the smallest and largest of `y`.
fn fit_logistic(x: &[f64], y: &[f64], y_span: (f64, f64), options: &Options, min_pos: f64, max: f64) -> LogisticFit {
    let data = Data::unweighted(doses(x), y.to_vec());
    let t = &options.thresholds;
    let (mut fix_lower, mut fix_upper) = (options.fix_lower, options.fix_upper);
    let (mut fit, mut hill_held) = fit_held(&data, y_span, options, fix_lower, fix_upper, min_pos, max);
    let mut window_flags = Vec::new();
    if options.percent {
        let inside = |v: f64, (lo, hi): (f64, f64)| v >= lo && v <= hi;
        if fix_upper.is_none() && !inside(fit.theta[Logistic::UPPER], t.upper_window) {
            fix_upper = Some(100.0);
            window_flags.push(Code::UpperOutsideWindow);
        }
        if fix_lower.is_none() && !inside(fit.theta[Logistic::LOWER], t.lower_window) {
            fix_lower = Some(0.0);
            window_flags.push(Code::LowerOutsideWindow);
        }
        if !window_flags.is_empty() {
            (fit, hill_held) = fit_held(&data, y_span, options, fix_lower, fix_upper, min_pos, max);
        }
    }
    LogisticFit { fit, data, hill_held, window_flags }
}

/// The doses of `x`, each with its ln x ([`Dose::new`]). The curves of a
/// deck mostly share one dilution series, so the last doses made on this
/// thread are kept and handed out again when the next curve's
/// concentrations are the same bits: `Dose::new` of the same bits is the
/// same dose, and a comparison per well is far cheaper than a logarithm.
fn doses(x: &[f64]) -> Vec<Dose> {
    thread_local! {
        static LAST: std::cell::RefCell<Vec<Dose>> = const { std::cell::RefCell::new(Vec::new()) };
    }
    LAST.with(|last| {
        let mut last = last.borrow_mut();
        let same = last.len() == x.len() && last.iter().zip(x).all(|(d, x)| d.x.to_bits() == x.to_bits());
        if !same {
            last.clear();
            last.extend(x.iter().map(|&x| Dose::new(x)));
        }
        last.clone()
    })
}

/// The free 4PL fit with the given asymptotes held; when the data do not
/// determine it (no transition in range: h → 0, an asymptote running away)
/// h is held at 1 (common practice) so that the IC50 can at least be placed.
/// Returns the fit and whether h was held.
///
/// Cost: a clean curve takes one minimiser run (the data-driven start). The
/// other starts run only when that fit is doubtful, and once; the held fit
/// runs from its first start unless that does not converge. Flat and
/// out-of-range curves — most of a screening deck — thus cost a handful of
/// runs, not a dozen.
fn fit_held(
    data: &Data<Dose>,
    y_span: (f64, f64),
    options: &Options,
    fix_lower: Option<f64>,
    fix_upper: Option<f64>,
    min_pos: f64,
    max: f64,
) -> (Fit, bool) {
    let t = &options.thresholds;
    let model = Logistic;
    let fixed = [None, None, fix_lower, fix_upper];
    let both_free = fix_lower.is_none() && fix_upper.is_none();
    let upright = |mut f: Fit| {
        if both_free && f.theta[Logistic::HILL] < 0.0 {
            mirror(&mut f);
        }
        f
    };
    let plausible =
        |f: &Fit| f.r2 >= t.min_r2 && f.theta[Logistic::IC50] > min_pos * 1e-3 && f.theta[Logistic::IC50] < max * 1e3;
    let good = |f: &Fit| f.converged() && plausible(f) && determined(f, y_span);
    // The engine's starts are built only when the engine runs.
    let starts_once = std::cell::OnceCell::new();
    let starts = || starts_once.get_or_init(|| model.starts(data));
    // Both asymptotes free: the variable-projection kernel, which declines
    // (None) whenever it cannot vouch for its answer; then the general engine.
    let projected = if both_free { fit_logistic_projected(data) } else { None };
    let mut fit = upright(
        projected
            .unwrap_or_else(|| fit_small(&model, data, &starts()[..1.min(starts().len())], &fixed, &options.settings)),
    );
    if !good(&fit) && starts().len() > 1 {
        let starts = starts();
        // The first start may have slid into a degenerate valley another start avoids.
        let rest = upright(fit_small(&model, data, &starts[1..], &fixed, &options.settings));
        let (a, b) = (determined(&fit, y_span), determined(&rest, y_span));
        if (b && !a) || (a == b && (rest.sse < fit.sse || (!fit.sse.is_finite() && rest.sse.is_finite()))) {
            fit = rest;
        }
    }
    if determined(&fit, y_span) {
        return (fit, false);
    }
    let held = [None, Some(1.0), fix_lower, fix_upper];
    (fit_curve(&model, data, &held, &options.settings, |f| f.converged()), true)
}

/// The outlier rule's result: the final fit, and which wells it marked.
struct Pass<T> {
    result: T,
    /// Indices (into the curve) of the marked wells, in the order found.
    marked: Vec<usize>,
    /// The rule marked more wells than the cap allows.
    too_many: bool,
    mode: OutlierMode,
}

impl<T> Pass<T> {
    fn flags(&self, flags: &mut Vec<Code>) {
        match self.mode {
            _ if self.marked.is_empty() => {}
            OutlierMode::Exclude => flags.push(Code::OutlierExcluded),
            OutlierMode::Flag => flags.push(Code::OutlierFlagged),
            OutlierMode::Keep => {}
        }
        if self.too_many {
            flags.push(Code::TooManyOutliers);
        }
    }

    fn listed(&self, curve: &Curve) -> Vec<Outlier> {
        self.marked
            .iter()
            .map(|&i| Outlier {
                line: curve.location.lines.get(i).copied(),
                concentration: curve.x[i],
                response: curve.y[i],
            })
            .collect()
    }
}

/// Fits, then while the outlier rule marks a well (and the cap allows),
/// drops it and refits. `fit_on(kept)` fits the wells `kept` and returns the
/// index *within `kept`* of the well the rule marks, if any. With
/// [`OutlierMode::Flag`] the marked wells are only listed: the final fit
/// uses every well.
fn exclude_outliers<T>(
    n: usize,
    n_free: usize,
    options: &Options,
    mut fit_on: impl FnMut(&[usize]) -> (T, Option<usize>),
) -> Pass<T> {
    // Most curves have no outlier: their one fit needs the indices of every
    // well, and nothing more is allocated unless a well is marked.
    const FIRST: [usize; 64] = {
        let mut all = [0; 64];
        let mut i = 0;
        while i < all.len() {
            all[i] = i;
            i += 1;
        }
        all
    };
    let all: std::borrow::Cow<[usize]> = match FIRST.get(..n) {
        Some(first) => std::borrow::Cow::Borrowed(first),
        None => std::borrow::Cow::Owned((0..n).collect()),
    };
    let (mut result, mut worst) = fit_on(&all);
    let mut kept = Vec::new();
    let mut marked = Vec::new();
    let mut too_many = false;
    while let Some(k) = worst {
        if marked.is_empty() {
            kept = all.to_vec();
        }
        // The rule needs two residual degrees of freedom after a deletion.
        if marked.len() >= options.thresholds.max_outliers || kept.len() <= n_free + 3 {
            too_many = true;
            break;
        }
        marked.push(kept.remove(k));
        (result, worst) = fit_on(&kept);
    }
    if options.outliers == OutlierMode::Flag && !marked.is_empty() {
        result = fit_on(&all).0;
    }
    Pass { result, marked, too_many, mode: options.outliers }
}

/// The well whose externally studentized residual exceeds the Bonferroni
/// bound, if any (Cook & Weisberg, *Residuals and Influence in Regression*,
/// 1982, §2.2; the Bonferroni outlier test of their §2.2.3). For well i with
/// residual eᵢ and leverage hᵢ (the diagonal of J(JᵀJ)⁻¹Jᵀ, the hat matrix of
/// the model linearised at the optimum — Cook & Weisberg §5.3 for nonlinear
/// models), tᵢ = eᵢ / (s₍ᵢ₎·√(1 − hᵢ)) with s₍ᵢ₎² = (SSE − eᵢ²/(1 − hᵢ))/(df − 1),
/// the residual variance with well i left out. The largest |tᵢ| is marked
/// when it exceeds t(1 − α/(2n); df − 1). Wells with hᵢ > 0.99 are not judged:
/// the curve can pass through them, so their residual says nothing.
/// Costs one pass over the wells with the fit's covariance; no refit.
fn worst_well<M: Model>(model: &M, data: &Data<M::Point>, fit: &Fit, alpha: f64) -> Option<usize> {
    let cov = fit.covariance.as_ref()?;
    if fit.df < 3 || !fit.converged() || fit.sse.is_nan() || fit.sse <= 0.0 {
        return None;
    }
    let s2 = fit.sse / fit.df as f64;
    // The kernel hands its fits' leverages over; other fits' are computed here.
    let computed;
    let leverage = match fit.leverage.as_deref().filter(|l| l.len() == data.len()) {
        Some(known) => known,
        None => {
            computed = leverages(model, data, fit, cov, s2);
            &computed[..]
        }
    };
    let mut worst: Option<(usize, f64)> = None;
    for (i, (&h, &e)) in leverage.iter().zip(&fit.residuals).enumerate() {
        if !(0.0..=0.99).contains(&h) {
            continue;
        }
        let sse_without = fit.sse - e * e / (1.0 - h);
        if sse_without.is_nan() || sse_without <= 0.0 {
            continue;
        }
        let t = e.abs() / ((sse_without / (fit.df - 1) as f64).sqrt() * (1.0 - h).sqrt());
        if worst.is_none_or(|(_, w)| t > w) {
            worst = Some((i, t));
        }
    }
    let (i, t) = worst?;
    let bound = cached_t(1.0 - alpha / data.len() as f64, fit.df - 1)?;
    (t > bound).then_some(i)
}

/// The leverage gᵢᵀ(C/s²)gᵢ of every point, C the covariance of the free
/// parameters and gᵢ the model's gradient there in them.
fn leverages<M: Model>(model: &M, data: &Data<M::Point>, fit: &Fit, cov: &nalgebra::DMatrix<f64>, s2: f64) -> Vec<f64> {
    let free: Vec<usize> = (0..fit.theta.len()).filter(|&j| !fit.fixed[j]).collect();
    let mut grad = vec![0.0; fit.theta.len()];
    data.x
        .iter()
        .map(|x| {
            model.gradient(&fit.theta, x, &mut grad);
            let mut h = 0.0;
            for (a, &ja) in free.iter().enumerate() {
                for (b, &jb) in free.iter().enumerate() {
                    h += grad[ja] * cov[(a, b)] * grad[jb];
                }
            }
            h / s2
        })
        .collect()
}

/// p of the extra-sum-of-squares F test of a flat line (the mean) against
/// the fitted curve, F = ((SSE₀ − SSE₁)/(df₀ − df₁))/(SSE₁/df₁) (Bates &
/// Watts 1988; DESIGN §5). `None` when it cannot be formed.
fn flat_test(y: &[f64], fit: &Fit) -> Option<f64> {
    let n = y.len();
    let mean = y.iter().sum::<f64>() / n as f64;
    let sse_flat: f64 = y.iter().map(|v| (v - mean) * (v - mean)).sum();
    crate::fit::stats::extra_sum_of_squares(sse_flat, n.saturating_sub(1), fit.sse, fit.df).map(|(_, p)| p)
}

/// Where the fitted curve sits, for the call.
struct Shape {
    /// Fitted response at the lowest positive concentration.
    y_low: f64,
    /// Fitted response at the highest concentration.
    y_high: f64,
    upper: f64,
    lower: f64,
    /// The lower asymptote was held, not fitted (so "partial" cannot be judged from it).
    lower_known: bool,
    /// IC50 (relative: where the curve is half-way between its asymptotes).
    ic50: f64,
    /// 90 % of the curve's own effect is reached inside the range.
    plateau_reached: bool,
}

/// The call, its qualifier and its reason.
struct Verdict {
    call: Call,
    qualifier: Qualifier,
    reason: Reason,
}

impl Verdict {
    /// The qualifier as reported (`~` for an in-range IC50 with h held) and the call's flags.
    fn apply(&self, hill_held: bool, flags: &mut Vec<Code>) -> Qualifier {
        match self.call {
            Call::Inactive => flags.push(Code::NoInhibition),
            Call::Partial => flags.push(Code::PartialInhibition),
            _ => {}
        }
        match self.qualifier {
            Qualifier::Greater => flags.push(Code::Ic50AboveRange),
            Qualifier::Less => flags.push(Code::Ic50BelowRange),
            _ => {}
        }
        if hill_held && self.qualifier == Qualifier::Equal { Qualifier::About } else { self.qualifier }
    }
}

/// The call from the data (module docs, "Calls"): first the F test of a flat
/// line, then where the fitted curve crosses half activity — half-way
/// between 100 % and 0 % for % activity, half-way between the fitted
/// asymptotes for raw signal.
fn decide(shape: &Shape, flat_p: Option<f64>, y: &[f64], options: &Options, min_pos: f64, max: f64) -> Verdict {
    let t = &options.thresholds;
    let unit = if options.percent { " %" } else { "" };
    let verdict =
        |call, qualifier, why, a, b| Verdict { call, qualifier, reason: Reason { why, p: flat_p, a, b, unit } };
    let flat = flat_p.is_some_and(|p| p >= t.flat_alpha);
    if flat {
        let mean = y.iter().sum::<f64>() / y.len() as f64;
        if options.percent && mean < 50.0 {
            return verdict(Call::Complete, Qualifier::Less, Why::FlatBelowHalf, t.flat_alpha, mean);
        }
        return verdict(Call::Inactive, Qualifier::Greater, Why::Flat, t.flat_alpha, 0.0);
    }
    let (top, half) = if options.percent { (100.0, 50.0) } else { (shape.upper, 0.5 * (shape.upper + shape.lower)) };
    let effect = if top > 0.0 { 1.0 - shape.y_high / top } else { 0.0 };
    if effect < t.min_inhibition {
        return verdict(
            Call::Inactive,
            Qualifier::Greater,
            Why::BelowMinInhibition,
            100.0 * effect,
            100.0 * t.min_inhibition,
        );
    }
    let partial = !shape.lower_known && top > 0.0 && shape.lower / top > t.partial_above && shape.lower < shape.upper;
    if shape.y_low < half || (!options.percent && shape.ic50 < min_pos) {
        return verdict(Call::Complete, Qualifier::Less, Why::CompleteAtLowest, half, shape.y_low);
    }
    if shape.y_high > half || (!options.percent && shape.ic50 > max) {
        if partial && shape.plateau_reached {
            return verdict(Call::Partial, Qualifier::Greater, Why::PartialNeverHalf, shape.lower, half);
        }
        return verdict(Call::Weak, Qualifier::Greater, Why::AboveHalfAtHighest, half, shape.y_high);
    }
    // Crosses half inside the range; the reported IC50 is the curve's own
    // midpoint, which for % data with asymptotes off 100/0 may still fall outside.
    let qualifier = if shape.ic50 > max {
        Qualifier::Greater
    } else if shape.ic50 < min_pos {
        Qualifier::Less
    } else {
        Qualifier::Equal
    };
    let (call, why) = if partial { (Call::Partial, Why::CrossesPartial) } else { (Call::Full, Why::CrossesFull) };
    verdict(call, qualifier, why, half, shape.lower)
}

/// Which rule made the call.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Why {
    FlatBelowHalf,
    Flat,
    BelowMinInhibition,
    CompleteAtLowest,
    PartialNeverHalf,
    AboveHalfAtHighest,
    CrossesPartial,
    CrossesFull,
}

/// The call's rule in words, with its numbers: kept as the rule and its
/// numbers and written out only when a report shows it (JSON), not built
/// for every curve of a CSV run that never prints it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reason {
    why: Why,
    /// p of the F test against a flat line.
    p: Option<f64>,
    /// The rule's numbers, in the order its text names them.
    a: f64,
    b: f64,
    /// `" %"` for % activity, else empty.
    unit: &'static str,
}

impl std::fmt::Display for Reason {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let sig3 = |v: f64| crate::units::sig(v, 3);
        let p_text = self.p.map_or("not formed".into(), |p| crate::units::sig(p, 2));
        let (a, b, unit) = (self.a, self.b, self.unit);
        match self.why {
            Why::FlatBelowHalf => write!(
                f,
                "a flat line fits as well as the curve (F test p = {p_text} ≥ {a}) at {} % activity, below half: inhibition is complete at the lowest concentration",
                sig3(b)
            ),
            Why::Flat => write!(
                f,
                "a flat line fits as well as the curve (F test p = {p_text} ≥ {a}): no significant inhibition up to the highest concentration"
            ),
            Why::BelowMinInhibition => write!(
                f,
                "the fitted inhibition at the highest concentration is {} %, below --min-inhibition ({b} %) (F test against a flat line p = {p_text})",
                sig3(a)
            ),
            Why::CompleteAtLowest => write!(
                f,
                "the fitted curve is already below half ({}{unit}) at the lowest concentration ({}{unit}): inhibition is complete there",
                sig3(a),
                sig3(b)
            ),
            Why::PartialNeverHalf => write!(
                f,
                "the curve levels off at {}{unit}, above half ({}{unit}): partial inhibition that never reaches half",
                sig3(a),
                sig3(b)
            ),
            Why::AboveHalfAtHighest => write!(
                f,
                "inhibition starts (F test against a flat line p = {p_text}) but the fitted curve is still above half ({}{unit}) at the highest concentration ({}{unit})",
                sig3(a),
                sig3(b)
            ),
            Why::CrossesPartial | Why::CrossesFull => {
                let what = if self.why == Why::CrossesPartial {
                    format!("levels off at {}{unit}, well above zero activity (partial inhibition)", sig3(b))
                } else {
                    "a full curve".into()
                };
                write!(
                    f,
                    "the fitted curve crosses half ({}{unit}) inside the tested range and {what} (F test against a flat line p = {p_text})",
                    sig3(a)
                )
            }
        }
    }
}

impl Serialize for Reason {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

/// Whether a free 4PL fit is a curve the data determine: a Hill coefficient
/// of at least 0.05 and asymptotes within one response span of the observed
/// responses. Degenerate fits (h → 0: a step at zero dose; an asymptote at
/// −700) fail this. A very steep fit passes: its IC50 is still placed
/// between two tested concentrations, and it is flagged `hill-steep`.
/// `(lo, hi)` is the smallest and largest observed response.
fn determined(fit: &Fit, (lo, hi): (f64, f64)) -> bool {
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
/// parameter exp(ln θ ± t·SE/θ) (the engine's `wald`), with t the quantile
/// of the fit's degrees of freedom at the confidence level: `cached_t`,
/// looked up once per curve by the caller (computing it is a third of the
/// cost of a 10-point fit; even looking it up four times was not free).
fn wald(fit: &Fit, j: usize, scale: Scale, t: Option<f64>) -> Interval {
    let (Some(se), Some(t)) = (fit.se[j], t) else {
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
/// curves costs iterations that change nothing that is reported. The
/// evaluation budget is 50 × (free parameters + 1): a curve the data
/// determine converges in a few dozen evaluations, while a degenerate one
/// (a flat curve whose asymptote runs away, now that linear parameters are
/// not clamped) would otherwise spend the engine's full budget going nowhere
/// — and most curves of a screening deck are flat.
pub fn screening_settings() -> FitSettings {
    FitSettings { ftol: 1e-10, xtol: 1e-10, gtol: 1e-12, patience: 50, polish: false }
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

/// Flags every model shares. R² says nothing about a flat curve (there is
/// no variance to explain), so `poor-fit` is not raised with `no-inhibition`.
fn common_flags(fit: &Fit, levels: usize, t: &Thresholds, curve: &Curve, flags: &mut Vec<Code>) {
    let flat = flags.contains(&Code::NoInhibition);
    if !flat && (fit.r2 < t.min_r2 || fit.r2.is_nan()) {
        flags.push(Code::PoorFit);
    }
    if levels < t.min_concentrations {
        flags.push(Code::TooFewPoints);
    }
    if !fit.converged() {
        flags.push(Code::NotConverged);
    }
    flags.extend(curve.read_flags.iter().copied());
}

/// IC50 (or Ki,app for Morrison, `offset` = Et/2 between them) as reported:
/// the bound when out of range, else the estimate with its interval — for a
/// profile interval, `profiled` when the kernel already found it; `t` is
/// the Wald intervals' quantile ([`wald`]).
#[allow(clippy::too_many_arguments)]
fn ic50_param<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    fit: &Fit,
    j: usize,
    qualifier: Qualifier,
    min_pos: f64,
    max: f64,
    (offset, profiled, t): (f64, Option<Interval>, Option<f64>),
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
            crate::units::sig(fitted, 4),
            options.unit
        )),
    };
    match qualifier {
        Qualifier::Greater => bound(max, "above the highest"),
        Qualifier::Less => bound(min_pos, "below the lowest positive"),
        _ => {
            let (interval, method) = match options.intervals {
                IntervalMethod::Profile if fit.converged() => (
                    profiled.unwrap_or_else(|| profile(model, data, fit, j, options.confidence, &options.settings)),
                    "profile",
                ),
                _ => (wald(fit, j, Scale::Log, t), "wald-log"),
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
    let (levels, min_pos, max, _) = check(curve, n_free)?;
    let t = &options.thresholds;
    let model = Morrison { et };
    let pass = exclude_outliers(curve.y.len(), n_free, options, |kept| {
        let data = Data::unweighted(subset(&curve.x, kept).into_owned(), subset(&curve.y, kept).into_owned());
        let fit = fit_curve(&model, &data, &fixed, &options.settings, |f| f.r2 >= t.min_r2);
        let worst = match options.outliers {
            OutlierMode::Keep => None,
            _ => worst_well(&model, &data, &fit, t.outlier_alpha),
        };
        ((fit, data), worst)
    });
    let (fit, data) = &pass.result;
    let (k, upper) = (fit.theta[Morrison::KI_APP], fit.theta[Morrison::UPPER]);
    let shape = Shape {
        y_low: model.value(&fit.theta, &min_pos),
        y_high: model.value(&fit.theta, &max),
        upper,
        lower: 0.0,
        lower_known: true,
        ic50: k + et / 2.0,
        plateau_reached: true,
    };
    let flat_p = flat_test(&data.y, fit);
    let verdict = decide(&shape, flat_p, &data.y, options, min_pos, max);
    let mut flags = Vec::new();
    let qualifier = verdict.apply(false, &mut flags);
    if qualifier == Qualifier::Equal && k < et / 10.0 {
        flags.push(Code::TightBindingTitration);
    }
    pass.flags(&mut flags);
    common_flags(fit, levels, t, curve, &mut flags);
    let t_fit = cached_t(options.confidence, fit.df);
    let ic50 =
        ic50_param(&model, data, fit, Morrison::KI_APP, qualifier, min_pos, max, (et / 2.0, None, t_fit), options);
    let unit = Some(options.unit.symbol().to_string());
    let ki_app = match qualifier {
        Qualifier::Equal => ic50.scaled(1.0, unit.clone()).shifted(-et / 2.0),
        _ => Param { value: ic50.value - et / 2.0, ..ic50.clone() },
    };
    let upper_p = match fit.fixed[Morrison::UPPER] {
        true => Param { unit: options.response_unit.clone(), ..fixed_param(upper, "--fix-upper") },
        false => {
            Param::new(upper, fit.se[1], wald(fit, 1, Scale::Linear, t_fit), "wald", options.response_unit.clone())
        }
    };
    let mut lower = Param { unit: options.response_unit.clone(), ..fixed_param(0.0, "the Morrison model") };
    lower.note = Some("zero by the Morrison model (complete inhibition at saturating inhibitor)".into());
    let outliers = pass.listed(curve);
    let (compound, source, carried) = names_of(curve);
    Ok(Ic50Result {
        compound,
        source,
        confidence: options.confidence,
        n: fit.n,
        converged: fit.converged(),
        call: verdict.call,
        reason: verdict.reason,
        qualifier,
        pic50: p_value(options.unit.to_molar(ic50.value)),
        ic50,
        hill: None,
        upper: upper_p,
        lower,
        residual_sd: fit.residual_sd,
        r2: fit.r2,
        flags,
        outliers,
        flat_p,
        carried,
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
    pub flags: Vec<Code>,
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
            flags: if z < min_z_prime { vec![Code::PlateZPrimeLow] } else { Vec::new() },
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

    /// The doses handed out again for a repeated series are those
    /// `Dose::new` makes, to the bit, whatever came before (another series,
    /// another length, −0 after 0, NaN).
    #[test]
    fn remembered_doses_are_new_doses() {
        let series: [&[f64]; 7] = [
            &[10000.0, 3333.33, 1111.11, 0.0],
            &[10000.0, 3333.33, 1111.11, 0.0],
            &[10000.0, 3333.33, 1111.11, -0.0],
            &[10000.0, 3333.33, 1111.11],
            &[f64::NAN, 1e-300, 5e-324, f64::INFINITY],
            &[f64::NAN, 1e-300, 5e-324, f64::INFINITY],
            &[10000.0, 3333.33, 1111.11, 0.0],
        ];
        let bits = |d: &[Dose]| d.iter().map(|d| (d.x.to_bits(), d.ln_x.to_bits())).collect::<Vec<_>>();
        for x in series {
            let fresh: Vec<Dose> = x.iter().map(|&x| Dose::new(x)).collect();
            assert_eq!(bits(&doses(x)), bits(&fresh));
        }
    }

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
