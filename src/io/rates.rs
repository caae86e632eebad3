//! The reader of `kimech rates`: long progress-curve tables (time, signal;
//! optional curve label and any other columns, which must be constant per
//! curve and are carried to the output) into one [`Curve`] per curve.

use crate::analysis::rates::Curve;
use crate::error::Result;
use crate::io::input::{ColumnSpec, Record, Table, group_by_label, rows_source};
use crate::units::ConcUnit;

const CURVE: ColumnSpec = ColumnSpec::new("curve", &["well", "progress_curve", "id"]);
const TIME: ColumnSpec = ColumnSpec::new("time", &["t"]);
const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const SIGNAL: ColumnSpec = ColumnSpec::new("signal", &["product", "absorbance", "fluorescence"]);

/// The curves of a table, each with the values of its carried columns.
#[derive(Debug, Clone)]
pub struct RatesInput {
    /// Curves in input order, with their carried (header, value) pairs.
    pub curves: Vec<(Curve, Vec<(String, String)>)>,
    /// Headers of the carried columns, in input order.
    pub carried_headers: Vec<String>,
    /// Whether the input had a curve column.
    pub has_curve_column: bool,
    /// `signal unit/time unit` when both headers carry a unit.
    pub rate_unit: Option<String>,
}

/// Reads every curve of `table`; an unreadable cell is an error at that cell.
pub fn read(table: &Table) -> Result<RatesInput> {
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
    let product_unit = table.unit_text(signal_col).and_then(ConcUnit::parse);
    let substrate_col = table.find(&SUBSTRATE).filter(|c| carried_cols.contains(c));
    let mut curves = Vec::new();
    for (label, rows) in &group_by_label(table, curve_col) {
        let carried = carried_values(table, rows, &carried_cols)?;
        let mut curve = read_curve(table, label.clone(), rows, time_col, signal_col)?;
        curve.substrate = initial_substrate(table, rows[0], substrate_col, product_unit)?;
        curves.push((curve, carried));
    }
    Ok(RatesInput {
        curves,
        carried_headers: carried_cols.iter().map(|c| table.columns[*c].header.clone()).collect(),
        has_curve_column: curve_col.is_some(),
        rate_unit,
    })
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
    let mut curve =
        Curve { label, origin: rows_source(table, rows), time: Vec::new(), signal: Vec::new(), substrate: None };
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
