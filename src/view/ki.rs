//! Views of `kimech ki`: one row per input row → terminal table, CSV and
//! JSON; CSV and JSON written as rows come (memory does not grow with the file).

use std::io::Write;

use serde::Serialize;

use super::{CAUTION, Grid};
use crate::convert::{Conversion, MechanismSource};
use crate::error::{Error, Result};
use crate::io::Format;
use crate::io::output::{Cell, CsvExport, JsonRows, qualifier_cell};
use crate::report::Code;
use crate::units::{ConcUnit, Qualifier, for_people, potency};

/// Output columns of the CSV before the carried ones (a carried column with one
/// of these names is renamed `input <name>`).
pub const CSV_KEYS: [&str; 20] = [
    "row",
    "source",
    "compound",
    "target",
    "endpoint",
    "qualifier",
    "ki",
    "ki_low",
    "ki_high",
    "pki",
    "pki_qualifier",
    "interval_method",
    "method",
    "mechanism",
    "mechanism_source",
    "range_low",
    "range_high",
    "flags",
    "conditions",
    "error",
];

/// A constant with its unit, qualifier and interval (the JSON `ki` object).
#[derive(Debug, Clone, Serialize)]
pub struct KiValue {
    /// The constant, or null when the row failed.
    pub value: Option<f64>,
    /// Unit of value, low and high.
    pub unit: String,
    /// `=` for a number, `~` approximate, `<`/`>`/`<=`/`>=` for a bound.
    pub qualifier: Qualifier,
    /// Lower end of the interval.
    pub low: Option<f64>,
    /// Upper end of the interval.
    pub high: Option<f64>,
}

/// The smallest and largest constant over the one-constant relations.
#[derive(Debug, Clone, Serialize)]
pub struct Range {
    /// Smallest (the uncompetitive or competitive one).
    pub low: f64,
    /// Largest.
    pub high: f64,
    /// Unit of both.
    pub unit: String,
}

/// One output row per input row (the JSON contract of issue 5, plus `target`,
/// `range`, `interval_method` and `messages`).
#[derive(Debug, Clone, Serialize)]
pub struct KiRow {
    /// Input file, as named on the command line (`<stdin>` for `-`).
    pub source: String,
    /// Input line number.
    pub row: u64,
    /// Confidence level of the interval (that of the IC50 interval it maps).
    pub confidence: f64,
    /// Compound as written.
    pub compound: String,
    /// The constant.
    pub ki: KiValue,
    /// −log10 of the constant in mol/L; for a bound, the bound (its direction reversed).
    pub pki: Option<f64>,
    /// Qualifier of `pki`: that of `ki` with a bound's direction reversed.
    pub pki_qualifier: Qualifier,
    /// `Ki` or `Kiu`.
    pub endpoint: &'static str,
    /// The relation used, with formula and source.
    pub method: String,
    /// The mechanism the relation assumes.
    pub mechanism: &'static str,
    /// `measured` (given in the input) or `assumed`.
    pub mechanism_source: MechanismSource,
    /// Codes of the assumption checks that fired.
    pub flags: Vec<Code>,
    /// Why the row has no constant; null when it converted.
    pub error: Option<String>,
    /// Target, when the input has a target column.
    pub target: Option<String>,
    /// For an unknown mechanism, the range over the three one-constant relations.
    pub range: Option<Range>,
    /// How the interval was obtained; null when there is none.
    pub interval_method: Option<&'static str>,
    /// The flags in words, in the order of `flags`.
    pub messages: Vec<String>,
    /// The conditions as used, for the CSV (`IC50 = …; S = …`).
    #[serde(skip)]
    pub conditions: String,
    /// Carried-through cells, in column order.
    #[serde(skip)]
    pub carried: Vec<String>,
}

/// The JSON document: `{"results": [...]}`.
#[derive(Debug, Serialize)]
pub struct Report<'a> {
    /// One result per input row, in order.
    pub results: &'a [KiRow],
}

impl KiRow {
    /// Fills the row from a conversion, constants in `unit`.
    pub fn fill(&mut self, c: &Conversion, unit: ConcUnit) {
        let row = self;
        let out = |m: f64| unit.from_molar(m);
        row.ki = KiValue {
            value: Some(out(c.ki)),
            unit: unit.symbol().into(),
            qualifier: c.qualifier,
            low: c.low.map(out),
            high: c.high.map(out),
        };
        row.pki = Some(crate::units::p_value(c.ki));
        row.pki_qualifier = c.qualifier.reversed();
        row.endpoint = c.endpoint.name();
        row.method = c.method.clone();
        row.mechanism = c.mechanism.name();
        row.mechanism_source = c.mechanism_source;
        row.flags = c.flags.iter().map(|w| w.code).collect();
        row.messages = c.flags.iter().map(|w| w.message.clone()).collect();
        row.range = c.range.map(|(lo, hi)| Range { low: out(lo), high: out(hi), unit: unit.symbol().into() });
        row.interval_method = c.interval_method;
    }
}

