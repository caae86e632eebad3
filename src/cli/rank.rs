//! `kimech rank`: aggregate Ki results per compound and target, rank them by
//! pKi, add selectivity and ligand efficiency, and write the registry export.
//!
//! Reads the CSV `kimech ki` writes, or any table with `compound`, a Ki
//! (unit in the cell, the header, a `unit` column or `--ki-unit`) and an
//! optional `qualifier` column. The numbers come from
//! [`crate::analysis::rank`]; this file reads and writes.
//!
//! `--format csv` is the registry export, a versioned contract whose columns
//! are declared in [`crate::report::registry`] (and listed in README.md).
//!
//! Rows are read one at a time and folded into one accumulator per compound ×
//! target × endpoint ([`Aggregator`]), so memory grows with the groups, not
//! the rows; outputs are written as they are produced.

use std::io::Write;

use serde::Serialize;

use super::{CAUTION, OutputArgs, parse_fraction};
use crate::analysis::rank::{Aggregator, Bounded, Entry, Options, RankRow};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::output::{new_grid, sig};
use crate::io::stream::{OutputSink, RowStream};
use crate::io::{ColumnSpec, Format, Table, write_output};
use crate::report::registry::{self, REGISTRY_VERSION};
use crate::units::{ConcUnit, Qualifier, parse_written};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "compound_name", "molecule", "id"]);
const TARGET: ColumnSpec = ColumnSpec::new("target", &["target_name", "protein"]);
const KI: ColumnSpec = ColumnSpec::new("ki", &["kiu", "ki_value", "value"]);
const PKI: ColumnSpec = ColumnSpec::new("pki", &["p_value", "pkiu"]);
const UNIT: ColumnSpec = ColumnSpec::new("unit", &["ki_unit"]);
const QUALIFIER: ColumnSpec = ColumnSpec::new("qualifier", &["relation", "ki_qualifier"]);
const ENDPOINT: ColumnSpec = ColumnSpec::new("endpoint", &[]);
const LOW: ColumnSpec = ColumnSpec::new("ki_low", &[]);
const HIGH: ColumnSpec = ColumnSpec::new("ki_high", &[]);
const INTERVAL_METHOD: ColumnSpec = ColumnSpec::new("interval_method", &[]);
const HEAVY_ATOMS: ColumnSpec = ColumnSpec::new("heavy_atoms", &["heavy_atom_count", "hac"]);
const MECHANISM: ColumnSpec = ColumnSpec::new("mechanism", &[]);
const MECHANISM_SOURCE: ColumnSpec = ColumnSpec::new("mechanism_source", &[]);
const METHOD: ColumnSpec = ColumnSpec::new("method", &[]);
const FLAGS: ColumnSpec = ColumnSpec::new("flags", &[]);
const CONDITIONS: ColumnSpec = ColumnSpec::new("conditions", &[]);
const ERROR: ColumnSpec = ColumnSpec::new("error", &[]);
const ASSAY_ID: ColumnSpec = ColumnSpec::new("assay_id", &["assay_ids", "experiment_id", "run_id"]);

/// Aggregate repeats per compound and target (mean pKi, SD, n, geometric-mean
/// Ki; bounds handled honestly), rank by pKi, and export a registry table.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSVs from `kimech ki`, or any tables with compound, ki and optionally qualifier; `-` reads stdin.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<String>,
    /// Counter-target: adds selectivity ΔpKi = pKi(target) − pKi(this target).
    #[arg(long, value_name = "TARGET")]
    pub versus: Option<String>,
    /// Unit of the reported Ki.
    #[arg(long, value_name = "UNIT", default_value_t = ConcUnit::Nanomolar)]
    pub unit: ConcUnit,
    /// Unit of Ki cells that carry none in the cell, the header or a unit column.
    #[arg(long, value_name = "UNIT")]
    pub ki_unit: Option<ConcUnit>,
    /// Confidence level of the interval of a geometric mean.
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination (csv is the registry export).
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per target) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

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

/// At most this many failure messages are kept for the HTML report (all go to stderr).
const KEPT_FAILURES: usize = 200;

