//! Michaelis–Menten analysis of one substrate series: Vmax, Km, kcat,
//! kcat/Km, the double-reciprocal line implied by the fit, and warnings.
//!
//! kcat = Vmax/Et (Cornish-Bowden, *Fundamentals of Enzyme Kinetics*, 4th
//! ed., 2012, §2.3). The Lineweaver–Burk line (Lineweaver & Burk, J. Am. Chem.
//! Soc. 56, 658–666, 1934) 1/v = (Km/Vmax)(1/S) + 1/Vmax is computed from the
//! fitted parameters, never by regressing reciprocals.

use crate::report::Code;
use serde::Serialize;

use crate::error::{Error, Result};
use crate::fit::intervals::{Interval, profile, wald};
use crate::fit::stats::runs_test;
use crate::fit::{Data, FitSettings, Weighting, fit, weights};
use crate::models::MichaelisMenten;
use crate::report::{Param, Warning};

/// One substrate series, concentrations already in the reporting unit.
#[derive(Debug, Clone)]
pub struct Series {
    /// The series label, if the input had a `series` column.
    pub label: Option<String>,
    /// Where the rows came from, for messages (e.g. "lines 2-13").
    pub origin: crate::report::Origin,
    /// Substrate concentrations in `Units::substrate`.
    pub substrate: Vec<f64>,
    /// Initial rates.
    pub rate: Vec<f64>,
    /// Standard deviation of each rate, when supplied.
    pub sd: Option<Vec<f64>>,
}

/// The units results are stated in.
#[derive(Debug, Clone)]
pub struct Units {
    /// Unit of substrate and Km (e.g. `uM`).
    pub substrate: Option<String>,
    /// Unit of rates and Vmax as written in the header (e.g. `uM/min`).
    pub rate: Option<String>,
}

/// How to analyse.
#[derive(Debug, Clone)]
pub struct Options {
    /// Residual weighting.
    pub weighting: Weighting,
    /// Confidence level of the intervals, e.g. 0.95.
    pub confidence: f64,
    /// Total enzyme concentration and its unit, for kcat.
    pub enzyme: Option<Enzyme>,
    /// Minimiser settings.
    pub settings: FitSettings,
}

/// Total active enzyme concentration.
#[derive(Debug, Clone)]
pub struct Enzyme {
    /// In mol/L.
    pub molar: f64,
    /// As the user wrote it, for units (e.g. `nM`).
    pub unit: crate::units::ConcUnit,
}

/// Everything reported for one series.
#[derive(Debug, Clone, Serialize)]
pub struct KmResult {
    /// Series label, or null when the file had no `series` column.
    pub series: Option<String>,
    /// Where the rows came from (`file:2-8`): the file as named on the command line and the lines.
    pub source: crate::report::Origin,
    /// Number of observations.
    pub n: usize,
    /// Residual degrees of freedom.
    pub df: usize,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// Residual standard deviation, √(SSE/df), in weighted units.
    pub residual_sd: f64,
    /// Weighted R².
    pub r2: f64,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
    /// Exact one-sided runs-test p for too few sign runs (residuals ordered by S); null when all residuals share a sign.
    pub runs_p: Option<f64>,
    /// The weighting used.
    pub weighting: Weighting,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// Estimates.
    pub params: KmParams,
    /// The double-reciprocal line implied by the fitted Vmax and Km.
    pub double_reciprocal: DoubleReciprocal,
    /// Warnings with stable codes.
    pub warnings: Vec<Warning>,
    /// The observations, kept for pictures; not serialised.
    #[serde(skip)]
    pub observations: Observations,
    /// Covariance of (Vmax, Km) on the natural scale, scaled by s²; for the
    /// confidence band of the curve. Not serialised.
    #[serde(skip)]
    pub covariance: Option<[[f64; 2]; 2]>,
}

/// The data a series was fitted to, in the reporting units.
#[derive(Debug, Clone, Default)]
pub struct Observations {
    /// Substrate concentrations.
    pub substrate: Vec<f64>,
    /// Observed rates.
    pub rate: Vec<f64>,
}

impl KmResult {
    /// The fitted rate v̂(S) = Vmax·S/(Km + S).
    pub fn rate_at(&self, s: f64) -> f64 {
        self.params.vmax.value * s / (self.params.km.value + s)
    }

