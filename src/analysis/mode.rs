//! Inhibition mode from an [S]×[I] rate matrix: global fits of the five rate
//! laws (see [`crate::models::inhibition`]) with Vmax and Km shared by every
//! inhibitor level, the evidence for each, a choice, and an adequacy check.
//!
//! * Evidence: AICc = n·ln(SSE/n) + 2K + 2K(K+1)/(n−K−1), K = fitted
//!   parameters + 1, and Akaike weights (Burnham & Anderson, *Model Selection
//!   and Multimodel Inference*, 2nd ed., 2002, §2.4, §2.9); the
//!   extra-sum-of-squares F test F = ((SSE₁−SSE₂)/(df₁−df₂))/(SSE₂/df₂) for
//!   each nested pair (Bates & Watts 1988, §3.10; Seber & Wild 1989, §5.3).
//! * Choice by AICc: the lowest AICc, except that among the models within
//!   [`PARSIMONY_WINDOW`] = 2 AICc units of the best the one with the fewest
//!   parameters is taken (models within 2 units have "substantial support",
//!   Burnham & Anderson 2002, §2.6; preferring the simplest of those is their
//!   parsimony principle, §1.4). Without this rule plain lowest AICc picks
//!   mixed over noncompetitive on a noticeable share of noncompetitive data,
//!   because one extra free constant always lowers the SSE a little.
//! * Choice by F test: start from `none`, step to the best one-constant
//!   model if it beats `none` at the chosen level, then to `mixed` if that
//!   beats the one-constant model.
//! * Adequacy of the chosen model: the runs test on residual signs (ordered
//!   by inhibitor, then substrate) and, with replicates, the lack-of-fit F
//!   test against pure error (Draper & Smith 1998, §2.1). Either at
//!   p < [`ADEQUACY_LEVEL`] makes the choice `no-model-adequate`.
//!
//! Mixed inhibition is degenerate at its edges: α → ∞ is competitive, Ki → ∞
//! with α·Ki fixed is uncompetitive. When a fitted constant lies beyond
//! [`LIMIT_FACTOR`] × the highest inhibitor concentration, its term changes
//! no rate by more than a part in 10⁶; it is then reported as unbounded
//! (JSON `null` with a note), never as a huge number.

use crate::report::Code;
use std::collections::HashMap;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::fit::intervals::{Bound, Interval, profile, wald};
use crate::fit::stats::{aicc, akaike_weights, extra_sum_of_squares, lack_of_fit, runs_test};
use crate::fit::{Data, Fit, FitSettings, Model, WeightProblem, Weighting, fit, fit_from, weights};
use crate::models::inhibition::{Extension, Mechanism, MixedAlphaKiu, MixedKiu, Point, RateLaw};
use crate::report::{Param, Warning};
use crate::units::same_levels;
use crate::units::sig;

mod extensions;
pub mod headline;

pub use extensions::{
    DIAGNOSIS_LEVEL, ExtensionParams, ExtensionResult, HINT_LEVEL, MAX_KSI_FACTOR, MIN_RESIDUAL_ACTIVITY,
    extension_starts,
};
use extensions::{diagnose, diagnosis_warning, fit_extensions, partial_hint, residual_activity_p};
use headline::uncertain;
pub use headline::{Basis, Headline};

/// Width of the parsimony window in AICc units (Burnham & Anderson 2002, §2.6).
pub const PARSIMONY_WINDOW: f64 = 2.0;

/// Level at which the runs test or the lack-of-fit test rejects the chosen
/// model. Stricter than the usual 0.05 because two tests are applied to
/// every dataset: a correct model is then rejected in about 2% of datasets
/// rather than 10% (measured in tests/mode_simulation.rs).
pub const ADEQUACY_LEVEL: f64 = 0.01;

/// An inhibition constant beyond this multiple of the highest inhibitor
/// concentration changes no rate by more than 1 part in 10⁶: it is unbounded.
pub const LIMIT_FACTOR: f64 = 1e6;

/// The smallest matrix on which all five models, including mixed's AICc
/// (n > K + 1 with K = 5), can be computed.
pub const MIN_ROWS: usize = 7;

/// One compound's rate matrix, concentrations already in the reporting units.
#[derive(Debug, Clone)]
pub struct Matrix {
    /// Compound label, when the input had a `compound` column.
    pub label: Option<String>,
    /// Where the rows came from, for messages (e.g. "lines 2-61").
    pub origin: crate::report::Origin,
    /// Input line of each row.
    pub lines: Vec<u64>,
    /// Substrate concentrations in `Units::substrate`.
    pub substrate: Vec<f64>,
    /// Inhibitor concentrations in `Units::inhibitor`.
    pub inhibitor: Vec<f64>,
    /// Initial rates.
    pub rate: Vec<f64>,
    /// SD of each rate, when supplied.
    pub sd: Option<Vec<f64>>,
}

/// The units results are stated in.
#[derive(Debug, Clone, Default)]
pub struct Units {
    /// Unit of substrate and Km.
    pub substrate: Option<String>,
    /// Unit of inhibitor, Ki and Kiu.
    pub inhibitor: Option<String>,
    /// Unit of rates and Vmax, as written in the header.
    pub rate: Option<String>,
}

/// How the model is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Criterion {
    /// Lowest AICc, simplest within 2 units.
    Aicc,
    /// Forward steps of extra-sum-of-squares F tests.
    FTest,
}

