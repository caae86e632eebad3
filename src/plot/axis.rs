//! Axes: a linear or logarithmic range that maps values to pixels, chooses
//! its own tick positions and formats tick labels.
//!
//! One coordinate type serves both scales, so every chart is drawn the same
//! way and a test can invert the mapping: for a log axis a value v sits at
//! the fraction (log₁₀ v − log₁₀ lo)/(log₁₀ hi − log₁₀ lo) of the axis, for
//! a linear axis at (v − lo)/(hi − lo).

use std::ops::Range;

use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};

/// How an axis spaces its values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scale {
    /// Equal distances for equal differences.
    Linear,
    /// Equal distances for equal ratios; only positive values.
    Log,
    /// Named slots at 0, 1, 2 …; linear, with a tick at every slot.
    Categories,
}

/// What a chart says about one axis before the data fix its range.
#[derive(Debug, Clone)]
pub struct Axis {
    /// The axis title, with its unit, e.g. "substrate (uM)".
    pub label: String,
    /// Linear or logarithmic.
    pub scale: Scale,
    /// Stretch a linear range to include zero (rates, reciprocals).
    pub include_zero: bool,
    /// Make a linear range symmetric about zero (residuals).
    pub symmetric: bool,
    /// A fixed range instead of one taken from the data.
    pub fixed: Option<(f64, f64)>,
}

impl Axis {
    /// A linear axis whose range comes from the data.
    pub fn linear(label: impl Into<String>) -> Axis {
        Axis { label: label.into(), scale: Scale::Linear, include_zero: false, symmetric: false, fixed: None }
    }

    /// A logarithmic axis whose range comes from the data.
    pub fn log(label: impl Into<String>) -> Axis {
        Axis { scale: Scale::Log, ..Axis::linear(label) }
    }

    /// A category axis: slots 0 … n−1, labelled by the chart.
    pub fn categories(label: impl Into<String>, n: usize) -> Axis {
        Axis { scale: Scale::Categories, fixed: Some((-0.6, n.max(1) as f64 - 0.4)), ..Axis::linear(label) }
    }

    /// The same axis, stretched to include zero.
    pub fn from_zero(mut self) -> Axis {
        self.include_zero = true;
        self
    }

    /// The same axis, symmetric about zero.
    pub fn symmetric(mut self) -> Axis {
        self.symmetric = true;
        self
    }

    /// The same axis with a fixed range.
    pub fn fixed(mut self, lo: f64, hi: f64) -> Axis {
        self.fixed = Some((lo, hi));
        self
    }

    /// The range that shows `values` (non-finite ones, and non-positive ones
    /// on a log axis, are ignored) with a little room at both ends.
    pub fn range_for(&self, values: impl IntoIterator<Item = f64>) -> AxisRange {
        if let Some((lo, hi)) = self.fixed.filter(|(lo, hi)| usable(self.scale, *lo, *hi)) {
            return AxisRange { lo, hi, scale: self.scale };
        }
        let usable_value = |v: &f64| v.is_finite() && (self.scale != Scale::Log || *v > 0.0);
        let (mut lo, mut hi) = values
            .into_iter()
            .filter(usable_value)
            .map(|v| v.clamp(-DRAWABLE, DRAWABLE))
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| (lo.min(v), hi.max(v)));
        if !lo.is_finite() {
            (lo, hi) = if self.scale == Scale::Log { (1.0, 10.0) } else { (0.0, 1.0) };
        }
        match self.scale {
            Scale::Linear | Scale::Categories => self.linear_range(lo, hi),
            Scale::Log => log_range(lo, hi),
        }
    }

    fn linear_range(&self, mut lo: f64, mut hi: f64) -> AxisRange {
        if self.symmetric {
            let m = lo.abs().max(hi.abs());
            (lo, hi) = (-m, m);
        }
        if self.include_zero {
            lo = lo.min(0.0);
            hi = hi.max(0.0);
        }
        if hi - lo <= f64::EPSILON * hi.abs().max(1.0) {
            let w = if hi.abs() > 0.0 { hi.abs() * 0.1 } else { 1.0 };
            (lo, hi) = (lo - w, hi + w);
        }
        let pad = 0.06 * (hi - lo);
        // A range that starts at zero for non-negative data stays at zero.
        let lo = if self.include_zero && lo == 0.0 { 0.0 } else { lo - pad };
        let hi = if self.include_zero && hi == 0.0 { 0.0 } else { hi + pad };
        AxisRange { lo, hi, scale: Scale::Linear }
    }
}

/// The largest magnitude an axis reaches. Data beyond it (a typo such as
/// `1.7e308`) sit at the edge: a range reaching f64::MAX would overflow when
/// padded, and its width, tick count and tick positions would be infinite.
const DRAWABLE: f64 = 1e300;

/// The smallest positive value a log axis reaches, for the same reason at
/// the other end (10^-320 is subnormal; its logarithm loses its decades).
const LOG_FLOOR: f64 = 1e-300;

/// Most ticks any axis computes before thinning (a guard against a range
/// that the 1-2-5 step cannot divide into a sensible count).
const TICK_LIMIT: f64 = 1000.0;