/// Writes rows as they come: CSV and JSON straight through, the table at the end.
pub enum RowWriter<W: Write> {
    /// CSV rows.
    Csv(Box<CsvExport<W>>),
    /// JSON rows.
    Json(JsonRows<W>),
    /// The table, written at the end.
    Table(W, Vec<KiRow>),
}

impl<W: Write> RowWriter<W> {
    /// Starts the output (the CSV header, the JSON head).
    pub fn start(format: Format, carried: &[String], unit: ConcUnit, out: W) -> Result<RowWriter<W>> {
        Ok(match format {
            Format::Csv => RowWriter::Csv(Box::new(CsvExport::new(out, &csv_header(carried, unit))?)),
            Format::Json => RowWriter::Json(JsonRows::start(out, &Report { results: &[] })?),
            Format::Table => RowWriter::Table(out, Vec::new()),
        })
    }

    /// Writes (or keeps, for the table) one row.
    pub fn push(&mut self, row: KiRow) -> Result<()> {
        match self {
            RowWriter::Csv(w) => w.row(&csv_cells(&row)),
            RowWriter::Json(w) => w.row(&row),
            RowWriter::Table(_, rows) => {
                rows.push(row);
                Ok(())
            }
        }
    }

    /// Ends the output.
    pub fn finish(self) -> Result<()> {
        match self {
            RowWriter::Csv(w) => w.finish().map(|_| ()),
            RowWriter::Json(w) => w.finish().map(|_| ()),
            RowWriter::Table(mut out, rows) => {
                out.write_all(human(&rows).as_bytes()).map_err(|e| Error::Serialise(e.to_string()))
            }
        }
    }
}

/// Serialises the rows in the chosen format.
pub fn render(rows: &[KiRow], carried: &[String], format: Format) -> Result<Vec<u8>> {
    if format == Format::Table {
        return Ok(human(rows).into_bytes());
    }
    let unit = rows.first().and_then(|r| ConcUnit::parse(&r.ki.unit)).unwrap_or(ConcUnit::Nanomolar);
    let mut writer = RowWriter::start(format, carried, unit, Vec::new())?;
    for r in rows {
        writer.push(r.clone())?;
    }
    match writer {
        RowWriter::Csv(w) => w.finish(),
        RowWriter::Json(w) => w.finish(),
        RowWriter::Table(out, _) => Ok(out),
    }
}

/// The CSV header `rank` reads: unit in the headers of every concentration,
/// then the carried columns.
fn csv_header(carried: &[String], unit: ConcUnit) -> Vec<String> {
    let mut header: Vec<String> = CSV_KEYS
        .iter()
        .map(|k| match *k {
            "ki" | "ki_low" | "ki_high" | "range_low" | "range_high" => format!("{k} ({unit})"),
            _ => k.to_string(),
        })
        .collect();
    header.extend(carried.iter().cloned());
    header
}

/// One CSV row, in the order of [`CSV_KEYS`]: numbers as numbers, an exact
/// qualifier as an empty cell, text (carried cells too) through the guard.
fn csv_cells(r: &KiRow) -> Vec<Cell> {
    let text = |s: &str| Cell::Text(s.to_string());
    let mut cells = vec![
        Cell::Count(Some(r.row as usize)),
        text(&r.source),
        text(&r.compound),
        text(r.target.as_deref().unwrap_or("")),
        text(r.endpoint),
        Cell::Text(qualifier_cell(r.ki.qualifier)),
        Cell::Number(r.ki.value),
        Cell::Number(r.ki.low),
        Cell::Number(r.ki.high),
        Cell::Number(r.pki),
        Cell::Text(if r.pki.is_some() { qualifier_cell(r.pki_qualifier) } else { String::new() }),
        text(r.interval_method.unwrap_or("")),
        text(&r.method),
        text(r.mechanism),
        text(if r.mechanism_source == MechanismSource::Measured { "measured" } else { "assumed" }),
        Cell::Number(r.range.as_ref().map(|g| g.low)),
        Cell::Number(r.range.as_ref().map(|g| g.high)),
        Cell::Text(crate::report::code::joined(&r.flags, ";")),
        text(&r.conditions),
        text(r.error.as_deref().unwrap_or("")),
    ];
    cells.extend(r.carried.iter().map(|c| text(c)));
    cells
}

