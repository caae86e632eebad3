//! Views of `kimech rates`: rates with their carried columns → terminal
//! table, CSV (the columns `kimech km` and `kimech mode` read) and JSON.

use serde::Serialize;

use super::{CAUTION, Grid, Part};
use crate::analysis::rates::RateResult;
use crate::error::Result;
use crate::io::Format;
use crate::io::output::{Cell, CsvExport, json_bytes, sig};
use crate::units::for_people;

/// One curve's result with the columns carried from its rows.
#[derive(Debug, Clone, Serialize)]
pub struct CarriedResult {
    /// The rate and its window.
    #[serde(flatten)]
    pub result: RateResult,
    /// The other columns of the curve's rows, by header.
    pub carried: Vec<(String, String)>,
}

/// What the views show: the rates and how the input's columns were laid out.
#[derive(Debug, Clone)]
pub struct RateTable {
    /// Results in input order.
    pub results: Vec<CarriedResult>,
    /// Headers of the carried columns, in input order.
    pub carried_headers: Vec<String>,
    /// Whether the input had a curve column.
    pub has_curve_column: bool,
}

/// `{"results": [...]}`.
#[derive(Debug, Serialize)]
struct Report<'a> {
    results: &'a [CarriedResult],
}

/// Serialises results in the chosen format.
pub fn render(outcome: &RateTable, format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: &outcome.results }),
        Format::Csv => csv(outcome),
        Format::Table => Ok(human(outcome).into_bytes()),
    }
}

fn rate_header(outcome: &RateTable) -> String {
    match outcome.results.first().and_then(|r| r.result.rate.unit.as_deref()) {
        Some(unit) => format!("rate ({unit})"),
        None => "rate".to_string(),
    }
}

/// CSV with the curve label, the carried columns as they were headed, then
/// the rate and its window: the columns `kimech km` reads. Every text cell
/// and header goes through the formula guard of [`CsvExport`].
fn csv(outcome: &RateTable) -> Result<Vec<u8>> {
    let mut header: Vec<String> = Vec::new();
    if outcome.has_curve_column {
        header.push("curve".into());
    }
    header.extend(outcome.carried_headers.iter().cloned());
    header.push(rate_header(outcome));
    let fixed = [
        "rate_se",
        "rate_low",
        "rate_high",
        "window_start",
        "window_end",
        "points_used",
        "points_total",
        "r2",
        "curvature_p",
        "flags",
        "source",
    ];
    header.extend(fixed.map(String::from));
    let mut export = CsvExport::new(Vec::new(), &header)?;
    for r in &outcome.results {
        export.row(&csv_row(r, outcome.has_curve_column))?;
    }
    export.finish()
}

fn csv_row(r: &CarriedResult, has_curve_column: bool) -> Vec<Cell> {
    let res = &r.result;
    let mut row: Vec<Cell> = Vec::new();
    if has_curve_column {
        row.push(Cell::Text(res.curve.clone().unwrap_or_default()));
    }
    row.extend(r.carried.iter().map(|(_, v)| Cell::Text(v.clone())));
    row.extend([Some(res.rate.value), res.rate.se, res.rate.low, res.rate.high].map(Cell::Full));
    row.extend([Cell::Full(Some(res.window_start)), Cell::Full(Some(res.window_end))]);
    row.extend([Cell::Count(Some(res.points_used)), Cell::Count(Some(res.points_total))]);
    row.extend([Cell::Full(Some(res.r2)), Cell::Full(res.curvature_p)]);
    row.push(Cell::Text(res.warnings.iter().map(|w| w.code.as_str()).collect::<Vec<_>>().join(";")));
    row.push(Cell::Text(res.source.cell()));
    row
}

/// The report in parts — title, the rates table, each warning — shared by
/// the terminal and the HTML report.
pub fn parts(outcome: &RateTable) -> Vec<Part> {
    let mut header: Vec<String> = vec!["curve".into()];
    header.extend(outcome.carried_headers.iter().cloned());
    header.extend([for_people(&rate_header(outcome)), "SE".into(), "window".into(), "points".into(), "flags".into()]);
    let mut grid = Grid::new(header);
    for r in &outcome.results {
        let res = &r.result;
        let mut row = vec![res.curve.clone().unwrap_or_else(|| "—".into())];
        row.extend(r.carried.iter().map(|(_, v)| v.clone()));
        row.push(sig(res.rate.value, 5));
        row.push(res.rate.se.map_or("—".into(), |s| sig(s, 2)));
        row.push(format!("{}–{}", sig(res.window_start, 4), sig(res.window_end, 4)));
        row.push(format!("{}/{}", res.points_used, res.points_total));
        row.push(res.warnings.iter().map(|w| w.code.as_str()).collect::<Vec<_>>().join(", "));
        grid.rows.push(row);
    }
    let mut parts = vec![
        Part::Title("Initial rates from progress curves (longest initial straight-line window)".into()),
        Part::Table(grid),
    ];
    for r in &outcome.results {
        let name = r.result.curve.as_deref().unwrap_or("curve");
        parts.extend(
            r.result
                .warnings
                .iter()
                .map(|w| Part::Warning { code: w.code.to_string(), message: format!("{name}: {}", w.message) }),
        );
    }
    parts
}

fn human(outcome: &RateTable) -> String {
    let mut out = super::terminal(&parts(outcome));
    out.push_str(CAUTION);
    out.push('\n');
    out
}
