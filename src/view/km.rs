//! Views of `kimech km`: results → terminal table, CSV and JSON, and the
//! parameter table and fit summary the HTML report shares.

use serde::Serialize;

use super::CAUTION;
use crate::analysis::km::KmResult;
use crate::error::Result;
use crate::fit::Weighting;
use crate::io::Format;
use crate::io::output::{csv_bytes, json_bytes, new_grid, sig};
use crate::report::Param;

/// The JSON document: `{"results": [...]}`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// One result per series, in input order.
    pub results: Vec<KmResult>,
}

/// Serialises results in the chosen format.
pub fn render(results: &[KmResult], format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: results.to_vec() }),
        Format::Csv => csv_bytes(&results.iter().map(CsvRow::from).collect::<Vec<_>>()),
        Format::Table => Ok(human(results).into_bytes()),
    }
}

/// One flattened CSV row per series.
#[derive(Debug, Serialize)]
struct CsvRow {
    series: String,
    n: usize,
    df: usize,
    vmax: Option<f64>,
    vmax_se: Option<f64>,
    vmax_low: Option<f64>,
    vmax_high: Option<f64>,
    vmax_unit: String,
    km: Option<f64>,
    km_se: Option<f64>,
    km_low: Option<f64>,
    km_high: Option<f64>,
    km_unit: String,
    kcat: Option<f64>,
    kcat_unit: Option<String>,
    kcat_km: Option<f64>,
    kcat_km_unit: Option<String>,
    sse: Option<f64>,
    residual_sd: Option<f64>,
    r2: Option<f64>,
    runs_p: Option<f64>,
    converged: bool,
    warnings: String,
    /// The input file and the lines of the rows (`file:2-8`).
    source: String,
}

impl From<&KmResult> for CsvRow {
    fn from(r: &KmResult) -> Self {
        let p = &r.params;
        CsvRow {
            series: crate::io::neutralise_formula(r.series.as_deref().unwrap_or("")),
            n: r.n,
            df: r.df,
            vmax: finite(p.vmax.value),
            vmax_se: p.vmax.se.and_then(finite),
            vmax_low: p.vmax.low.and_then(finite),
            vmax_high: p.vmax.high.and_then(finite),
            vmax_unit: p.vmax.unit.clone().unwrap_or_default(),
            km: finite(p.km.value),
            km_se: p.km.se.and_then(finite),
            km_low: p.km.low.and_then(finite),
            km_high: p.km.high.and_then(finite),
            km_unit: p.km.unit.clone().unwrap_or_default(),
            kcat: p.kcat.as_ref().map(|k| k.value).and_then(finite),
            kcat_unit: p.kcat.as_ref().and_then(|k| k.unit.clone()),
            kcat_km: p.kcat_km.as_ref().map(|k| k.value).and_then(finite),
            kcat_km_unit: p.kcat_km.as_ref().and_then(|k| k.unit.clone()),
            sse: finite(r.sse),
            residual_sd: finite(r.residual_sd),
            r2: finite(r.r2),
            runs_p: r.runs_p.and_then(finite),
            converged: r.converged,
            warnings: r.warnings.iter().map(|w| w.code.as_str()).collect::<Vec<_>>().join(";"),
            source: r.source.cell(),
        }
    }
}

/// A number for a CSV cell: a non-finite one (an R² with no spread to
/// explain) is written as an empty cell, never as `NaN` or `inf`.
fn finite(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

fn weighting_name(w: Weighting) -> &'static str {
    match w {
        Weighting::None => "none",
        Weighting::Relative => "relative (1/rate²)",
        Weighting::Sd => "1/sd²",
    }
}

/// The one-line account of a fit's quality, shared with the HTML report.
pub fn fit_summary(r: &KmResult) -> String {
    format!(
        "n = {}, df = {}, SSE = {}, residual SD = {}, R² = {}, runs-test p = {}, {}; intervals: {}, weighting: {}",
        r.n,
        r.df,
        sig(r.sse, 5),
        sig(r.residual_sd, 4),
        sig(r.r2, 4),
        r.runs_p.map_or("—".into(), |p| sig(p, 2)),
        if r.converged { "converged" } else { "NOT converged" },
        r.params.km.interval,
        weighting_name(r.weighting),
    )
}

/// The column headers of the parameter table, shared with the HTML report.
pub fn param_header(confidence: f64) -> Vec<String> {
    let level = format!("{:.0}%", confidence * 100.0);
    ["parameter", "estimate", "SE", &format!("{level} low"), &format!("{level} high"), "unit", "interval"]
        .map(String::from)
        .to_vec()
}

/// One parameter as table cells (estimate, SE, interval ends, unit, interval method),
/// and every parameter of a result in reporting order; shared with the HTML report.
pub fn param_rows(r: &KmResult) -> Vec<Vec<String>> {
    let cells = |name: &str, p: &Param| {
        let end = |v: Option<f64>| v.map_or("unbounded".to_string(), |v| sig(v, 5));
        vec![
            name.to_string(),
            sig(p.value, 6),
            p.se.map_or("—".into(), |s| sig(s, 3)),
            end(p.low),
            end(p.high),
            p.unit.as_deref().map(crate::units::for_people).unwrap_or_default(),
            p.interval.to_string(),
        ]
    };
    let mut rows = vec![cells("Vmax", &r.params.vmax), cells("Km", &r.params.km)];
    rows.extend(r.params.kcat.as_ref().map(|k| cells("kcat", k)));
    rows.extend(r.params.kcat_km.as_ref().map(|k| cells("kcat/Km", k)));
    rows
}

/// The human-readable report.
pub fn human(results: &[KmResult]) -> String {
    let mut out = String::new();
    for r in results {
        let title = r
            .series
            .as_deref()
            .map_or("Michaelis–Menten fit".to_string(), |s| format!("Michaelis–Menten fit — series {s}"));
        out.push_str(&format!("{title}\n"));
        let mut grid = new_grid(param_header(r.confidence));
        for row in param_rows(r) {
            grid.add_row(row);
        }
        out.push_str(&format!("{grid}\n"));
        out.push_str(&format!("{}\n", fit_summary(r)));
        let dr = &r.double_reciprocal;
        out.push_str(&format!(
            "double-reciprocal line from the fit: slope Km/Vmax = {}, 1/v intercept = {}, 1/S intercept = {}\n",
            sig(dr.slope, 5),
            sig(dr.y_intercept, 5),
            sig(dr.x_intercept, 5)
        ));
        for note in [&r.params.vmax.note, &r.params.km.note].into_iter().flatten() {
            out.push_str(&format!("note: {note}\n"));
        }
        for w in &r.warnings {
            out.push_str(&format!("warning [{}]: {}\n", w.code, w.message));
        }
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}
