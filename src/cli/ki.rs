//! `kimech ki`: IC50 → Ki per row, with the relation, the mechanism behind it,
//! the assumption checks and an interval. The numbers come from
//! [`crate::convert`]; this file reads the table, writes the results.
//!
//! Reads any IC50 table (`compound`, `ic50` with unit in the cell or header
//! and an optional qualifier) and the CSV that `kimech ic50` writes
//! (`ic50 (nM)`, `ic50_low`, `ic50_high`, `hill`, carried columns).
//! Conditions come from columns where present (a non-empty cell wins) and
//! from the command-line defaults otherwise.

use std::io::Write;

use serde::Serialize;

use super::{CAUTION, OutputArgs, parse_flag_concentration, parse_fraction};
use crate::convert::{self, Assay, Conditions, Conversion, Measurement, Mechanism, MechanismSource, Settings};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::output::{Cell, CsvExport, JsonRows, new_grid, qualifier_cell, sig};
use crate::io::stream::{OutputSink, RowStream};
use crate::io::{ColumnSpec, Format, Table};
use crate::units::{ConcUnit, ConcentrationArg, Qualifier};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "compound_name", "molecule", "id"]);
const TARGET: ColumnSpec = ColumnSpec::new("target", &["target_name", "protein"]);
const IC50: ColumnSpec = ColumnSpec::new("ic50", &["ic_50"]);
const IC50_LOW: ColumnSpec = ColumnSpec::new("ic50_low", &["ic50_lower"]);
const IC50_HIGH: ColumnSpec = ColumnSpec::new("ic50_high", &["ic50_upper"]);
const HILL: ColumnSpec = ColumnSpec::new("hill", &["hill_coefficient", "hill_slope", "nh"]);
const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const KM: ColumnSpec = ColumnSpec::new("km", &[]);
const KM_SE: ColumnSpec = ColumnSpec::new("km_se", &[]);
const ENZYME: ColumnSpec = ColumnSpec::new("enzyme", &["et", "enzyme_concentration"]);
const MECHANISM: ColumnSpec = ColumnSpec::new("mechanism", &["mode"]);
const ALPHA: ColumnSpec = ColumnSpec::new("alpha", &["α"]);
const ASSAY: ColumnSpec = ColumnSpec::new("assay", &["assay_type"]);
const LIGAND: ColumnSpec = ColumnSpec::new("ligand", &["l", "ligand_concentration"]);
const KD: ColumnSpec = ColumnSpec::new("kd", &[]);

/// Columns this command reads; every other column is carried through to the CSV.
const CONSUMED: [ColumnSpec; 15] = [
    COMPOUND, TARGET, IC50, IC50_LOW, IC50_HIGH, HILL, SUBSTRATE, KM, KM_SE, ENZYME, MECHANISM, ALPHA, ASSAY, LIGAND,
    KD,
];

/// Output columns of the CSV before the carried ones (a carried column with one
/// of these names is renamed `input <name>`).
const CSV_KEYS: [&str; 20] = [
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

/// Convert IC50 values to Ki (Cheng–Prusoff, with the Morrison tight-binding
/// correction when Et is known), flagging every assumption the number leans on.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with compound, ic50 and optionally the conditions as columns; `-` reads stdin.
    pub file: String,
    /// Substrate concentration for rows without a 'substrate' value, e.g. "50 uM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub substrate: Option<ConcentrationArg>,
    /// Km of the substrate for rows without a 'km' value, e.g. "12 uM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub km: Option<ConcentrationArg>,
    /// Standard error of Km for rows without a 'km_se' value, e.g. "1.5 uM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub km_se: Option<ConcentrationArg>,
    /// Total active enzyme concentration Et for rows without an 'enzyme' value, e.g. "5 nM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// Mechanism for rows without a 'mechanism' value; unknown gives the competitive Ki, flagged.
    #[arg(long, value_enum, default_value_t = Mechanism::Unknown)]
    pub mechanism: Mechanism,
    /// α = Kiu/Kic for mixed inhibition, for rows without an 'alpha' value.
    #[arg(long, value_name = "NUMBER")]
    pub alpha: Option<f64>,
    /// Assay kind for rows without an 'assay' value.
    #[arg(long, value_enum, default_value_t = Assay::Enzyme)]
    pub assay: Assay,
    /// Labelled-ligand concentration L (binding assays), e.g. "2 nM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub ligand: Option<ConcentrationArg>,
    /// Kd of the labelled ligand (binding assays), e.g. "1.5 nM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub kd: Option<ConcentrationArg>,
    /// Unit of the reported constants.
    #[arg(long, value_name = "UNIT", default_value_t = ConcUnit::Nanomolar)]
    pub unit: ConcUnit,
    /// Unit of IC50 cells that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub ic50_unit: Option<ConcUnit>,
    /// Unit of condition cells (substrate, km, enzyme, ligand, kd) that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub conc_unit: Option<ConcUnit>,
    /// Flag hill-far-from-one when |log2 h| exceeds this (common practice: 0.5).
    #[arg(long, default_value_t = 0.5, value_name = "NUMBER")]
    pub hill_tolerance: f64,
    /// Confidence level of the Ki interval (the IC50 interval is taken to be at this level).
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
}

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
    pub flags: Vec<&'static str>,
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

