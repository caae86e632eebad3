//! `kimech rates`: initial rates from progress curves, written so that the
//! output feeds `kimech km` (and the rate-matrix command) directly.

use std::collections::HashMap;

use serde::Serialize;

use super::{CAUTION, OutputArgs, finish, parse_fraction};
use crate::analysis::rates::{Curve, Options, RateResult, analyse};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::output::{json_bytes, new_grid, sig};
use crate::io::{ColumnSpec, Format, Table, neutralise_formula, write_output};
use crate::units::ConcUnit;

const CURVE: ColumnSpec = ColumnSpec::new("curve", &["well", "progress_curve", "id"]);
const TIME: ColumnSpec = ColumnSpec::new("time", &["t"]);
const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const SIGNAL: ColumnSpec = ColumnSpec::new("signal", &["product", "absorbance", "fluorescence"]);

/// Initial rates from progress curves: the slope of the longest initial
/// window that a straight line describes. Other columns (substrate,
/// inhibitor, compound…) must be constant per curve and are carried to the
/// output, so it can be given to `kimech km` as it is.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns time, signal and optionally curve; `-` reads stdin.
    pub file: String,
    /// The smallest initial window tried, in points (at least 3).
    #[arg(long, default_value_t = 4)]
    pub min_points: usize,
    /// Significance level of the t² term at which the window stops growing.
    #[arg(long, default_value_t = 0.05, value_parser = parse_fraction)]
    pub curvature_alpha: f64,
    /// Largest fraction of the substrate converted inside the window (common practice: 0.1);
    /// checked when the signal is a product concentration and a substrate column has a unit.
    #[arg(long, default_value_t = 0.1, value_parser = parse_fraction)]
    pub max_conversion: f64,
    /// Confidence level of the rate intervals.
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// One curve's result with the columns carried from its rows.
#[derive(Debug, Clone, Serialize)]
pub struct CarriedResult {
    /// The rate and its window.
    #[serde(flatten)]
    pub result: RateResult,
    /// The other columns of the curve's rows, by header.
    pub carried: Vec<(String, String)>,
}

/// `{"results": [...]}`.
#[derive(Debug, Serialize)]
struct Report<'a> {
    results: &'a [CarriedResult],
}

/// What one run produced.
pub struct Outcome {
    /// Results in input order.
    pub results: Vec<CarriedResult>,
    /// Errors of curves that could not be used.
    pub failures: Vec<Error>,
    /// Number of curves.
    pub total: usize,
    /// Headers of the carried columns, in input order.
    pub carried_headers: Vec<String>,
    /// Whether the input had a curve column.
    pub has_curve_column: bool,
}

/// Runs `kimech rates`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, args)?;
    let bytes = render(&outcome, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    finish(&outcome.failures, outcome.total, "curves")
}

/// Reads the curves of `table` and finds each one's initial rate.
pub fn process(table: &Table, args: &Args) -> Result<Outcome> {
    let time_col = table.require(&TIME)?;
    let signal_col = table.require(&SIGNAL)?;
    let curve_col = table.find(&CURVE);
    let carried_cols: Vec<usize> = (0..table.columns.len())
        .filter(|c| ![Some(time_col), Some(signal_col), curve_col].contains(&Some(*c)))
        .collect();
    let rate_unit = match (table.unit_text(signal_col), table.unit_text(time_col)) {
        (Some(s), Some(t)) => Some(format!("{s}/{t}")),
        _ => None,
    };
    let options = Options {
        min_points: args.min_points,
        curvature_alpha: args.curvature_alpha,
        max_conversion: args.max_conversion,
        confidence: args.confidence,
        rate_unit,
    };
    let mut results = Vec::new();
    let mut failures = Vec::new();
    let groups = group_rows(table, curve_col);
    let product_unit = table.unit_text(signal_col).and_then(ConcUnit::parse);
    let substrate_col = table.find(&SUBSTRATE).filter(|c| carried_cols.contains(c));
    for (label, rows) in &groups {
        let carried = carried_values(table, rows, &carried_cols)?;
        let mut curve = read_curve(table, label.clone(), rows, time_col, signal_col)?;
        curve.substrate = initial_substrate(table, rows[0], substrate_col, product_unit)?;
        match analyse(&curve, &options) {
            Ok(result) => results.push(CarriedResult { result, carried }),
            Err(e) => failures.push(e),
        }
    }
    Ok(Outcome {
        results,
        failures,
        total: groups.len(),
        carried_headers: carried_cols.iter().map(|c| table.columns[*c].header.clone()).collect(),
        has_curve_column: curve_col.is_some(),
    })
}

fn group_rows(table: &Table, curve_col: Option<usize>) -> Vec<(Option<String>, Vec<&Record>)> {
    let mut groups: Vec<(Option<String>, Vec<&Record>)> = Vec::new();
    let mut index: HashMap<Option<String>, usize> = HashMap::new();
    for row in &table.rows {
        let label = curve_col.map(|c| table.text(row, c).to_string());
        let k = *index.entry(label.clone()).or_insert_with(|| {
            groups.push((label, Vec::new()));
            groups.len() - 1
        });
        groups[k].1.push(row);
    }
    groups
}

/// The carried columns' values, which must not change within a curve.
fn carried_values(table: &Table, rows: &[&Record], cols: &[usize]) -> Result<Vec<(String, String)>> {
    let first = rows[0];
    for row in &rows[1..] {
        if let Some(&c) = cols.iter().find(|&&c| table.text(row, c) != table.text(first, c)) {
            return Err(table.cell_error(
                row,
                c,
                format!("differs from '{}' on line {} of the same curve", table.text(first, c), first.line),
                "columns other than curve, time and signal describe the whole curve and must be the same on each of its rows",
            ));
        }
    }
    Ok(cols.iter().map(|&c| (table.columns[c].header.clone(), table.text(first, c).to_string())).collect())
}

