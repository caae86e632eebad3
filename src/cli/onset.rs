//! `kimech onset`: time-dependent (slow-binding and covalent) inhibition from
//! progress curves. Reads with [`crate::io::onset`], computes with
//! [`crate::analysis::onset`], writes with [`crate::view::onset`].

use super::mode::CriterionArg;
use super::{OutputArgs, finish, parse_flag_concentration, parse_fraction};
use crate::analysis::onset::{Compound, OnsetResult, Options, SubstrateMechanism, analyse};
use crate::error::{Error, Result};
use crate::io::onset::{ReadOptions, TimeUnit, read};
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
    /// How the model is chosen: aicc (lowest AICc; simplest within 2 units) or f-test.
    #[arg(long, value_enum, default_value_t = CriterionArg::Aicc)]
    pub criterion: CriterionArg,
    /// Significance level of the F-test steps (with --criterion f-test).
    #[arg(long, default_value_t = 0.05, value_parser = parse_fraction)]
    pub alpha_level: f64,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per compound) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
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
    let read_options = ReadOptions {
        inhibitor_unit: args.inhibitor_unit,
        time_unit: args.time_unit,
        substrate: args.substrate.map(|c| c.molar),
        km: args.km.map(|c| c.molar),
        enzyme: args.enzyme.map(|c| c.molar),
    };
    let input = read(&table, &read_options)?;
    let options = Options {
        criterion: args.criterion.into(),
        alpha_level: args.alpha_level,
        confidence: args.confidence,
        substrate_mechanism: args.mechanism_vs_substrate.into(),
        ..Options::default()
    };
    let mut pairs = Vec::new();
    let mut failures: Vec<Error> = Vec::new();
    for compound in &input.compounds {
        match analyse(compound, &input.units, &options) {
            Ok(r) => pairs.push((compound, r)),
            Err(e) => failures.push(e),
        }
    }
    if pairs.is_empty() && failures.len() == 1 {
        return Err(failures.remove(0));
    }
    let results: Vec<OnsetResult> = pairs.iter().map(|(_, r)| r.clone()).collect();
    let bytes = crate::view::onset::render(&results, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    let pairs: Vec<(&Compound, &OnsetResult)> = pairs.iter().map(|(c, r)| (*c, r)).collect();
    write_pictures(&pairs, &failures, args)?;
    finish(&failures, input.compounds.len(), "compounds")
}

/// Writes `--plot` SVGs (one per compound) and the `--report` page.
fn write_pictures(pairs: &[(&Compound, &OnsetResult)], failures: &[Error], args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = pairs.iter().map(|(_, r)| r.compound.as_deref()).collect();
        let mut files = Vec::new();
        for (name, (c, r)) in crate::plot::files::unique_names("onset", &ids).into_iter().zip(pairs) {
            files.push((name, crate::plot::onset::compound_figure(c, r)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let command = std::env::args().collect::<Vec<_>>().join(" ");
        let page = crate::plot::html::Page {
            title: format!("kimech onset — {}", args.file),
            intro: vec![format!("Time-dependent inhibition of {} compound(s) from {}.", pairs.len(), args.file)],
            sections: vec![crate::plot::onset::section(pairs, failures, &command)?],
            caution: crate::view::CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}