/// How to analyse.
#[derive(Debug, Clone)]
pub struct Options {
    /// Residual weighting.
    pub weighting: Weighting,
    /// How to choose.
    pub criterion: Criterion,
    /// Significance level of the F-test steps.
    pub alpha_level: f64,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// Minimiser settings.
    pub settings: FitSettings,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            weighting: Weighting::None,
            criterion: Criterion::Aicc,
            alpha_level: 0.05,
            confidence: crate::report::DEFAULT_CONFIDENCE,
            settings: FitSettings::default(),
        }
    }
}

/// Everything reported for one compound.
#[derive(Debug, Clone, Serialize)]
pub struct ModeResult {
    /// Compound label, or null when the file had no `compound` column.
    pub compound: Option<String>,
    /// Where the rows came from (`file:2-8`): the file as named on the command line and the lines.
    pub source: crate::report::Origin,
    /// Number of observations.
    pub n: usize,
    /// The chosen model's name; a diagnosis (`partial-inhibition`,
    /// `substrate-inhibition`) when an extension model was named; or
    /// `no-model-adequate`.
    pub chosen: String,
    /// The constants the output leads with, carrying the model uncertainty.
    pub headline: Headline,
    /// The criterion used for the choice.
    pub criterion: Criterion,
    /// The evidence for the choice in words.
    pub evidence: String,
    /// The five fits, simplest first.
    pub models: Vec<ModelResult>,
    /// The extension models (diagnoses), fitted and compared with the five.
    pub extensions: Vec<ExtensionResult>,
    /// F tests of every nested pair.
    pub tests: Vec<NestedTest>,
    /// Adequacy of the model the criterion picked.
    pub adequacy: Adequacy,
    /// What the mixed model's α says.
    pub alpha_interpretation: String,
    /// The weighting used.
    pub weighting: Weighting,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// Warnings with stable codes.
    pub warnings: Vec<Warning>,
}

/// One global fit.
#[derive(Debug, Clone, Serialize)]
pub struct ModelResult {
    /// Model name.
    pub model: &'static str,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// Residual degrees of freedom.
    pub df: usize,
    /// AICc; null when n ≤ K + 1.
    pub aicc: Option<f64>,
    /// Akaike weight among the five.
    pub weight: f64,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
    /// When the optimum lies at infinity, the simpler model it reduces to.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub limit: Option<Mechanism>,
    /// Estimated constants.
    pub params: ModelParams,
}

/// Constants of one model; absent ones are not part of it.
#[derive(Debug, Clone, Serialize)]
pub struct ModelParams {
    /// Limiting rate, in the rate's unit.
    pub vmax: Param,
    /// Michaelis constant, in the substrate's unit.
    pub km: Param,
    /// Competitive constant Kic, in the inhibitor's unit.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ki: Option<Param>,
    /// α = Kiu/Kic, dimensionless.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub alpha: Option<Param>,
    /// Uncompetitive constant Kiu, in the inhibitor's unit.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub kiu: Option<Param>,
}

/// An extra-sum-of-squares F test of a nested pair.
#[derive(Debug, Clone, Serialize)]
pub struct NestedTest {
    /// The nested model.
    pub simpler: &'static str,
    /// The model it is nested in.
    pub fuller: &'static str,
    /// F statistic; null when not computable.
    pub f: Option<f64>,
    /// P(F ≥ f) under the simpler model.
    pub p: Option<f64>,
}

/// Whether the picked model describes the data.
#[derive(Debug, Clone, Serialize)]
pub struct Adequacy {
    /// The model tested.
    pub model: &'static str,
    /// Runs-test p for too few sign runs; null when every residual has one sign,
    /// or when the model reproduces every rate to rounding (1e-9 of the largest).
    pub runs_p: Option<f64>,
    /// Lack-of-fit F against pure error; null without replicates.
    pub lack_of_fit_f: Option<f64>,
    /// Its p-value.
    pub lack_of_fit_p: Option<f64>,
    /// Neither test below the adequacy level.
    pub adequate: bool,
}

/// One model's fit and what is derived from it, before serialisation.
struct Fitted {
    mechanism: Mechanism,
    fit: Fit,
    limit: Option<Mechanism>,
    params: ModelParams,
}

