//! `kimech mode`: how a compound inhibits, from global fits of its [S]×[I]
//! rate matrix (the numerical core is [`crate::analysis::mode`]).

use super::km::WeightingArg;
use super::{CAUTION, OutputArgs, finish};
use crate::analysis::mode::{Criterion, Options};
pub use crate::batch::mode::Outcome;
use crate::batch::mode::{Settings, process};
use crate::error::Result;
use crate::fit::FitSettings;
use crate::io::{Table, write_output};
use crate::units::ConcUnit;
use crate::view::mode::render;

/// Say how a compound inhibits: global fits of none, competitive,
/// uncompetitive, noncompetitive and mixed inhibition to an [S]×[I] rate
/// matrix, with Ki, α, their intervals, AICc weights, F tests and an
/// adequacy check.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns substrate, inhibitor, rate and optionally compound and sd; `-` reads stdin.
    pub file: String,
    /// Unit of substrate values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub substrate_unit: Option<ConcUnit>,
    /// Unit of inhibitor values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub inhibitor_unit: Option<ConcUnit>,
    /// Residual weighting: none, relative (1/rate²) or sd (1/sd² from the sd column).
    #[arg(long, value_enum, default_value_t = WeightingArg::None)]
    pub weighting: WeightingArg,
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

/// `--criterion` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum CriterionArg {
    /// Lowest AICc, preferring the simplest model within 2 units.
    Aicc,
    /// none → best one-constant model → mixed, each step by an F test.
    FTest,
}

impl From<CriterionArg> for Criterion {
    fn from(c: CriterionArg) -> Self {
        match c {
            CriterionArg::Aicc => Criterion::Aicc,
            CriterionArg::FTest => Criterion::FTest,
        }
    }
}

/// Runs `kimech mode`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, &settings(args))?;
    let bytes = render(&outcome.results(), args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.total, "compounds")
}

/// Reads and analyses every compound of a table ([`crate::batch::mode::process`] with the flags' settings).
pub fn analyse_with_matrices(table: &Table, args: &Args) -> Result<Outcome> {
    process(table, &settings(args))
}

/// Writes `--plot` SVGs (one per compound) and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = outcome.pairs.iter().map(|(r, _)| r.compound.as_deref()).collect();
        let names = crate::plot::files::unique_names("mode", &ids);
        let mut files = Vec::with_capacity(names.len());
        for (name, (r, m)) in names.into_iter().zip(&outcome.pairs) {
            files.push((name, crate::plot::mode::figure(r, m, &outcome.units)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let page = crate::page::Page {
            title: format!("kimech mode — {}", args.file),
            intro: vec![format!("Inhibition mechanism of {} compound(s) from {}.", outcome.total, args.file)],
            sections: vec![outcome.section(&format!("kimech mode {}", args.file))?],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::page::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}

/// The analysis options the arguments ask for.
pub fn options(args: &Args) -> Options {
    Options {
        weighting: args.weighting.into(),
        criterion: args.choice.criterion.into(),
        alpha_level: args.choice.alpha_level,
        confidence: args.choice.confidence,
        settings: FitSettings::default(),
    }
}

/// The library's settings from the flags.
pub fn settings(args: &Args) -> Settings {
    Settings { substrate_unit: args.substrate_unit, inhibitor_unit: args.inhibitor_unit, options: options(args) }
}
