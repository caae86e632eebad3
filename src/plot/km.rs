//! Pictures and the report section for `kimech km`.
//!
//! Three panels per series: the rate against substrate with the fitted
//! Michaelis–Menten curve and a pointwise confidence band for the mean rate
//! (delta method from the fit covariance, see [`KmResult::rate_band`]); the
//! residuals against substrate; and the double-reciprocal view, whose line
//! 1/v = (Km/Vmax)(1/S) + 1/Vmax (Lineweaver & Burk, J. Am. Chem. Soc. 56,
//! 658–666, 1934) is computed from the fitted parameters, not regressed on
//! the reciprocals, and is for display only.

use super::axis::Axis;
use super::xy::{Layer, Line, XyChart};
use super::{PANEL, Svg};
use crate::analysis::km::KmResult;
use crate::error::Result;
use crate::io::output::sig;
use crate::report::Param;

/// "unit" in parentheses, or a plain statement that none was given.
pub(crate) fn unit_suffix(unit: Option<&str>) -> String {
    match unit {
        Some(u) => format!(" ({u})"),
        None => " (unit not given)".into(),
    }
}

/// The unit of a reciprocal: `uM/min` → `min/uM`, `uM` → `1/uM`.
pub(crate) fn reciprocal_unit(unit: Option<&str>) -> Option<String> {
    let u = unit?;
    Some(match u.split_once('/') {
        Some((a, b)) if !a.contains('/') && !b.contains('/') && a.trim() != "1" => format!("{}/{}", b.trim(), a.trim()),
        Some(("1", b)) => b.trim().to_string(),
        _ => format!("1/{u}"),
    })
}

/// "12.3 (10.1–14.9) uM": the estimate, its interval (words for a missing end) and unit.
pub(crate) fn estimate_text(p: &Param) -> String {
    let end = |v: Option<f64>, word: &str| v.map_or(word.to_string(), |v| sig(v, 3));
    format!(
        "{} ({}–{}){}",
        sig(p.value, 3),
        end(p.low, "unbounded"),
        end(p.high, "unbounded"),
        p.unit.as_deref().map_or(String::new(), |u| format!(" {u}"))
    )
}

/// How a series is named in captions: `series A`, or `all rows`.
pub fn series_name(r: &KmResult) -> String {
    r.series.clone().map_or("all rows".into(), |s| format!("series {s}"))
}

/// Rate against substrate: points, the fitted curve and its confidence band.
pub fn rate_panel(r: &KmResult) -> XyChart {
    let (s_unit, v_unit) = (r.params.km.unit.as_deref(), r.params.vmax.unit.as_deref());
    let x = Axis::linear(format!("substrate S{}", unit_suffix(s_unit))).from_zero();
    let y = Axis::linear(format!("initial rate v{}", unit_suffix(v_unit))).from_zero();
    let mut chart = XyChart::new(format!("Rate vs substrate — {}", series_name(r)), x, y);
    chart.subtitle = Some(format!(
        "Vmax {} · Km {} ({:.0}% CI)",
        estimate_text(&r.params.vmax),
        estimate_text(&r.params.km),
        r.confidence * 100.0
    ));
    chart.flagged = !r.warnings.is_empty();
    let s_max = r.observations.substrate.iter().cloned().fold(0.0, f64::max);
    let top = s_max * 1.06;
    let n = 160;
    let band: Vec<(f64, f64, f64)> =
        (0..=n).map(|k| top * k as f64 / n as f64).filter_map(|s| r.rate_band(s).map(|(lo, hi)| (s, lo, hi))).collect();
    let level = format!("{:.0}%", r.confidence * 100.0);
    if !band.is_empty() {
        chart.layers.push(Layer::Band { label: Some(format!("{level} band")), series: 0, points: band });
    }
    let (vmax, km) = (r.params.vmax.value, r.params.km.value);
    chart.layers.push(Layer::Function {
        label: Some("fit".into()),
        series: 0,
        f: Box::new(move |s| vmax * s / (km + s)),
        dashed: false,
        domain: Some((0.0, top)),
    });
    chart.layers.push(Layer::Points { label: Some("observed".into()), series: 1, points: observed(r) });
    chart.notes.push(format!(
        "Band: pointwise {level} confidence band for the mean rate (delta method from the fit covariance)."
    ));
    chart
}