/// Runs `kimech ki`. Rows are read, converted and written one at a time, so
/// memory does not grow with the file (except for `--format table`, whose
/// column widths need every row).
pub fn run(args: &Args) -> Result<()> {
    let mut stream = RowStream::open(&args.file)?;
    let plan = Plan::new(stream.table(), args)?;
    let mut sink = OutputSink::create(args.output.output.as_deref(), &[&args.file])?;
    let mut writer = RowWriter::start(args.output.format, &plan.carried_headers, args.unit, &mut sink)?;
    let (mut total, mut failed) = (0, 0);
    let mut record = Record { line: 0, cells: Vec::new() };
    while stream.next_into(&mut record)? {
        total += 1;
        let (row, failure) = plan.convert(stream.table(), &record, args);
        if let Some(f) = failure {
            eprintln!("kimech: {f}");
            failed += 1;
        }
        writer.push(row)?;
    }
    writer.finish()?;
    sink.commit()?;
    if failed == 0 { Ok(()) } else { Err(Error::Partial { failed, total, what: "rows" }) }
}

/// Converts every row; rows that fail keep their place with `error` set.
/// Returns the rows, the headers of the carried columns and the failures.
pub fn convert_table(table: &Table, args: &Args) -> Result<(Vec<KiRow>, Vec<String>, Vec<Error>)> {
    let plan = Plan::new(table, args)?;
    let mut rows = Vec::new();
    let mut failures = Vec::new();
    for record in &table.rows {
        let (row, failure) = plan.convert(table, record, args);
        rows.push(row);
        failures.extend(failure);
    }
    Ok((rows, plan.carried_headers, failures))
}

/// What the header says: where each column is and which ones are carried through.
struct Plan {
    columns: Columns,
    carried_cols: Vec<usize>,
    carried_headers: Vec<String>,
    settings: Settings,
}

impl Plan {
    fn new(table: &Table, args: &Args) -> Result<Plan> {
        let columns = Columns::find(table)?;
        let carried_cols: Vec<usize> =
            (0..table.columns.len()).filter(|&i| !CONSUMED.iter().any(|spec| table.find(spec) == Some(i))).collect();
        let carried_headers = carried_cols
            .iter()
            .map(|&i| {
                let c = &table.columns[i];
                if CSV_KEYS.contains(&c.key.as_str()) { format!("input {}", c.header) } else { c.header.clone() }
            })
            .collect();
        let settings =
            Settings { hill_tolerance: args.hill_tolerance, confidence: args.confidence, ..Settings::default() };
        Ok(Plan { columns, carried_cols, carried_headers, settings })
    }

    fn convert(&self, table: &Table, record: &Record, args: &Args) -> (KiRow, Option<Error>) {
        let carried = self.carried_cols.iter().map(|&i| table.text(record, i).to_string()).collect();
        convert_row(table, &self.columns, record, args, &self.settings, carried)
    }
}

/// Writes rows as they come: CSV and JSON straight through, the table at the end.
enum RowWriter<W: Write> {
    Csv(Box<CsvExport<W>>),
    Json(JsonRows<W>),
    Table(W, Vec<KiRow>),
}

