//! Views of `kimech mode`: results → terminal table, CSV and JSON, and the
//! per-compound text block the HTML report shares.

use crate::report::Code;
use serde::Serialize;

use super::{CAUTION, Grid, Part};
use crate::analysis::mode::{Basis, Criterion, ModeResult, ModelResult};
use crate::error::Result;
use crate::io::Format;
use crate::io::output::{csv_bytes, json_bytes, sig};
use crate::report::Param;
use crate::units::{for_people, potency};

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
    /// The input file and the lines of the rows (`file:2-8`).
    source: String,
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
        warnings: r.warnings.iter().map(|w| w.code.as_str()).collect::<Vec<_>>().join(";"),
        source: r.source.cell(),
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
        .map(|(n, p)| p.as_ref().map_or(format!("{n} not given"), |p| with_interval(n, p, potency)))
        .collect();
    let flag = if r.warnings.iter().any(|w| w.code == Code::MechanismUncertain) { "; MECHANISM UNCERTAIN" } else { "" };
    format!("headline: {} ({basis}{flag})", consts.join("; "))
}

/// A constant in a table cell, written by `number`: the estimate, or `→ ∞` /
/// `n.d.` when it lies at a limit.
fn cell(p: Option<&Param>, number: fn(f64) -> String) -> String {
    match p {
        None => String::new(),
        Some(p) if p.value.is_infinite() => "→ ∞".into(),
        Some(p) if p.value.is_nan() => "n.d.".into(),
        Some(p) => number(p.value),
    }
}

fn four(v: f64) -> String {
    sig(v, 4)
}

/// A constant with its interval (ends to three significant figures), for the chosen
/// model's line and the headline: `Ki = 42.3 nM [39.3 to 48.6]`, or
/// `Ki → ∞ nM [5710 to unbounded]` at a limit.
fn with_interval(name: &str, p: &Param, number: fn(f64) -> String) -> String {
    let end = |v: Option<f64>| v.map_or("unbounded".to_string(), potency);
    let unit = p.unit.as_deref().map(|u| format!(" {}", for_people(u))).unwrap_or_default();
    let value = if p.value.is_finite() { format!("= {}", number(p.value)) } else { cell(Some(p), number) };
    format!("{name} {value}{unit} [{} to {}]", end(p.low), end(p.high))
}