/// Runs `kimech rank`.
pub fn run(args: &Args) -> Result<()> {
    let mut aggregator = Aggregator::new();
    let (mut total, mut failed) = (0, 0);
    let mut failures = Vec::new();
    for file in &args.files {
        let mut stream = RowStream::open(file)?;
        let cols = Columns::find(stream.table())?;
        let mut record = Record { line: 0, cells: Vec::new() };
        while stream.next_into(&mut record)? {
            total += 1;
            let (entry, failure) = entry_for_row(stream.table(), &cols, &record, args.ki_unit);
            if let Some(e) = &entry {
                aggregator.add(e);
            }
            if let Some(f) = failure {
                eprintln!("kimech: {f}");
                failed += 1;
                if failures.len() < KEPT_FAILURES {
                    failures.push(f);
                }
            }
        }
    }
    let ranking = aggregator.rank(&Options { versus: args.versus.clone(), confidence: args.confidence });
    if let Some(v) = &args.versus
        && !ranking.targets().contains(&v.as_str())
    {
        let targets = ranking.targets();
        return Err(Error::Option {
            option: "--versus".into(),
            value: v.clone(),
            problem: "no row has this target".into(),
            expected: format!("use one of the targets in the input: {}", targets.join(", ")),
        });
    }
    let inputs: Vec<&str> = args.files.iter().map(String::as_str).collect();
    let mut sink = OutputSink::create(args.output.output.as_deref(), &inputs)?;
    render_to(ranking.rows(), args.unit, args.output.format, &mut sink)?;
    sink.commit()?;
    if args.pictures.plot.is_some() || args.pictures.report.is_some() {
        let rows: Vec<RankRow> = ranking.rows().collect();
        write_pictures(&rows, &failures, args, &inputs)?;
    }
    if failed == 0 { Ok(()) } else { Err(Error::Partial { failed, total, what: "rows" }) }
}

/// Writes `--plot` SVGs (one per target and endpoint) and the `--report` page.
fn write_pictures(rows: &[RankRow], failures: &[Error], args: &Args, inputs: &[&str]) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let groups = crate::plot::rank::groups(rows);
        let ids: Vec<String> = groups.iter().map(|((t, e), _)| format!("{t}-{e}")).collect();
        let names = crate::plot::files::unique_names("rank", &ids.iter().map(|s| Some(s.as_str())).collect::<Vec<_>>());
        let mut files = Vec::with_capacity(names.len());
        for (name, ((target, endpoint), group)) in names.into_iter().zip(&groups) {
            files.push((name, crate::plot::rank::group_figure(target, endpoint, group)?.text));
        }
        crate::plot::files::write_plots(dir, &files, inputs)?;
    }
    if let Some(path) = &args.pictures.report {
        let mut command = format!("kimech rank {}", args.files.join(" "));
        if let Some(v) = &args.versus {
            command.push_str(&format!(" --versus {v}"));
        }
        let page = crate::plot::html::Page {
            title: format!("kimech rank — {}", args.files.join(", ")),
            intro: vec![format!("{} ranked rows from {}.", rows.len(), args.files.join(", "))],
            sections: vec![crate::plot::rank::section(rows, args.unit, failures, &command)?],
            caution: super::CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), inputs)?;
    }
    Ok(())
}

/// The version string written into every export.
pub fn tool_version() -> String {
    format!("kimech {}", env!("CARGO_PKG_VERSION"))
}

struct Columns {
    compound: usize,
    ki: Option<usize>,
    pki: Option<usize>,
    target: Option<usize>,
    unit: Option<usize>,
    qualifier: Option<usize>,
    endpoint: Option<usize>,
    low: Option<usize>,
    high: Option<usize>,
    interval_method: Option<usize>,
    heavy_atoms: Option<usize>,
    mechanism: Option<usize>,
    mechanism_source: Option<usize>,
    method: Option<usize>,
    flags: Option<usize>,
    conditions: Option<usize>,
    error: Option<usize>,
    assay_id: Option<usize>,
}

