//! The reader of `kimech onset`: long progress-curve tables (one reading a
//! row: compound, inhibitor, time, signal; optional curve, replicate,
//! substrate, km, enzyme) into one [`Compound`] per compound.
//!
//! Columns, units, qualifiers and located errors come from [`Table`]; this
//! file adds the grouping into curves, time units, and the checks that need
//! line numbers (times that do not increase within a curve).

use std::collections::HashMap;

use crate::analysis::onset::{Compound, Conditions, Curve, Units};
use crate::error::Result;
use crate::io::input::{ColumnSpec, Record, Table};
use crate::units::ConcUnit;

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "compound_name", "molecule", "id"]);
const INHIBITOR: ColumnSpec = ColumnSpec::new("inhibitor", &["i", "inhibitor_concentration", "concentration", "conc"]);
const TIME: ColumnSpec = ColumnSpec::new("time", &["t"]);
const SIGNAL: ColumnSpec = ColumnSpec::new("signal", &["product", "absorbance", "fluorescence"]);
const CURVE: ColumnSpec = ColumnSpec::new("curve", &["well", "progress_curve"]);
const REPLICATE: ColumnSpec = ColumnSpec::new("replicate", &["rep"]);
const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const KM: ColumnSpec = ColumnSpec::new("km", &[]);
const ENZYME: ColumnSpec = ColumnSpec::new("enzyme", &["et", "enzyme_concentration"]);

/// A unit of time.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    /// Seconds.
    Second,
    /// Minutes.
    Minute,
    /// Hours.
    Hour,
}

impl TimeUnit {
    /// Accepted spellings, for messages.
    pub const ACCEPTED: &'static str = "s, sec, min, h, hr (and their plurals)";

    /// Parses a unit of time.
    pub fn parse(text: &str) -> Option<TimeUnit> {
        match text.trim().to_lowercase().as_str() {
            "s" | "sec" | "secs" | "second" | "seconds" => Some(TimeUnit::Second),
            "min" | "mins" | "minute" | "minutes" => Some(TimeUnit::Minute),
            "h" | "hr" | "hrs" | "hour" | "hours" => Some(TimeUnit::Hour),
            _ => None,
        }
    }

    /// The symbol used in outputs.
    pub fn symbol(self) -> &'static str {
        match self {
            TimeUnit::Second => "s",
            TimeUnit::Minute => "min",
            TimeUnit::Hour => "h",
        }
    }

    fn seconds(self) -> f64 {
        match self {
            TimeUnit::Second => 1.0,
            TimeUnit::Minute => 60.0,
            TimeUnit::Hour => 3600.0,
        }
    }
}

/// Defaults and assay conditions from the command line.
#[derive(Debug, Clone, Copy, Default)]
pub struct ReadOptions {
    /// Unit of inhibitor values with none in the cell or header.
    pub inhibitor_unit: Option<ConcUnit>,
    /// Unit of time values with none in the cell or header.
    pub time_unit: Option<TimeUnit>,
    /// Substrate concentration, mol/L (a column overrides it per compound).
    pub substrate: Option<f64>,
    /// Km, mol/L (a column overrides it per compound).
    pub km: Option<f64>,
    /// Total enzyme, mol/L (a column overrides it per compound).
    pub enzyme: Option<f64>,
}

/// The compounds of a table and the units of its numbers.
#[derive(Debug, Clone)]
pub struct OnsetInput {
    /// One per compound, in input order.
    pub compounds: Vec<Compound>,
    /// Units for reporting.
    pub units: Units,
}

struct Columns {
    compound: Option<usize>,
    inhibitor: usize,
    time: usize,
    signal: usize,
    curve: Option<usize>,
    replicate: Option<usize>,
    substrate: Option<usize>,
    km: Option<usize>,
    enzyme: Option<usize>,
}

