//! Pictures and the report section for `kimech ic50`: each curve on a
//! log-concentration axis with its fit, the IC50 marked with its interval
//! (or drawn as a bound when it lies outside the tested range), qualifier
//! and flags in the title; for a batch, a grid of thumbnails with the
//! flagged curves first.

use super::charts::{DoseCurve, dose_panel};
use super::xy::{Direction, Layer, XyChart};
use super::{PANEL, Svg, THUMBNAIL};
use crate::analysis::ic50::{Curve, Ic50Result};
use crate::error::Result;
use crate::fit::Model;
use crate::io::output::sig;
use crate::models::logistic::{Dose, Logistic, Morrison};
use crate::units::Qualifier;

/// The fitted response y(x) of a converged result. A bounded IC50 is
/// reported as the bound, but the curve drawn is the one that was fitted, so
/// that an incomplete curve can be judged by eye.
fn fitted(r: &Ic50Result, et: Option<f64>) -> Option<Box<dyn Fn(f64) -> f64>> {
    if !r.converged {
        return None;
    }
    let theta = r.fitted.clone();
    match (r.model, et) {
        ("morrison", Some(et)) if theta.len() == 2 => Some(Box::new(move |x| Morrison { et }.value(&theta, &x))),
        ("logistic", _) if theta.len() == 4 => Some(Box::new(move |x| Logistic.value(&theta, &Dose::new(x)))),
        _ => None,
    }
}

fn direction(q: Qualifier) -> Option<Direction> {
    match q {
        Qualifier::Greater | Qualifier::AtLeast => Some(Direction::Above),
        Qualifier::Less | Qualifier::AtMost => Some(Direction::Below),
        _ => None,
    }
}

/// "IC50 = 0.31 uM (0.25–0.38)", or "IC50 > 10 uM" for a bound.
fn ic50_text(r: &Ic50Result, unit: &str) -> String {
    let p = &r.ic50;
    if r.qualifier.is_bound() {
        return format!("IC50 {} {} {unit}", r.qualifier, sig(p.value, 3));
    }
    format!("IC50 {} {} {unit} ({})", r.qualifier, sig(p.value, 3), interval_text(p.low, p.high))
}

pub use crate::view::ic50::interval_text;

/// The panel of one curve.
pub fn panel(r: &Ic50Result, curve: &Curve, unit: &str, response: &str, et: Option<f64>) -> XyChart {
    let f = fitted(r, et);
    let mid = (r.upper.value + r.lower.value) / 2.0;
    let y_at_ic50 = f.as_ref().map_or(mid, |f| f(r.ic50.value));
    let hill = r.hill.as_ref().map_or(String::new(), |h| format!(" · Hill {}", sig(h.value, 2)));
    let flags = if r.flags.is_empty() {
        String::new()
    } else {
        format!(" · flags: {}", crate::report::code::joined(&r.flags, ", "))
    };
    // Wells the outlier rule marked are drawn apart, with their own marker.
    let is_marked = |x: f64, y: f64| {
        r.outliers.iter().any(|o| o.concentration.to_bits() == x.to_bits() && o.response.to_bits() == y.to_bits())
    };
    let (marked, kept): (Vec<_>, Vec<_>) =
        curve.x.iter().cloned().zip(curve.y.iter().cloned()).partition(|&(x, y)| is_marked(x, y));
    let lowest = kept.iter().chain(&marked).map(|p| p.0).filter(|x| *x > 0.0).fold(f64::INFINITY, f64::min);
    let mut chart = dose_panel(DoseCurve {
        title: r.compound.clone(),
        subtitle: format!("{} · {}{hill}{flags}", r.call.word(), ic50_text(r, unit)),
        flagged: !r.flags.is_empty(),
        points: kept,
        fit: f,
        ic50: Some((r.ic50.value, y_at_ic50, r.ic50.low, r.ic50.high, direction(r.qualifier))),
        unit: Some(unit.to_string()),
        response: response.to_string(),
    });
    if !marked.is_empty() {
        // Zero-concentration wells sit at the left edge, as in the dose panel.
        let points = marked.iter().map(|&(x, y)| (if x > 0.0 { x } else { lowest / 10f64.sqrt() }, y)).collect();
        let label = if r.flags.contains(&crate::report::Code::OutlierFlagged) {
            "outlier (still fitted)"
        } else {
            "outlier (excluded)"
        };
        chart.layers.push(Layer::Points { label: Some(label.into()), series: 3, points });
        chart.notes.push(format!(
            "{} well(s) marked by the outlier rule (studentized residual beyond the Bonferroni bound, Cook & Weisberg 1982).",
            marked.len()
        ));
    }
    if r.qualifier.is_bound() {
        chart
            .notes
            .push("The IC50 lies outside the tested range: it is drawn as a bound; the curve is the fit over the tested range.".into());
    }
    chart
}

