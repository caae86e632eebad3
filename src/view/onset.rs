//! The views of `kimech onset`: JSON (the result structs as they are), CSV
//! (one row per compound) and the terminal table. The CSV columns are
//! declared once, in [`COLUMNS`], and the terminal summary uses the same list.

use serde::Serialize;

use super::CAUTION;
use crate::analysis::onset::{IntervalBasis, OnsetResult, Rates};
use crate::error::{Error, Result};
use crate::io::output::{json_bytes, new_grid, qualifier_cell, sig};
use crate::io::{Format, neutralise_formula};
use crate::report::Param;

/// One cell of a row: text is guarded against spreadsheet formulas, numbers never are.
enum Cell {
    Text(String),
    Number(Option<f64>),
    Count(usize),
}

/// A CSV column: its header, its value, and whether the terminal summary shows it.
struct Column {
    name: &'static str,
    value: fn(&OnsetResult) -> Cell,
    summary: bool,
}

fn text(s: impl Into<String>) -> Cell {
    Cell::Text(s.into())
}

fn value(p: &Option<Param>) -> Cell {
    Cell::Number(p.as_ref().map(|p| p.value))
}

fn low(p: &Option<Param>) -> Cell {
    Cell::Number(p.as_ref().and_then(|p| p.low))
}

fn high(p: &Option<Param>) -> Cell {
    Cell::Number(p.as_ref().and_then(|p| p.high))
}

fn unit(p: &Option<Param>) -> Cell {
    text(p.as_ref().and_then(|p| p.unit.clone()).unwrap_or_default())
}

/// The CSV columns, one row per compound.
const COLUMNS: &[Column] = &[
    Column { name: "compound", value: |r| text(r.compound.clone().unwrap_or_default()), summary: true },
    Column { name: "onset", value: |r| text(r.onset.name()), summary: true },
    Column {
        name: "reversible",
        value: |r| text(r.reversible.map_or("", |v| if v { "true" } else { "false" })),
        summary: true,
    },
    Column { name: "kinact", value: |r| value(&r.kinact), summary: true },
    Column { name: "kinact_low", value: |r| low(&r.kinact), summary: false },
    Column { name: "kinact_high", value: |r| high(&r.kinact), summary: false },
    Column { name: "kinact_unit", value: |r| unit(&r.kinact), summary: false },
    Column { name: "ki", value: |r| value(&r.ki), summary: true },
    Column { name: "ki_low", value: |r| low(&r.ki), summary: false },
    Column { name: "ki_high", value: |r| high(&r.ki), summary: false },
    Column { name: "ki_unit", value: |r| unit(&r.ki), summary: false },
    Column { name: "ki_app", value: |r| value(&r.ki_app), summary: false },
    Column { name: "kinact_ki", value: |r| value(&r.kinact_ki), summary: true },
    Column { name: "kinact_ki_low", value: |r| low(&r.kinact_ki), summary: false },
    Column { name: "kinact_ki_high", value: |r| high(&r.kinact_ki), summary: false },
    Column { name: "kinact_ki_unit", value: |r| unit(&r.kinact_ki), summary: false },
    Column {
        name: "koff_qualifier",
        value: |r| text(if r.koff.is_some() { qualifier_cell(r.koff_qualifier) } else { String::new() }),
        summary: false,
    },
    Column { name: "koff", value: |r| value(&r.koff), summary: false },
    Column { name: "koff_unit", value: |r| unit(&r.koff), summary: false },
    Column { name: "curves", value: |r| Cell::Count(r.curves.len()), summary: true },
    Column { name: "rates", value: |r| text(r.rates.name()), summary: false },
    Column { name: "interval_basis", value: |r| text(r.interval_basis.name()), summary: false },
    Column { name: "n", value: |r| Cell::Count(r.n), summary: false },
    Column { name: "evidence", value: |r| text(r.evidence.clone()), summary: false },
    Column { name: "substrate_correction", value: |r| text(r.substrate_correction.clone()), summary: false },
    Column {
        name: "warnings",
        value: |r| text(r.warnings.iter().map(|w| w.code.as_str()).collect::<Vec<_>>().join(";")),
        summary: true,
    },
    Column { name: "source", value: |r| text(r.source.cell()), summary: false },
];

/// `{"results": [...]}`.
#[derive(Serialize)]
struct Document<'a> {
    results: &'a [OnsetResult],
}

/// Serialises results in the chosen format.
pub fn render(results: &[OnsetResult], format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Document { results }),
        Format::Csv => csv(results),
        Format::Table => Ok(human(results).into_bytes()),
    }
}

fn csv(results: &[OnsetResult]) -> Result<Vec<u8>> {
    let serialise = |e: csv::Error| Error::Serialise(e.to_string());
    let mut writer = csv::Writer::from_writer(Vec::new());
    writer.write_record(COLUMNS.iter().map(|c| c.name)).map_err(serialise)?;
    for r in results {
        let row = COLUMNS.iter().map(|c| match (c.value)(r) {
            Cell::Text(t) => neutralise_formula(&t),
            Cell::Number(v) => v.map_or(String::new(), |v| format!("{v}")),
            Cell::Count(n) => n.to_string(),
        });
        writer.write_record(row).map_err(serialise)?;
    }
    writer.into_inner().map_err(|e| Error::Serialise(e.to_string()))
}

