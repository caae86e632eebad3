//! `kimech onset`: time-dependent (slow-binding and covalent) inhibition from
//! progress curves. Reads with [`crate::io::onset`], computes with
//! [`crate::analysis::onset`], writes with [`crate::view::onset`].

use super::{OutputArgs, finish, parse_flag_concentration};
use crate::analysis::onset::{Options, RatesPolicy, SubstrateMechanism};
use crate::batch::onset::{Outcome, Settings, process};
use crate::error::Result;
use crate::io::onset::{ReadOptions, TimeUnit};
use crate::io::{Table, write_output};
use crate::units::{ConcUnit, ConcentrationArg};

/// Fit progress curves at several inhibitor concentrations: is there an
/// onset, one-step or two-step, reversible or not; kinact, KI and kinact/KI.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns compound, inhibitor, time, signal (optionally curve, replicate,
    /// substrate, km, enzyme); `-` reads stdin.
    pub file: String,
    /// Unit of inhibitor values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub inhibitor_unit: Option<ConcUnit>,
    /// Unit of time values that carry none in the cell or header (s, min, h).
    #[arg(long, value_name = "UNIT", value_parser = parse_time_unit)]
    pub time_unit: Option<TimeUnit>,
    /// Substrate concentration of the assay, e.g. "50 uM" (a substrate column overrides it).
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub substrate: Option<ConcentrationArg>,
    /// Km of the substrate, e.g. "20 uM" (a km column overrides it).
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub km: Option<ConcentrationArg>,
    /// Total enzyme concentration, e.g. "5 nM": checks that [I] is in excess.
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// How the first binding step relates to the substrate, for KI = KI,app/(…).
    #[arg(long, value_enum, default_value_t = MechanismArg::Competitive)]
    pub mechanism_vs_substrate: MechanismArg,
    /// Initial rates of the global fits: tested (tied to v0 by the scheme
    /// unless the data reject it), always tied, or free per curve (e.g. a known
    /// mixing dead time).
    #[arg(long, value_enum, default_value_t = RatesArg::Test)]
    pub initial_rates: RatesArg,
    /// Model choice and confidence level.
    #[command(flatten)]
    pub choice: super::ModelChoiceArgs,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per compound) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

/// `--initial-rates` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum RatesArg {
    /// Tied unless the tie is rejected by the criterion.
    Test,
    /// Always tied to v0 by the scheme.
    Tied,
    /// Always free per curve.
    Free,
}

impl From<RatesArg> for RatesPolicy {
    fn from(r: RatesArg) -> Self {
        match r {
            RatesArg::Test => RatesPolicy::Test,
            RatesArg::Tied => RatesPolicy::Tied,
            RatesArg::Free => RatesPolicy::Free,
        }
    }
}

/// `--mechanism-vs-substrate` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum MechanismArg {
    /// KI = KI,app/(1 + S/Km).
    Competitive,
    /// KI = KI,app.
    Noncompetitive,
    /// KI = KI,app/(1 + Km/S).
    Uncompetitive,
}

impl From<MechanismArg> for SubstrateMechanism {
    fn from(m: MechanismArg) -> Self {
        match m {
            MechanismArg::Competitive => SubstrateMechanism::Competitive,
            MechanismArg::Noncompetitive => SubstrateMechanism::Noncompetitive,
            MechanismArg::Uncompetitive => SubstrateMechanism::Uncompetitive,
        }
    }
}

fn parse_time_unit(text: &str) -> std::result::Result<TimeUnit, String> {
    TimeUnit::parse(text).ok_or_else(|| format!("'{text}' is not a unit of time; use one of {}", TimeUnit::ACCEPTED))
}

/// Runs `kimech onset`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let mut outcome = process(&table, &settings(args))?;
    if outcome.pairs.is_empty() && outcome.failures.len() == 1 {
        return Err(outcome.failures.remove(0));
    }
    let bytes = crate::view::onset::render(&outcome.results(), args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.pairs.len() + outcome.failures.len(), "compounds")
}

/// The library's settings from the flags.
pub fn settings(args: &Args) -> Settings {
    let read = ReadOptions {
        inhibitor_unit: args.inhibitor_unit,
        time_unit: args.time_unit,
        substrate: args.substrate.map(|c| c.molar),
        km: args.km.map(|c| c.molar),
        enzyme: args.enzyme.map(|c| c.molar),
    };
    let options = Options {
        criterion: args.choice.criterion.into(),
        alpha_level: args.choice.alpha_level,
        confidence: args.choice.confidence,
        substrate_mechanism: args.mechanism_vs_substrate.into(),
        initial_rates: args.initial_rates.into(),
        ..Options::default()
    };
    Settings { read, options }
}

/// Writes `--plot` SVGs (one per compound) and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = outcome.pairs.iter().map(|(_, r)| r.compound.as_deref()).collect();
        let mut files = Vec::new();
        for (name, (c, r)) in crate::plot::files::unique_names("onset", &ids).into_iter().zip(&outcome.pairs) {
            files.push((name, crate::plot::onset::compound_figure(c, r)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let command = std::env::args().collect::<Vec<_>>().join(" ");
        let page = crate::page::Page {
            title: format!("kimech onset — {}", args.file),
            intro: vec![format!(
                "Time-dependent inhibition of {} compound(s) from {}.",
                outcome.pairs.len(),
                args.file
            )],
            sections: vec![outcome.section(&command)?],
            caution: crate::view::CAUTION.to_string(),
        };
        write_output(Some(path), crate::page::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}