/// Reads every compound of `table`.
pub fn read(table: &Table, options: &ReadOptions) -> Result<OnsetInput> {
    let cols = Columns {
        compound: table.find(&COMPOUND),
        inhibitor: table.require(&INHIBITOR)?,
        time: table.require(&TIME)?,
        signal: table.require(&SIGNAL)?,
        curve: table.find(&CURVE),
        replicate: table.find(&REPLICATE),
        substrate: table.find(&SUBSTRATE),
        km: table.find(&KM),
        enzyme: table.find(&ENZYME),
    };
    let inhibitor_unit = table.column_unit(cols.inhibitor, options.inhibitor_unit)?;
    let time_unit = reporting_time_unit(table, cols.time, options.time_unit)?;
    let signal_unit = table.unit_text(cols.signal).map(str::to_string);
    let units = Units {
        inhibitor: inhibitor_unit.map(|u| u.symbol().to_string()),
        time: time_unit.map(|u| u.symbol().to_string()),
        signal: signal_unit.clone(),
    };
    let mut compounds = Vec::new();
    for (label, rows) in group(table, |r| cols.compound.map(|c| table.text(r, c).to_string())) {
        compounds.push(read_compound(table, &cols, label, &rows, inhibitor_unit, time_unit, options)?);
    }
    Ok(OnsetInput { compounds, units })
}

/// Rows grouped by a key, groups in order of first appearance.
fn group<K: std::hash::Hash + Eq + Clone>(table: &Table, key: impl Fn(&Record) -> K) -> Vec<(K, Vec<&Record>)> {
    let mut groups: Vec<(K, Vec<&Record>)> = Vec::new();
    let mut index: HashMap<K, usize> = HashMap::new();
    for row in &table.rows {
        let k = key(row);
        let at = *index.entry(k.clone()).or_insert_with(|| {
            groups.push((k, Vec::new()));
            groups.len() - 1
        });
        groups[at].1.push(row);
    }
    groups
}

fn read_compound(
    table: &Table,
    cols: &Columns,
    label: Option<String>,
    rows: &[&Record],
    inhibitor_unit: Option<ConcUnit>,
    time_unit: Option<TimeUnit>,
    options: &ReadOptions,
) -> Result<Compound> {
    let mut curves: Vec<Curve> = Vec::new();
    let mut index: HashMap<(String, String), usize> = HashMap::new();
    let mut last_line: Vec<(f64, u64)> = Vec::new();
    let mut first_line: Vec<u64> = Vec::new();
    for row in rows {
        let conc = table.inhibitor_concentration(row, cols.inhibitor, options.inhibitor_unit, "--inhibitor-unit")?;
        let inhibitor = inhibitor_unit.unwrap_or(conc.unit).from_molar(conc.molar);
        let curve_key = cols.curve.map_or_else(|| format!("{:e}", conc.molar), |c| table.text(row, c).to_string());
        let replicate = cols.replicate.map_or(String::new(), |c| table.text(row, c).to_string());
        let k = *index.entry((curve_key, replicate)).or_insert_with(|| {
            curves.push(Curve { inhibitor, time: Vec::new(), signal: Vec::new(), origin: String::new() });
            last_line.push((f64::NEG_INFINITY, 0));
            first_line.push(row.line);
            curves.len() - 1
        });
        if (curves[k].inhibitor - inhibitor).abs() > 1e-12 * inhibitor.abs().max(curves[k].inhibitor.abs()) {
            return Err(table.cell_error(
                row,
                cols.inhibitor,
                format!("differs from {} on earlier rows of the same curve", curves[k].inhibitor),
                "one curve has one inhibitor concentration; label different curves differently in the curve column",
            ));
        }
        let t = read_time(table, row, cols.time, time_unit)?;
        let (previous, previous_line) = last_line[k];
        if t.partial_cmp(&previous) != Some(std::cmp::Ordering::Greater) {
            return Err(table.cell_error(
                row,
                cols.time,
                format!("time does not increase: it follows {previous} on line {previous_line} of the same curve"),
                "times within a progress curve must increase strictly; give repeated curves a replicate or curve label",
            ));
        }
        last_line[k] = (t, row.line);
        curves[k].time.push(t);
        curves[k].signal.push(table.number(row, cols.signal)?);
        curves[k].origin = crate::io::input::line_span(first_line[k], row.line);
    }
    same_on_every_row(table, rows, &[cols.substrate, cols.km, cols.enzyme])?;
    let conditions = conditions(table, cols, rows[0], inhibitor_unit, options)?;
    let origin = crate::io::input::rows_source(table, rows);
    Ok(Compound { label, origin, curves, conditions })
}