    /// A pointwise confidence interval for the mean rate at `s`, by the delta
    /// method: v̂ ± t(df)·√(gᵀ C g) with g = ∂v/∂(Vmax, Km) and C the scaled
    /// covariance (Bates & Watts, *Nonlinear Regression Analysis and Its
    /// Applications*, 1988, §2.3.2). `None` when the covariance is missing.
    pub fn rate_band(&self, s: f64) -> Option<(f64, f64)> {
        let c = self.covariance?;
        let (vmax, km) = (self.params.vmax.value, self.params.km.value);
        let g = [s / (km + s), -vmax * s / ((km + s) * (km + s))];
        let var = g[0] * g[0] * c[0][0] + 2.0 * g[0] * g[1] * c[0][1] + g[1] * g[1] * c[1][1];
        let t = crate::fit::intervals::t_quantile(self.confidence, self.df)?;
        let half = t * var.max(0.0).sqrt();
        let v = self.rate_at(s);
        (half.is_finite()).then_some((v - half, v + half))
    }
}

/// Estimated constants of one series.
#[derive(Debug, Clone, Serialize)]
pub struct KmParams {
    /// Limiting rate, in the rate's unit.
    pub vmax: Param,
    /// Michaelis constant, in the substrate's unit.
    pub km: Param,
    /// Turnover number Vmax/Et, when Et was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub kcat: Option<Param>,
    /// Specificity constant kcat/Km, when Et was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub kcat_km: Option<Param>,
}

/// 1/v = slope·(1/S) + y_intercept; the line meets the 1/S axis at x_intercept.
#[derive(Debug, Clone, Serialize)]
pub struct DoubleReciprocal {
    /// Km/Vmax.
    pub slope: f64,
    /// 1/Vmax.
    pub y_intercept: f64,
    /// −1/Km.
    pub x_intercept: f64,
}

/// Fits one series.
pub fn analyse(series: &Series, units: &Units, options: &Options) -> Result<KmResult> {
    check_series(series)?;
    let w = weights(options.weighting, &series.rate, series.sd.as_deref()).map_err(|p| {
        let (i, why) = match p {
            crate::fit::WeightProblem::ZeroResponse(i) => {
                (i, "relative weighting (1/rate²) needs every rate to be non-zero")
            }
            crate::fit::WeightProblem::BadSd(i) => (i, "SD weighting needs a positive sd on every row"),
        };
        Error::Data {
            group: group_name(series),
            problem: format!(
                "observation {} (rate {}) cannot be weighted: {why}",
                i + 1,
                series.rate.get(i).copied().unwrap_or(f64::NAN)
            ),
            expected: "fix the row or choose another --weighting".into(),
        }
    })?;
    let data = Data { x: series.substrate.clone(), y: series.rate.clone(), weights: w };
    let model = MichaelisMenten;
    let best = fit(&model, &data, &[None, None], &options.settings);
    let interval = |j| {
        if best.converged() {
            profile(&model, &data, &best, j, options.confidence, &options.settings)
        } else {
            wald(&model, &best, j, options.confidence)
        }
    };
    if !(best.theta.iter().all(|t| t.is_finite()) && best.sse.is_finite()) {
        return Err(Error::Data {
            group: group_name(series),
            problem: format!(
                "the fit overflowed (Vmax {:e}, Km {:e}, SSE {:e}): the rates or concentrations are too large or too small for double precision",
                best.theta[MichaelisMenten::VMAX],
                best.theta[MichaelisMenten::KM],
                best.sse
            ),
            expected: "check the exponents and units of the rate and substrate columns, or rescale them".into(),
        });
    }
    let method = if best.converged() { "profile" } else { "wald" };
    let (vmax, km) = (best.theta[MichaelisMenten::VMAX], best.theta[MichaelisMenten::KM]);
    let vmax_p = Param::new(vmax, best.se[0], interval(MichaelisMenten::VMAX), method, units.rate.clone());
    let km_p = Param::new(km, best.se[1], interval(MichaelisMenten::KM), method, units.substrate.clone());
    let (kcat, kcat_km) = match &options.enzyme {
        Some(e) => {
            let (kcat, kcat_km) = turnover(&vmax_p, &km_p, &best, e, units, options.confidence);
            (Some(kcat), Some(kcat_km))
        }
        None => (None, None),
    };
    let mut warnings = design_warnings(series, km);
    if !best.converged() {
        warnings.push(Warning::new(
            Code::NotConverged,
            format!("the fit did not converge ({}); the estimates are not trustworthy", best.termination),
        ));
    }
    let residuals_by_s = residuals_sorted_by(&series.substrate, &best.residuals);
    let runs = runs_test(&residuals_by_s);
    Ok(KmResult {
        series: series.label.clone(),
        source: series.origin.clone(),
        n: best.n,
        df: best.df,
        sse: best.sse,
        residual_sd: best.residual_sd,
        r2: best.r2,
        converged: best.converged(),
        runs_p: runs.map(|r| r.p_too_few),
        weighting: options.weighting,
        confidence: options.confidence,
        params: KmParams { vmax: vmax_p, km: km_p, kcat, kcat_km },
        double_reciprocal: DoubleReciprocal { slope: km / vmax, y_intercept: 1.0 / vmax, x_intercept: -1.0 / km },
        warnings,
        observations: Observations { substrate: series.substrate.clone(), rate: series.rate.clone() },
        covariance: best.covariance.as_ref().map(|c| [[c[(0, 0)], c[(0, 1)]], [c[(1, 0)], c[(1, 1)]]]),
    })
}

