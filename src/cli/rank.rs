//! `kimech rank`: aggregate Ki results per compound and target, rank them by
//! pKi, add selectivity and ligand efficiency, and write the registry export.
//!
//! Reads the CSV `kimech ki` writes, or any table with `compound`, a Ki
//! (unit in the cell, the header, a `unit` column or `--ki-unit`) and an
//! optional `qualifier` column. The numbers come from
//! [`crate::analysis::rank`]; this file reads and writes.
//!
//! `--format csv` is the registry export; its columns are fixed (see
//! [`REGISTRY_COLUMNS`] and README.md) and every text cell is guarded against
//! spreadsheet formula injection.

use serde::Serialize;

use super::{CAUTION, OutputArgs, finish, parse_fraction};
use crate::analysis::rank::{Bounded, Entry, Options, RankRow, aggregate};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::output::{json_bytes, new_grid, sig};
use crate::io::{ColumnSpec, Format, Table, neutralise_formula, write_output};
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

/// The registry export's columns, in order. The first fourteen are the
/// stable registry set; the rest are ranking extras, always present.
pub const REGISTRY_COLUMNS: [&str; 22] = [
    "compound",
    "target",
    "endpoint",
    "qualifier",
    "value",
    "unit",
    "p_value",
    "interval",
    "n",
    "mechanism",
    "method",
    "flags",
    "conditions",
    "tool_version",
    "rank",
    "p_value_sd",
    "n_censored",
    "interval_method",
    "ligand_efficiency",
    "versus",
    "delta_p_value",
    "delta_qualifier",
];

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

/// The JSON document: `{"unit": …, "results": [...]}`; Ki values in mol/L
/// are converted to `unit`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// Unit of every Ki, low and high.
    pub unit: String,
    /// The tool and version that made it.
    pub tool_version: String,
    /// Ranked rows.
    pub results: Vec<RankRow>,
}

/// Runs `kimech rank`.
pub fn run(args: &Args) -> Result<()> {
    let mut entries = Vec::new();
    let mut failures = Vec::new();
    for file in &args.files {
        let table = Table::read(file)?;
        let (e, f) = read_entries(&table, args.ki_unit)?;
        entries.extend(e);
        failures.extend(f);
    }
    let total = entries.len() + failures.len();
    if let Some(v) = &args.versus
        && !entries.iter().any(|e| &e.target == v)
    {
        let mut targets: Vec<&str> = entries.iter().map(|e| e.target.as_str()).collect();
        targets.sort_unstable();
        targets.dedup();
        return Err(Error::Option {
            option: "--versus".into(),
            value: v.clone(),
            problem: "no row has this target".into(),
            expected: format!("use one of the targets in the input: {}", targets.join(", ")),
        });
    }
    let rows = aggregate(&entries, &Options { versus: args.versus.clone(), confidence: args.confidence });
    let bytes = render(&rows, args.unit, args.output.format)?;
    let inputs: Vec<&str> = args.files.iter().map(String::as_str).collect();
    write_output(args.output.output.as_deref(), &bytes, &inputs)?;
    write_pictures(&rows, &failures, args, &inputs)?;
    finish(&failures, total, "rows")
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
}