fn usable(scale: Scale, lo: f64, hi: f64) -> bool {
    lo.is_finite() && hi.is_finite() && hi > lo && (scale != Scale::Log || lo > 0.0)
}

fn log_range(lo: f64, hi: f64) -> AxisRange {
    let (mut a, mut b) = (lo.max(LOG_FLOOR).log10(), hi.max(LOG_FLOOR).log10());
    if b - a < 0.3 {
        let mid = 0.5 * (a + b);
        (a, b) = (mid - 0.5, mid + 0.5);
    }
    let pad = 0.06 * (b - a);
    // The padding may not carry the range past what f64 holds (10^±307).
    let (a, b) = ((a - pad).max(-307.0), (b + pad).min(307.0));
    AxisRange { lo: 10f64.powf(a), hi: 10f64.powf(b), scale: Scale::Log }
}

/// A fixed axis range: the coordinate type every kimech chart is drawn in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AxisRange {
    /// Smallest value shown.
    pub lo: f64,
    /// Largest value shown.
    pub hi: f64,
    /// Linear or logarithmic.
    pub scale: Scale,
}

impl AxisRange {
    /// The value in the axis's own space (log₁₀ for a log axis).
    pub fn forward(&self, v: f64) -> f64 {
        match self.scale {
            Scale::Linear | Scale::Categories => v,
            Scale::Log => v.log10(),
        }
    }

    /// Back from the axis's own space to a value.
    pub fn backward(&self, t: f64) -> f64 {
        match self.scale {
            Scale::Linear | Scale::Categories => t,
            Scale::Log => 10f64.powf(t),
        }
    }

    /// Where `v` lies along the axis, 0 at `lo` and 1 at `hi`.
    pub fn fraction(&self, v: f64) -> f64 {
        let (a, b) = (self.forward(self.lo), self.forward(self.hi));
        (self.forward(v) - a) / (b - a)
    }

    /// The value at a fraction of the axis.
    pub fn at_fraction(&self, f: f64) -> f64 {
        let (a, b) = (self.forward(self.lo), self.forward(self.hi));
        self.backward(a + f * (b - a))
    }

    /// Whether `v` lies on the axis.
    pub fn contains(&self, v: f64) -> bool {
        v.is_finite() && v >= self.lo && v <= self.hi && (self.scale != Scale::Log || v > 0.0)
    }

    /// `n` values evenly spaced in the axis's own space, ends included.
    pub fn samples(&self, n: usize) -> Vec<f64> {
        let n = n.max(2);
        (0..n).map(|k| self.at_fraction(k as f64 / (n - 1) as f64)).collect()
    }

    /// Tick positions: 1-2-5 steps on a linear axis; decades on a log axis
    /// (every second or third decade on a wide one, 1-2-5 within a narrow one).
    pub fn ticks(&self, max: usize) -> Vec<f64> {
        let max = max.max(2);
        match self.scale {
            Scale::Linear => linear_ticks(self.lo, self.hi, max),
            Scale::Log => self.log_ticks(max),
            Scale::Categories => (self.lo.ceil() as i64..=self.hi.floor() as i64).map(|k| k as f64).collect(),
        }
    }

    fn log_ticks(&self, max: usize) -> Vec<f64> {
        let floor = LOG_FLOOR.log10();
        let (a, b) = (self.lo.log10().clamp(floor, -floor), self.hi.log10().clamp(floor, -floor));
        if !(a.is_finite() && b.is_finite()) {
            return Vec::new();
        }
        let decades = (a.ceil() as i32)..=(b.floor() as i32);
        let count = decades.clone().count();
        if count >= 2 {
            let every = count.div_ceil(max).max(1);
            return decades.filter(|d| d.rem_euclid(every as i32) == 0).map(|d| 10f64.powi(d)).collect();
        }
        let mut ticks: Vec<f64> = ((a.floor() as i32)..=(b.ceil() as i32))
            .flat_map(|d| [1.0, 2.0, 5.0].map(|m| m * 10f64.powi(d)))
            .filter(|v| self.contains(*v))
            .collect();
        if ticks.len() < 3 {
            ticks = linear_ticks(self.lo, self.hi, max).into_iter().filter(|v| *v > 0.0).collect();
        }
        ticks
    }

    /// The step between neighbouring linear ticks, for label precision.
    fn step(&self, max: usize) -> f64 {
        nice_step((self.hi - self.lo) / max.max(2) as f64)
    }

    /// A tick label: as few digits as the tick spacing needs.
    pub fn label(&self, v: f64, max_ticks: usize) -> String {
        match self.scale {
            Scale::Linear | Scale::Categories => linear_label(v, self.step(max_ticks)),
            Scale::Log => log_label(v),
        }
    }
}

/// The smallest 1, 2 or 5 × 10ᵏ not below `raw`.
fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0].into_iter().map(|m| m * p).find(|s| *s >= raw * (1.0 - 1e-9)).unwrap_or(10.0 * p)
}