/// The common value of rates that are all equal (to 1 part in 10¹²), which
/// determine Vmax but not Km: the fit would drive Km to 0 and call it converged.
fn constant_rate(rate: &[f64]) -> Option<f64> {
    let (lo, hi) = crate::fit::span_of(rate);
    (hi > 0.0 && hi - lo <= 1e-12 * hi.abs()).then_some(hi)
}

fn group_name(series: &Series) -> String {
    match &series.label {
        Some(l) => format!("series '{}' ({})", crate::report::short_id(l), series.origin),
        None => format!("the data ({})", series.origin),
    }
}

/// Rejects series that cannot support a two-parameter fit.
fn check_series(series: &Series) -> Result<()> {
    let data_error =
        |problem: String, expected: &str| Error::Data { group: group_name(series), problem, expected: expected.into() };
    let mut distinct = series.substrate.clone();
    distinct.sort_by(f64::total_cmp);
    distinct.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs());
    if distinct.len() < 2 {
        return Err(data_error(
            format!("only {} distinct substrate concentration(s)", distinct.len()),
            "Km and Vmax need rates at several substrate concentrations (at least 2; 5 or more spanning Km is common practice)",
        ));
    }
    if series.rate.len() < 3 {
        return Err(data_error(
            format!("only {} rows", series.rate.len()),
            "fitting Km and Vmax with an error estimate needs at least 3 rows",
        ));
    }
    if let Some(flat) = constant_rate(&series.rate) {
        return Err(data_error(
            format!(
                "every rate is {flat}: the rates do not change with substrate, so Km is not determined (Vmax would be {flat}, but Km only lies somewhere well below the lowest substrate concentration)"
            ),
            "measure rates at substrate concentrations around and below Km, where the rate still rises",
        ));
    }
    if series.rate.iter().all(|r| *r <= 0.0) {
        return Err(data_error(
            "no positive rate".into(),
            "rates must rise with substrate; check the rate column and its sign",
        ));
    }
    Ok(())
}

/// kcat = Vmax/Et and kcat/Km, in units derived from the inputs.
fn turnover(
    vmax: &Param,
    km: &Param,
    fit: &crate::fit::Fit,
    enzyme: &Enzyme,
    units: &Units,
    confidence: f64,
) -> (Param, Param) {
    let et_in_own_unit = enzyme.unit.from_molar(enzyme.molar);
    let rate_unit = units.rate.as_deref();
    // When the rate is a concentration per time (uM/min), kcat comes out per time.
    let (factor, kcat_unit) = match rate_unit.and_then(split_concentration_rate) {
        Some((conc, time)) => (conc.molar_factor() / enzyme.molar, format!("1/{time}")),
        None => (1.0 / et_in_own_unit, format!("{} per {}", rate_unit.unwrap_or("rate"), enzyme.unit)),
    };
    let kcat = vmax.scaled(factor, Some(kcat_unit.clone()));
    let value = kcat.value / km.value;
    // Delta method for V/K on the log scale: var(ln V − ln K).
    let se_log = fit.covariance.as_ref().map(|c| {
        let (v, k) = (fit.theta[0], fit.theta[1]);
        (c[(0, 0)] / (v * v) + c[(1, 1)] / (k * k) - 2.0 * c[(0, 1)] / (v * k)).max(0.0).sqrt()
    });
    let t = crate::fit::intervals::t_quantile(confidence, fit.df);
    let interval = match (se_log, t) {
        (Some(s), Some(t)) => Interval {
            low: crate::fit::intervals::Bound::At(value * (-t * s).exp()),
            high: crate::fit::intervals::Bound::At(value * (t * s).exp()),
        },
        _ => Interval {
            low: crate::fit::intervals::Bound::NotDetermined,
            high: crate::fit::intervals::Bound::NotDetermined,
        },
    };
    let km_unit = km.unit.clone().unwrap_or_else(|| "substrate unit".into());
    let kcat_km_unit = match kcat_unit.strip_prefix("1/") {
        Some(time) => format!("1/({km_unit}*{time})"),
        None => format!("{kcat_unit} per {km_unit}"),
    };
    let kcat_km = Param::new(value, se_log.map(|s| s * value), interval, "wald-log", Some(kcat_km_unit));
    (kcat, kcat_km)
}