fn model_row(m: &ModelResult) -> Vec<String> {
    let p = &m.params;
    vec![
        m.model.to_string(),
        cell(Some(&p.vmax), four),
        cell(Some(&p.km), four),
        cell(p.ki.as_ref(), potency),
        cell(p.alpha.as_ref(), four),
        cell(p.kiu.as_ref(), potency),
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
        out.push_str(&super::terminal(&parts(r)));
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}

/// The model table: every law's constants, SSE, AICc and Akaike weight.
fn model_table(r: &ModeResult) -> Grid {
    let unit = |p: Option<&Param>| {
        p.and_then(|p| p.unit.as_deref()).map(|u| format!(" ({})", for_people(u))).unwrap_or_default()
    };
    let any = |get: fn(&ModelResult) -> Option<&Param>| r.models.iter().find_map(get);
    let mut grid = Grid::new(vec![
        "model".into(),
        format!("Vmax{}", unit(any(|m| Some(&m.params.vmax)))),
        format!("Km{}", unit(any(|m| Some(&m.params.km)))),
        format!("Ki{}", unit(any(|m| m.params.ki.as_ref()))),
        "α".into(),
        format!("Kiu{}", unit(any(|m| m.params.kiu.as_ref()))),
        "SSE".into(),
        "AICc".into(),
        "weight".into(),
        String::new(),
    ]);
    grid.rows = r.models.iter().map(model_row).collect();
    grid
}

/// One compound's report, in parts: title with the headline, the model table,
/// the choice, the chosen law's constants, adequacy, F tests and warnings —
/// the terminal prints them as lines, the HTML report as a section.
pub fn parts(r: &ModeResult) -> Vec<Part> {
    let name = r.compound.as_deref().map_or("Inhibition mode".to_string(), |c| format!("Inhibition mode — {c}"));
    let mut parts = vec![
        Part::TitleWith { title: name, finding: headline_text(r) },
        Part::Line(format!(
            "(n = {}, weighting {}, global fits, Vmax and Km shared)",
            r.n,
            format!("{:?}", r.weighting).to_lowercase()
        )),
        Part::Table(model_table(r)),
    ];
    let criterion = match r.criterion {
        Criterion::Aicc => "AICc",
        Criterion::FTest => "F test",
    };
    parts.push(Part::Line(if r.extensions.iter().any(|e| e.named) {
        format!("choice: {} (diagnosis); among the five laws alone ({criterion}): {}", r.chosen, r.evidence)
    } else {
        format!("choice ({criterion}): {}", r.evidence)
    }));
    if let Some(line) = chosen_line(r) {
        parts.push(Part::Line(line));
    }
    if !r.alpha_interpretation.is_empty() {
        parts.push(Part::Line(format!("mixed model: {}", r.alpha_interpretation)));
    }
    let a = &r.adequacy;
    let p = |p: Option<f64>| p.map_or("—".to_string(), |p| sig(p, 2));
    parts.push(Part::Line(format!(
        "adequacy of {}: runs-test p = {}, lack-of-fit p = {} ({})",
        a.model,
        p(a.runs_p),
        p(a.lack_of_fit_p),
        if a.adequate { "adequate" } else { "NOT adequate" }
    )));
    let tests: Vec<String> = r.tests.iter().map(|t| format!("{}→{} p = {}", t.simpler, t.fuller, p(t.p))).collect();
    parts.push(Part::Line(format!("F tests: {}", tests.join(", "))));
    parts.extend(r.warnings.iter().map(|w| Part::Warning { code: w.code.to_string(), message: w.message.clone() }));
    parts
}

/// Counts for the top of a report: compounds, calls and warnings.
pub fn summary_text(results: &[&ModeResult]) -> String {
    let calls = super::tally(results.iter().map(|r| r.chosen.as_str()));
    let codes = super::tally(results.iter().flat_map(|r| r.warnings.iter().map(|w| w.code.as_str())));
    let mut text = format!("{} compounds. Calls: {calls}.", results.len());
    if !codes.is_empty() {
        text.push_str(&format!(" Warnings: {codes}."));
    }
    text
}

/// One row per compound — call, headline constants, warnings — the compounds
/// with a warning first (input order within each group).
pub fn summary_grid(results: &[&ModeResult]) -> Grid {
    let mut grid = Grid::new(["compound", "call", "Ki", "Kiu", "headline from", "warnings"].map(String::from).to_vec());
    let (flagged, plain): (Vec<&ModeResult>, Vec<&ModeResult>) =
        results.iter().copied().partition(|r| !r.warnings.is_empty());
    for r in flagged.into_iter().chain(plain) {
        let h = &r.headline;
        let constant = |p: &Option<Param>| {
            p.as_ref().map_or("—".to_string(), |p| {
                let unit = p.unit.as_deref().map(|u| format!(" {}", for_people(u))).unwrap_or_default();
                format!("{}{unit}", cell(Some(p), potency))
            })
        };
        let from = match h.basis {
            Basis::ChosenModel => "chosen model",
            Basis::SpanOverPlausibleModels => "span over plausible models",
            Basis::Diagnosis => "diagnosis",
            Basis::NoModelAdequate => "no model adequate",
        };
        grid.rows.push(vec![
            r.compound.clone().unwrap_or_else(|| "—".into()),
            r.chosen.clone(),
            constant(&h.ki),
            constant(&h.kiu),
            from.to_string(),
            r.warnings.iter().map(|w| w.code.to_string()).collect::<Vec<_>>().join(", "),
        ]);
    }
    grid
}

/// The chosen law's constants with their profile intervals, or why none are given.
fn chosen_line(r: &ModeResult) -> Option<String> {
    if let Some(m) = r.models.iter().find(|m| m.model == r.chosen) {
        let level = format!("{:.0}%", r.confidence * 100.0);
        let consts: Vec<String> = [
            ("Ki", &m.params.ki, potency as fn(f64) -> String),
            ("α", &m.params.alpha, four),
            ("Kiu", &m.params.kiu, potency),
        ]
        .into_iter()
        .filter_map(|(n, p, number)| p.as_ref().map(|p| with_interval(n, p, number)))
        .collect();
        (!consts.is_empty()).then(|| {
            format!("{} inhibition, global fit, {level} profile-likelihood intervals: {}", m.model, consts.join("; "))
        })
    } else if r.headline.basis == crate::analysis::mode::Basis::Diagnosis {
        Some(format!(
            "chosen: {} (a diagnosis beyond the five laws) — its constants are in the headline and the warning below",
            r.chosen
        ))
    } else {
        Some(format!("chosen: {} — no Ki is reported", r.chosen))
    }
}