/// The curve's substrate concentration in the product's unit, when both are
/// concentrations; a substrate cell without any unit is then an error.
fn initial_substrate(
    table: &Table,
    row: &Record,
    col: Option<usize>,
    product: Option<ConcUnit>,
) -> Result<Option<f64>> {
    match (col, product) {
        (Some(c), Some(unit)) => {
            let s = table.concentration(row, c, None, "a unit in the substrate header")?;
            Ok(Some(unit.from_molar(s.molar)))
        }
        _ => Ok(None),
    }
}

fn read_curve(table: &Table, label: Option<String>, rows: &[&Record], t: usize, y: usize) -> Result<Curve> {
    let mut curve = Curve {
        label,
        origin: format!("{}, {}", table.source, super::rows_origin(rows)),
        time: Vec::new(),
        signal: Vec::new(),
        substrate: None,
    };
    let mut previous: Option<(f64, u64)> = None;
    for row in rows {
        let time = table.number(row, t)?;
        check_time(table, row, t, time, previous)?;
        previous = Some((time, row.line));
        curve.time.push(time);
        curve.signal.push(table.number(row, y)?);
    }
    Ok(curve)
}

/// A progress curve runs forward from the start of the reaction: a negative
/// time, or one earlier than the curve's previous row, is a typo or rows
/// from two curves mixed together, and would silently be re-sorted.
fn check_time(table: &Table, row: &Record, col: usize, time: f64, previous: Option<(f64, u64)>) -> Result<()> {
    if time < 0.0 {
        return Err(table.cell_error(
            row,
            col,
            "the time is negative",
            "times count from the start of the reaction (0 or more)",
        ));
    }
    match previous {
        Some((before, line)) if time < before => Err(table.cell_error(
            row,
            col,
            format!("the time goes back from {before} on line {line} of the same curve"),
            "list each curve's rows in time order, and give each curve its own label in the curve column",
        )),
        _ => Ok(()),
    }
}

/// Serialises results in the chosen format.
pub fn render(outcome: &Outcome, format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: &outcome.results }),
        Format::Csv => csv(outcome),
        Format::Table => Ok(human(outcome).into_bytes()),
    }
}

fn rate_header(outcome: &Outcome) -> String {
    match outcome.results.first().and_then(|r| r.result.rate.unit.as_deref()) {
        Some(unit) => format!("rate ({unit})"),
        None => "rate".to_string(),
    }
}

/// CSV with the curve label, the carried columns as they were headed, then
/// the rate and its window: the columns `kimech km` reads.
fn csv(outcome: &Outcome) -> Result<Vec<u8>> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let mut header: Vec<String> = Vec::new();
    if outcome.has_curve_column {
        header.push("curve".into());
    }
    header.extend(outcome.carried_headers.iter().cloned());
    header.push(rate_header(outcome));
    for h in [
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
    ] {
        header.push(h.into());
    }
    let serialise_error = |e: csv::Error| Error::Serialise(e.to_string());
    writer.write_record(&header).map_err(serialise_error)?;
    let number = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v}"));
    for r in &outcome.results {
        let res = &r.result;
        let mut row: Vec<String> = Vec::new();
        if outcome.has_curve_column {
            row.push(neutralise_formula(res.curve.as_deref().unwrap_or("")));
        }
        row.extend(r.carried.iter().map(|(_, v)| neutralise_formula(v)));
        row.push(format!("{}", res.rate.value));
        row.extend([number(res.rate.se), number(res.rate.low), number(res.rate.high)]);
        row.extend([format!("{}", res.window_start), format!("{}", res.window_end)]);
        row.extend([res.points_used.to_string(), res.points_total.to_string(), format!("{}", res.r2)]);
        row.push(number(res.curvature_p));
        row.push(res.warnings.iter().map(|w| w.code).collect::<Vec<_>>().join(";"));
        writer.write_record(&row).map_err(serialise_error)?;
    }
    writer.into_inner().map_err(|e| Error::Serialise(e.to_string()))
}

fn human(outcome: &Outcome) -> String {
    let mut header: Vec<String> = vec!["curve".into()];
    header.extend(outcome.carried_headers.iter().cloned());
    header.extend([rate_header(outcome), "SE".into(), "window".into(), "points".into(), "flags".into()]);
    let mut grid = new_grid(header);
    for r in &outcome.results {
        let res = &r.result;
        let mut row = vec![res.curve.clone().unwrap_or_else(|| "—".into())];
        row.extend(r.carried.iter().map(|(_, v)| v.clone()));
        row.push(sig(res.rate.value, 5));
        row.push(res.rate.se.map_or("—".into(), |s| sig(s, 2)));
        row.push(format!("{}–{}", sig(res.window_start, 4), sig(res.window_end, 4)));
        row.push(format!("{}/{}", res.points_used, res.points_total));
        row.push(res.warnings.iter().map(|w| w.code).collect::<Vec<_>>().join(", "));
        grid.add_row(row);
    }
    let mut out = format!("Initial rates from progress curves (longest initial straight-line window)\n{grid}\n");
    for r in &outcome.results {
        for w in &r.result.warnings {
            let name = r.result.curve.as_deref().unwrap_or("curve");
            out.push_str(&format!("warning [{}] {name}: {}\n", w.code, w.message));
        }
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}
