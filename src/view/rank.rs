//! Views of `kimech rank`: ranked rows → terminal table, JSON and the
//! registry CSV (declared in [`crate::view::registry`]), written one row at a time.

use std::io::Write;

use serde::Serialize;

use super::CAUTION;
use crate::analysis::rank::{Bounded, RankRow};
use crate::error::{Error, Result};
use crate::io::Format;
use crate::io::output::{new_grid, sig};
use crate::units::{ConcUnit, Qualifier, for_people, potency};
use crate::view::registry::{self, REGISTRY_VERSION};

/// The JSON document: `{"unit": …, "tool_version": …, "registry_version": …, "results": [...]}`;
/// Ki values in mol/L are converted to `unit`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// Unit of every Ki, low and high.
    pub unit: String,
    /// The tool and version that made it.
    pub tool_version: String,
    /// Version of the registry contract the rows follow.
    pub registry_version: u32,
    /// Ranked rows.
    pub results: Vec<RankRow>,
}

/// The version string written into every export.
pub fn tool_version() -> String {
    crate::io::provenance::tool()
}

/// Serialises ranked rows (Ki in mol/L) in the chosen format, Ki values in `unit`.
pub fn render(rows: &[RankRow], unit: ConcUnit, format: Format) -> Result<Vec<u8>> {
    let mut bytes = Vec::new();
    render_to(rows.iter().cloned(), unit, format, &mut bytes)?;
    Ok(bytes)
}

/// [`render`] into a writer, one row at a time (no second copy of the rows).
pub fn render_to(
    rows: impl Iterator<Item = RankRow>,
    unit: ConcUnit,
    format: Format,
    out: &mut impl Write,
) -> Result<()> {
    let io = |e: std::io::Error| Error::Serialise(e.to_string());
    match format {
        Format::Json => {
            let head = Report {
                unit: unit.symbol().into(),
                tool_version: tool_version(),
                registry_version: REGISTRY_VERSION,
                results: Vec::new(),
            };
            let mut json = crate::io::output::JsonRows::start(out, &head)?;
            for r in rows {
                json.row(&in_unit(&r, unit))?;
            }
            json.finish().map(|_| ())
        }
        Format::Csv => {
            let context = registry::Context { unit, tool: tool_version() };
            registry::write(rows, &context, out).map(|_| ())
        }
        Format::Table => {
            let converted: Vec<RankRow> = rows.map(|r| in_unit(&r, unit)).collect();
            out.write_all(human(&converted, unit).as_bytes()).map_err(io)
        }
    }
}

/// A ranked row (Ki in mol/L) with its constants expressed in `unit`.
pub fn in_unit(r: &RankRow, unit: ConcUnit) -> RankRow {
    let f = |v: Option<f64>| v.map(|m| unit.from_molar(m));
    let each = |list: &[Bounded]| {
        list.iter().map(|b| Bounded { qualifier: b.qualifier, value: unit.from_molar(b.value) }).collect()
    };
    RankRow {
        ki: f(r.ki),
        low: f(r.low),
        high: f(r.high),
        censored: each(&r.censored),
        values: each(&r.values),
        ..r.clone()
    }
}

fn interval_text(r: &RankRow) -> String {
    match (r.low, r.high) {
        (None, None) => String::new(),
        (lo, hi) => {
            format!("{} to {}", lo.map_or("0".into(), potency), hi.map_or("unbounded".into(), potency))
        }
    }
}

fn bounded_text(b: Option<Bounded>, digits: usize) -> String {
    match b {
        None => "—".into(),
        Some(b) if b.qualifier.is_bound() => format!("{} {}", b.qualifier, sig(b.value, digits)),
        Some(b) => sig(b.value, digits),
    }
}

/// The ranking as table cells, shared by the terminal table and the HTML
/// report: (header, one row of cells per ranked row, the method footnotes
/// `[k] method` in order of first use).
pub struct RankTable {
    /// Column headings.
    pub header: Vec<String>,
    /// Cells, one row per ranked row, in ranking order.
    pub rows: Vec<Vec<String>>,
    /// The method behind each footnote number.
    pub methods: Vec<String>,
}