/// Analyses one compound: a pure function of the matrix and the options
/// (no I/O), so that design planning can call it on simulated matrices.
pub fn analyse(matrix: &Matrix, units: &Units, options: &Options) -> Result<ModeResult> {
    check_matrix(matrix, options)?;
    let data = build_data(matrix, options)?;
    let i_max = matrix.inhibitor.iter().cloned().fold(0.0, f64::max);
    let fits = fit_all(&data, &options.settings);
    let ext_fits = fit_extensions(&data, &fits[Mechanism::Mixed.index()], &options.settings);
    let fitted: Vec<Fitted> =
        Mechanism::ALL.iter().map(|&m| describe(m, &fits, &data, i_max, units, options)).collect();
    // A model at a limit (a constant → ∞) is the simpler model it reduces to: its SSE is taken as
    // no lower than that model's, so rounding in an all but exact fit cannot pick, say,
    // noncompetitive with Ki → ∞ over none.
    let sse_for_choice = |f: &Fitted| {
        let nested = f.limit.and_then(|l| fitted.iter().find(|g| g.mechanism == l));
        nested.map_or(f.fit.sse, |g| f.fit.sse.max(g.fit.sse))
    };
    let aiccs: Vec<Option<f64>> = fitted.iter().map(|f| aicc(f.fit.n, f.fit.n_free, sse_for_choice(f))).collect();
    let weights = akaike_weights(&aiccs);
    let tests = nested_tests(&fitted);
    let (picked, evidence) = match options.criterion {
        Criterion::Aicc => choose_by_aicc(&aiccs, &weights),
        Criterion::FTest => choose_by_f(&fitted, options.alpha_level),
    };
    let adequacy = adequacy_of(matrix, &data, &fitted[picked].fit, fitted[picked].mechanism.name());
    let best_five = aiccs.iter().flatten().cloned().fold(f64::INFINITY, f64::min);
    let (extensions, named) = diagnose(
        matrix,
        &data,
        &ext_fits,
        &fits[Mechanism::Mixed.index()],
        best_five,
        adequacy.adequate,
        units,
        options,
    );
    let mut warnings = Vec::new();
    // Range and spacing warnings come only from a model still standing.
    let standing = match named {
        Some(k) => Some((&ext_fits[k].theta, Mechanism::Mixed)),
        None if adequacy.adequate => Some((&fitted[picked].fit.theta, fitted[picked].mechanism)),
        None => None,
    };
    warnings.extend(design_warnings(matrix, standing, i_max, units));
    let chosen = match named {
        Some(k) => {
            warnings.push(diagnosis_warning(&extensions[k], adequacy.adequate, units));
            Extension::ALL[k].name().to_string()
        }
        None if adequacy.adequate => Mechanism::ALL[picked].name().to_string(),
        None => {
            warnings.push(inadequacy_warning(&adequacy));
            "no-model-adequate".to_string()
        }
    };
    let alpha_interpretation = interpret_alpha(&fitted[Mechanism::Mixed.index()]);
    let plain = named.is_none() && adequacy.adequate;
    if plain
        && picked == Mechanism::Mixed.index()
        && fitted[Mechanism::Mixed.index()].params.alpha.as_ref().is_some_and(|a| a.low.is_none() || a.high.is_none())
    {
        warnings.push(Warning::new(Code::AlphaNotDetermined, alpha_interpretation.clone()));
    }
    if plain && picked == Mechanism::None.index() {
        warnings.push(Warning::new(
            Code::NoInhibitionDetected,
            "the rates do not depend on the inhibitor clearly enough to prefer any inhibition model over none; \
             no Ki can be given (test higher inhibitor concentrations or check the compound)",
        ));
    }
    for f in fitted.iter().filter(|f| !f.fit.converged()) {
        warnings.push(Warning::new(
            Code::NotConverged,
            format!(
                "the {} fit did not converge ({}); its numbers are not trustworthy",
                f.mechanism.name(),
                f.fit.termination
            ),
        ));
    }
    let models: Vec<ModelResult> = fitted
        .into_iter()
        .zip(aiccs)
        .zip(weights)
        .map(|((f, a), w)| ModelResult {
            model: f.mechanism.name(),
            sse: f.fit.sse,
            df: f.fit.df,
            aicc: a,
            weight: w,
            converged: f.fit.converged(),
            limit: f.limit,
            params: f.params,
        })
        .collect();
    if plain {
        warnings.extend(uncertain(&models, picked));
        // Partial inhibition acts through ESI: a call in which no ESI forms (competitive) cannot hide it.
        let esi = match Mechanism::at(picked) {
            Some(Mechanism::Uncompetitive | Mechanism::Noncompetitive) => true,
            Some(Mechanism::Mixed) => models[picked].limit != Some(Mechanism::Competitive),
            _ => false,
        };
        let residual_p = if esi {
            residual_activity_p(&data, &ext_fits[0], &fits[Mechanism::Mixed.index()], &options.settings)
        } else {
            None
        };
        warnings.extend(partial_hint(&extensions, residual_p));
    }
    let headline = match named {
        Some(k) => headline::from_extension(&extensions[k]),
        None if adequacy.adequate => headline::from_five(&models, picked),
        None => headline::inadequate(),
    };
    Ok(ModeResult {
        compound: matrix.label.clone(),
        source: matrix.origin.clone(),
        n: matrix.rate.len(),
        chosen,
        headline,
        criterion: options.criterion,
        evidence,
        models,
        extensions,
        tests,
        adequacy,
        alpha_interpretation,
        weighting: options.weighting,
        confidence: options.confidence,
        warnings,
    })
}

/// The compound's name for messages.
pub fn group_name(matrix: &Matrix) -> String {
    match &matrix.label {
        Some(l) => format!("compound '{}' ({})", crate::report::short_id(l), matrix.origin),
        None => format!("the data ({})", matrix.origin),
    }
}

fn distinct(values: &[f64]) -> Vec<f64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    v.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs());
    v
}

