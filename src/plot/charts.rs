//! Chart builders on plain data, shared by the commands' picture modules:
//! families of rate curves (one per inhibitor level), their linear
//! transforms (double reciprocal, Dixon, Cornish-Bowden), residual panels,
//! an evidence bar chart, dose-response curves on a log axis, and a ranking
//! of estimates with intervals and bounds.
//!
//! The transforms follow the standard definitions: double reciprocal 1/v
//! against 1/S (Lineweaver & Burk, J. Am. Chem. Soc. 56, 658–666, 1934),
//! Dixon 1/v against I (Dixon, Biochem. J. 55, 170–171, 1953) and S/v against
//! I (Cornish-Bowden, Biochem. J. 137, 143–144, 1974). Every line is computed
//! from the fitted rate law, never regressed on transformed data; they are
//! views for reading a mechanism, not estimates.

use std::rc::Rc;

use super::axis::Axis;
use super::xy::{Direction, Layer, Line, XyChart};
use crate::io::output::sig;

/// A fitted rate law v(S, I).
pub type RateLaw = Rc<dyn Fn(f64, f64) -> f64>;

/// One observation of a rate matrix.
#[derive(Debug, Clone, Copy)]
pub struct RatePoint {
    /// Substrate concentration.
    pub s: f64,
    /// Inhibitor concentration.
    pub i: f64,
    /// Observed rate.
    pub v: f64,
}

/// Units of a rate matrix, for axis titles (`None`: not given).
#[derive(Debug, Clone, Default)]
pub struct RateUnits {
    /// Substrate unit.
    pub s: Option<String>,
    /// Inhibitor unit.
    pub i: Option<String>,
    /// Rate unit.
    pub v: Option<String>,
}

fn unit(u: &Option<String>) -> String {
    super::km::unit_suffix(u.as_deref())
}

fn reciprocal(u: &Option<String>) -> String {
    super::km::unit_suffix(super::km::reciprocal_unit(u.as_deref()).as_deref())
}

/// Distinct values of `key`, ascending, merging values within 1e-9 relative.
fn levels(points: &[RatePoint], key: fn(&RatePoint) -> f64) -> Vec<f64> {
    let mut values: Vec<f64> = points.iter().map(key).collect();
    values.sort_by(f64::total_cmp);
    values.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs().max(f64::MIN_POSITIVE));
    values
}

/// A level for a legend: three significant digits without trailing zeros.
fn short(v: f64) -> String {
    let t = sig(v, 3);
    if t.contains('.') && !t.contains('e') { t.trim_end_matches('0').trim_end_matches('.').to_string() } else { t }
}

fn same(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * b.abs().max(f64::MIN_POSITIVE)
}

/// Rate against substrate, one series per inhibitor level, with the law's
/// curve at each level.
pub fn rate_family(title: &str, points: &[RatePoint], law: &RateLaw, units: &RateUnits) -> XyChart {
    let x = Axis::linear(format!("substrate S{}", unit(&units.s))).from_zero();
    let y = Axis::linear(format!("initial rate v{}", unit(&units.v))).from_zero();
    let mut chart = XyChart::new(title, x, y);
    let s_max = points.iter().map(|p| p.s).fold(0.0, f64::max) * 1.05;
    for (k, i) in levels(points, |p| p.i).into_iter().enumerate() {
        let law = law.clone();
        let label = format!("I = {}{}", short(i), units.i.as_deref().map_or(String::new(), |u| format!(" {u}")));
        chart.layers.push(Layer::Function {
            label: None,
            series: k,
            f: Box::new(move |s| law(s, i)),
            dashed: false,
            domain: Some((0.0, s_max)),
        });
        let pts = points.iter().filter(|p| same(p.i, i)).map(|p| (p.s, p.v)).collect();
        chart.layers.push(Layer::Points { label: Some(label), series: k, points: pts });
    }
    chart
}