/// Reads every row into an [`Entry`]; rows that cannot be used are returned as
/// errors naming their line (and are not aggregated).
pub fn read_entries(table: &Table, ki_unit: Option<ConcUnit>) -> Result<(Vec<Entry>, Vec<Error>)> {
    let ki = table.find(&KI);
    let pki = table.find(&PKI);
    if ki.is_none() && pki.is_none() {
        return Err(missing_value_column(table));
    }
    let cols = Columns {
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
    };
    let mut entries = Vec::new();
    let mut failures = Vec::new();
    for record in &table.rows {
        match read_entry(table, &cols, record, ki_unit) {
            Ok(e) => entries.push(e),
            Err(e) => failures.push(e),
        }
    }
    Ok((entries, failures))
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

/// Serialises ranked rows in the chosen format, Ki values in `unit`.
pub fn render(rows: &[RankRow], unit: ConcUnit, format: Format) -> Result<Vec<u8>> {
    let converted: Vec<RankRow> = rows.iter().map(|r| in_unit(r, unit)).collect();
    match format {
        Format::Json => {
            json_bytes(&Report { unit: unit.symbol().into(), tool_version: tool_version(), results: converted })
        }
        Format::Csv => registry_csv(&converted, unit),
        Format::Table => Ok(human(&converted, unit).into_bytes()),
    }
}

fn in_unit(r: &RankRow, unit: ConcUnit) -> RankRow {
    let f = |v: Option<f64>| v.map(|m| unit.from_molar(m));
    RankRow {
        ki: f(r.ki),
        low: f(r.low),
        high: f(r.high),
        censored: r
            .censored
            .iter()
            .map(|b| Bounded { qualifier: b.qualifier, value: unit.from_molar(b.value) })
            .collect(),
        ..r.clone()
    }
}

/// A number for an export cell: ten significant digits, so that unit
/// conversions do not print as 49.999999999999986.
fn num(v: Option<f64>) -> String {
    v.map_or(String::new(), |x| {
        let rounded: f64 = format!("{x:.9e}").parse().unwrap_or(x);
        format!("{rounded}")
    })
}

fn interval_text(r: &RankRow) -> String {
    match (r.low, r.high) {
        (None, None) => String::new(),
        (lo, hi) => {
            format!("{} to {}", lo.map_or("0".into(), |v| sig(v, 4)), hi.map_or("unbounded".into(), |v| sig(v, 4)))
        }
    }
}

/// The registry export: [`REGISTRY_COLUMNS`], one header row, UTF-8, exact
/// qualifiers as empty cells, every text cell through the formula guard.
fn registry_csv(rows: &[RankRow], unit: ConcUnit) -> Result<Vec<u8>> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let serialise = |e: csv::Error| Error::Serialise(e.to_string());
    writer.write_record(REGISTRY_COLUMNS).map_err(serialise)?;
    let qualifier = |q: Qualifier| if q.is_bound() { q.symbol().to_string() } else { String::new() };
    for r in rows {
        let conditions = if r.censored.is_empty() || r.n == 0 {
            r.conditions.clone()
        } else {
            let set_aside: Vec<String> =
                r.censored.iter().map(|b| format!("{} {} {}", b.qualifier, sig(b.value, 3), unit)).collect();
            format!("{} | bounds set aside: {}", r.conditions, set_aside.join(", "))
        };
        let record: Vec<String> = vec![
            neutralise_formula(&r.compound),
            neutralise_formula(&r.target),
            neutralise_formula(&r.endpoint),
            qualifier(r.qualifier),
            num(r.ki),
            unit.symbol().into(),
            num(r.pki),
            interval_text(r),
            r.n.to_string(),
            neutralise_formula(&r.mechanism),
            neutralise_formula(&r.method),
            neutralise_formula(&r.flags.iter().map(|f| f.code.as_str()).collect::<Vec<_>>().join(";")),
            neutralise_formula(&conditions),
            tool_version(),
            r.rank.to_string(),
            num(r.pki_sd),
            r.n_censored.to_string(),
            neutralise_formula(r.interval_method.as_deref().unwrap_or("")),
            num(r.ligand_efficiency.map(|b| b.value)),
            neutralise_formula(r.versus.as_deref().unwrap_or("")),
            num(r.delta_pki.map(|b| b.value)),
            r.delta_pki.map_or(String::new(), |b| qualifier(b.qualifier)),
        ];
        writer.write_record(&record).map_err(serialise)?;
    }
    writer.into_inner().map_err(|e| Error::Serialise(e.to_string()))
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
        let m = methods.iter().position(|m| *m == r.method).unwrap_or_else(|| {
            methods.push(&r.method);
            methods.len() - 1
        }) + 1;
        let constant = match r.ki {
            None => format!("{} —", r.endpoint),
            Some(v) => {
                let q = if r.qualifier.is_bound() { format!("{} ", r.qualifier) } else { String::new() };
                format!("{} {q}{} {unit}", r.endpoint, sig(v, 3))
            }
        };
        let pki = match (r.pki, r.pki_sd) {
            (None, _) => "—".into(),
            (Some(p), _) if r.qualifier.is_bound() => format!("{} {p:.2}", r.qualifier.reversed()),
            (Some(p), Some(sd)) => format!("{p:.2} ({sd:.2})"),
            (Some(p), None) => format!("{p:.2}"),
        };
        let n = if r.n_censored > 0 { format!("{} + {} bound", r.n, r.n_censored) } else { r.n.to_string() };
        let interval = match interval_text(r) {
            t if t.is_empty() => "—".into(),
            t => t,
        };
        let mut cells = vec![
            r.rank.to_string(),
            r.compound.clone(),
            r.target.clone(),
            constant,
            pki,
            n,
            interval,
            bounded_text(r.ligand_efficiency, 2),
            r.mechanism.clone(),
            format!("[{m}]"),
            r.flags.iter().map(|f| f.code.as_str()).collect::<Vec<_>>().join(" "),
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
        for f in r.flags.iter().filter(|f| f.message != "carried from the input") {
            out.push_str(&format!("{} on {} [{}]: {}\n", r.compound, r.target, f.code, f.message));
        }
    }
    out.push_str("LE = 1.37·pKi / heavy atoms, kcal/mol per heavy atom (Hopkins, Groom & Alex 2004).\n\n");
    out.push_str(CAUTION);
    out.push('\n');
    out
}
