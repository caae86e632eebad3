//! Diagnoses: the extension rate laws of [`crate::models::inhibition::Extension`]
//! (partial inhibition, substrate inhibition) fitted beside the five and
//! compared by the same criteria.
//!
//! Each extension reduces to mixed inhibition at an edge of its extra
//! parameter (β → 0, Ksi → ∞), so the extra-sum-of-squares F test against
//! mixed applies (Bates & Watts 1988, §3.10). Because the null value lies on
//! the boundary of the parameter space, the nominal p-value is conservative
//! (Self & Liang, J. Am. Stat. Assoc. 82, 605–610, 1987): the test errs
//! towards the five laws.
//!
//! An extension is named (the diagnosis) when it has a lower AICc than every
//! one of the five, shows an effect one can see ([`MIN_RESIDUAL_ACTIVITY`] ≤
//! β < 1; Ksi ≤ [`MAX_KSI_FACTOR`] × the highest substrate concentration), and
//! either beats mixed by the F test at [`DIAGNOSIS_LEVEL`], or is adequate
//! (runs and lack-of-fit tests, as for the five) where the five are not. The
//! first route is what catches mild partial inhibition that the five laws fit
//! "adequately" but systematically worse; on it the extension's own adequacy
//! is reported but not required (a correct model fails one of the two tests
//! in about 2 % of datasets, and the five are worse still).

use crate::report::Code;
use serde::Serialize;

use super::{Adequacy, Matrix, Options, Units, adequacy_of, p_text};
use crate::fit::intervals::{Interval, profile, wald};
use crate::fit::stats::{aicc, extra_sum_of_squares};
use crate::fit::{Data, Fit, FitSettings, fit_from};
use crate::models::inhibition::{Extension, ExtensionLaw, Point, vmax_km_starts};
use crate::report::{Param, Warning};
use crate::units::sig;

/// F-test level at which an extension must beat mixed to be named when the
/// five laws are adequate: strict, because naming a diagnosis replaces a
/// mechanism.
pub const DIAGNOSIS_LEVEL: f64 = 0.01;

/// Smallest residual activity β for a partial-inhibition diagnosis: below 5 %
/// the inhibition is complete for any practical purpose.
pub const MIN_RESIDUAL_ACTIVITY: f64 = 0.05;

/// Largest Ksi, as a multiple of the highest substrate concentration, for a
/// substrate-inhibition diagnosis: at 3 × S_max the rate at S_max is still
/// about 25 % below the Michaelis–Menten curve, a fall one can see.
pub const MAX_KSI_FACTOR: f64 = 3.0;

/// F-test level below which a plain call gets the note that partial
/// inhibition is possible (the diagnosis itself needs [`DIAGNOSIS_LEVEL`]).
pub const HINT_LEVEL: f64 = 0.05;

/// The residual activity a plain call must be able to rule out: an inhibitor
/// that leaves 10 % or more of the activity at saturation changes what its Ki
/// means for dosing. A plain call whose data are compatible with β at or
/// above this (see [`residual_activity_p`]) gets `partial-inhibition-possible`.
pub const NOTABLE_RESIDUAL_ACTIVITY: f64 = 0.1;

/// Level of the test of β = [`NOTABLE_RESIDUAL_ACTIVITY`]: β is compatible
/// with the data when it lies inside the 95 % profile-likelihood interval.
pub const EXCLUSION_LEVEL: f64 = 0.05;

/// One extension's fit and its comparison with the five.
#[derive(Debug, Clone, Serialize)]
pub struct ExtensionResult {
    /// The diagnosis's name (`partial-inhibition`, `substrate-inhibition`).
    pub model: &'static str,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// Residual degrees of freedom.
    pub df: usize,
    /// AICc; null when n ≤ K + 1.
    pub aicc: Option<f64>,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
    /// Extra-sum-of-squares F statistic against mixed.
    pub f_vs_mixed: Option<f64>,
    /// Its p-value (nominal; conservative at the boundary).
    pub p_vs_mixed: Option<f64>,
    /// Runs and lack-of-fit tests of this fit.
    pub adequacy: Adequacy,
    /// Whether this extension is the diagnosis.
    pub named: bool,
    /// Estimated constants (profile intervals when named, Wald on the log scale otherwise).
    pub params: ExtensionParams,
}