/// Which linear view of a rate matrix.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    /// 1/v against 1/S, one line per inhibitor level.
    DoubleReciprocal,
    /// 1/v against I, one line per substrate level.
    Dixon,
    /// S/v against I, one line per substrate level.
    CornishBowden,
}

/// A linear view with the law's lines; lines extend left of the data so that
/// their crossing (which the mechanism predicts) can be seen.
pub fn linear_view(view: View, title: &str, points: &[RatePoint], law: &RateLaw, units: &RateUnits) -> XyChart {
    let (x, y) = match view {
        View::DoubleReciprocal => (format!("1/S{}", reciprocal(&units.s)), format!("1/v{}", reciprocal(&units.v))),
        View::Dixon => (format!("inhibitor I{}", unit(&units.i)), format!("1/v{}", reciprocal(&units.v))),
        View::CornishBowden => (
            format!("inhibitor I{}", unit(&units.i)),
            format!(
                "S/v{}",
                units.v.as_deref().map_or(" (unit not given)".into(), |v| format!(
                    " ({} per {v})",
                    units.s.as_deref().unwrap_or("S unit")
                ))
            ),
        ),
    };
    let mut chart = XyChart::new(title, Axis::linear(x), Axis::linear(y).from_zero());
    let usable: Vec<RatePoint> = points.iter().copied().filter(|p| p.v > 0.0 && p.s > 0.0).collect();
    let group_by_i = view == View::DoubleReciprocal;
    let key: fn(&RatePoint) -> f64 = if group_by_i { |p| p.i } else { |p| p.s };
    let to_xy = move |p: &RatePoint| match view {
        View::DoubleReciprocal => (1.0 / p.s, 1.0 / p.v),
        View::Dixon => (p.i, 1.0 / p.v),
        View::CornishBowden => (p.i, p.s / p.v),
    };
    let x_max = usable.iter().map(|p| to_xy(p).0).fold(0.0, f64::max) * 1.05;
    let x_min = -0.5 * x_max;
    for (k, level) in levels(&usable, key).into_iter().enumerate() {
        let law = law.clone();
        let f: Box<dyn Fn(f64) -> f64> = match view {
            View::DoubleReciprocal => Box::new(move |x| 1.0 / law(1.0 / x, level)),
            View::Dixon => Box::new(move |i| 1.0 / law(level, i)),
            View::CornishBowden => Box::new(move |i| level / law(level, i)),
        };
        let name = if group_by_i { "I" } else { "S" };
        let u = if group_by_i { &units.i } else { &units.s };
        let label = format!("{name} = {}{}", short(level), u.as_deref().map_or(String::new(), |u| format!(" {u}")));
        chart.layers.push(Layer::Function { label: None, series: k, f, dashed: false, domain: Some((x_min, x_max)) });
        let pts = usable.iter().filter(|p| same(key(p), level)).map(to_xy).collect();
        chart.layers.push(Layer::Points { label: Some(label), series: k, points: pts });
    }
    chart.layers.push(Layer::Reference { at: Line::Vertical(0.0), label: None });
    chart.notes.push("Lines from the fitted rate law, for reading the mechanism only; not a regression.".into());
    let hidden = points.len() - usable.len();
    if hidden > 0 {
        chart.notes.push(format!("{hidden} observation(s) with rate or S ≤ 0 cannot be shown in this view."));
    }
    chart
}

/// Residuals against substrate, coloured by inhibitor level: (S, I, residual).
pub fn residual_panel(title: &str, residuals: &[(f64, f64, f64)], units: &RateUnits) -> XyChart {
    let x = Axis::linear(format!("substrate S{}", unit(&units.s))).from_zero();
    let y = Axis::linear(format!("residual{}", unit(&units.v))).symmetric();
    let mut chart = XyChart::new(title, x, y);
    chart.layers.push(Layer::Reference { at: Line::Horizontal(0.0), label: None });
    let points: Vec<RatePoint> = residuals.iter().map(|&(s, i, v)| RatePoint { s, i, v }).collect();
    for (k, i) in levels(&points, |p| p.i).into_iter().enumerate() {
        let pts = points.iter().filter(|p| same(p.i, i)).map(|p| (p.s, p.v)).collect();
        chart.layers.push(Layer::Points { label: None, series: k, points: pts });
    }
    chart
}