fn observed(r: &KmResult) -> Vec<(f64, f64)> {
    r.observations.substrate.iter().cloned().zip(r.observations.rate.iter().cloned()).collect()
}

/// Residuals (observed − fitted) against substrate.
pub fn residual_panel(r: &KmResult) -> XyChart {
    let (s_unit, v_unit) = (r.params.km.unit.as_deref(), r.params.vmax.unit.as_deref());
    let x = Axis::linear(format!("substrate S{}", unit_suffix(s_unit))).from_zero();
    let y = Axis::linear(format!("residual v − fit{}", unit_suffix(v_unit))).symmetric();
    let mut chart = XyChart::new(format!("Residuals — {}", series_name(r)), x, y);
    chart.subtitle = Some(format!(
        "residual SD {}; runs-test p {}",
        sig(r.residual_sd, 3),
        r.runs_p.map_or("not computed".into(), |p| sig(p, 2))
    ));
    let points = observed(r).into_iter().map(|(s, v)| (s, v - r.rate_at(s))).collect();
    chart.layers.push(Layer::Reference { at: Line::Horizontal(0.0), label: None });
    chart.layers.push(Layer::Points { label: None, series: 1, points });
    if r.weighting != crate::fit::Weighting::None {
        chart.notes.push("The fit was weighted; residuals are shown unweighted.".into());
    }
    chart
}

/// The double-reciprocal view with the line implied by the fitted Vmax and Km.
pub fn reciprocal_panel(r: &KmResult) -> XyChart {
    let (s_unit, v_unit) = (r.params.km.unit.as_deref(), r.params.vmax.unit.as_deref());
    let x = Axis::linear(format!("1/S{}", unit_suffix(reciprocal_unit(s_unit).as_deref())));
    let y = Axis::linear(format!("1/v{}", unit_suffix(reciprocal_unit(v_unit).as_deref()))).from_zero();
    let mut chart = XyChart::new(format!("Double reciprocal — {}", series_name(r)), x, y);
    let dr = &r.double_reciprocal;
    chart.subtitle = Some(format!(
        "slope Km/Vmax {} · 1/v intercept {} · 1/S intercept {}",
        sig(dr.slope, 3),
        sig(dr.y_intercept, 3),
        sig(dr.x_intercept, 3)
    ));
    let (points, hidden): (Vec<_>, Vec<_>) = observed(r).into_iter().partition(|(s, v)| *s > 0.0 && *v > 0.0);
    let points: Vec<(f64, f64)> = points.into_iter().map(|(s, v)| (1.0 / s, 1.0 / v)).collect();
    let x_max = points.iter().map(|p| p.0).fold(0.0, f64::max) * 1.05;
    // Show the 1/S intercept unless it lies far to the left of the data.
    let x_min = dr.x_intercept.max(-x_max) * 1.1;
    let (slope, intercept) = (dr.slope, dr.y_intercept);
    chart.layers.push(Layer::Reference { at: Line::Vertical(0.0), label: None });
    chart.layers.push(Layer::Function {
        label: Some("from fitted Vmax, Km".into()),
        series: 0,
        f: Box::new(move |x| slope * x + intercept),
        dashed: false,
        domain: Some((x_min, x_max)),
    });
    chart.layers.push(Layer::Points { label: Some("observed".into()), series: 1, points });
    chart
        .notes
        .push("For display only: the line comes from the nonlinear fit, not from a regression of reciprocals.".into());
    if !hidden.is_empty() {
        chart
            .notes
            .push(format!("{} observation(s) with rate ≤ 0 have no reciprocal and are not shown.", hidden.len()));
    }
    chart
}

/// The three panels of one series, side by side in one SVG.
pub fn series_figure(r: &KmResult) -> Result<Svg> {
    let panels = [rate_panel(r), residual_panel(r), reciprocal_panel(r)];
    super::figure(&panels, 3, PANEL, &format!("the km plots of {}", series_name(r)))
}