impl Columns {
    fn find(table: &Table) -> Result<Columns> {
        let ki = table.find(&KI);
        let pki = table.find(&PKI);
        if ki.is_none() && pki.is_none() {
            return Err(missing_value_column(table));
        }
        Ok(Columns {
            compound: table.require(&COMPOUND)?,
            ki,
            pki,
            target: table.find(&TARGET),
            unit: table.find(&UNIT),
            qualifier: table.find(&QUALIFIER),
            endpoint: table.find(&ENDPOINT),
            low: table.find(&LOW),
            high: table.find(&HIGH),
            interval_method: table.find(&INTERVAL_METHOD),
            heavy_atoms: table.find(&HEAVY_ATOMS),
            mechanism: table.find(&MECHANISM),
            mechanism_source: table.find(&MECHANISM_SOURCE),
            method: table.find(&METHOD),
            flags: table.find(&FLAGS),
            conditions: table.find(&CONDITIONS),
            error: table.find(&ERROR),
            assay_id: table.find(&ASSAY_ID),
        })
    }
}

/// Reads every row into an [`Entry`]. A row that cannot be used is returned
/// as an error naming its line, and, when it names a compound, also as an
/// entry with `error` set, so that the compound keeps its registry row.
pub fn read_entries(table: &Table, ki_unit: Option<ConcUnit>) -> Result<(Vec<Entry>, Vec<Error>)> {
    let cols = Columns::find(table)?;
    let mut entries = Vec::new();
    let mut failures = Vec::new();
    for record in &table.rows {
        let (entry, failure) = entry_for_row(table, &cols, record, ki_unit);
        entries.extend(entry);
        failures.extend(failure);
    }
    Ok((entries, failures))
}

/// One row as an entry, a failure, or both (a failed row that names its compound).
fn entry_for_row(
    table: &Table,
    cols: &Columns,
    record: &Record,
    ki_unit: Option<ConcUnit>,
) -> (Option<Entry>, Option<Error>) {
    match read_entry(table, cols, record, ki_unit) {
        Ok(e) => (Some(e), None),
        Err(error) => {
            let compound = text(table, record, Some(cols.compound));
            let entry = (!compound.is_empty()).then(|| {
                let endpoint = text(table, record, cols.endpoint);
                Entry {
                    file: table.source.clone(),
                    line: record.line,
                    compound,
                    target: text(table, record, cols.target),
                    endpoint: if endpoint.is_empty() { "Ki".into() } else { endpoint },
                    error: Some(error.to_string()),
                    ..Entry::default()
                }
            });
            (entry, Some(error))
        }
    }
}

fn missing_value_column(table: &Table) -> Error {
    Error::MissingColumn {
        path: table.source.clone(),
        column: "ki".into(),
        aliases: "kiu, ki_value, value, or a pki / p_value column".into(),
        found: table.columns.iter().map(|c| c.header.as_str()).collect::<Vec<_>>().join(", "),
    }
}

/// Text of an optional column, with the formula guard's apostrophe removed
/// (so our own exports read back as they were).
fn text(table: &Table, record: &Record, col: Option<usize>) -> String {
    col.map(|c| {
        let t = table.text(record, c);
        match t.strip_prefix('\'') {
            Some(rest) if rest.starts_with(['=', '+', '-', '@', '\t', '\r']) => rest.to_string(),
            _ => t.to_string(),
        }
    })
    .unwrap_or_default()
}