/// Rejects matrices that cannot support the five fits.
fn check_matrix(matrix: &Matrix, options: &Options) -> Result<()> {
    let err =
        |problem: String, expected: &str| Error::Data { group: group_name(matrix), problem, expected: expected.into() };
    let levels = distinct(&matrix.inhibitor);
    if levels.len() < 2 {
        return Err(err(
            format!(
                "only one inhibitor concentration ({}) in the matrix",
                levels.first().map_or("none".into(), |l| sig(*l, 4))
            ),
            "telling mechanisms apart needs rates at several inhibitor concentrations: 0 and at least 3 others \
             around the expected Ki (common practice)",
        ));
    }
    if distinct(&matrix.substrate).len() < 2 {
        return Err(err(
            "only one substrate concentration in the matrix".into(),
            "mechanisms differ in how inhibition changes with substrate: measure at 5 or more substrate \
             concentrations spanning Km (common practice)",
        ));
    }
    if matrix.rate.len() < MIN_ROWS {
        return Err(err(
            format!("only {} rows", matrix.rate.len()),
            "comparing all five models needs at least 7 rows (the mixed model has 4 constants and its AICc \
             needs n > 6); a full matrix is usually 5+ substrate × 4+ inhibitor levels",
        ));
    }
    if options.weighting == Weighting::Relative
        && let Some(k) = matrix.rate.iter().position(|v| *v <= 0.0 || !v.is_finite())
    {
        return Err(err(
            format!("line {}: rate {} is not positive", matrix.lines[k], matrix.rate[k]),
            "relative weighting (1/rate²) assumes positive rates with proportional error; \
             fix the row or use --weighting none",
        ));
    }
    if !matrix.rate.iter().any(|v| *v > 0.0) {
        return Err(err("no positive rate".into(), "check the rate column and its sign"));
    }
    let (lo, hi) = crate::fit::span_of(&matrix.rate);
    if hi - lo <= 1e-12 * hi.abs() {
        return Err(err(
            format!(
                "every rate is {}: the rates change with neither substrate nor inhibitor, so Km is not \
                 determined (it lies somewhere well below the lowest substrate concentration) and neither is Ki, \
                 Kiu or α (the inhibitor changes no rate)",
                sig(hi, 6)
            ),
            "measure substrate concentrations around and below Km, where the rate still rises, and inhibitor \
             concentrations up to several times the expected Ki",
        ));
    }
    if let Some(problem) = crate::fit::out_of_range(&matrix.rate, "rates") {
        return Err(err(problem, "rescale the rate column (a power of ten changes only Vmax)"));
    }
    Ok(())
}

fn build_data(matrix: &Matrix, options: &Options) -> Result<Data<Point>> {
    let w = weights(options.weighting, &matrix.rate, matrix.sd.as_deref()).map_err(|p| {
        let (k, why) = match p {
            WeightProblem::ZeroResponse(k) => (k, "relative weighting needs a non-zero rate"),
            WeightProblem::BadSd(k) => (k, "sd weighting needs a positive sd on every row"),
        };
        Error::Data {
            group: group_name(matrix),
            problem: format!("line {}: this row cannot be weighted ({why})", matrix.lines.get(k).copied().unwrap_or(0)),
            expected: "fix the row or choose another --weighting".into(),
        }
    })?;
    let x = matrix.substrate.iter().cloned().zip(matrix.inhibitor.iter().cloned()).collect();
    Ok(Data { x, y: matrix.rate.clone(), weights: w })
}

/// Fits the five models. Mixed also starts from the three one-constant
/// optima (with α, or Ki, pushed far out for the limits), so that it never
/// ends above a model nested in it.
pub fn fit_all(data: &Data<Point>, settings: &FitSettings) -> Vec<Fit> {
    let mut fits: Vec<Fit> =
        Mechanism::ALL[..4].iter().map(|&m| fit(&RateLaw(m), data, &vec![None; m.n_params()], settings)).collect();
    let mixed = RateLaw(Mechanism::Mixed);
    let mut starts = mixed.starts(data);
    let far = 1e12 * data.x.iter().map(|x| x.1).fold(1e-300, f64::max);
    let (c, u, nc) = (&fits[1].theta, &fits[2].theta, &fits[3].theta);
    starts.extend([
        vec![c[0], c[1], c[2], far / c[2]],
        vec![c[0], c[1], c[2], 10.0],
        vec![u[0], u[1], far, u[2] / far],
        vec![u[0], u[1], 10.0 * u[2], 0.1],
        vec![nc[0], nc[1], nc[2], 1.0],
    ]);
    starts.retain(|s| s.iter().all(|v| v.is_finite() && *v > 0.0));
    fits.push(fit_from(&mixed, data, &starts, &[None; 4], settings));
    fits
}

/// Pulls constants that lie at infinity back to [`LIMIT_FACTOR`] × I_max,
/// where the SSE is the same to 1 part in 10⁶ but the profile can start
/// walking; returns the limit model's name, if any.
fn tame_limits(mechanism: Mechanism, theta: &mut [f64], i_max: f64) -> Option<Mechanism> {
    let cap = LIMIT_FACTOR * i_max;
    match mechanism {
        Mechanism::None => None,
        Mechanism::Competitive | Mechanism::Uncompetitive | Mechanism::Noncompetitive => (theta[2] > cap).then(|| {
            theta[2] = cap;
            Mechanism::None
        }),
        Mechanism::Mixed => {
            let (ki, kiu) = (theta[2], theta[2] * theta[3]);
            match (ki > cap, kiu > cap) {
                (false, false) => None,
                (false, true) => {
                    theta[3] = cap / ki;
                    Some(Mechanism::Competitive)
                }
                (true, false) => {
                    theta[2] = cap;
                    theta[3] = kiu / cap;
                    Some(Mechanism::Uncompetitive)
                }
                (true, true) => {
                    theta[2] = cap;
                    theta[3] = 1.0;
                    Some(Mechanism::None)
                }
            }
        }
    }
}