fn constant_text(r: &KiRow) -> String {
    match r.ki.value {
        None => "—".into(),
        Some(v) => {
            let q = if r.ki.qualifier == Qualifier::Equal { String::new() } else { format!("{} ", r.ki.qualifier) };
            format!("{} {q}{} {}", r.endpoint, potency(v), for_people(&r.ki.unit))
        }
    }
}

fn pki_text(r: &KiRow) -> String {
    match r.pki {
        None => "—".into(),
        Some(p) if r.pki_qualifier != Qualifier::Equal => format!("{} {:.2}", r.pki_qualifier, p),
        Some(p) => format!("{p:.2}"),
    }
}

/// The conversions as table cells, shared by the terminal and the HTML
/// report: the table, the method behind each footnote number, and every
/// error, range and flag in words.
pub struct KiTable {
    /// One row per input row, in input order.
    pub grid: Grid,
    /// The relation behind footnote `[k]` (k = index + 1).
    pub methods: Vec<String>,
    /// Errors, ranges and flags in words, one line each, with the interval methods last.
    pub notes: Vec<String>,
    /// Which rows carry an error or a flag (for listing them first).
    pub flagged: Vec<bool>,
}

/// Builds the [`KiTable`] of converted rows.
pub fn ki_table(rows: &[KiRow]) -> KiTable {
    let mut methods: Vec<String> = Vec::new();
    let interval_header = format!("interval ({})", rows.first().map_or("nM".to_string(), |r| for_people(&r.ki.unit)));
    let mut grid = Grid::new(
        ["line", "compound", "target", "constant", "pKi", &interval_header, "mechanism", "method", "flags"]
            .map(String::from)
            .to_vec(),
    );
    for r in rows {
        // Failed rows get no footnote, so the numbers in the table and the legend match.
        let m = match methods.iter().position(|m| *m == r.method) {
            _ if r.error.is_some() => 0,
            Some(i) => i + 1,
            None => {
                methods.push(r.method.clone());
                methods.len()
            }
        };
        let interval = match (r.ki.low, r.ki.high) {
            (None, None) => "—".to_string(),
            (lo, hi) => format!("{} – {}", lo.map_or("0".into(), potency), hi.map_or("unbounded".into(), potency)),
        };
        let source = if r.mechanism_source == MechanismSource::Measured { "measured" } else { "assumed" };
        grid.rows.push(vec![
            r.row.to_string(),
            r.compound.clone(),
            r.target.clone().unwrap_or_default(),
            constant_text(r),
            pki_text(r),
            interval,
            format!("{} ({source})", r.mechanism),
            if r.error.is_some() { "—".into() } else { format!("[{m}]") },
            if r.error.is_some() { "ERROR".into() } else { crate::report::code::joined(&r.flags, " ") },
        ]);
    }
    let flagged = rows.iter().map(|r| r.error.is_some() || !r.flags.is_empty()).collect();
    KiTable { grid, methods, notes: notes(rows), flagged }
}

/// Every error, range and flag in words, then how the intervals were made.
fn notes(rows: &[KiRow]) -> Vec<String> {
    let mut out = Vec::new();
    for r in rows {
        let who = format!("line {} {}", r.row, r.compound);
        if let Some(e) = &r.error {
            out.push(format!("{who}: ERROR: {e}"));
        }
        if let Some(g) = &r.range {
            out.push(format!(
                "{who}: over the competitive, noncompetitive and uncompetitive relations the constant spans {}{} – {} {}",
                if r.ki.qualifier.is_bound() { format!("{} ", r.ki.qualifier) } else { String::new() },
                potency(g.low),
                potency(g.high),
                for_people(&g.unit)
            ));
        }
        for (code, message) in r.flags.iter().zip(&r.messages) {
            out.push(format!("{who} [{code}]: {message}"));
        }
    }
    let mut interval_methods: Vec<&str> = Vec::new();
    for m in rows.iter().filter_map(|r| r.interval_method) {
        if !interval_methods.contains(&m) {
            interval_methods.push(m);
        }
    }
    out.extend(interval_methods.into_iter().map(|m| format!("interval: {m}")));
    out
}

/// The human-readable report: one line per row, methods as a legend, then
/// ranges, flags and errors in words.
pub fn human(rows: &[KiRow]) -> String {
    let table = ki_table(rows);
    let mut out = format!("IC50 → Ki\n{}\n", table.grid.terminal());
    for (i, m) in table.methods.iter().enumerate() {
        out.push_str(&format!("[{}] {m}\n", i + 1));
    }
    for note in &table.notes {
        out.push_str(&format!("{note}\n"));
    }
    out.push('\n');
    out.push_str(CAUTION);
    out.push('\n');
    out
}
