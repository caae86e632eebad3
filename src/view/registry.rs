//! The registry export of `kimech rank --format csv`: a versioned, stable
//! contract (README.md, "Registry export"). Its columns are declared once,
//! here, with their meaning; the header and every row come from this list, and
//! every cell goes through [`CsvExport`] (text guarded against spreadsheet
//! formulas, numbers written as numbers).

use std::io::Write;

use crate::analysis::rank::{Bounded, RankRow};
use crate::error::Result;
use crate::io::output::{Cell, CsvExport, export_number, qualifier_cell};
use crate::units::ConcUnit;

/// Version of the column contract. Raised whenever a column is renamed,
/// removed, reordered or changes meaning; adding a column at the end raises it too.
pub const REGISTRY_VERSION: u32 = 2;

/// What every cell needs besides its row.
pub struct Context {
    /// Unit of `value`, `low`, `high` and `values`.
    pub unit: ConcUnit,
    /// `kimech <version>`.
    pub tool: String,
}

/// One registry column: its name, what it holds, and how a row fills it.
pub struct Column {
    /// Header name.
    pub name: &'static str,
    /// What the column holds (README.md lists the same).
    pub meaning: &'static str,
    /// The cell of a row (Ki values in mol/L; the context converts).
    pub value: fn(&RankRow, &Context) -> Cell,
}

fn text(s: &str) -> Cell {
    Cell::Text(s.to_string())
}

fn conc(v: Option<f64>, c: &Context) -> Cell {
    Cell::Number(v.map(|m| c.unit.from_molar(m)))
}

fn bounded_value(b: Option<Bounded>) -> Cell {
    Cell::Number(b.map(|b| b.value))
}

fn bounded_qualifier(b: Option<Bounded>) -> Cell {
    Cell::Text(b.map_or(String::new(), |b| qualifier_cell(b.qualifier)))
}

/// The individual values as written, in `unit`: `40;80;>10000`.
fn values(r: &RankRow, c: &Context) -> Cell {
    let listed: Vec<String> = r
        .values
        .iter()
        .map(|b| format!("{}{}", qualifier_cell(b.qualifier), export_number(Some(c.unit.from_molar(b.value)))))
        .collect();
    let more = (r.n + r.n_censored).saturating_sub(listed.len());
    let tail = if more > 0 { format!(";… {more} more") } else { String::new() };
    Cell::Text(format!("{}{tail}", listed.join(";")))
}