fn read_entry(table: &Table, cols: &Columns, record: &Record, ki_unit: Option<ConcUnit>) -> Result<Entry> {
    let compound = text(table, record, Some(cols.compound));
    if compound.is_empty() {
        return Err(table.cell_error(record, cols.compound, "no compound name", "give the compound code"));
    }
    if let Some(c) = cols.error
        && !table.text(record, c).is_empty()
    {
        return Err(Error::Data {
            group: format!("{}, line {} (compound '{compound}')", table.source, record.line),
            problem: format!("the row has no Ki: {}", table.text(record, c)),
            expected: "fix the input of `kimech ki` for this row and convert again".into(),
        });
    }
    let row_unit = match cols.unit.map(|c| (c, table.text(record, c))) {
        Some((c, t)) if !t.is_empty() => Some(ConcUnit::parse(t).ok_or_else(|| {
            table.cell_error(
                record,
                c,
                "not a concentration unit",
                format!("use one of {}", crate::units::ACCEPTED_UNITS),
            )
        })?),
        _ => ki_unit,
    };
    let (cell_qualifier, ki, unit) = match (cols.ki, cols.pki) {
        (Some(c), _) if !table.text(record, c).is_empty() => {
            let v = table.concentration(record, c, row_unit, "--ki-unit")?;
            (v.qualifier, v.molar, Some(v.unit))
        }
        (_, Some(c)) if !table.text(record, c).is_empty() => {
            let w = parse_written(table.text(record, c))
                .map_err(|p| table.cell_error(record, c, p.describe(), "expected a pKi such as 7.2"))?;
            // A bound on pKi is the reverse bound on Ki.
            (w.qualifier.reversed(), 10f64.powf(-w.value), None)
        }
        (Some(c), _) | (None, Some(c)) => {
            return Err(table.cell_error(record, c, "empty cell", "give the Ki, e.g. '12 nM' or '> 10 uM'"));
        }
        (None, None) => return Err(missing_value_column(table)),
    };
    let qualifier = merge_qualifier(table, cols, record, cell_qualifier)?;
    let value_col = cols.ki.or(cols.pki).unwrap_or(cols.compound);
    if !(ki > 0.0 && ki.is_finite()) {
        return Err(table.cell_error(record, value_col, "a Ki must be positive", "give a positive concentration"));
    }
    let end = |col: Option<usize>| -> Result<Option<f64>> {
        match col {
            Some(c) if !table.text(record, c).is_empty() => {
                Ok(Some(table.concentration(record, c, unit.or(row_unit), "--ki-unit")?.molar))
            }
            _ => Ok(None),
        }
    };
    let heavy_atoms = match cols.heavy_atoms {
        Some(c) if !table.text(record, c).is_empty() => {
            let h = table.number(record, c)?;
            if h < 1.0 {
                return Err(table.cell_error(record, c, "fewer than one heavy atom", "give the heavy-atom count"));
            }
            Some(h)
        }
        _ => None,
    };
    let mechanism = match (text(table, record, cols.mechanism), text(table, record, cols.mechanism_source)) {
        (m, _) if m.is_empty() => String::new(),
        (m, s) if s.is_empty() => m,
        (m, s) => format!("{m} ({s})"),
    };
    let endpoint = text(table, record, cols.endpoint);
    Ok(Entry {
        file: table.source.clone(),
        assay: text(table, record, cols.assay_id),
        error: None,
        line: record.line,
        compound,
        target: text(table, record, cols.target),
        endpoint: if endpoint.is_empty() { "Ki".into() } else { endpoint },
        qualifier,
        ki,
        low: end(cols.low)?,
        high: end(cols.high)?,
        interval_method: Some(text(table, record, cols.interval_method)).filter(|t| !t.is_empty()),
        heavy_atoms,
        mechanism,
        method: text(table, record, cols.method),
        flags: text(table, record, cols.flags)
            .split([';', ','])
            .map(str::trim)
            .filter(|f| !f.is_empty())
            .map(String::from)
            .collect(),
        conditions: text(table, record, cols.conditions),
    })
}

/// The qualifier from a `qualifier` column and the one in the value cell must agree.
fn merge_qualifier(table: &Table, cols: &Columns, record: &Record, cell: Qualifier) -> Result<Qualifier> {
    let Some(c) = cols.qualifier else { return Ok(cell) };
    let t = table.text(record, c).trim_start_matches('\'');
    let (q, rest) = Qualifier::split(t);
    if !rest.is_empty() {
        return Err(table.cell_error(
            record,
            c,
            "not a qualifier",
            "use one of = < <= > >= ~, or leave empty for exact",
        ));
    }
    match (q.is_bound(), cell.is_bound()) {
        (true, true) if q != cell => Err(table.cell_error(
            record,
            c,
            format!("disagrees with the qualifier '{cell}' written in the value cell"),
            "write the qualifier once",
        )),
        (true, _) => Ok(q),
        _ if q == Qualifier::About => Ok(Qualifier::About),
        _ => Ok(cell),
    }
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