/// Intervals and reported constants for one model. `fits` are all five
/// fits: at a limit, SEs of the finite constants come from the model the
/// limit reduces to (there the two fits are the same curve, and the fuller
/// model's covariance is singular).
fn describe(
    mechanism: Mechanism,
    fits: &[Fit],
    data: &Data<Point>,
    i_max: f64,
    units: &Units,
    options: &Options,
) -> Fitted {
    let best = fits[mechanism as usize].clone();
    let mut tamed = best.clone();
    let limit = tame_limits(mechanism, &mut tamed.theta, i_max);
    let nested = limit.and_then(|l| Mechanism::ALL.iter().position(|m| *m == l)).map(|k| &fits[k]);
    let se = |j: usize| match nested {
        Some(n) if j < n.theta.len() => n.se[j],
        _ => best.se[j],
    };
    let method = if best.converged() { "profile" } else { "wald" };
    let prof = |model: &dyn Profiled, fit: &Fit, j: usize| {
        if best.converged() { model.profile(data, fit, j, options) } else { model.wald(fit, j, options) }
    };
    let cap = LIMIT_FACTOR * i_max;
    let report = |value: f64, se: Option<f64>, iv: Interval, unit: &Option<String>, infinite: bool| {
        let (value, se) = if infinite { (f64::INFINITY, None) } else { (value, se) };
        let mut p = Param::new(value, se, iv, method, unit.clone());
        if infinite {
            p.note = Some(format!(
                "not determined: the best fit lies at infinity (beyond {LIMIT_FACTOR:e} × the highest inhibitor \
                 concentration, where it no longer changes any rate); {}",
                p.note.clone().unwrap_or_default()
            ));
        }
        p
    };
    let law = RateLaw(mechanism);
    let plain = |j: usize, unit: &Option<String>, infinite: bool| {
        report(best.theta[j], se(j), prof(&law, &tamed, j), unit, infinite)
    };
    let mut params = ModelParams {
        vmax: plain(0, &units.rate, false),
        km: plain(1, &units.substrate, false),
        ki: None,
        alpha: None,
        kiu: None,
    };
    match mechanism {
        Mechanism::None => {}
        Mechanism::Competitive | Mechanism::Noncompetitive => {
            params.ki = Some(plain(2, &units.inhibitor, best.theta[2] > cap));
        }
        Mechanism::Uncompetitive => params.kiu = Some(plain(2, &units.inhibitor, best.theta[2] > cap)),
        Mechanism::Mixed => {
            let (ki, alpha) = (best.theta[2], best.theta[3]);
            let kiu = ki * alpha;
            // SE of Kiu by the delta method: var(ln Kiu) = var(ln Ki) + var(ln α) + 2 cov.
            let kiu_se = best.covariance.as_ref().filter(|c| c.nrows() == 4).map(|c| {
                let var_log = c[(2, 2)] / (ki * ki) + c[(3, 3)] / (alpha * alpha) + 2.0 * c[(2, 3)] / (ki * alpha);
                kiu * var_log.max(0.0).sqrt()
            });
            let kiu_se = if limit == Some(Mechanism::Uncompetitive) { se(2) } else { kiu_se };
            let (tki, talpha) = (tamed.theta[2], tamed.theta[3]);
            let ki_kiu =
                reparametrised(&tamed, [tki, tki * talpha], [tamed.se[2], kiu_se.map(|s| s * talpha * tki / kiu)]);
            let kiu_alpha = reparametrised(&tamed, [tki * talpha, talpha], [ki_kiu.se[3], tamed.se[3]]);
            let ki_infinite = matches!(limit, Some(Mechanism::Uncompetitive | Mechanism::None));
            let kiu_infinite = matches!(limit, Some(Mechanism::Competitive | Mechanism::None));
            params.ki = Some(report(ki, se(2), prof(&MixedKiu, &ki_kiu, 2), &units.inhibitor, ki_infinite));
            params.kiu = Some(report(kiu, kiu_se, prof(&MixedKiu, &ki_kiu, 3), &units.inhibitor, kiu_infinite));
            // α walked up holds Ki (the competitive edge), walked down holds Kiu (the uncompetitive edge).
            // A refit can only miss the profile minimum from above, so each form's interval lies
            // inside the true one: the wider end of the two is the better estimate.
            let up = prof(&law, &tamed, 3);
            let down = prof(&MixedAlphaKiu, &kiu_alpha, 3);
            let iv = Interval { low: wider(down.low, up.low, -1.0), high: wider(up.high, down.high, 1.0) };
            let mut a = report(alpha, best.se[3], iv, &None, limit == Some(Mechanism::Competitive));
            if ki_infinite {
                a.value = f64::NAN;
                a.se = None;
                a.note = Some(format!(
                    "not determined: the best fit has Ki → ∞ (and α → 0 with α·Ki = Kiu fixed), i.e. it reduces to {}; {}",
                    limit.map_or("a simpler model", Mechanism::name),
                    Param::new(1.0, None, iv, method, None).note.unwrap_or_default()
                ));
            }
            params.alpha = Some(a);
        }
    }
    Fitted { mechanism, fit: best, limit, params }
}

/// The farther of two interval ends in `direction` (−1 low, +1 high); an
/// unbounded end is farthest, an undetermined one yields to the other.
fn wider(first: Bound, second: Bound, direction: f64) -> Bound {
    match (first, second) {
        (Bound::Unbounded, _) | (_, Bound::Unbounded) => Bound::Unbounded,
        (Bound::At(a), Bound::At(b)) => Bound::At(if (a - b) * direction >= 0.0 { a } else { b }),
        (Bound::At(a), Bound::NotDetermined) | (Bound::NotDetermined, Bound::At(a)) => Bound::At(a),
        (Bound::NotDetermined, Bound::NotDetermined) => Bound::NotDetermined,
    }
}