/// `uM/min` → (µM, "min"); `None` when the rate is not a concentration per time.
fn split_concentration_rate(unit: &str) -> Option<(crate::units::ConcUnit, &str)> {
    let (conc, time) = unit.split_once('/')?;
    let conc = crate::units::ConcUnit::parse(conc)?;
    let time = time.trim();
    matches!(time, "s" | "sec" | "min" | "h" | "hr" | "ms").then_some((conc, time))
}

fn residuals_sorted_by(x: &[f64], residuals: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|a, b| x[*a].total_cmp(&x[*b]));
    order.into_iter().map(|i| residuals[i]).collect()
}

/// Mean rate at each distinct substrate concentration, ascending in S.
fn level_means(series: &Series) -> Vec<(f64, f64, usize)> {
    let mut pairs: Vec<(f64, f64)> = series.substrate.iter().cloned().zip(series.rate.iter().cloned()).collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut levels: Vec<(f64, f64, usize)> = Vec::new();
    for (s, v) in pairs {
        match levels.last_mut() {
            Some(last) if (last.0 - s).abs() <= 1e-12 * s.abs() => {
                last.1 += v;
                last.2 += 1;
            }
            _ => levels.push((s, v, 1)),
        }
    }
    levels.iter().map(|(s, sum, n)| (*s, sum / *n as f64, *n)).collect()
}

/// Warnings about the experimental design rather than the fit.
fn design_warnings(series: &Series, km: f64) -> Vec<Warning> {
    let mut warnings = Vec::new();
    let levels = level_means(series);
    let (s_min, s_max) = (levels[0].0, levels[levels.len() - 1].0);
    if s_max < km || s_min > km {
        warnings.push(Warning::new(
            Code::KmNotBracketed,
            format!(
                "the substrate range {}–{} does not include the fitted Km {}; Km and Vmax are then poorly defined (common practice: about 0.2–5 × Km)",
                crate::units::sig(s_min, 3),
                crate::units::sig(s_max, 3),
                crate::units::sig(km, 3)
            ),
        ));
    }
    if levels.len() < 5 {
        warnings.push(Warning::new(
            Code::FewConcentrations,
            format!(
                "only {} distinct substrate concentrations; 5 or more are needed to judge the fit (common practice)",
                levels.len()
            ),
        ));
    }
    if let Some(w) = substrate_inhibition(&levels) {
        warnings.push(w);
    }
    warnings
}

/// Rates that fall at the highest concentrations: the mean at the top level
/// is more than 10% below the highest mean at a lower level (common practice;
/// a hyperbola never falls). Michaelis–Menten then underestimates Vmax.
fn substrate_inhibition(levels: &[(f64, f64, usize)]) -> Option<Warning> {
    if levels.len() < 3 {
        return None;
    }
    let top = levels[levels.len() - 1];
    let (peak_s, peak) =
        levels[..levels.len() - 1].iter().fold((0.0, f64::MIN), |acc, l| if l.1 > acc.1 { (l.0, l.1) } else { acc });
    (top.1 < 0.9 * peak).then(|| {
        Warning::new(
            Code::SubstrateInhibition,
            format!(
                "the mean rate falls from {} at S = {} to {} at the highest S = {}: possible substrate inhibition, which a Michaelis–Menten fit cannot describe",
                crate::units::sig(peak, 3),
                crate::units::sig(peak_s, 3),
                crate::units::sig(top.1, 3),
                crate::units::sig(top.0, 3)
            ),
        )
    })
}
