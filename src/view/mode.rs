//! Views of `kimech mode`: results → terminal table, CSV and JSON, and the
//! per-compound text block the HTML report shares.

use serde::Serialize;

use super::CAUTION;
use crate::analysis::mode::{Basis, Criterion, ModeResult, ModelResult};
use crate::error::Result;
use crate::io::Format;
use crate::io::output::{csv_bytes, json_bytes, new_grid, sig};
use crate::report::Param;

/// The JSON document: `{"results": [...]}`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// One result per compound, in input order.
    pub results: Vec<ModeResult>,
}

/// Serialises results in the chosen format.
pub fn render(results: &[ModeResult], format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: results.to_vec() }),
        Format::Csv => csv_bytes(&results.iter().flat_map(csv_rows).collect::<Vec<_>>()),
        Format::Table => Ok(human(results).into_bytes()),
    }
}

/// One CSV row per compound and model.
#[derive(Debug, Serialize)]
struct CsvRow {
    compound: String,
    model: &'static str,
    chosen: bool,
    choice: String,
    n: usize,
    df: usize,
    sse: f64,
    aicc: Option<f64>,
    weight: Option<f64>,
    converged: bool,
    weighting: String,
    runs_p: Option<f64>,
    lack_of_fit_p: Option<f64>,
    headline_basis: String,
    headline_ki: Option<f64>,
    headline_ki_low: Option<f64>,
    headline_ki_high: Option<f64>,
    headline_kiu: Option<f64>,
    headline_kiu_low: Option<f64>,
    headline_kiu_high: Option<f64>,
    vmax: Option<f64>,
    vmax_se: Option<f64>,
    vmax_low: Option<f64>,
    vmax_high: Option<f64>,
    rate_unit: String,
    km: Option<f64>,
    km_se: Option<f64>,
    km_low: Option<f64>,
    km_high: Option<f64>,
    km_unit: String,
    ki: Option<f64>,
    ki_se: Option<f64>,
    ki_low: Option<f64>,
    ki_high: Option<f64>,
    alpha: Option<f64>,
    alpha_se: Option<f64>,
    alpha_low: Option<f64>,
    alpha_high: Option<f64>,
    kiu: Option<f64>,
    kiu_se: Option<f64>,
    kiu_low: Option<f64>,
    kiu_high: Option<f64>,
    inhibitor_unit: String,
    beta: Option<f64>,
    beta_low: Option<f64>,
    beta_high: Option<f64>,
    ksi: Option<f64>,
    ksi_low: Option<f64>,
    ksi_high: Option<f64>,
    warnings: String,
}

fn finite(p: Option<&Param>) -> (Option<f64>, Option<f64>, Option<f64>) {
    p.map_or((None, None, None), |p| (p.value.is_finite().then_some(p.value), p.low, p.high))
}

fn se(p: Option<&Param>) -> Option<f64> {
    p.and_then(|p| p.se)
}

/// The columns every row of a compound shares.
fn compound_row(
    r: &ModeResult,
    model: &'static str,
    sse: f64,
    df: usize,
    aicc: Option<f64>,
    converged: bool,
) -> CsvRow {
    let (hki, hki_low, hki_high) = finite(r.headline.ki.as_ref());
    let (hkiu, hkiu_low, hkiu_high) = finite(r.headline.kiu.as_ref());
    let basis = serde_json::to_value(r.headline.basis).ok().and_then(|v| v.as_str().map(String::from));
    CsvRow {
        compound: crate::io::neutralise_formula(r.compound.as_deref().unwrap_or("")),
        model,
        chosen: r.chosen == model,
        choice: r.chosen.clone(),
        n: r.n,
        df,
        sse,
        aicc,
        weight: None,
        converged,
        weighting: format!("{:?}", r.weighting).to_lowercase(),
        runs_p: r.adequacy.runs_p,
        lack_of_fit_p: r.adequacy.lack_of_fit_p,
        headline_basis: basis.unwrap_or_default(),
        headline_ki: hki,
        headline_ki_low: hki_low,
        headline_ki_high: hki_high,
        headline_kiu: hkiu,
        headline_kiu_low: hkiu_low,
        headline_kiu_high: hkiu_high,
        vmax: None,
        vmax_se: None,
        vmax_low: None,
        vmax_high: None,
        rate_unit: String::new(),
        km: None,
        km_se: None,
        km_low: None,
        km_high: None,
        km_unit: String::new(),
        ki: None,
        ki_se: None,
        ki_low: None,
        ki_high: None,
        alpha: None,
        alpha_se: None,
        alpha_low: None,
        alpha_high: None,
        kiu: None,
        kiu_se: None,
        kiu_low: None,
        kiu_high: None,
        inhibitor_unit: String::new(),
        beta: None,
        beta_low: None,
        beta_high: None,
        ksi: None,
        ksi_low: None,
        ksi_high: None,
        warnings: r.warnings.iter().map(|w| w.code).collect::<Vec<_>>().join(";"),
    }
}