/// The registry columns, in order.
pub const COLUMNS: &[Column] = &[
    Column { name: "compound", meaning: "compound code as given", value: |r, _| text(&r.compound) },
    Column { name: "target", meaning: "target (empty when the input has none)", value: |r, _| text(&r.target) },
    Column { name: "endpoint", meaning: "`Ki` or `Kiu` (never averaged together)", value: |r, _| text(&r.endpoint) },
    Column {
        name: "qualifier",
        meaning: "of `value`: empty when exact, `~` approximate, `>`, `>=`, `<`, `<=` for a bound",
        value: |r, _| Cell::Text(qualifier_cell(r.qualifier)),
    },
    Column {
        name: "value",
        meaning: "geometric-mean Ki, or the tightest bound, in `unit`; empty when there is none (see `error`)",
        value: |r, c| conc(r.ki, c),
    },
    Column {
        name: "unit",
        meaning: "unit of `value`, `low`, `high` and `values`",
        value: |_, c| text(c.unit.symbol()),
    },
    Column {
        name: "pki",
        meaning: "mean pKi (−log10 of the molar Ki), or the bound",
        value: |r, _| Cell::Number(r.pki),
    },
    Column {
        name: "pki_qualifier",
        meaning: "of `pki`: that of `value` with a bound's direction reversed (Ki > x is pKi < −log x)",
        value: |r, _| Cell::Text(if r.pki.is_some() { qualifier_cell(r.pki_qualifier) } else { String::new() }),
    },
    Column { name: "low", meaning: "lower end of the interval, in `unit`", value: |r, c| conc(r.low, c) },
    Column { name: "high", meaning: "upper end of the interval, in `unit`", value: |r, c| conc(r.high, c) },
    Column {
        name: "interval_method",
        meaning: "how `low`–`high` was obtained: t interval (n ≥ 3), range of the 2 values, a single value's own interval, or the range left by bounds",
        value: |r, _| text(r.interval_method.as_deref().unwrap_or("")),
    },
    Column { name: "n", meaning: "exact (and `~`) values averaged", value: |r, _| Cell::Count(Some(r.n)) },
    Column { name: "n_censored", meaning: "bounds in the group", value: |r, _| Cell::Count(Some(r.n_censored)) },
    Column {
        name: "values",
        meaning: "the individual Ki values in input order, in `unit`, `;`-separated, each with its qualifier (`40;80;>10000`); at most 50, then `… k more`",
        value: values,
    },
    Column {
        name: "assays",
        meaning: "the assay id of each of `values` (input column `assay_id`), `;`-separated, empty where none",
        value: |r, _| {
            Cell::Text(if r.assays.iter().all(String::is_empty) { String::new() } else { r.assays.join(";") })
        },
    },
    Column { name: "pki_sd", meaning: "sample SD of pKi (n ≥ 2)", value: |r, _| Cell::Number(r.pki_sd) },
    Column {
        name: "rank",
        meaning: "1-based rank by pKi within target and endpoint; empty when there is no value",
        value: |r, _| Cell::Count(r.rank),
    },
    Column {
        name: "mechanism",
        meaning: "mechanism(s) behind the values, with `(measured)`/`(assumed)`; `not stated` if absent",
        value: |r, _| text(&r.mechanism),
    },
    Column {
        name: "method",
        meaning: "relation(s) used, with formula and source; `not stated` if absent",
        value: |r, _| text(&r.method),
    },
    Column {
        name: "flags",
        meaning: "flag codes, `;`-separated: those from `kimech ki` and the aggregation flags",
        value: |r, _| Cell::Text(r.flags.iter().map(|f| f.code.as_str()).collect::<Vec<_>>().join(";")),
    },
    Column {
        name: "conditions",
        meaning: "assay conditions behind the values (`S = …; Km = …; Et = …`), distinct ones `|`-separated",
        value: |r, _| text(&r.conditions),
    },
    Column {
        name: "ligand_efficiency",
        meaning: "LE = 1.37·pKi / heavy atoms, kcal/mol per heavy atom",
        value: |r, _| bounded_value(r.ligand_efficiency),
    },
    Column {
        name: "ligand_efficiency_qualifier",
        meaning: "of `ligand_efficiency`: empty when exact, `~`, or the bound's direction (that of `pki`)",
        value: |r, _| bounded_qualifier(r.ligand_efficiency),
    },
    Column {
        name: "versus",
        meaning: "counter-target of `delta_pki`",
        value: |r, _| text(r.versus.as_deref().unwrap_or("")),
    },
    Column {
        name: "delta_pki", meaning: "ΔpKi = pKi(target) − pKi(versus)", value: |r, _| bounded_value(r.delta_pki)
    },
    Column {
        name: "delta_pki_qualifier",
        meaning: "of `delta_pki`: empty when exact, `~`, `<` or `>` when it is a bound",
        value: |r, _| bounded_qualifier(r.delta_pki),
    },
    Column {
        name: "error",
        meaning: "why there is no value (every row failed, or the bounds conflict); empty otherwise",
        value: |r, _| text(r.error.as_deref().unwrap_or("")),
    },
    Column {
        name: "source",
        meaning: "input file(s) and line(s) of the rows behind this one: `ki.csv:2,5; other.csv:3`",
        value: |r, _| text(&r.source),
    },
    Column { name: "tool", meaning: "`kimech <version>` that wrote the file", value: |_, c| text(&c.tool) },
    Column {
        name: "registry_version",
        meaning: "version of this column contract",
        value: |_, _| Cell::Count(Some(REGISTRY_VERSION as usize)),
    },
];

/// The header row.
pub fn header() -> Vec<String> {
    COLUMNS.iter().map(|c| c.name.to_string()).collect()
}

/// Writes the registry CSV of `rows` (Ki in mol/L) to `out`, one row at a time.
pub fn write<W: Write>(rows: impl Iterator<Item = RankRow>, context: &Context, out: W) -> Result<W> {
    let mut export = CsvExport::new(out, &header())?;
    for r in rows {
        let cells: Vec<Cell> = COLUMNS.iter().map(|c| (c.value)(&r, context)).collect();
        export.row(&cells)?;
    }
    export.finish()
}