/// A copy of a mixed fit with parameters 2 and 3 replaced (same curve, another form).
fn reparametrised(fit: &Fit, theta: [f64; 2], se: [Option<f64>; 2]) -> Fit {
    let mut f = fit.clone();
    f.theta[2] = theta[0];
    f.theta[3] = theta[1];
    f.se[2] = se[0];
    f.se[3] = se[1];
    f
}

/// Refits along a profile need the SSE to ~1e-8 relative, far below the
/// ~7% rise that defines an interval end; tighter tolerances only cost time.
fn profile_settings(settings: &FitSettings) -> FitSettings {
    FitSettings {
        ftol: settings.ftol.max(1e-8),
        xtol: settings.xtol.max(1e-8),
        gtol: settings.gtol.max(1e-8),
        ..*settings
    }
}

/// Interval methods over the model forms, so one closure can serve them all.
trait Profiled {
    fn profile(&self, data: &Data<Point>, fit: &Fit, j: usize, options: &Options) -> Interval;
    fn wald(&self, fit: &Fit, j: usize, options: &Options) -> Interval;
}

impl<M: Model<Point = Point>> Profiled for M {
    fn profile(&self, data: &Data<Point>, fit: &Fit, j: usize, options: &Options) -> Interval {
        profile(self, data, fit, j, options.confidence, &profile_settings(&options.settings))
    }
    fn wald(&self, fit: &Fit, j: usize, options: &Options) -> Interval {
        wald(self, fit, j, options.confidence)
    }
}

/// F tests for none ⊂ each one-constant model ⊂ mixed.
fn nested_tests(fitted: &[Fitted]) -> Vec<NestedTest> {
    let pairs = [(0, 1), (0, 2), (0, 3), (1, 4), (2, 4), (3, 4)];
    pairs
        .iter()
        .map(|&(a, b)| {
            let (s, f) = (&fitted[a].fit, &fitted[b].fit);
            let test = extra_sum_of_squares(s.sse, s.df, f.sse, f.df);
            NestedTest {
                simpler: fitted[a].mechanism.name(),
                fuller: fitted[b].mechanism.name(),
                f: test.map(|t| t.0),
                p: test.map(|t| t.1),
            }
        })
        .collect()
}