fn cell_text(cell: Cell) -> String {
    match cell {
        Cell::Text(t) if t.is_empty() => "—".into(),
        Cell::Text(t) => t,
        Cell::Number(v) => v.map_or("—".into(), |v| sig(v, 4)),
        Cell::Count(n) => n.to_string(),
    }
}

/// One parameter as table cells.
fn param_row(name: &str, p: &Param) -> Vec<String> {
    let end = |v: Option<f64>| v.map_or("unbounded".to_string(), |v| sig(v, 4));
    vec![
        name.to_string(),
        sig(p.value, 5),
        end(p.low),
        end(p.high),
        p.unit.clone().unwrap_or_default(),
        p.interval.to_string(),
    ]
}

/// The terminal report: a summary row per compound, then each compound's
/// constants, per-curve kobs, evidence and warnings.
pub fn human(results: &[OnsetResult]) -> String {
    let shown: Vec<&Column> = COLUMNS.iter().filter(|c| c.summary).collect();
    let mut grid = new_grid(shown.iter().map(|c| c.name.to_string()).collect());
    for r in results {
        grid.add_row(shown.iter().map(|c| cell_text((c.value)(r))).collect::<Vec<_>>());
    }
    let mut out = format!("Time-dependent inhibition (global fits of the progress curves)\n{grid}\n");
    for r in results {
        out.push('\n');
        out.push_str(&compound_block(r));
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}

/// The constants of one compound as a table (header, rows), shared by the
/// terminal and the HTML report.
pub fn constant_table(r: &OnsetResult) -> (Vec<String>, Vec<Vec<String>>) {
    let level = format!("{:.0}%", r.confidence * 100.0);
    let header = ["constant", "estimate", &format!("{level} low"), &format!("{level} high"), "unit", "interval"];
    let params: [(&str, &Option<Param>); 5] =
        [("kinact", &r.kinact), ("KI", &r.ki), ("KI,app", &r.ki_app), ("kinact/KI", &r.kinact_ki), ("koff", &r.koff)];
    let mut rows: Vec<Vec<String>> =
        params.iter().filter_map(|(label, p)| p.as_ref().map(|p| param_row(label, p))).collect();
    // An irreversible call reports koff as an upper bound, not an estimate.
    if let (Some(p), true) = (&r.koff, r.koff_qualifier.is_bound())
        && let Some(row) = rows.last_mut()
    {
        *row = vec![
            "koff".into(),
            format!("{} {}", r.koff_qualifier.symbol(), sig(p.value, 4)),
            "—".into(),
            "—".into(),
            p.unit.clone().unwrap_or_default(),
            "profile upper end".into(),
        ];
    }
    (header.map(String::from).to_vec(), rows)
}

fn compound_block(r: &OnsetResult) -> String {
    let name = r.compound.as_deref().unwrap_or("the data");
    let mut out = format!("{name}: onset {}", r.onset.name());
    if let Some(rev) = r.reversible {
        out.push_str(if rev {
            ", reversible (slow-binding)"
        } else {
            ", irreversible within the run (covalent, or a return from the final complex too slow to show)"
        });
        if let (Some(p), true) = (&r.koff, r.koff_qualifier.is_bound()) {
            out.push_str(&format!(
                " — no return seen within the run: koff {} {} {}",
                r.koff_qualifier.symbol(),
                sig(p.value, 3),
                p.unit.as_deref().unwrap_or("")
            ));
        }
    }
    out.push_str(&format!("; chosen by {}: {}\n", criterion_name(r), r.evidence));
    out.push_str(&format!("initial rates: {}\n", rates_text(r.rates)));
    let (header, rows) = constant_table(r);
    if !rows.is_empty() {
        let mut grid = new_grid(header);
        for row in rows {
            grid.add_row(row);
        }
        out.push_str(&format!("{grid}\n"));
        if r.interval_basis == IntervalBasis::SpanOverReversibility
            && let Some(note) = r.kinact_ki.as_ref().and_then(|p| p.note.as_deref())
        {
            out.push_str(&format!("intervals: {note}\n"));
        }
        out.push_str(&format!("substrate correction: {}\n", r.substrate_correction));
    }
    let mut curves = new_grid(["[I]", "kobs (own fit)", "vi", "vs", "points"].map(String::from).to_vec());
    for c in &r.curves {
        curves.add_row(vec![
            sig(c.inhibitor, 4),
            sig(c.kobs.value, 4),
            sig(c.vi.value, 4),
            sig(c.vs.value, 4),
            c.n.to_string(),
        ]);
    }
    out.push_str(&format!("per-curve fits (the replot of kobs against [I]):\n{curves}\n"));
    for w in &r.warnings {
        out.push_str(&format!("warning [{}]: {}\n", w.code, w.message));
    }
    out
}

fn rates_text(rates: Rates) -> &'static str {
    match rates {
        Rates::Tied => {
            "tied to v0 by the scheme (vi = v0/(1 + [I]/KI,app) two-step, vi = v0 one-step; Morrison & Walsh 1988)"
        }
        Rates::Free => "free per curve (the tie to the scheme rejected — see warnings — or --initial-rates free)",
    }
}

fn criterion_name(r: &OnsetResult) -> &'static str {
    match r.criterion {
        crate::analysis::mode::Criterion::Aicc => "AICc",
        crate::analysis::mode::Criterion::FTest => "F test",
    }
}
