//! `kimech ki`: IC50 → Ki per row, with the relation, the mechanism behind it,
//! the assumption checks and an interval. The numbers come from
//! [`crate::convert`], the per-row work from [`crate::batch::ki`]; this file
//! streams the table through it and writes the results.
//!
//! Reads any IC50 table (`compound`, `ic50` with unit in the cell or header
//! and an optional qualifier) and the CSV that `kimech ic50` writes
//! (`ic50 (nM)`, `ic50_low`, `ic50_high`, `hill`, carried columns).
//! Conditions come from columns where present (a non-empty cell wins) and
//! from the command-line defaults otherwise.

use super::{OutputArgs, parse_flag_concentration, parse_fraction};
use crate::batch::ki::{Plan, Settings};
use crate::convert::{Assay, Mechanism};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::ki::Defaults;
use crate::io::stream::{OutputSink, RowStream};
use crate::units::{ConcUnit, ConcentrationArg};
use crate::view::ki::RowWriter;

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
    #[arg(long, value_enum, default_value_t = MechanismArg::Unknown)]
    pub mechanism: MechanismArg,
    /// α = Kiu/Kic for mixed inhibition, for rows without an 'alpha' value.
    #[arg(long, value_name = "NUMBER")]
    pub alpha: Option<f64>,
    /// Assay kind for rows without an 'assay' value.
    #[arg(long, value_enum, default_value_t = AssayArg::Enzyme)]
    pub assay: AssayArg,
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
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// `--mechanism` values: the mechanisms a conversion has a relation for, or unknown.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum MechanismArg {
    /// Binds free enzyme only (Kic).
    Competitive,
    /// Binds the enzyme–substrate complex only (Kiu).
    Uncompetitive,
    /// Binds both equally (Kic = Kiu).
    Noncompetitive,
    /// Binds both, Kiu = α·Kic.
    Mixed,
    /// Not known: the competitive relation is used and flagged.
    Unknown,
}

impl MechanismArg {
    /// The mechanism stated; `None` for unknown.
    pub fn stated(self) -> Option<Mechanism> {
        match self {
            MechanismArg::Competitive => Some(Mechanism::Competitive),
            MechanismArg::Uncompetitive => Some(Mechanism::Uncompetitive),
            MechanismArg::Noncompetitive => Some(Mechanism::Noncompetitive),
            MechanismArg::Mixed => Some(Mechanism::Mixed),
            MechanismArg::Unknown => None,
        }
    }
}

/// `--assay` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum AssayArg {
    /// Enzyme activity against substrate S with Michaelis constant Km.
    Enzyme,
    /// Displacement of a labelled ligand L with dissociation constant Kd.
    Binding,
}

impl From<AssayArg> for Assay {
    fn from(a: AssayArg) -> Self {
        match a {
            AssayArg::Enzyme => Assay::Enzyme,
            AssayArg::Binding => Assay::Binding,
        }
    }
}

/// Runs `kimech ki`. Rows are read, converted and written one at a time, so
/// memory does not grow with the file (except for `--format table`, whose
/// column widths need every row).
pub fn run(args: &Args) -> Result<()> {
    let mut stream = RowStream::open(&args.file)?;
    let plan = Plan::new(stream.table(), &settings(args))?;
    let mut sink = OutputSink::create(args.output.output.as_deref(), &[&args.file])?;
    let mut writer = RowWriter::start(args.output.format, &plan.carried_headers, args.unit, &mut sink)?;
    let (mut total, mut failed) = (0, 0);
    let mut record = Record { line: 0, cells: Vec::new() };
    while stream.next_into(&mut record)? {
        total += 1;
        let (row, failure) = plan.convert(stream.table(), &record);
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

/// The library's settings from the flags.
pub fn settings(args: &Args) -> Settings {
    let convert = crate::convert::Settings {
        hill_tolerance: args.hill_tolerance,
        confidence: args.confidence,
        ..Default::default()
    };
    Settings { defaults: defaults(args), convert, unit: args.unit }
}

/// The conditions the arguments give for rows that do not.
fn defaults(args: &Args) -> Defaults {
    Defaults {
        ic50_unit: args.ic50_unit,
        conc_unit: args.conc_unit,
        substrate: args.substrate,
        km: args.km,
        km_se: args.km_se,
        enzyme: args.enzyme,
        ligand: args.ligand,
        kd: args.kd,
        alpha: args.alpha,
        mechanism: args.mechanism.stated(),
        assay: args.assay.into(),
    }
}