fn linear_ticks(lo: f64, hi: f64, max: usize) -> Vec<f64> {
    let step = nice_step((hi - lo) / max as f64);
    let (first, last) = ((lo / step).ceil(), (hi / step).floor());
    if !(first.is_finite() && last.is_finite() && last - first <= TICK_LIMIT) {
        return Vec::new(); // an unusable range (NaN, infinite, or finer than f64 can step)
    }
    let (first, last) = (first as i64, last as i64);
    (first..=last).map(|k| k as f64 * step).map(|v| if v.abs() < step * 1e-9 { 0.0 } else { v }).collect()
}

fn linear_label(v: f64, step: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let big = v.abs().max(step);
    if !(1e-4..1e6).contains(&big) {
        return power_label(v);
    }
    // Enough decimals for the step, then no trailing zeros: 0.5, 1, 1.5.
    let decimals = (-step.log10().floor()).max(0.0) as usize + 1;
    let text = format!("{v:.decimals$}");
    if text.contains('.') { text.trim_end_matches('0').trim_end_matches('.').to_string() } else { text }
}

fn log_label(v: f64) -> String {
    if (1e-3..1e5).contains(&v) {
        let digits = (-v.log10().floor()).max(0.0) as usize;
        let text = format!("{v:.digits$}");
        return text;
    }
    power_label(v)
}

/// `m×10ⁿ`, or `10ⁿ` for an exact power of ten, with superscript digits.
fn power_label(v: f64) -> String {
    let e = v.abs().log10().floor() as i32;
    let m = v / 10f64.powi(e);
    let sup: String = e
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            d => ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'][d.to_digit(10).unwrap_or(0) as usize],
        })
        .collect();
    if (m.abs() - 1.0).abs() < 1e-9 {
        format!("{}10{sup}", if m < 0.0 { "−" } else { "" })
    } else {
        format!("{}×10{sup}", crate::io::output::sig(m, 2))
    }
}

impl Ranged for AxisRange {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let f = self.fraction(*value);
        let px = limit.0 as f64 + f * (limit.1 - limit.0) as f64;
        // Far-off values (a log of zero) are pinned just outside the area.
        px.clamp(-1e6, 1e6).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        match self.scale {
            Scale::Categories => self.ticks(usize::MAX),
            _ => self.ticks(hint.max_num_points().min(8)),
        }
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn log_axis_ticks_fall_on_decades() {
        let r = AxisRange { lo: 0.5, hi: 2000.0, scale: Scale::Log };
        assert_eq!(r.ticks(8), vec![1.0, 10.0, 100.0, 1000.0]);
        assert_eq!(r.label(1000.0, 8), "1000");
        assert_eq!(r.label(0.01, 8), "0.01");
        assert_eq!(r.label(1e-9, 8), "10⁻⁹");
    }

    #[test]
    fn linear_ticks_use_one_two_five_steps() {
        let r = AxisRange { lo: 0.0, hi: 2.3, scale: Scale::Linear };
        assert_eq!(r.ticks(6), vec![0.0, 0.5, 1.0, 1.5, 2.0]);
        assert_eq!(r.label(1.5, 6), "1.5");
    }

    #[test]
    fn fraction_inverts() {
        let r = AxisRange { lo: 1e-9, hi: 1e-5, scale: Scale::Log };
        assert_relative_eq!(r.fraction(1e-7), 0.5, epsilon = 1e-12);
        assert_relative_eq!(r.at_fraction(0.25), 1e-8, max_relative = 1e-12);
    }

    #[test]
    fn axes_survive_huge_tiny_and_non_finite_values_without_panic() {
        let extremes = [1.7e308, f64::MAX, -f64::MAX, 5e-324, 1e-320, 0.0, -0.0, f64::NAN, f64::INFINITY];
        for a in extremes {
            for b in extremes {
                for axis in [Axis::linear("x"), Axis::linear("x").from_zero().symmetric(), Axis::log("x")] {
                    let r = axis.range_for([a, b, 1.0]);
                    assert!(r.lo.is_finite() && r.hi.is_finite() && r.hi >= r.lo, "{a} {b}: {r:?}");
                    let ticks = r.ticks(8);
                    assert!(ticks.len() <= TICK_LIMIT as usize + 1);
                    for t in ticks {
                        let _ = r.label(t, 8);
                    }
                    let _ = r.map(&a, (0, 500));
                }
                for scale in [Scale::Linear, Scale::Log] {
                    let r = AxisRange { lo: a.min(b), hi: a.max(b), scale };
                    assert!(r.ticks(8).len() <= 3 * 700, "{r:?}");
                    let _ = (r.label(a, 8), r.map(&b, (0, 500)), r.samples(5));
                }
            }
        }
    }

    #[test]
    fn ranges_start_at_zero_for_rates() {
        let r = Axis::linear("rate").from_zero().range_for([0.3, 2.0, f64::NAN]);
        assert!(r.lo.abs() < 1e-300, "starts at zero: {}", r.lo);
        assert!(r.hi > 2.0);
        let s = Axis::linear("residual").symmetric().range_for([-0.1, 0.3]);
        assert_relative_eq!(s.lo, -s.hi);
    }
}