/// Constants of an extension model.
#[derive(Debug, Clone, Serialize)]
pub struct ExtensionParams {
    /// Limiting rate of the uninhibited enzyme, in the rate's unit.
    pub vmax: Param,
    /// Michaelis constant, in the substrate's unit.
    pub km: Param,
    /// Dissociation constant of EI (Kic), in the inhibitor's unit.
    pub ki: Param,
    /// α: ESI dissociation constant over Ki.
    pub alpha: Param,
    /// Kiu = α·Ki (interval from the delta method on the log scale).
    pub kiu: Param,
    /// Partial inhibition: relative activity of ESI (dimensionless).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub beta: Option<Param>,
    /// Substrate inhibition: the substrate-inhibition constant, in the substrate's unit.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ksi: Option<Param>,
}

/// Fits both extensions from starts built on the mixed optimum `mixed`,
/// which each extension contains (β → 0, Ksi → ∞), so that an extension
/// never ends above mixed:
///
/// * partial: the mixed optimum with β ∈ {10⁻⁶, 0.1, 0.3}; Ki × 0.3 and α = 1
///   with β ∈ {0.2, 0.5} (strong partial inhibition looks like a weaker
///   inhibitor to mixed); where mixed sits at an edge, the same pulled back —
///   constants capped at [`EDGE_CAP`] × the highest inhibitor concentration
///   (β ∈ {0.01, 0.1}), α capped at 10 (β ∈ {0.05, 0.6}) — because from an
///   edge the partial law has no gradient towards a finite optimum;
/// * substrate inhibition: the mixed optimum with Ksi at 10⁶ × the highest
///   substrate concentration, and Vmax, Km doubled with Ksi at 0.5 and 2 ×
///   it (a fall at high S hides a larger Vmax).
///
/// * substrate inhibition, also: the uninhibited series' own Vmax/Km guess
///   (Vmax doubled), Ki at the highest inhibitor concentration, α = 1, Ksi
///   at 1 and 5 × the highest substrate concentration.
///
/// These 5–9 and 5 starts replace a grid of 27 and 18 (the mixed grid crossed
/// with the extra constant) plus the mixed-based ones. Measured by the ignored
/// test `extension_starts_reach_the_grid_optimum` in tests/mode_uncertainty.rs
/// (figures in the README); the committed scipy multistart reference
/// (tests/mode.rs) still holds.
pub fn fit_extensions(data: &Data<Point>, mixed: &Fit, settings: &FitSettings) -> Vec<Fit> {
    Extension::ALL
        .iter()
        .map(|&e| {
            let mut starts = extension_starts(e, data, &mixed.theta);
            starts.retain(|s| s.iter().all(|v| v.is_finite() && *v > 0.0));
            fit_from(&ExtensionLaw(e), data, &starts, &[None; 5], settings)
        })
        .collect()
}

/// How far (× the highest inhibitor concentration) a mixed constant at an
/// edge is pulled back to start a partial fit.
const EDGE_CAP: f64 = 1e3;

/// The starts of [`fit_extensions`] (natural scale), from the mixed optimum `m`.
pub fn extension_starts(e: Extension, data: &Data<Point>, m: &[f64]) -> Vec<Vec<f64>> {
    let (s_max, i_max) = data.x.iter().fold((0.0f64, 0.0f64), |(s, i), p| (s.max(p.0), i.max(p.1)));
    let at = |ki: f64, alpha: f64, extra: f64| vec![m[0], m[1], ki, alpha, extra];
    let mut starts = Vec::new();
    match e {
        Extension::Partial => {
            starts.extend([1e-6, 0.1, 0.3].iter().map(|&b| at(m[2], m[3], b)));
            starts.extend([0.2, 0.5].iter().map(|&b| at(0.3 * m[2], 1.0, b)));
            let cap = EDGE_CAP * i_max.max(1e-300);
            let (ki, kiu) = (m[2].min(cap), (m[2] * m[3]).min(cap));
            if ki < m[2] || kiu < m[2] * m[3] {
                starts.extend([0.01, 0.1].iter().map(|&b| at(ki, kiu / ki, b)));
            }
            if m[3] > 10.0 {
                starts.extend([0.05, 0.6].iter().map(|&b| at(m[2], 10.0, b)));
            }
        }
        Extension::SubstrateInhibition => {
            let s_max = s_max.max(1e-300);
            starts.push(at(m[2], m[3], 1e6 * s_max));
            starts.extend([0.5, 2.0].iter().map(|&k| vec![2.0 * m[0], 2.0 * m[1], m[2], m[3], k * s_max]));
            // Strong substrate inhibition can distort the whole mixed fit beyond repair: also
            // start from the uninhibited series' own Vmax/Km guess (Vmax doubled for the fall at
            // high S), with Ki at the highest inhibitor concentration and α = 1.
            if let Some(&(v, k)) = vmax_km_starts(data).first() {
                let ki = if i_max > 0.0 { i_max } else { 1.0 };
                starts.extend([1.0, 5.0].iter().map(|&f| vec![2.0 * v, k, ki, 1.0, f * s_max]));
            }
        }
    }
    starts
}