/// The assay conditions describe the whole compound: a row that differs from
/// the compound's first row is an error, not silently ignored.
fn same_on_every_row(table: &Table, rows: &[&Record], cols: &[Option<usize>]) -> Result<()> {
    let first = rows[0];
    for row in &rows[1..] {
        if let Some(c) = cols.iter().flatten().find(|&&c| table.text(row, c) != table.text(first, c)) {
            return Err(table.cell_error(
                row,
                *c,
                format!("differs from '{}' on line {} of the same compound", table.text(first, *c), first.line),
                "substrate, km and enzyme describe the compound's assay and must be the same on each of its rows",
            ));
        }
    }
    Ok(())
}

/// The unit of the time column: the header's, else the flag's, else that of
/// the first cell that carries one.
fn reporting_time_unit(table: &Table, col: usize, default: Option<TimeUnit>) -> Result<Option<TimeUnit>> {
    if let Some(text) = table.unit_text(col) {
        return TimeUnit::parse(text).map(Some).ok_or_else(|| {
            table.cell_error(
                &Record { line: table.header_line, cells: table.columns.iter().map(|c| c.header.clone()).collect() },
                col,
                "the unit in the header is not a unit of time",
                format!("use one of {}", TimeUnit::ACCEPTED),
            )
        });
    }
    if default.is_some() {
        return Ok(default);
    }
    Ok(table.rows.iter().find_map(|r| split_unit(table.text(r, col)).1.and_then(TimeUnit::parse)))
}

/// "30 s" → ("30", Some("s")).
fn split_unit(text: &str) -> (&str, Option<&str>) {
    match text.find(|c: char| c.is_alphabetic() && c != 'e' && c != 'E') {
        Some(at) => (text[..at].trim(), Some(text[at..].trim())),
        None => (text.trim(), None),
    }
}

/// A time in the reporting unit.
fn read_time(table: &Table, row: &Record, col: usize, unit: Option<TimeUnit>) -> Result<f64> {
    let text = table.text(row, col);
    let expected = format!("a time such as 30 or '30 s' (units: {})", TimeUnit::ACCEPTED);
    let (number, cell_unit) = split_unit(text);
    let value: f64 = number
        .parse()
        .ok()
        .filter(|v: &f64| v.is_finite())
        .ok_or_else(|| table.cell_error(row, col, "not a number", expected.clone()))?;
    match (cell_unit, unit) {
        (None, _) => Ok(value),
        (Some(u), target) => {
            let from = TimeUnit::parse(u)
                .ok_or_else(|| table.cell_error(row, col, "unknown unit of time", expected.clone()))?;
            let to = target.unwrap_or(from);
            Ok(value * from.seconds() / to.seconds())
        }
    }
}

/// Substrate, Km and enzyme of a compound: columns (first row) over flags.
fn conditions(
    table: &Table,
    cols: &Columns,
    row: &Record,
    inhibitor_unit: Option<ConcUnit>,
    options: &ReadOptions,
) -> Result<Conditions> {
    let molar = |col: Option<usize>, flag: Option<f64>, name: &str| -> Result<Option<f64>> {
        match col.filter(|&c| !table.text(row, c).is_empty()) {
            Some(c) => {
                let v = table.concentration(row, c, None, &format!("a unit in the {name} header"))?;
                if v.qualifier.is_bound() || v.molar <= 0.0 {
                    return Err(table.cell_error(row, c, "not an exact, positive concentration", "e.g. '50 uM'"));
                }
                Ok(Some(v.molar))
            }
            None => Ok(flag),
        }
    };
    let substrate = molar(cols.substrate, options.substrate, "substrate")?;
    let km = molar(cols.km, options.km, "km")?;
    let enzyme = molar(cols.enzyme, options.enzyme, "enzyme")?;
    let signal_unit = table.unit_text(cols.signal).and_then(ConcUnit::parse);
    Ok(Conditions {
        substrate,
        km,
        enzyme: enzyme.zip(inhibitor_unit).map(|(e, u)| u.from_molar(e)),
        substrate_as_signal: substrate.zip(signal_unit).map(|(s, u)| u.from_molar(s)),
    })
}
