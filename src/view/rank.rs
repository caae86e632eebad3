//! Views of `kimech rank`: ranked rows → terminal table, JSON and the
//! registry CSV (declared in [`crate::report::registry`]), written one row at a time.

use std::io::Write;

use serde::Serialize;

use super::CAUTION;
use crate::analysis::rank::{Bounded, RankRow};
use crate::error::{Error, Result};
use crate::io::Format;
use crate::io::output::{new_grid, sig};
use crate::report::registry::{self, REGISTRY_VERSION};
use crate::units::{ConcUnit, Qualifier};

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
    format!("kimech {}", env!("CARGO_PKG_VERSION"))
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

fn in_unit(r: &RankRow, unit: ConcUnit) -> RankRow {
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
            format!("{} to {}", lo.map_or("0".into(), |v| sig(v, 3)), hi.map_or("unbounded".into(), |v| sig(v, 3)))
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

/// The human-readable ranking, with the relations as a legend and every flag in words.
pub fn human(rows: &[RankRow], unit: ConcUnit) -> String {
    let versus = rows.iter().find_map(|r| r.versus.clone());
    let mut header: Vec<String> =
        ["rank", "compound", "target", "constant", "pKi (SD)", "n", "interval", "LE", "mechanism", "method", "flags"]
            .map(String::from)
            .to_vec();
    if let Some(v) = &versus {
        header.insert(8, format!("ΔpKi vs {v}"));
    }
    let mut grid = new_grid(header);
    let mut methods: Vec<&str> = Vec::new();
    for r in rows {
        let m = if r.method.is_empty() {
            "—".to_string()
        } else {
            let i = methods.iter().position(|m| *m == r.method).unwrap_or_else(|| {
                methods.push(&r.method);
                methods.len() - 1
            });
            format!("[{}]", i + 1)
        };
        let constant = match r.ki {
            None => format!("{} —", r.endpoint),
            Some(v) => {
                let q = if r.qualifier == Qualifier::Equal { String::new() } else { format!("{} ", r.qualifier) };
                format!("{} {q}{} {unit}", r.endpoint, sig(v, 3))
            }
        };
        let pki = match (r.pki, r.pki_sd) {
            (None, _) => "—".into(),
            (Some(p), _) if r.pki_qualifier.is_bound() => format!("{} {p:.2}", r.pki_qualifier),
            (Some(p), sd) => {
                let q = if r.pki_qualifier == Qualifier::About { "~ " } else { "" };
                match sd {
                    Some(sd) => format!("{q}{p:.2} ({sd:.2})"),
                    None => format!("{q}{p:.2}"),
                }
            }
        };
        let n = if r.n_censored > 0 { format!("{} + {} bound", r.n, r.n_censored) } else { r.n.to_string() };
        let interval = match interval_text(r) {
            t if t.is_empty() => "—".into(),
            t => t,
        };
        let mut cells = vec![
            r.rank.map_or("—".into(), |k| k.to_string()),
            r.compound.clone(),
            r.target.clone(),
            constant,
            pki,
            n,
            interval,
            bounded_text(r.ligand_efficiency, 2),
            r.mechanism.clone(),
            m,
            if r.error.is_some() {
                "ERROR".into()
            } else {
                r.flags.iter().map(|f| f.code.as_str()).collect::<Vec<_>>().join(" ")
            },
        ];
        if versus.is_some() {
            cells.insert(
                8,
                if r.target == versus.clone().unwrap_or_default() { "".into() } else { bounded_text(r.delta_pki, 2) },
            );
        }
        grid.add_row(cells);
    }
    let mut out = format!("Ranking by pKi (most potent first within each target)\n{grid}\n");
    for (i, m) in methods.iter().enumerate() {
        out.push_str(&format!("[{}] {m}\n", i + 1));
    }
    for r in rows {
        if let Some(e) = &r.error {
            out.push_str(&format!("{} on {}: no value: {e}\n", r.compound, r.target));
        }
        for f in r.flags.iter().filter(|f| f.message != "carried from the input") {
            out.push_str(&format!("{} on {} [{}]: {}\n", r.compound, r.target, f.code, f.message));
        }
    }
    out.push_str("LE = 1.37·pKi / heavy atoms, kcal/mol per heavy atom (Hopkins, Groom & Alex 2004).\n\n");
    out.push_str(CAUTION);
    out.push('\n');
    out
}
