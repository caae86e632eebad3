//! Pictures and the report section for `kimech mode`.
//!
//! Per compound: the rates against substrate at each inhibitor level with
//! the picked model's global curves; the double-reciprocal, Dixon and
//! Cornish-Bowden views with lines from that model (see [`super::charts`]
//! for the definitions and sources); the Akaike weights of the five models
//! as bars; and the residuals of every model side by side, on one shared
//! scale so that the pattern left by a wrong mechanism can be compared.

use std::rc::Rc;

use super::charts::{RatePoint, RateUnits, View, evidence_panel, linear_view, rate_family, residual_panel};
use super::xy::{Layer, XyChart};
use super::{PANEL, Svg};
use crate::analysis::mode::{Matrix, ModeResult, ModelResult, Units};
use crate::error::{Error, Result};
use crate::fit::{Model, Weighting};
use crate::models::inhibition::{Mechanism, RateLaw};

/// The mechanism of a model result, by its name.
fn mechanism(m: &ModelResult) -> Option<Mechanism> {
    Mechanism::ALL.into_iter().find(|k| k.name() == m.model)
}

/// The parameter vector of a model result, in the rate law's order.
fn theta(m: &ModelResult, mech: Mechanism) -> Option<Vec<f64>> {
    let p = &m.params;
    mech.names()
        .iter()
        .map(|name| match *name {
            "vmax" => Some(p.vmax.value),
            "km" => Some(p.km.value),
            "ki" => p.ki.as_ref().map(|v| v.value),
            "kiu" => p.kiu.as_ref().map(|v| v.value),
            "alpha" => p.alpha.as_ref().map(|v| v.value),
            _ => None,
        })
        .collect()
}

/// v(S, I) of a fitted model, as the plots need it.
fn law(m: &ModelResult) -> Option<super::charts::RateLaw> {
    let mech = mechanism(m)?;
    let theta = theta(m, mech)?;
    Some(Rc::new(move |s, i| RateLaw(mech).value(&theta, &(s, i))))
}

fn points(matrix: &Matrix) -> Vec<RatePoint> {
    (0..matrix.rate.len())
        .map(|k| RatePoint { s: matrix.substrate[k], i: matrix.inhibitor[k], v: matrix.rate[k] })
        .collect()
}

fn units(u: &Units) -> RateUnits {
    RateUnits { s: u.substrate.clone(), i: u.inhibitor.clone(), v: u.rate.clone() }
}

/// How a compound is named in captions: `compound KX-1`, or `all rows`.
pub fn compound_name(r: &ModeResult) -> String {
    r.compound.clone().map_or("all rows".into(), |c| format!("compound {c}"))
}

/// The model the curves are drawn with: the chosen one, or the one the
/// criterion picked when none was adequate.
pub fn drawn(r: &ModeResult) -> Option<&ModelResult> {
    r.models.iter().find(|m| m.model == r.chosen).or_else(|| r.models.iter().find(|m| m.model == r.adequacy.model))
}

/// All panels of one compound: rates, three linear views, evidence, and one
/// residual panel per model.
pub fn panels(r: &ModeResult, matrix: &Matrix, u: &Units) -> Result<Vec<XyChart>> {
    let name = compound_name(r);
    let pts = points(matrix);
    let ru = units(u);
    let model = drawn(r).ok_or_else(|| Error::Plot {
        what: format!("the mode plots of {name}"),
        problem: format!("no fitted model named '{}'", r.chosen),
    })?;
    let f = law(model).ok_or_else(|| Error::Plot {
        what: format!("the mode plots of {name}"),
        problem: format!("model '{}' has no rate law with these constants", model.model),
    })?;
    let verdict = if r.chosen == model.model {
        format!("{} model (by {})", model.model, criterion_name(r))
    } else {
        format!("no model adequate; curves: {} (the criterion's pick)", model.model)
    };
    let mut rates = rate_family(&format!("Rates — {name}"), &pts, &f, &ru);
    rates.subtitle = Some(format!("curves: {verdict}"));
    rates.flagged = !r.warnings.is_empty() || !r.adequacy.adequate;
    let mut out = vec![rates];
    for (view, title) in [
        (View::DoubleReciprocal, "Double reciprocal"),
        (View::Dixon, "Dixon"),
        (View::CornishBowden, "Cornish-Bowden (S/v vs I)"),
    ] {
        let mut chart = linear_view(view, &format!("{title} — {name}"), &pts, &f, &ru);
        chart.subtitle = Some(format!("lines: {} model", model.model));
        out.push(chart);
    }
    out.push(evidence(r));
    out.extend(residuals(r, &pts, &ru));
    Ok(out)
}

fn criterion_name(r: &ModeResult) -> &'static str {
    match r.criterion {
        crate::analysis::mode::Criterion::Aicc => "AICc",
        crate::analysis::mode::Criterion::FTest => "F tests",
    }
}

/// Akaike weights as bars, the chosen model marked; F-test p-values in notes.
fn evidence(r: &ModeResult) -> XyChart {
    // Short names so five labels fit under the bars.
    let short = |name: &str| match name {
        "competitive" => "comp.".to_string(),
        "uncompetitive" => "uncomp.".to_string(),
        "noncompetitive" => "noncomp.".to_string(),
        other => other.to_string(),
    };
    let weights: Vec<(String, f64)> = r.models.iter().map(|m| (short(m.model), m.weight)).collect();
    let chosen = r.models.iter().position(|m| m.model == r.chosen);
    let mut chart = evidence_panel("Model evidence", "Akaike weight", &weights, chosen);
    chart.subtitle = Some(format!("chosen by {}: {}", criterion_name(r), r.chosen));
    let tests: Vec<String> = r
        .tests
        .iter()
        .filter_map(|t| t.p.map(|p| format!("{} vs {}: p = {}", t.simpler, t.fuller, crate::io::output::sig(p, 2))))
        .collect();
    if !tests.is_empty() {
        chart.notes.push(format!("F tests: {}", tests.join("; ")));
    }
    chart
}