/// One curve's SVG.
pub fn figure(r: &Ic50Result, curve: &Curve, unit: &str, response: &str, et: Option<f64>) -> Result<Svg> {
    super::chart(&panel(r, curve, unit, response, et), PANEL)
}

/// Thumbnails of many curves, flagged ones first (then in input order),
/// three to a row.
pub fn grid(items: &[(&Ic50Result, &Curve)], unit: &str, response: &str, et: Option<f64>) -> Result<Svg> {
    let mut order: Vec<usize> = (0..items.len()).collect();
    order.sort_by_key(|&k| items[k].0.flags.is_empty());
    let mut panels: Vec<XyChart> = order.iter().map(|&k| panel(items[k].0, items[k].1, unit, response, et)).collect();
    // % activity thumbnails share one axis: at least 0–100 % (with a margin),
    // widened only as far as the wells shown need, so curves compare at a glance.
    if response.contains('%') {
        let ys = items.iter().flat_map(|(_, c)| c.y.iter().copied()).filter(|y| y.is_finite());
        let (lo, hi) = ys.fold((-10.0f64, 120.0f64), |(lo, hi), y| (lo.min(y), hi.max(y)));
        for p in &mut panels {
            p.y = p.y.clone().fixed(lo, hi);
        }
    }
    super::figure(&panels, 3, THUMBNAIL, "the dose-response thumbnails")
}

/// Thumbnails kept during a run for the grid and the report: the flagged
/// curves and the others, each up to `cap`, plus a summary row per result
/// (up to `max_rows`) for the report's table.
#[derive(Debug, Clone)]
pub struct Gallery {
    /// Most thumbnails shown.
    pub cap: usize,
    /// Most table rows kept.
    pub max_rows: usize,
    /// Flagged curves kept, in input order.
    pub flagged: Vec<(Curve, Ic50Result)>,
    /// Unflagged curves kept, in input order.
    pub plain: Vec<(Curve, Ic50Result)>,
    /// Results seen.
    pub total: usize,
    /// Flagged results seen.
    pub total_flagged: usize,
    /// Report table header, from the view (the terminal table's).
    pub header: Vec<String>,
    /// Report table rows, from the view.
    pub rows: Vec<Vec<String>>,
    /// Concentration unit symbol.
    pub unit: String,
    /// Response axis title.
    pub response: String,
    /// Total enzyme in the concentration unit (Morrison fits).
    pub et: Option<f64>,
}

impl Gallery {
    /// An empty gallery.
    pub fn new(cap: usize, max_rows: usize) -> Gallery {
        Gallery {
            cap,
            max_rows,
            flagged: Vec::new(),
            plain: Vec::new(),
            total: 0,
            total_flagged: 0,
            header: Vec::new(),
            rows: Vec::new(),
            unit: String::new(),
            response: "response".into(),
            et: None,
        }
    }

    /// Adds one fitted curve with its row of the report table (built by the
    /// view, so that the report and the terminal show the same table).
    pub fn add(&mut self, curve: Curve, r: Ic50Result, row: Vec<String>) {
        self.total += 1;
        if self.rows.len() < self.max_rows {
            self.rows.push(row);
        }
        let list = if r.flags.is_empty() { &mut self.plain } else { &mut self.flagged };
        if !r.flags.is_empty() {
            self.total_flagged += 1;
        }
        if list.len() < self.cap {
            list.push((curve, r));
        }
    }

    /// The thumbnails to show: flagged first, at most `cap`.
    pub fn shown(&self) -> Vec<(&Ic50Result, &Curve)> {
        self.flagged.iter().chain(&self.plain).take(self.cap).map(|(c, r)| (r, c)).collect()
    }

    /// The grid of thumbnails.
    pub fn grid(&self) -> Result<Svg> {
        grid(&self.shown(), &self.unit, &self.response, self.et)
    }
}
