//! Initial rates from progress curves.
//!
//! The initial rate is the slope of the straight line through the earliest
//! points, over the longest initial window that a straight line still
//! describes: the window grows one point at a time while adding a t² term
//! does not improve the fit (extra-sum-of-squares F test at `curvature_alpha`;
//! Bates & Watts 1988, §3.10). Curvature in a progress curve comes from
//! substrate depletion, product inhibition or enzyme instability (Cornish-Bowden,
//! *Fundamentals of Enzyme Kinetics*, 4th ed., 2012, §1.5 and §4.6), so a
//! rate from a window that curves underestimates the initial rate; that is
//! flagged rather than hidden.

use crate::report::Code;
use serde::Serialize;

use crate::error::{Error, Result};
use crate::fit::intervals::wald;
use crate::fit::stats::extra_sum_of_squares;
use crate::fit::{Data, Fit, FitSettings, fit};
use crate::models::Polynomial;
use crate::report::{Param, Warning};

/// One progress curve: signal against time, in input order.
#[derive(Debug, Clone)]
pub struct Curve {
    /// The curve's label, if the input had a `curve` column.
    pub label: Option<String>,
    /// Where the rows came from, for messages.
    pub origin: crate::report::Origin,
    /// Times.
    pub time: Vec<f64>,
    /// Product concentration or signal at each time.
    pub signal: Vec<f64>,
    /// Initial substrate concentration in the signal's unit, when the signal
    /// is a product concentration; enables the conversion limit.
    pub substrate: Option<f64>,
}

/// How to choose the window.
#[derive(Debug, Clone)]
pub struct Options {
    /// The smallest window (points) tried; at least 3.
    pub min_points: usize,
    /// Significance level at which the t² term counts as curvature.
    pub curvature_alpha: f64,
    /// Largest fraction of substrate converted inside the window.
    pub max_conversion: f64,
    /// Confidence level of the rate's interval.
    pub confidence: f64,
    /// Unit of the rate, e.g. `uM/min`.
    pub rate_unit: Option<String>,
}

/// The initial rate of one curve.
#[derive(Debug, Clone, Serialize)]
pub struct RateResult {
    /// Curve label, or null.
    pub curve: Option<String>,
    /// Where the rows came from (`file:2-8`): the file as named on the command line and the lines.
    pub source: crate::report::Origin,
    /// Confidence level of the rate's interval.
    pub confidence: f64,
    /// Slope of the initial straight line, with a Wald interval (t quantile).
    pub rate: Param,
    /// Signal of that line at the first time point.
    pub intercept: f64,
    /// First time in the window.
    pub window_start: f64,
    /// Last time in the window.
    pub window_end: f64,
    /// Points in the window.
    pub points_used: usize,
    /// Points in the curve.
    pub points_total: usize,
    /// R² of the line in the window.
    pub r2: f64,
    /// F-test p of the t² term where the window stopped growing (null when it used every point).
    pub curvature_p: Option<f64>,
    /// Warnings with stable codes.
    pub warnings: Vec<Warning>,
}

/// Where the window stopped and why.
struct Window {
    line: Fit,
    points: usize,
    /// The quadratic fit and p that stopped the growth, if any.
    stop: Option<(Fit, f64)>,
}

/// Finds the initial rate of one curve.
pub fn analyse(curve: &Curve, options: &Options) -> Result<RateResult> {
    let (time, signal) = sorted(curve);
    check_curve(curve, &time)?;
    let min_points = options.min_points.max(3).min(time.len());
    let (limit, over_limit) = conversion_limit(&time, &signal, min_points, curve.substrate, options.max_conversion);
    let window = choose_window(&time[..limit], &signal[..limit], min_points, options.curvature_alpha);
    let line = &window.line;
    let rate = Param::new(
        line.theta[1],
        line.se[1],
        wald(&Polynomial::LINE, line, 1, options.confidence),
        "wald",
        options.rate_unit.clone(),
    );
    let mut warnings = warnings_for(&window, min_points, &rate);
    warnings.extend(conversion_warning(curve.substrate, over_limit, options.max_conversion));
    Ok(RateResult {
        curve: curve.label.clone(),
        source: curve.origin.clone(),
        confidence: options.confidence,
        intercept: line.theta[0] + line.theta[1] * time[0],
        rate,
        window_start: time[0],
        window_end: time[window.points - 1],
        points_used: window.points,
        points_total: time.len(),
        r2: line.r2,
        curvature_p: window.stop.as_ref().map(|(_, p)| *p),
        warnings,
    })
}

fn sorted(curve: &Curve) -> (Vec<f64>, Vec<f64>) {
    let mut pairs: Vec<(f64, f64)> = curve.time.iter().cloned().zip(curve.signal.iter().cloned()).collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    pairs.into_iter().unzip()
}