/// Lowest AICc, simplest within the parsimony window. Returns the index and
/// the evidence sentence.
fn choose_by_aicc(aiccs: &[Option<f64>], weights: &[f64]) -> (usize, String) {
    let best = (0..5)
        .filter(|&k| aiccs[k].is_some())
        .min_by(|&a, &b| aiccs[a].unwrap_or(0.0).total_cmp(&aiccs[b].unwrap_or(0.0)));
    let Some(best) = best else {
        return (0, "no model has an AICc (too few rows)".into());
    };
    let best_aicc = aiccs[best].unwrap_or(f64::INFINITY);
    let pick = (0..5)
        .filter(|&k| aiccs[k].is_some_and(|a| a - best_aicc <= PARSIMONY_WINDOW))
        .min_by(|&a, &b| {
            let pa = Mechanism::ALL[a].n_params();
            let pb = Mechanism::ALL[b].n_params();
            pa.cmp(&pb).then(aiccs[a].unwrap_or(0.0).total_cmp(&aiccs[b].unwrap_or(0.0)))
        })
        .unwrap_or(best);
    let mut others: Vec<usize> = (0..5).filter(|&k| k != pick && weights[k] >= 0.005).collect();
    others.sort_by(|a, b| weights[*b].total_cmp(&weights[*a]));
    let rest = if others.is_empty() {
        "every other model below 0.01".to_string()
    } else {
        others
            .iter()
            .map(|&k| format!("{} {}", Mechanism::ALL[k].name(), weight_text(weights[k])))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut evidence =
        format!("{} (Akaike weight {}; {rest})", Mechanism::ALL[pick].name(), weight_text(weights[pick]));
    if pick != best {
        evidence.push_str(&format!(
            "; {} has the lowest AICc but is only {} units better, so the simpler model is preferred \
             (parsimony: simplest within {PARSIMONY_WINDOW} AICc units, Burnham & Anderson 2002)",
            Mechanism::ALL[best].name(),
            sig(aiccs[pick].unwrap_or(f64::NAN) - best_aicc, 2)
        ));
    }
    (pick, evidence)
}

fn weight_text(w: f64) -> String {
    if w >= 0.995 {
        ">0.99".into()
    } else if w < 0.01 {
        "<0.01".into()
    } else {
        format!("{w:.2}")
    }
}

fn p_text(p: Option<f64>) -> String {
    match p {
        None => "not computable".into(),
        Some(p) if p < 1e-4 => "p < 0.0001".into(),
        Some(p) => format!("p = {}", sig(p, 2)),
    }
}

/// Forward F-test steps: none → best one-constant model → mixed.
fn choose_by_f(fitted: &[Fitted], level: f64) -> (usize, String) {
    let one = (1..4).min_by(|&a, &b| fitted[a].fit.sse.total_cmp(&fitted[b].fit.sse)).unwrap_or(1);
    let test = |a: usize, b: usize| {
        let (s, f) = (&fitted[a].fit, &fitted[b].fit);
        extra_sum_of_squares(s.sse, s.df, f.sse, f.df).map(|t| t.1)
    };
    let name = |k: usize| Mechanism::ALL[k].name();
    let p1 = test(0, one);
    if !p1.is_some_and(|p| p < level) {
        return (0, format!("none ({} does not beat no inhibition: F test {}, level {level})", name(one), p_text(p1)));
    }
    let p2 = test(one, 4);
    if p2.is_some_and(|p| p < level) {
        (4, format!("mixed (beats {}: F test {}; {} beats none: {})", name(one), p_text(p2), name(one), p_text(p1)))
    } else {
        (
            one,
            format!(
                "{} (beats none: F test {}; mixed does not improve on it: {}, level {level})",
                name(one),
                p_text(p1),
                p_text(p2)
            ),
        )
    }
}

/// Runs test and lack-of-fit test of one fit.
/// Residuals within this fraction of the largest rate are rounding, not scatter.
const EXACT_FIT: f64 = 1e-9;

fn adequacy_of(matrix: &Matrix, data: &Data<Point>, fit: &Fit, model: &'static str) -> Adequacy {
    // Replicates by level, not by bit pattern: 1000 nM and 1 uM differ in the last bit after conversion.
    let (substrate, inhibitor) = (same_levels(&matrix.substrate), same_levels(&matrix.inhibitor));
    let mut order: Vec<usize> = (0..data.len()).collect();
    order.sort_by(|&a, &b| inhibitor[a].total_cmp(&inhibitor[b]).then(substrate[a].total_cmp(&substrate[b])));
    let ordered: Vec<f64> = order.iter().map(|&k| fit.residuals[k]).collect();
    // Residuals at rounding level (the model reproduces every rate to 1e-9 of the largest) have
    // signs set by floating-point rounding, not by the data: no runs test on them.
    let scale = data.y.iter().fold(0f64, |m, v| m.max(v.abs()));
    let exact = fit.residuals.iter().all(|r| r.abs() <= EXACT_FIT * scale);
    let runs = if exact { None } else { runs_test(&ordered).map(|r| r.p_too_few) };
    let mut cells: HashMap<(u64, u64), usize> = HashMap::new();
    let groups: Vec<usize> = substrate
        .iter()
        .zip(&inhibitor)
        .map(|(s, i)| {
            let next = cells.len();
            *cells.entry((s.to_bits(), i.to_bits())).or_insert(next)
        })
        .collect();
    let lof = lack_of_fit(&fit.residuals, &data.weights, &groups, fit.n_free);
    let adequate = !runs.is_some_and(|p| p < ADEQUACY_LEVEL) && !lof.is_some_and(|t| t.1 < ADEQUACY_LEVEL);
    Adequacy { model, runs_p: runs, lack_of_fit_f: lof.map(|t| t.0), lack_of_fit_p: lof.map(|t| t.1), adequate }
}

fn inadequacy_warning(a: &Adequacy) -> Warning {
    let mut why = Vec::new();
    if let Some(p) = a.runs_p.filter(|p| *p < ADEQUACY_LEVEL) {
        why.push(format!("the residual signs cluster (runs test p = {})", sig(p, 2)));
    }
    if let Some(p) = a.lack_of_fit_p.filter(|p| *p < ADEQUACY_LEVEL) {
        why.push(format!("the misfit exceeds the replicate scatter (lack-of-fit p = {})", sig(p, 2)));
    }
    Warning::new(
        Code::NoModelAdequate,
        format!(
            "the best-supported model, {}, does not describe the data: {} (level {ADEQUACY_LEVEL}); the matrix may \
             show substrate inhibition, partial inhibition, aggregation or an assay artefact, so no mechanism is named",
            a.model,
            why.join("; ")
        ),
    )
}

/// What the mixed model's α says, in words.
fn interpret_alpha(mixed: &Fitted) -> String {
    let Some(alpha) = &mixed.params.alpha else {
        return String::new();
    };
    let simple = match mixed.limit {
        Some(Mechanism::Competitive) => {
            return "α → ∞: the best mixed fit is competitive (the inhibitor shows no binding to the ES complex)"
                .into();
        }
        Some(Mechanism::Uncompetitive) => {
            return "Ki → ∞, α → 0: the best mixed fit is uncompetitive (the inhibitor shows no binding to free enzyme)"
                .into();
        }
        Some(_) => return "both inhibition constants → ∞: the best mixed fit is no inhibition".into(),
        None => match (alpha.low, alpha.high) {
            (Some(_), None) => Some("competitive (α → ∞)"),
            (None, Some(_)) => Some("uncompetitive (α → 0)"),
            (None, None) => Some("competitive or uncompetitive"),
            _ => None,
        },
    };
    let a = alpha.value;
    let lean = if a > 1.0 {
        format!("α = {} > 1: binds free enzyme preferentially (Kiu = αKi > Ki)", sig(a, 3))
    } else {
        format!("α = {} < 1: binds the ES complex preferentially (Kiu = αKi < Ki)", sig(a, 3))
    };
    match (simple, alpha.low, alpha.high) {
        (Some(s), _, _) => format!("{lean}, but α's interval is unbounded: the data cannot be told from {s}"),
        (None, Some(lo), Some(hi)) if lo <= 1.0 && hi >= 1.0 => {
            format!(
                "{lean}, but α's interval ({}–{}) includes 1: not distinguishable from noncompetitive",
                sig(lo, 3),
                sig(hi, 3)
            )
        }
        _ => lean,
    }
}

/// Warnings about the design rather than the fit. Those that compare the
/// design with fitted constants use the model still standing (`standing`:
/// its parameters and the mechanism they are laid out as), and are skipped
/// when every model was rejected.
fn design_warnings(
    matrix: &Matrix,
    standing: Option<(&Vec<f64>, Mechanism)>,
    i_max: f64,
    units: &Units,
) -> Vec<Warning> {
    let mut warnings = Vec::new();
    let levels = distinct(&matrix.inhibitor);
    let nonzero: Vec<f64> = levels.iter().cloned().filter(|l| *l > 0.0).collect();
    let iu = units.inhibitor.clone().unwrap_or_default();
    if nonzero.len() < 3 {
        warnings.push(Warning::new(
            Code::FewInhibitorLevels,
            format!(
                "only {} non-zero inhibitor concentration(s); 3 or more are needed to tell mechanisms apart (common practice)",
                nonzero.len()
            ),
        ));
    }
    if levels.first().is_none_or(|l| *l > 0.0) {
        warnings.push(Warning::new(
            Code::NoUninhibitedSeries,
            "no rows at inhibitor 0: Vmax and Km of the free enzyme rest on extrapolation",
        ));
    }
    let Some((theta, mechanism)) = standing else {
        return warnings;
    };
    let s = distinct(&matrix.substrate);
    let km = theta[1];
    if let (Some(lo), Some(hi)) = (s.first(), s.last())
        && (*lo > km || *hi < km)
    {
        warnings.push(Warning::new(
            Code::KmNotSpanned,
            format!(
                "the substrate range {}–{} {} does not include the fitted Km {}; mechanisms differ mainly in how \
                 inhibition changes across Km (common practice: about 0.2–5 × Km)",
                sig(*lo, 3),
                sig(*hi, 3),
                units.substrate.clone().unwrap_or_default(),
                sig(km, 3)
            ),
        ));
    }
    let constant = match mechanism {
        Mechanism::None => None,
        Mechanism::Mixed => Some(theta[2].min(theta[2] * theta[3])),
        _ => Some(theta[2]),
    };
    if let (Some(k), Some(lo)) = (constant, nonzero.first())
        && k < LIMIT_FACTOR * i_max
        && (i_max < 0.5 * k || *lo > 5.0 * k)
    {
        warnings.push(Warning::new(
            Code::InhibitorRangeFarFromKi,
            format!(
                "the inhibitor range {}–{} {iu} is far from the fitted inhibition constant {} {iu}; \
                 common practice is about 0.5–5 × Ki",
                sig(*lo, 3),
                sig(i_max, 3),
                sig(k, 3)
            ),
        ));
    }
    warnings
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wider_takes_the_farther_end() {
        assert_eq!(wider(Bound::At(1.0), Bound::At(2.0), -1.0), Bound::At(1.0));
        assert_eq!(wider(Bound::At(1.0), Bound::At(2.0), 1.0), Bound::At(2.0));
        assert_eq!(wider(Bound::At(1.0), Bound::Unbounded, -1.0), Bound::Unbounded);
        assert_eq!(wider(Bound::NotDetermined, Bound::At(3.0), 1.0), Bound::At(3.0));
    }

    #[test]
    fn range_warnings_only_from_a_model_still_standing() {
        // Substrate 1–4 against a fitted Km of 100: km-not-spanned from a standing fit, none without one.
        let matrix = Matrix {
            label: None,
            origin: crate::report::Origin::new("test", []),
            lines: (0..9).collect(),
            substrate: [1.0, 2.0, 4.0].repeat(3),
            inhibitor: [0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 2.0, 2.0, 2.0].to_vec(),
            rate: vec![1.0; 9],
            sd: None,
        };
        let theta = vec![10.0, 100.0, 1000.0];
        let codes = |w: Vec<Warning>| w.iter().map(|w| w.code).collect::<Vec<_>>();
        let standing = codes(design_warnings(&matrix, Some((&theta, Mechanism::Competitive)), 2.0, &Units::default()));
        assert!(standing.contains(&Code::KmNotSpanned) && standing.contains(&Code::InhibitorRangeFarFromKi));
        let rejected = codes(design_warnings(&matrix, None, 2.0, &Units::default()));
        assert!(!rejected.contains(&Code::KmNotSpanned) && !rejected.contains(&Code::InhibitorRangeFarFromKi));
        assert!(rejected.contains(&Code::FewInhibitorLevels), "design-only warnings stay");
    }

    #[test]
    fn limits_are_pulled_back_keeping_the_finite_constant() {
        // α·Ki beyond 10⁶ × I_max: competitive edge, Ki kept.
        let mut t = [1.0, 2.0, 3.0, 1e9];
        assert_eq!(tame_limits(Mechanism::Mixed, &mut t, 8.0), Some(Mechanism::Competitive));
        assert!((t[2] - 3.0).abs() < 1e-12 && (t[2] * t[3] - 8e6).abs() < 1e-3);
        // Ki beyond: uncompetitive edge, Kiu = α·Ki kept.
        let mut t = [1.0, 2.0, 1e20, 2e-20];
        assert_eq!(tame_limits(Mechanism::Mixed, &mut t, 8.0), Some(Mechanism::Uncompetitive));
        assert!((t[2] - 8e6).abs() < 1e-3 && (t[2] * t[3] - 2.0).abs() < 1e-9);
        let mut t = [1.0, 2.0, 3.0, 4.0];
        assert_eq!(tame_limits(Mechanism::Mixed, &mut t, 8.0), None);
    }
}