/// Builds the [`RankTable`] of ranked rows whose constants are in `unit`.
pub fn rank_table(rows: &[RankRow], unit: ConcUnit) -> RankTable {
    let versus = rows.iter().find_map(|r| r.versus.clone());
    let mut header: Vec<String> =
        ["rank", "compound", "target", "constant", "pKi (SD)", "n", "interval", "LE", "mechanism", "method", "flags"]
            .map(String::from)
            .to_vec();
    if let Some(v) = &versus {
        header.insert(8, format!("ΔpKi vs {v}"));
    }
    let mut methods: Vec<String> = Vec::new();
    let mut cells_of_rows = Vec::with_capacity(rows.len());
    for r in rows {
        let m = if r.method.is_empty() {
            "—".to_string()
        } else {
            let i = methods.iter().position(|m| *m == r.method).unwrap_or_else(|| {
                methods.push(r.method.clone());
                methods.len() - 1
            });
            format!("[{}]", i + 1)
        };
        let mut cells = vec![
            r.rank.map_or("—".into(), |k| k.to_string()),
            r.compound.clone(),
            r.target.clone(),
            constant_text(r, unit),
            pki_text(r),
            if r.n_censored > 0 { format!("{} + {} bound", r.n, r.n_censored) } else { r.n.to_string() },
            match interval_text(r) {
                t if t.is_empty() => "—".into(),
                t => t,
            },
            bounded_text(r.ligand_efficiency, 2),
            r.mechanism.clone(),
            m,
            if r.error.is_some() {
                "ERROR".into()
            } else {
                r.flags.iter().map(|f| f.code.as_str()).collect::<Vec<_>>().join(" ")
            },
        ];
        if let Some(v) = &versus {
            cells.insert(8, if &r.target == v { "".into() } else { bounded_text(r.delta_pki, 2) });
        }
        cells_of_rows.push(cells);
    }
    RankTable { header, rows: cells_of_rows, methods }
}

fn constant_text(r: &RankRow, unit: ConcUnit) -> String {
    match r.ki {
        None => format!("{} —", r.endpoint),
        Some(v) => {
            let q = if r.qualifier == Qualifier::Equal { String::new() } else { format!("{} ", r.qualifier) };
            format!("{} {q}{} {}", r.endpoint, potency(v), for_people(unit.symbol()))
        }
    }
}

fn pki_text(r: &RankRow) -> String {
    match (r.pki, r.pki_sd) {
        (None, _) => "—".into(),
        (Some(p), _) if r.pki_qualifier.is_bound() => format!("{} {p:.2}", r.pki_qualifier),
        (Some(p), sd) => {
            let q = if r.pki_qualifier == Qualifier::About { "~ " } else { "" };
            match sd {
                Some(sd) => format!("{q}{p:.2} ({sd:.2})"),
                None => format!("{q}{p:.2}"),
            }
        }
    }
}

/// Every error and flag in words, one line each (`compound on target [code]: message`).
pub fn row_notes(rows: &[RankRow]) -> Vec<String> {
    let mut notes = Vec::new();
    for r in rows {
        if let Some(e) = &r.error {
            notes.push(format!("{} on {}: no value: {e}", r.compound, r.target));
        }
        for f in r.flags.iter().filter(|f| f.message != "carried from the input") {
            notes.push(format!("{} on {} [{}]: {}", r.compound, r.target, f.code, f.message));
        }
    }
    notes
}

/// What the ligand-efficiency column means, with its source.
pub const LE_NOTE: &str = "LE = 1.37·pKi / heavy atoms, kcal/mol per heavy atom (Hopkins, Groom & Alex 2004).";

/// The human-readable ranking.
pub fn human(rows: &[RankRow], unit: ConcUnit) -> String {
    let table = rank_table(rows, unit);
    let mut grid = new_grid(table.header);
    for cells in table.rows {
        grid.add_row(cells);
    }
    let mut out = format!("Ranking by pKi (most potent first within each target)\n{grid}\n");
    for (i, m) in table.methods.iter().enumerate() {
        out.push_str(&format!("[{}] {m}\n", i + 1));
    }
    for note in row_notes(rows) {
        out.push_str(&format!("{note}\n"));
    }
    out.push_str(&format!("{LE_NOTE}\n\n"));
    out.push_str(CAUTION);
    out.push('\n');
    out
}