/// The comparison of the extensions with the five, and the diagnosis (index
/// into `Extension::ALL`), if any.
#[allow(clippy::too_many_arguments)]
pub fn diagnose(
    matrix: &Matrix,
    data: &Data<Point>,
    ext_fits: &[Fit],
    mixed: &Fit,
    best_five_aicc: f64,
    five_adequate: bool,
    units: &Units,
    options: &Options,
) -> (Vec<ExtensionResult>, Option<usize>) {
    let s_max = matrix.substrate.iter().cloned().fold(0.0, f64::max);
    let mut candidates = Vec::new();
    let mut pre = Vec::new();
    for (k, (&e, f)) in Extension::ALL.iter().zip(ext_fits).enumerate() {
        let a = aicc(f.n, f.n_free, f.sse);
        let test = extra_sum_of_squares(mixed.sse, mixed.df, f.sse, f.df);
        let adequacy = adequacy_of(matrix, data, f, e.name());
        let physical = match e {
            Extension::Partial => (MIN_RESIDUAL_ACTIVITY..1.0).contains(&f.theta[4]),
            Extension::SubstrateInhibition => f.theta[4] <= MAX_KSI_FACTOR * s_max,
        };
        let better = a.is_some_and(|a| a < best_five_aicc);
        let significant = test.is_some_and(|t| t.1 < DIAGNOSIS_LEVEL);
        let rescue = !five_adequate && adequacy.adequate;
        if f.converged() && physical && better && (significant || rescue) {
            candidates.push((k, a.unwrap_or(f64::INFINITY)));
        }
        pre.push((a, test, adequacy));
    }
    let named = candidates.iter().min_by(|a, b| a.1.total_cmp(&b.1)).map(|c| c.0);
    let results = Extension::ALL
        .iter()
        .zip(ext_fits)
        .zip(pre)
        .enumerate()
        .map(|(k, ((&e, f), (a, test, adequacy)))| ExtensionResult {
            model: e.name(),
            sse: f.sse,
            df: f.df,
            aicc: a,
            converged: f.converged(),
            f_vs_mixed: test.map(|t| t.0),
            p_vs_mixed: test.map(|t| t.1),
            adequacy,
            named: named == Some(k),
            params: describe(e, f, data, named == Some(k), units, options),
        })
        .collect();
    (results, named)
}

/// Constants with intervals: profile likelihood for the diagnosis, Wald on
/// the log scale for the others (they are only reported, not used).
fn describe(
    e: Extension,
    f: &Fit,
    data: &Data<Point>,
    named: bool,
    units: &Units,
    options: &Options,
) -> ExtensionParams {
    let law = ExtensionLaw(e);
    let profiled = named && f.converged();
    let method = if profiled { "profile" } else { "wald-log" };
    let settings = super::profile_settings(&options.settings);
    let iv = |j: usize| -> Interval {
        if profiled {
            profile(&law, data, f, j, options.confidence, &settings)
        } else {
            wald(&law, f, j, options.confidence)
        }
    };
    let p = |j: usize, unit: &Option<String>| Param::new(f.theta[j], f.se[j], iv(j), method, unit.clone());
    let (ki, alpha) = (f.theta[2], f.theta[3]);
    let kiu = ki * alpha;
    // var(ln Kiu) = var(ln Ki) + var(ln α) + 2 cov(ln Ki, ln α) (delta method).
    let kiu_se = f.covariance.as_ref().filter(|c| c.nrows() == 5).map(|c| {
        let var_log = c[(2, 2)] / (ki * ki) + c[(3, 3)] / (alpha * alpha) + 2.0 * c[(2, 3)] / (ki * alpha);
        kiu * var_log.max(0.0).sqrt()
    });
    let kiu_iv = match (kiu_se, crate::fit::intervals::t_quantile(options.confidence, f.df)) {
        (Some(se), Some(t)) => {
            let half = t * se / kiu;
            Interval {
                low: crate::fit::intervals::Bound::At(kiu * (-half).exp()),
                high: crate::fit::intervals::Bound::At(kiu * half.exp()),
            }
        }
        _ => Interval {
            low: crate::fit::intervals::Bound::NotDetermined,
            high: crate::fit::intervals::Bound::NotDetermined,
        },
    };
    let params = ExtensionParams {
        vmax: p(0, &units.rate),
        km: p(1, &units.substrate),
        ki: p(2, &units.inhibitor),
        alpha: p(3, &None),
        kiu: Param::new(kiu, kiu_se, kiu_iv, "wald-log", units.inhibitor.clone()),
        beta: (e == Extension::Partial).then(|| p(4, &None)),
        ksi: (e == Extension::SubstrateInhibition).then(|| p(4, &units.substrate)),
    };
    if profiled { params } else { without_runaway(params, e, f, data) }
}