/// A small bar chart of model evidence (e.g. Akaike weights); `chosen` is
/// drawn in the second colour and named so in its label.
pub fn evidence_panel(title: &str, what: &str, models: &[(String, f64)], chosen: Option<usize>) -> XyChart {
    let names: Vec<String> = models
        .iter()
        .enumerate()
        .map(|(k, (n, _))| if Some(k) == chosen { format!("{n} ✓") } else { n.clone() })
        .collect();
    let top = models.iter().map(|m| m.1).fold(0.0, f64::max).max(1e-12);
    let y = Axis::linear(what).fixed(0.0, if top <= 1.0 { 1.05 } else { top * 1.1 });
    let mut chart = XyChart::new(title, Axis::categories("model", models.len()), y);
    chart.x_categories = Some(names);
    let (picked, rest): (Vec<_>, Vec<_>) =
        models.iter().enumerate().map(|(k, m)| (k as f64, m.1)).partition(|(k, _)| Some(*k as usize) == chosen);
    chart.layers.push(Layer::Bars { series: 0, bars: rest, width: 0.6 });
    chart.layers.push(Layer::Bars { series: 1, bars: picked, width: 0.6 });
    chart
}

/// An IC50 mark: (concentration, response at it), the interval ends, and
/// whether it is only a bound.
pub type Ic50Mark = (f64, f64, Option<f64>, Option<f64>, Option<Direction>);

/// A dose-response curve on a log-concentration axis.
pub struct DoseCurve {
    /// Panel title (compound id).
    pub title: String,
    /// Subtitle: the IC50 with its qualifier and interval, and the flags.
    pub subtitle: String,
    /// Whether the curve carries flags (drawn in the flag colour, sorted first).
    pub flagged: bool,
    /// (concentration, response); zero concentrations are drawn at the left edge.
    pub points: Vec<(f64, f64)>,
    /// The fitted curve, if there is one.
    pub fit: Option<Box<dyn Fn(f64) -> f64>>,
    /// IC50 estimate (concentration, response at it), its interval ends and
    /// whether it is only a bound.
    pub ic50: Option<Ic50Mark>,
    /// Concentration unit.
    pub unit: Option<String>,
    /// Response axis title.
    pub response: String,
}

/// The panel of one dose-response curve.
pub fn dose_panel(curve: DoseCurve) -> XyChart {
    let positive: Vec<f64> = curve.points.iter().map(|p| p.0).filter(|c| *c > 0.0).collect();
    let c_min = positive.iter().cloned().fold(f64::INFINITY, f64::min);
    let c_max = positive.iter().cloned().fold(0.0, f64::max);
    // Zero-concentration wells sit half a decade left of the lowest dose.
    let zero_at = c_min / 10f64.sqrt();
    let has_zero = curve.points.iter().any(|p| p.0 <= 0.0);
    let lo = if has_zero { zero_at } else { c_min };
    // A bound's arrow points past the tested range: leave it room.
    let (mut a, mut b) = (lo, c_max);
    match curve.ic50.and_then(|m| m.4) {
        Some(Direction::Above) => b *= 6.0,
        Some(Direction::Below) => a /= 6.0,
        None => {}
    }
    let mut x = Axis::log(format!("concentration{}", unit(&curve.unit)));
    if a > 0.0 && b > a && a.is_finite() && b.is_finite() {
        x = x.fixed(a / 1.4, b * 1.4);
    }
    let mut chart = XyChart::new(curve.title, x, Axis::linear(curve.response));
    chart.subtitle = Some(curve.subtitle);
    chart.flagged = curve.flagged;
    if let Some(f) = curve.fit {
        chart.layers.push(Layer::Function {
            label: Some("fit".into()),
            series: 0,
            f,
            dashed: false,
            domain: Some((lo, c_max * 1.2)),
        });
    }
    if let Some((x, y, low, high, bound)) = curve.ic50 {
        let label = if bound.is_some() { "IC50 bound" } else { "IC50 and interval" };
        chart.layers.push(Layer::Estimate {
            label: Some(label.into()),
            series: 2,
            at: (x, y),
            low,
            high,
            interval: bound.is_none() && (low.is_some() || high.is_some()),
            bound,
            drop_line: true,
        });
    }
    let (zero, dosed): (Vec<_>, Vec<_>) = curve.points.iter().partition(|p| p.0 <= 0.0);
    chart.layers.push(Layer::Points { label: Some("observed".into()), series: 1, points: dosed });
    if !zero.is_empty() {
        let z = zero.iter().map(|p| (zero_at, p.1)).collect();
        chart.layers.push(Layer::Points { label: Some("no inhibitor".into()), series: 5, points: z });
        chart.notes.push("Wells without inhibitor are drawn at the left edge (a log axis has no zero).".into());
    }
    chart
}