impl<W: Write> RowWriter<W> {
    fn start(format: Format, carried: &[String], unit: ConcUnit, out: W) -> Result<RowWriter<W>> {
        Ok(match format {
            Format::Csv => RowWriter::Csv(Box::new(CsvExport::new(out, &csv_header(carried, unit))?)),
            Format::Json => RowWriter::Json(JsonRows::start(out, &Report { results: &[] })?),
            Format::Table => RowWriter::Table(out, Vec::new()),
        })
    }

    fn push(&mut self, row: KiRow) -> Result<()> {
        match self {
            RowWriter::Csv(w) => w.row(&csv_cells(&row)),
            RowWriter::Json(w) => w.row(&row),
            RowWriter::Table(_, rows) => {
                rows.push(row);
                Ok(())
            }
        }
    }

    fn finish(self) -> Result<()> {
        match self {
            RowWriter::Csv(w) => w.finish().map(|_| ()),
            RowWriter::Json(w) => w.finish().map(|_| ()),
            RowWriter::Table(mut out, rows) => {
                out.write_all(human(&rows).as_bytes()).map_err(|e| Error::Serialise(e.to_string()))
            }
        }
    }
}

/// Where each known column is.
struct Columns {
    compound: usize,
    ic50: usize,
    target: Option<usize>,
    low: Option<usize>,
    high: Option<usize>,
    hill: Option<usize>,
    substrate: Option<usize>,
    km: Option<usize>,
    km_se: Option<usize>,
    enzyme: Option<usize>,
    mechanism: Option<usize>,
    alpha: Option<usize>,
    assay: Option<usize>,
    ligand: Option<usize>,
    kd: Option<usize>,
}

impl Columns {
    fn find(t: &Table) -> Result<Columns> {
        Ok(Columns {
            compound: t.require(&COMPOUND)?,
            ic50: t.require(&IC50)?,
            target: t.find(&TARGET),
            low: t.find(&IC50_LOW),
            high: t.find(&IC50_HIGH),
            hill: t.find(&HILL),
            substrate: t.find(&SUBSTRATE),
            km: t.find(&KM),
            km_se: t.find(&KM_SE),
            enzyme: t.find(&ENZYME),
            mechanism: t.find(&MECHANISM),
            alpha: t.find(&ALPHA),
            assay: t.find(&ASSAY),
            ligand: t.find(&LIGAND),
            kd: t.find(&KD),
        })
    }
}

/// What one row said, before conversion.
struct RowInput {
    measurement: Measurement,
    conditions: Conditions,
    described: String,
}

fn convert_row(
    table: &Table,
    cols: &Columns,
    record: &Record,
    args: &Args,
    settings: &Settings,
    carried: Vec<String>,
) -> (KiRow, Option<Error>) {
    let compound = table.text(record, cols.compound).to_string();
    let mechanism = cols
        .mechanism
        .and_then(|c| Mechanism::parse(table.text(record, c)).filter(|_| !table.text(record, c).is_empty()))
        .unwrap_or(args.mechanism);
    let mut row = KiRow {
        source: table.source.clone(),
        row: record.line,
        compound: compound.clone(),
        ki: KiValue {
            value: None,
            unit: args.unit.symbol().into(),
            qualifier: Qualifier::Equal,
            low: None,
            high: None,
        },
        pki: None,
        pki_qualifier: Qualifier::Equal,
        endpoint: if mechanism == Mechanism::Uncompetitive { "Kiu" } else { "Ki" },
        method: "not converted".into(),
        mechanism: if mechanism == Mechanism::Unknown { "competitive" } else { mechanism.name() },
        mechanism_source: if mechanism == Mechanism::Unknown {
            MechanismSource::Assumed
        } else {
            MechanismSource::Measured
        },
        flags: Vec::new(),
        error: None,
        target: cols.target.map(|c| table.text(record, c).to_string()),
        range: None,
        interval_method: None,
        messages: Vec::new(),
        conditions: String::new(),
        carried,
    };
    let outcome = read_row(table, cols, record, args).and_then(|input| {
        row.conditions = input.described.clone();
        convert::convert(&input.measurement, &input.conditions, settings).map_err(|p| Error::Data {
            group: format!("{}, line {} (compound '{}')", table.source, record.line, compound),
            problem: p.problem(),
            expected: p.expected(),
        })
    });
    match outcome {
        Ok(conversion) => {
            fill(&mut row, &conversion, args.unit);
            add_curve_flags(&mut row, table, record);
            (row, None)
        }
        Err(e) => {
            let e = with_upstream_error(table, record, e);
            row.error = Some(e.to_string());
            (row, Some(e))
        }
    }
}