fn check_curve(curve: &Curve, time: &[f64]) -> Result<()> {
    let mut distinct = time.to_vec();
    distinct.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs().max(1e-300));
    if distinct.len() < 3 {
        let group = match &curve.label {
            Some(l) => format!("curve '{}' ({})", crate::report::short_id(l), curve.origin),
            None => format!("the curve ({})", curve.origin),
        };
        return Err(Error::Data {
            group,
            problem: format!("only {} distinct time point(s)", distinct.len()),
            expected: "an initial rate with an error estimate needs at least 3 time points".into(),
        });
    }
    Ok(())
}

/// How many leading points stay within `max_conversion` of the substrate:
/// product formed is estimated as the rise of the signal above the value at
/// the first time of the line through the first `min_points` points (common
/// practice: keep initial-rate windows within about 10% conversion, so that
/// substrate depletion and product build-up stay negligible). Returns the
/// point count and whether even the smallest window goes past the limit.
fn conversion_limit(time: &[f64], signal: &[f64], min_points: usize, s0: Option<f64>, max: f64) -> (usize, bool) {
    let Some(s0) = s0.filter(|s| *s > 0.0) else { return (time.len(), false) };
    let start = fit_first(Polynomial::LINE, time, signal, min_points);
    let baseline = start.theta[0] + start.theta[1] * time[0];
    let within = signal.iter().take_while(|y| ((*y - baseline) / s0).abs() <= max).count();
    (within.max(min_points), within < min_points)
}

fn conversion_warning(s0: Option<f64>, over_limit: bool, max: f64) -> Option<Warning> {
    let percent = format!("{:.0}%", max * 100.0);
    match s0 {
        None => Some(Warning::new(
            Code::ConversionNotChecked,
            format!(
                "the substrate conversion was not checked against the {percent} limit: that needs a product signal in a concentration unit and a substrate column with a unit"
            ),
        )),
        Some(_) if over_limit => Some(Warning::new(
            Code::HighConversion,
            format!(
                "more than {percent} of the substrate is converted within the first points; the rate is likely underestimated — use more enzyme-dilute conditions or earlier readings"
            ),
        )),
        Some(_) => None,
    }
}

fn fit_first(model: Polynomial, time: &[f64], signal: &[f64], m: usize) -> Fit {
    let data = Data::unweighted(time[..m].to_vec(), signal[..m].to_vec());
    fit(&model, &data, &[], &FitSettings::default())
}

/// Grows the window from `min_points` while the line still fits. One
/// significant t² term can be noise (at α = 0.05 one extension in twenty is
/// rejected by chance), so the growth stops only when two consecutive
/// extensions show curvature; the window is the last one before them.
fn choose_window(time: &[f64], signal: &[f64], min_points: usize, alpha: f64) -> Window {
    let mut accepted =
        Window { line: fit_first(Polynomial::LINE, time, signal, min_points), points: min_points, stop: None };
    let mut pending: Option<(Fit, f64)> = None;
    for m in min_points..=time.len() {
        let line =
            if m == accepted.points { accepted.line.clone() } else { fit_first(Polynomial::LINE, time, signal, m) };
        match curvature(&line, time, signal, m, alpha) {
            Some(found) if pending.is_some() || m == time.len() => {
                accepted.stop = pending.or(Some(found));
                return accepted;
            }
            Some(found) => pending = Some(found),
            None => {
                if pending.is_none() {
                    accepted = Window { line, points: m, stop: None };
                }
                pending = None;
            }
        }
    }
    accepted.stop = pending;
    accepted
}

/// The quadratic fit and p when the t² term is significant on the first m points.
fn curvature(line: &Fit, time: &[f64], signal: &[f64], m: usize, alpha: f64) -> Option<(Fit, f64)> {
    if m < 4 {
        return None;
    }
    let quadratic = fit_first(Polynomial::QUADRATIC, time, signal, m);
    let (_, p) = extra_sum_of_squares(line.sse, line.df, quadratic.sse, quadratic.df)?;
    (p < alpha).then_some((quadratic, p))
}

fn warnings_for(window: &Window, min_points: usize, rate: &Param) -> Vec<Warning> {
    let mut warnings = Vec::new();
    if let Some((quadratic, p)) = &window.stop {
        // The growth stopped at the smallest window itself.
        if quadratic.n == window.points {
            warnings.push(Warning::new(
                Code::CurvedFromStart,
                format!(
                    "the first {min_points} points already curve (t² term p = {}); the rate is likely underestimated — measure earlier or more often",
                    crate::units::sig(*p, 2)
                ),
            ));
        }
        if quadratic.theta[2] * rate.value.signum() > 0.0 {
            warnings.push(Warning::new(
                Code::Accelerating,
                "the signal accelerates (lag phase, mixing or temperature drift?); the initial slope may not be the steady-state rate",
            ));
        }
    }
    if rate.low.zip(rate.high).is_some_and(|(lo, hi)| lo <= 0.0 && hi >= 0.0) {
        warnings
            .push(Warning::new(Code::NoDetectableChange, "the interval of the rate includes zero: no change detected"));
    }
    warnings
}