/// How far beyond the tested concentrations (or from α = 1) an estimate may
/// lie before it counts as having run off to an edge of the model.
const RUNAWAY_FACTOR: f64 = 1e6;

/// An extension fitted to data it does not describe runs to an edge of its
/// law (α → ∞ when no ESI forms, Ki → ∞ when no EI forms, Ksi → ∞ with no
/// substrate inhibition): the constant that ran off has no effect, its value
/// is wherever the minimiser stopped, and the information matrix is singular
/// to within rounding, so whether its inverse exists depends on the scale of
/// the rates. Such a fit's constants are reported as not determined and its
/// Wald intervals dropped, decided from the estimates against the tested
/// concentrations, which does not depend on the scale of the response.
fn without_runaway(mut params: ExtensionParams, e: Extension, f: &Fit, data: &Data<Point>) -> ExtensionParams {
    let (max_s, max_i) = data.x.iter().fold((0.0f64, 0.0f64), |(s, i), p| (s.max(p.0), i.max(p.1)));
    let beyond = |v: f64, top: f64| !(v.is_finite() && v <= RUNAWAY_FACTOR * top && v * RUNAWAY_FACTOR >= top);
    let (ki, alpha) = (f.theta[2], f.theta[3]);
    let ki_off = beyond(ki, max_i);
    let alpha_off = beyond(alpha, 1.0);
    let kiu_off = beyond(ki * alpha, max_i);
    let ksi_off = e == Extension::SubstrateInhibition && beyond(f.theta[4], max_s);
    if !(ki_off || alpha_off || kiu_off || ksi_off) {
        return params;
    }
    let undetermined = |p: &mut Param, off: bool| {
        p.se = None;
        p.low = None;
        p.high = None;
        p.note = Some(if off {
            "not determined: the fit runs to an edge of this model, where this constant has no effect".into()
        } else {
            "interval not determined: another constant of this fit runs to an edge of the model".into()
        });
        if off {
            p.value = f64::NAN;
        }
    };
    undetermined(&mut params.vmax, false);
    undetermined(&mut params.km, false);
    undetermined(&mut params.ki, ki_off);
    undetermined(&mut params.alpha, alpha_off);
    undetermined(&mut params.kiu, kiu_off);
    // β is the activity of ESI: with Kiu run off, no ESI forms and β has no effect.
    if let Some(b) = params.beta.as_mut() {
        undetermined(b, kiu_off || alpha_off);
    }
    if let Some(k) = params.ksi.as_mut() {
        undetermined(k, ksi_off);
    }
    params
}

/// The warning that names a diagnosis, with its constants and evidence.
pub fn diagnosis_warning(r: &ExtensionResult, five_adequate: bool, units: &Units) -> Warning {
    let why = if five_adequate {
        format!(
            "it fits significantly better than mixed inhibition (F test {}, level {DIAGNOSIS_LEVEL}) and has the lowest AICc",
            p_text(r.p_vs_mixed)
        )
    } else {
        "none of the five rate laws describes the data, and this one does (with the lowest AICc)".to_string()
    };
    let range = |p: &Param| match (p.low, p.high) {
        (Some(l), Some(h)) => format!("{}–{}", sig(l, 3), sig(h, 3)),
        (Some(l), None) => format!("{}–open", sig(l, 3)),
        (None, Some(h)) => format!("open–{}", sig(h, 3)),
        (None, None) => "open".into(),
    };
    let iu = units.inhibitor.clone().unwrap_or_default();
    let what = match (&r.params.beta, &r.params.ksi) {
        (Some(b), _) => format!(
            "partial (hyperbolic) inhibition: the enzyme–substrate–inhibitor complex keeps a fraction β = {} ({}) of the \
             activity, so rates level off instead of falling to zero (Segel 1975, ch. 4); Ki = {} ({}) {iu}, Kiu = {} {iu}",
            sig(b.value, 3),
            range(b),
            sig(r.params.ki.value, 3),
            range(&r.params.ki),
            sig(r.params.kiu.value, 3)
        ),
        (None, Some(k)) => format!(
            "substrate inhibition: the uninhibited rate falls at high substrate, Ksi = {} ({}) {} (Haldane 1930); \
             Ki = {} ({}) {iu}, α = {}",
            sig(k.value, 3),
            range(k),
            units.substrate.clone().unwrap_or_default(),
            sig(r.params.ki.value, 3),
            range(&r.params.ki),
            sig(r.params.alpha.value, 3)
        ),
        _ => String::new(),
    };
    let caveat = if r.adequacy.adequate {
        ""
    } else {
        " It does not describe every feature of the data either (see its adequacy tests)."
    };
    // The diagnosis names itself: its model name is its warning code.
    let code = Code::parse(r.model).unwrap_or(Code::PartialInhibition);
    Warning::new(code, format!("{what}; named because {why}. No plain mechanism is given.{caveat}"))
}