/// When the IC50 step already reported why a row has no IC50 (an `error`
/// column, as `kimech ic50` writes), say that instead of "empty cell".
fn with_upstream_error(table: &Table, record: &Record, e: Error) -> Error {
    let upstream = table.find(&ColumnSpec::new("error", &[])).map(|c| table.text(record, c)).unwrap_or("");
    match e {
        Error::Cell(cell) if cell.value.is_empty() && !upstream.is_empty() => Error::Data {
            group: format!("{}, line {}", cell.path, cell.line),
            problem: format!("no value in column '{}'; the input's error column says: {upstream}", cell.column),
            expected: "fix the IC50 fit for this row first".into(),
        },
        e => e,
    }
}

fn fill(row: &mut KiRow, c: &Conversion, unit: ConcUnit) {
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

/// Flags of the dose-response fit (the `flags` column `kimech ic50` writes)
/// that undermine the conversion itself: Cheng–Prusoff assumes a complete,
/// well-defined inhibition curve (Cheng & Prusoff 1973).
const CURVE_FLAGS_THAT_MATTER: [(&str, &str, &str); 6] = [
    (
        "partial-inhibition",
        "partial-inhibition",
        "the dose-response curve levels off above zero activity: the Cheng–Prusoff relations assume complete inhibition, so this constant is not a Ki of a full inhibitor",
    ),
    ("poor-fit", "ic50-poor-fit", "the dose-response fit was poor, so the IC50 behind this constant is unreliable"),
    (
        "not-converged",
        "ic50-not-converged",
        "the dose-response fit did not converge, so the IC50 behind this constant is unreliable",
    ),
    (
        "hill-fixed",
        "ic50-hill-fixed",
        "the Hill coefficient was held at 1 in the dose-response fit, so the IC50 leans on that assumption",
    ),
    (
        "outlier-excluded",
        "ic50-outlier-excluded",
        "wells marked by the outlier rule were left out of the dose-response fit (listed in the ic50 output)",
    ),
    (
        "too-many-outliers",
        "ic50-too-many-outliers",
        "the dose-response curve had more aberrant wells than the outlier rule may remove; the IC50 is unreliable",
    ),
];

fn add_curve_flags(row: &mut KiRow, table: &Table, record: &Record) {
    let Some(col) = table.find(&ColumnSpec::new("flags", &[])) else { return };
    let upstream: Vec<&str> = table.text(record, col).split([';', ',', ' ']).filter(|f| !f.is_empty()).collect();
    for (upstream_code, code, message) in CURVE_FLAGS_THAT_MATTER {
        if upstream.contains(&upstream_code) && !row.flags.contains(&code) {
            row.flags.push(code);
            row.messages.push(message.to_string());
        }
    }
}

/// What a row from a partial-inhibition curve is refused as (the demo recognises it).
pub const PARTIAL_REFUSED: &str = "a partial-inhibition curve";

/// Reads the measurement and conditions of one row; the first bad cell is the row's error.
fn read_row(table: &Table, cols: &Columns, record: &Record, args: &Args) -> Result<RowInput> {
    refuse_time_dependent(table, record)?;
    if table.text(record, cols.compound).is_empty() {
        return Err(table.cell_error(record, cols.compound, "no compound name", "give the compound code"));
    }
    let ic50 = table.concentration(record, cols.ic50, args.ic50_unit, "--ic50-unit")?;
    // `kimech ic50` says what the curve showed; Cheng–Prusoff needs a curve
    // that inhibits completely, so a partial one gives no Ki (issue 9).
    if let Some(c) = table.find(&ColumnSpec::new("call", &[]))
        && table.text(record, c).eq_ignore_ascii_case("partial")
    {
        return Err(table.cell_error(
            record,
            c,
            PARTIAL_REFUSED,
            "a curve that inhibits completely: Cheng–Prusoff assumes full inhibition, so no Ki is derived from a partial curve",
        ));
    }
    let bound_end = |col: Option<usize>| -> Result<Option<f64>> {
        match col {
            Some(c) if !is_missing(table.text(record, c)) => {
                let end = table.concentration(record, c, Some(ic50.unit), "--ic50-unit")?;
                if end.qualifier.is_bound() {
                    return Err(table.cell_error(record, c, "a qualified interval end", "give the number itself"));
                }
                Ok(Some(end.molar))
            }
            _ => Ok(None),
        }
    };
    let measurement = Measurement {
        qualifier: ic50.qualifier,
        ic50: ic50.molar,
        low: bound_end(cols.low)?,
        high: bound_end(cols.high)?,
        hill: match cols.hill {
            Some(c) if !is_missing(table.text(record, c)) => Some(table.number(record, c)?),
            _ => None,
        },
    };
    let mut described = vec![format!("IC50 = {}", table.text(record, cols.ic50))];
    // Km's SE is read in Km's header unit when its own column has none.
    let km_unit = cols.km.and_then(|c| table.header_unit(c).ok().flatten());
    let mut conc = |col: Option<usize>, flag_value: Option<ConcentrationArg>, label: &str, flag: &str| {
        let default_unit = if label == "Km SE" { args.conc_unit.or(km_unit) } else { args.conc_unit };
        condition(table, record, col, flag_value, default_unit, flag).map(|found| {
            found.map(|(molar, unit)| {
                described.push(format!("{label} = {} {unit}", sig(unit.from_molar(molar), 4)));
                molar
            })
        })
    };
    let substrate = conc(cols.substrate, args.substrate, "S", "--substrate")?;
    let km = conc(cols.km, args.km, "Km", "--km")?;
    let km_se = conc(cols.km_se, args.km_se, "Km SE", "--km-se")?;
    let enzyme = conc(cols.enzyme, args.enzyme, "Et", "--enzyme")?;
    let ligand = conc(cols.ligand, args.ligand, "L", "--ligand")?;
    let kd = conc(cols.kd, args.kd, "Kd", "--kd")?;
    let alpha = match cols.alpha {
        Some(c) if !table.text(record, c).is_empty() => Some(table.number(record, c)?),
        _ => args.alpha,
    };
    if let Some(a) = alpha {
        described.push(format!("alpha = {}", sig(a, 4)));
    }
    let mechanism = match cols.mechanism.map(|c| (c, table.text(record, c))) {
        Some((c, text)) if !text.is_empty() => Mechanism::parse(text).ok_or_else(|| {
            table.cell_error(
                record,
                c,
                "not a mechanism",
                "use competitive, uncompetitive, noncompetitive, mixed or unknown",
            )
        })?,
        _ => args.mechanism,
    };
    let assay = match cols.assay.map(|c| (c, table.text(record, c))) {
        Some((c, text)) if !text.is_empty() => match text.to_ascii_lowercase().as_str() {
            "enzyme" => Assay::Enzyme,
            "binding" => Assay::Binding,
            _ => return Err(table.cell_error(record, c, "not an assay kind", "use enzyme or binding")),
        },
        _ => args.assay,
    };
    described.push(format!("{} assay", if assay == Assay::Enzyme { "enzyme" } else { "binding" }));
    let conditions = Conditions { assay, mechanism, substrate, km, km_se, enzyme, alpha, ligand, kd };
    Ok(RowInput { measurement, conditions, described: described.join("; ") })
}

/// A column saying whether the inhibitor is time-dependent: `time_dependent`
/// (yes/no), or `onset` as `kimech onset` writes it (none/one-step/two-step).
const TIME_DEPENDENT: ColumnSpec = ColumnSpec::new("time_dependent", &["onset"]);

/// The IC50 of a time-dependent (slow-binding or covalent) inhibitor depends on
/// how long enzyme and inhibitor were together, so no exact Ki follows from it
/// (Copeland, *Evaluation of Enzyme Inhibitors in Drug Discovery*, 2nd ed.,
/// 2013, ch. 9): such a row is refused with the reason.
fn refuse_time_dependent(table: &Table, record: &Record) -> Result<()> {
    let Some(col) = table.find(&TIME_DEPENDENT) else { return Ok(()) };
    let text = table.text(record, col);
    let time_dependent = match text.to_ascii_lowercase().as_str() {
        "" | "no" | "false" | "0" | "none" => false,
        "yes" | "true" | "1" | "one-step" | "two-step" => true,
        _ => {
            return Err(table.cell_error(
                record,
                col,
                "not a yes/no answer",
                "use yes or no (or none, one-step, two-step as kimech onset writes)",
            ));
        }
    };
    if !time_dependent {
        return Ok(());
    }
    Err(Error::Data {
        group: format!("{}, line {}", table.source, record.line),
        problem: format!(
            "the inhibitor is time-dependent ('{text}' in column '{}'): its IC50 depends on the preincubation time, \
             so no exact Ki can be derived from it",
            table.columns[col].header
        ),
        expected: "rank it by kinact/KI from kimech onset (Copeland 2013, ch. 9)".into(),
    })
}

/// Cells that mean "no value" in an interval column (as fitters write unbounded ends).
fn is_missing(text: &str) -> bool {
    matches!(text.to_ascii_lowercase().as_str(), "" | "na" | "n/a" | "nan" | "none" | "null" | "unbounded" | "—")
}

/// A condition from its column (a non-empty cell wins) or from its flag.
fn condition(
    table: &Table,
    record: &Record,
    col: Option<usize>,
    flag_value: Option<ConcentrationArg>,
    default_unit: Option<ConcUnit>,
    flag: &str,
) -> Result<Option<(f64, ConcUnit)>> {
    match col {
        Some(c) if !table.text(record, c).is_empty() => {
            let v = table.concentration(record, c, default_unit, "--conc-unit")?;
            if v.qualifier.is_bound() || v.qualifier == Qualifier::About {
                return Err(table.cell_error(
                    record,
                    c,
                    "a qualified assay condition",
                    format!("give the concentration used, without < > ~ (or leave the cell empty to use {flag})"),
                ));
            }
            Ok(Some((v.molar, v.unit)))
        }
        _ => Ok(flag_value.map(|f| (f.molar, f.unit))),
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
        Cell::Text(r.flags.join(";")),
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
            format!("{} {q}{} {}", r.endpoint, sig(v, 3), r.ki.unit)
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

/// The human-readable report: one line per row, methods as a legend, then
/// ranges, flags and errors in words.
pub fn human(rows: &[KiRow]) -> String {
    let mut methods: Vec<&str> = Vec::new();
    let interval_header = format!("interval ({})", rows.first().map_or("nM", |r| r.ki.unit.as_str()));
    let mut grid = new_grid(
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
                methods.push(&r.method);
                methods.len()
            }
        };
        let interval = match (r.ki.low, r.ki.high) {
            (None, None) => "—".to_string(),
            (lo, hi) => {
                format!("{} – {}", lo.map_or("0".into(), |v| sig(v, 3)), hi.map_or("unbounded".into(), |v| sig(v, 3)))
            }
        };
        let source = if r.mechanism_source == MechanismSource::Measured { "measured" } else { "assumed" };
        grid.add_row(vec![
            r.row.to_string(),
            r.compound.clone(),
            r.target.clone().unwrap_or_default(),
            constant_text(r),
            pki_text(r),
            interval,
            format!("{} ({source})", r.mechanism),
            if r.error.is_some() { "—".into() } else { format!("[{m}]") },
            if r.error.is_some() { "ERROR".into() } else { r.flags.join(" ") },
        ]);
    }
    let mut out = format!("IC50 → Ki\n{grid}\n");
    for (i, m) in methods.iter().enumerate() {
        out.push_str(&format!("[{}] {m}\n", i + 1));
    }
    for r in rows {
        let who = format!("line {} {}", r.row, r.compound);
        if let Some(e) = &r.error {
            out.push_str(&format!("{who}: ERROR: {e}\n"));
        }
        if let Some(g) = &r.range {
            out.push_str(&format!(
                "{who}: over the competitive, noncompetitive and uncompetitive relations the constant spans {}{} – {} {}\n",
                if r.ki.qualifier.is_bound() { format!("{} ", r.ki.qualifier) } else { String::new() },
                sig(g.low, 3),
                sig(g.high, 3),
                g.unit
            ));
        }
        for (code, message) in r.flags.iter().zip(&r.messages) {
            out.push_str(&format!("{who} [{code}]: {message}\n"));
        }
    }
    let mut interval_methods: Vec<&str> = Vec::new();
    for m in rows.iter().filter_map(|r| r.interval_method) {
        if !interval_methods.contains(&m) {
            interval_methods.push(m);
        }
    }
    for m in interval_methods {
        out.push_str(&format!("interval: {m}\n"));
    }
    out.push('\n');
    out.push_str(CAUTION);
    out.push('\n');
    out
}