/// One row of a ranking: an estimate with its interval, or a bound.
#[derive(Debug, Clone)]
pub struct Ranked {
    /// Row label (compound id).
    pub label: String,
    /// The value (e.g. pKi).
    pub value: f64,
    /// Interval ends, where known.
    pub low: Option<f64>,
    /// Interval ends, where known.
    pub high: Option<f64>,
    /// A bound rather than an estimate, and which way the truth lies.
    pub bound: Option<Direction>,
}

/// Rows top to bottom in the given order, values along x.
pub fn ranking_panel(title: &str, value_label: &str, rows: &[Ranked]) -> XyChart {
    let n = rows.len();
    // The axis follows the estimates, not the intervals: one very wide interval
    // (two repeats that disagree) would squeeze every other row into a point.
    // Ends beyond the axis are drawn dashed to its edge and counted in a note.
    let values = rows.iter().map(|r| r.value).filter(|v| v.is_finite());
    let (vmin, vmax) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    let span = if vmin.is_finite() { (vmax - vmin).max(1.0) } else { 1.0 };
    let (lo, hi) = (vmin - 0.35 * span - 0.4, vmax + 0.35 * span + 0.4);
    let x = if vmin.is_finite() { Axis::linear(value_label).fixed(lo, hi) } else { Axis::linear(value_label) };
    let inside = |v: Option<f64>| v.filter(|v| *v >= lo && *v <= hi);
    let clipped = rows
        .iter()
        .filter(|r| r.low.is_some() && inside(r.low).is_none() || r.high.is_some() && inside(r.high).is_none())
        .count();
    let mut chart = XyChart::new(title, x, Axis::categories("", n));
    // Category 0 is drawn at the bottom; list the first row at the top.
    chart.y_categories = Some(rows.iter().rev().map(|r| r.label.clone()).collect());
    for (k, r) in rows.iter().enumerate() {
        let y = (n - 1 - k) as f64;
        let (series, label) = match r.bound {
            None => (
                0,
                (k == rows.iter().position(|r| r.bound.is_none()).unwrap_or(usize::MAX))
                    .then(|| "estimate and interval".to_string()),
            ),
            Some(_) => (
                1,
                (k == rows.iter().position(|r| r.bound.is_some()).unwrap_or(usize::MAX))
                    .then(|| "bound (arrow: where the value lies)".to_string()),
            ),
        };
        chart.layers.push(Layer::Estimate {
            label,
            series,
            at: (r.value, y),
            low: inside(r.low),
            high: inside(r.high),
            interval: r.bound.is_none() && (r.low.is_some() || r.high.is_some()),
            bound: r.bound,
            drop_line: false,
        });
    }
    if clipped > 0 {
        chart.notes.push(format!("{clipped} interval(s) run beyond the axis: drawn dashed to its edge."));
    }
    chart
}