/// Whether the data can rule out a residual activity of
/// [`NOTABLE_RESIDUAL_ACTIVITY`] or more: the p-value of the F test of the
/// partial law with β held at that value against the free partial fit
/// (one numerator degree of freedom; a profile-likelihood test, Bates & Watts
/// 1988, §6.1). 1 when the free fit already has β at or above it. `None`
/// when the fit cannot be made.
pub fn residual_activity_p(data: &Data<Point>, partial: &Fit, mixed: &Fit, settings: &FitSettings) -> Option<f64> {
    let beta0 = NOTABLE_RESIDUAL_ACTIVITY;
    if !partial.converged() {
        return None;
    }
    if partial.theta[4] >= beta0 {
        return Some(1.0);
    }
    let (p, m) = (&partial.theta, &mixed.theta);
    let mut starts = vec![vec![p[0], p[1], p[2], p[3], beta0], vec![m[0], m[1], m[2], m[3], beta0]];
    starts.retain(|s| s.iter().all(|v| v.is_finite() && *v > 0.0));
    let fixed = [None, None, None, None, Some(beta0)];
    let held = fit_from(&ExtensionLaw(Extension::Partial), data, &starts, &fixed, settings);
    let sse = held.sse.max(partial.sse);
    extra_sum_of_squares(sse, held.df, partial.sse, partial.df).map(|t| t.1)
}

/// A note on a plain call when partial inhibition is not ruled out: either it
/// fits better than mixed at [`HINT_LEVEL`] (but not at [`DIAGNOSIS_LEVEL`])
/// with a residual activity worth mentioning, or the data are compatible
/// with a residual activity of [`NOTABLE_RESIDUAL_ACTIVITY`] or more
/// (`residual_p` ≥ [`EXCLUSION_LEVEL`], from [`residual_activity_p`]). The
/// mechanism stands, but its constants assume the inhibition is complete.
pub fn partial_hint(extensions: &[ExtensionResult], residual_p: Option<f64>) -> Option<Warning> {
    let r = extensions.iter().find(|r| r.model == Extension::Partial.name())?;
    let beta = r.params.beta.as_ref()?.value;
    let p = r.p_vs_mixed?;
    if p < HINT_LEVEL && (MIN_RESIDUAL_ACTIVITY..1.0).contains(&beta) {
        return Some(Warning::new(
            Code::PartialInhibitionPossible,
            format!(
                "partial inhibition (residual activity β = {} at saturating inhibitor) fits better than mixed \
                 (F test {}), though not at the level {DIAGNOSIS_LEVEL} needed to name it; the constants may be \
                 biased if the inhibitor leaves activity — test higher inhibitor concentrations to see whether rates \
                 level off",
                sig(beta, 2),
                p_text(Some(p))
            ),
        ));
    }
    let q = residual_p.filter(|q| *q >= EXCLUSION_LEVEL)?;
    Some(Warning::new(
        Code::PartialInhibitionPossible,
        format!(
            "the data cannot rule out partial inhibition: a residual activity of {:.0} % or more at saturating \
             inhibitor is compatible with them (F test of β = {NOTABLE_RESIDUAL_ACTIVITY} against the free partial \
             fit {}, level {EXCLUSION_LEVEL}); the mechanism and its constants assume the inhibition is complete — \
             test higher inhibitor concentrations to see whether rates level off",
            100.0 * NOTABLE_RESIDUAL_ACTIVITY,
            p_text(Some(q))
        ),
    ))
}