/// Fills the constants' columns of a row.
fn with_constants(
    mut row: CsvRow,
    vmax: &Param,
    km: &Param,
    ki: Option<&Param>,
    alpha: Option<&Param>,
    kiu: Option<&Param>,
) -> CsvRow {
    (row.vmax, row.vmax_low, row.vmax_high) = finite(Some(vmax));
    (row.km, row.km_low, row.km_high) = finite(Some(km));
    (row.ki, row.ki_low, row.ki_high) = finite(ki);
    (row.alpha, row.alpha_low, row.alpha_high) = finite(alpha);
    (row.kiu, row.kiu_low, row.kiu_high) = finite(kiu);
    row.vmax_se = vmax.se;
    row.km_se = km.se;
    row.ki_se = se(ki);
    row.alpha_se = se(alpha);
    row.kiu_se = se(kiu);
    row.rate_unit = vmax.unit.clone().unwrap_or_default();
    row.km_unit = km.unit.clone().unwrap_or_default();
    row.inhibitor_unit = ki.or(kiu).and_then(|k| k.unit.clone()).unwrap_or_default();
    row
}

/// One row per model of the five, then one per extension model.
fn csv_rows(r: &ModeResult) -> Vec<CsvRow> {
    let mut rows: Vec<CsvRow> = r
        .models
        .iter()
        .map(|m| {
            let p = &m.params;
            let mut row = compound_row(r, m.model, m.sse, m.df, m.aicc, m.converged);
            row.weight = Some(m.weight);
            with_constants(row, &p.vmax, &p.km, p.ki.as_ref(), p.alpha.as_ref(), p.kiu.as_ref())
        })
        .collect();
    rows.extend(r.extensions.iter().map(|e| {
        let p = &e.params;
        let row = compound_row(r, e.model, e.sse, e.df, e.aicc, e.converged);
        let mut row = with_constants(row, &p.vmax, &p.km, Some(&p.ki), Some(&p.alpha), Some(&p.kiu));
        (row.beta, row.beta_low, row.beta_high) = finite(p.beta.as_ref());
        (row.ksi, row.ksi_low, row.ksi_high) = finite(p.ksi.as_ref());
        row
    }));
    rows
}

/// The headline in one line: the constants, their intervals and what they rest on.
pub fn headline_text(r: &ModeResult) -> String {
    let h = &r.headline;
    let basis = match h.basis {
        Basis::ChosenModel => format!("chosen model {}", r.chosen),
        Basis::SpanOverPlausibleModels => format!("span over the plausible models {}", h.models.join(", ")),
        Basis::Diagnosis => format!("diagnosis {}", r.chosen),
        Basis::NoModelAdequate => "no model adequate".to_string(),
    };
    let consts: Vec<String> = [("Ki", &h.ki), ("Kiu", &h.kiu)]
        .into_iter()
        .map(|(n, p)| p.as_ref().map_or(format!("{n} not given"), |p| with_interval(n, p)))
        .collect();
    let flag = if r.warnings.iter().any(|w| w.code == "mechanism-uncertain") { "; MECHANISM UNCERTAIN" } else { "" };
    format!("headline: {} ({basis}{flag})", consts.join("; "))
}

/// A constant in a table cell: the estimate, or `→ ∞` / `n.d.` when it lies at a limit.
fn cell(p: Option<&Param>) -> String {
    match p {
        None => String::new(),
        Some(p) if p.value.is_infinite() => "→ ∞".into(),
        Some(p) if p.value.is_nan() => "n.d.".into(),
        Some(p) => sig(p.value, 4),
    }
}

/// A constant with its interval, for the chosen model's line.
fn with_interval(name: &str, p: &Param) -> String {
    let end = |v: Option<f64>| v.map_or("unbounded".to_string(), |v| sig(v, 3));
    let unit = p.unit.as_deref().map(|u| format!(" {u}")).unwrap_or_default();
    let value = if p.value.is_finite() { sig(p.value, 4) } else { cell(Some(p)) };
    format!("{name} = {value}{unit} [{} to {}]", end(p.low), end(p.high))
}

