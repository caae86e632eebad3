//! Pictures for `kimech onset`: per compound, the progress curves with the
//! chosen global fit drawn through each [I], and kobs of each curve's own fit
//! against [I] with the one-step line and the two-step hyperbola of the
//! replot (the chosen scheme solid, the other dashed).

use super::axis::Axis;
use super::xy::{Layer, XyChart};
use super::{PANEL, Svg};
use crate::analysis::onset::{Compound, Onset, OnsetResult};
use crate::error::Result;
use crate::io::output::sig;

/// How a compound is named in captions and headings.
pub fn name(r: &OnsetResult) -> String {
    r.compound.clone().unwrap_or_else(|| "all rows".into())
}

fn unit_of(p: &crate::report::Param) -> String {
    p.unit.clone().map_or(String::new(), |u| format!(" ({u})"))
}

/// Signal against time: the readings of every curve and the global fit through them.
pub fn curves_panel(compound: &Compound, r: &OnsetResult) -> XyChart {
    let time_unit = r.curves.first().map(|c| unit_of(&c.kobs)).unwrap_or_default().replace("(1/", "(");
    let x = Axis::linear(format!("time{time_unit}")).from_zero();
    let y = Axis::linear("signal".to_string());
    let mut chart = XyChart::new(format!("Progress curves — {}", name(r)), x, y);
    chart.subtitle =
        Some(format!("onset {}; lines: the chosen global fit (initial rates {})", r.onset.name(), r.rates.name()));
    chart.flagged = !r.warnings.is_empty();
    let mut curves: Vec<_> = compound.curves.iter().collect();
    curves.sort_by(|a, b| a.inhibitor.total_cmp(&b.inhibitor));
    for (k, (curve, fitted)) in curves.iter().zip(&r.curves).enumerate() {
        let t_max = curve.time.last().copied().unwrap_or(0.0);
        let g = fitted.global;
        chart.layers.push(Layer::Function {
            label: None,
            series: k,
            f: Box::new(move |t| g.at(t)),
            dashed: false,
            domain: Some((0.0, t_max)),
        });
        let points = curve.time.iter().cloned().zip(curve.signal.iter().cloned()).collect();
        chart.layers.push(Layer::Points { label: Some(format!("[I] {}", sig(curve.inhibitor, 3))), series: k, points });
    }
    chart
}

/// kobs of each curve's own fit against [I], with both replot schemes.
pub fn kobs_panel(r: &OnsetResult) -> XyChart {
    let k_unit = r.curves.iter().find(|c| c.inhibitor > 0.0).map(|c| unit_of(&c.kobs)).unwrap_or_default();
    let i_unit = r.ki.as_ref().map(unit_of).unwrap_or_default();
    let x = Axis::linear(format!("inhibitor [I]{i_unit}")).from_zero();
    let y = Axis::linear(format!("kobs{k_unit}")).from_zero();
    let mut chart = XyChart::new(format!("kobs vs [I] — {}", name(r)), x, y);
    chart.subtitle = Some(match &r.kinact_ki {
        Some(p) => format!("kinact/KI {}{}", sig(p.value, 3), unit_of(p)),
        None => "no onset: kobs not determined".into(),
    });
    let i_max = r.curves.iter().map(|c| c.inhibitor).fold(0.0, f64::max) * 1.05;
    let reversible = r.reversible.unwrap_or(false);
    for fit in r.replot.iter().filter(|f| f.koff.is_some() == reversible) {
        let chosen = fit.scheme == r.onset;
        let koff = fit.koff.unwrap_or(0.0);
        let (label, f): (String, Box<dyn Fn(f64) -> f64>) = match (fit.scheme, fit.kinact, fit.ki_app) {
            (Onset::TwoStep, Some(kinact), Some(ki)) => {
                ("two-step".into(), Box::new(move |i| koff + kinact * i / (ki + i)))
            }
            _ => {
                let slope = fit.kinact_ki_app;
                ("one-step".into(), Box::new(move |i| koff + slope * i))
            }
        };
        chart.layers.push(Layer::Function {
            label: Some(label),
            series: if chosen { 0 } else { 1 },
            f,
            dashed: !chosen,
            domain: Some((0.0, i_max)),
        });
    }
    let points: Vec<(f64, f64)> =
        r.curves.iter().filter(|c| c.inhibitor > 0.0).map(|c| (c.inhibitor, c.kobs.value)).collect();
    chart.layers.push(Layer::Points { label: Some("each curve's own fit".into()), series: 2, points });
    chart.notes.push("The global fit, not this replot, gives the reported constants.".into());
    chart
}

/// Both panels of one compound, side by side.
pub fn compound_figure(compound: &Compound, r: &OnsetResult) -> Result<Svg> {
    let panels = [curves_panel(compound, r), kobs_panel(r)];
    super::figure(&panels, 2, PANEL, &format!("the onset plots of {}", name(r)))
}