/// The residual the fit minimised, on the scale a reader can judge: under
/// relative weighting (1/v²) it is (observed − fitted)/observed, so that the
/// small rates, which carry the weight, are not hidden under the large ones.
fn weighted_residual(r: &ModeResult, observed: f64, fitted: f64) -> f64 {
    if r.weighting == Weighting::Relative && observed != 0.0 {
        (observed - fitted) / observed
    } else {
        observed - fitted
    }
}

/// Three significant digits without padding zeros (1, 0.5, 2.25).
fn trimmed(v: f64) -> String {
    let t = crate::io::output::sig(v, 3);
    if t.contains('.') && !t.contains('e') { t.trim_end_matches('0').trim_end_matches('.').to_string() } else { t }
}

/// Names each point series by its inhibitor level, so the panel has a legend.
fn label_levels(chart: &mut XyChart, res: &[(f64, f64, f64)], ru: &RateUnits) {
    let mut levels: Vec<f64> = res.iter().map(|p| p.1).collect();
    levels.sort_by(f64::total_cmp);
    levels.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs().max(1e-300));
    let unit = ru.i.as_deref().map_or(String::new(), |u| format!(" {u}"));
    for layer in chart.layers.iter_mut() {
        if let Layer::Points { label, series, .. } = layer
            && let Some(i) = levels.get(*series)
        {
            *label = Some(format!("I = {}{unit}", trimmed(*i)));
        }
    }
}

/// One residual panel per model, all on the same symmetric scale (weighted
/// residuals under relative weighting), with a legend of inhibitor levels.
fn residuals(r: &ModeResult, pts: &[RatePoint], ru: &RateUnits) -> Vec<XyChart> {
    type Residuals<'a> = Vec<(&'a ModelResult, Vec<(f64, f64, f64)>)>;
    let per_model: Residuals = r
        .models
        .iter()
        .filter_map(|m| {
            let f = law(m)?;
            Some((m, pts.iter().map(|p| (p.s, p.i, weighted_residual(r, p.v, f(p.s, p.i)))).collect()))
        })
        .collect();
    let relative = r.weighting == Weighting::Relative;
    let largest = per_model.iter().flat_map(|(_, res)| res.iter().map(|p| p.2.abs())).fold(0.0, f64::max);
    let span = if largest > 0.0 { largest * 1.1 } else { 1.0 };
    per_model
        .into_iter()
        .map(|(m, res)| {
            let mut chart = residual_panel(&format!("Residuals — {}", m.model), &res, ru);
            chart.y = chart.y.clone().fixed(-span, span);
            if relative {
                chart.y.label = "relative residual (observed − fitted)/observed".into();
            }
            label_levels(&mut chart, &res, ru);
            let mark = if m.model == r.chosen { " (chosen)" } else { "" };
            chart.subtitle = Some(format!(
                "SSE {}; AICc weight {}{mark}",
                crate::io::output::sig(m.sse, 3),
                crate::io::output::sig(m.weight, 2)
            ));
            chart
        })
        .collect()
}

/// One compound's figure: three panels to a row.
pub fn figure(r: &ModeResult, matrix: &Matrix, u: &Units) -> Result<Svg> {
    let panels = panels(r, matrix, u)?;
    super::figure(&panels, 3, PANEL, &format!("the mode plots of {}", compound_name(r)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::mode::{Options, analyse};

    /// A competitive matrix (Vmax 10, Km 50, Ki 2) with deterministic ±3 % scatter.
    fn matrix() -> Matrix {
        let law = RateLaw(Mechanism::Competitive);
        let mut m = Matrix {
            label: None,
            origin: crate::report::Origin::new("test", []),
            lines: Vec::new(),
            substrate: Vec::new(),
            inhibitor: Vec::new(),
            rate: Vec::new(),
            sd: None,
        };
        for (a, i) in [0.0, 1.0, 2.0, 4.0].into_iter().enumerate() {
            for (b, s) in [10.0, 25.0, 50.0, 100.0, 200.0].into_iter().enumerate() {
                let wobble = if (a + b) % 2 == 0 { 1.03 } else { 0.97 };
                m.lines.push(m.rate.len() as u64 + 2);
                m.substrate.push(s);
                m.inhibitor.push(i);
                m.rate.push(law.value(&[10.0, 50.0, 2.0], &(s, i)) * wobble);
            }
        }
        m
    }

    #[test]
    fn residual_panels_are_relative_under_relative_weighting_and_have_a_legend() {
        let m = matrix();
        let units = Units { inhibitor: Some("uM".into()), ..Units::default() };
        for (weighting, relative) in [(Weighting::Relative, true), (Weighting::None, false)] {
            let r = analyse(&m, &units, &Options { weighting, ..Options::default() }).unwrap();
            let panels = panels(&r, &m, &units).unwrap();
            let res = panels.iter().find(|p| p.title.starts_with("Residuals — competitive")).unwrap();
            assert_eq!(res.y.label.starts_with("relative residual"), relative, "{}", res.y.label);
            let labels: Vec<&str> = res
                .layers
                .iter()
                .filter_map(|l| match l {
                    Layer::Points { label, .. } => label.as_deref(),
                    _ => None,
                })
                .collect();
            assert_eq!(labels, ["I = 0 uM", "I = 1 uM", "I = 2 uM", "I = 4 uM"]);
        }
    }
}