fn model_row(m: &ModelResult) -> Vec<String> {
    let p = &m.params;
    vec![
        m.model.to_string(),
        cell(Some(&p.vmax)),
        cell(Some(&p.km)),
        cell(p.ki.as_ref()),
        cell(p.alpha.as_ref()),
        cell(p.kiu.as_ref()),
        sig(m.sse, 4),
        m.aicc.map_or("—".into(), |a| format!("{a:.2}")),
        format!("{:.3}", m.weight),
        if m.converged { String::new() } else { "not converged".into() },
    ]
}

/// The human-readable report: one compact block per compound.
pub fn human(results: &[ModeResult]) -> String {
    let mut out = String::new();
    for r in results {
        out.push_str(&block(r));
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}

/// One compound's text block: headline, model table, tests and warnings (terminal and report).
pub fn block(r: &ModeResult) -> String {
    let mut out = String::new();
    let name = r.compound.as_deref().map_or("Inhibition mode".to_string(), |c| format!("Inhibition mode — {c}"));
    out.push_str(&format!("{name} — {}\n", headline_text(r)));
    out.push_str(&format!(
        "(n = {}, weighting {}, global fits, Vmax and Km shared)\n",
        r.n,
        format!("{:?}", r.weighting).to_lowercase()
    ));
    let first = &r.models[0].params;
    let unit = |p: Option<&Param>| p.and_then(|p| p.unit.clone()).map(|u| format!(" ({u})")).unwrap_or_default();
    let iu = r.models[4].params.ki.as_ref();
    let mut grid = new_grid(vec![
        "model".into(),
        format!("Vmax{}", unit(Some(&first.vmax))),
        format!("Km{}", unit(Some(&first.km))),
        format!("Ki{}", unit(iu)),
        "α".into(),
        format!("Kiu{}", unit(iu)),
        "SSE".into(),
        "AICc".into(),
        "weight".into(),
        String::new(),
    ]);
    for m in &r.models {
        grid.add_row(model_row(m));
    }
    out.push_str(&format!("{grid}\n"));
    let criterion = match r.criterion {
        Criterion::Aicc => "AICc",
        Criterion::FTest => "F test",
    };
    if r.extensions.iter().any(|e| e.named) {
        out.push_str(&format!(
            "choice: {} (diagnosis); among the five laws alone ({criterion}): {}\n",
            r.chosen, r.evidence
        ));
    } else {
        out.push_str(&format!("choice ({criterion}): {}\n", r.evidence));
    }
    if let Some(m) = r.models.iter().find(|m| m.model == r.chosen) {
        let level = format!("{:.0}%", r.confidence * 100.0);
        let consts: Vec<String> = [("Ki", &m.params.ki), ("α", &m.params.alpha), ("Kiu", &m.params.kiu)]
            .into_iter()
            .filter_map(|(n, p)| p.as_ref().map(|p| with_interval(n, p)))
            .collect();
        if !consts.is_empty() {
            out.push_str(&format!(
                "{} inhibition, global fit, {level} profile-likelihood intervals: {}\n",
                m.model,
                consts.join("; ")
            ));
        }
    } else if r.headline.basis == crate::analysis::mode::Basis::Diagnosis {
        out.push_str(&format!(
            "chosen: {} (a diagnosis beyond the five laws) — its constants are in the headline and the warning below\n",
            r.chosen
        ));
    } else {
        out.push_str(&format!("chosen: {} — no Ki is reported\n", r.chosen));
    }
    if !r.alpha_interpretation.is_empty() {
        out.push_str(&format!("mixed model: {}\n", r.alpha_interpretation));
    }
    let a = &r.adequacy;
    let p = |p: Option<f64>| p.map_or("—".to_string(), |p| sig(p, 2));
    out.push_str(&format!(
        "adequacy of {}: runs-test p = {}, lack-of-fit p = {} ({})\n",
        a.model,
        p(a.runs_p),
        p(a.lack_of_fit_p),
        if a.adequate { "adequate" } else { "NOT adequate" }
    ));
    let tests: Vec<String> = r.tests.iter().map(|t| format!("{}→{} p = {}", t.simpler, t.fuller, p(t.p))).collect();
    out.push_str(&format!("F tests: {}\n", tests.join(", ")));
    for w in &r.warnings {
        out.push_str(&format!("warning [{}]: {}\n", w.code, w.message));
    }
    out
}
