//! `kimech mode`: how a compound inhibits, from global fits of its [S]×[I]
//! rate matrix (the numerical core is [`crate::analysis::mode`]).

use super::km::WeightingArg;
use super::{CAUTION, OutputArgs, finish};
use crate::analysis::mode::{Criterion, Matrix, ModeResult, Options, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::FitSettings;
use crate::io::mode::{ReadOptions, read};
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
    let outcome = analyse_with_matrices(&table, args)?;
    let results: Vec<ModeResult> = outcome.pairs.iter().map(|(r, _)| r.clone()).collect();
    let bytes = render(&results, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.total, "compounds")
}

/// A run's results, each with the matrix it was fitted to (for pictures).
pub struct Outcome {
    /// (result, matrix) per analysed compound, in input order.
    pub pairs: Vec<(ModeResult, Matrix)>,
    /// Units of the matrices.
    pub units: Units,
    /// Compounds that could not be read or analysed.
    pub failures: Vec<Error>,
    /// Compounds in the input.
    pub total: usize,
}

/// Reads and analyses every compound of a table, keeping each compound's
/// matrix beside its result (for pictures); a compound that fails is a failure, not fatal.
pub fn analyse_with_matrices(table: &Table, args: &Args) -> Result<Outcome> {
    let (matrices, units, mut failures) = read(table, &read_options(args))?;
    let total = matrices.len() + failures.len();
    let opts = options(args);
    let mut pairs = Vec::new();
    for m in matrices {
        match analyse(&m, &units, &opts) {
            Ok(r) => pairs.push((r, m)),
            Err(e) => failures.push(e),
        }
    }
    Ok(Outcome { pairs, units, failures, total })
}

/// The report section of a run: per compound its text block and figure.
pub fn report_section(outcome: &Outcome, command: &str) -> Result<crate::plot::html::Section> {
    let pairs: Vec<(&ModeResult, &Matrix)> = outcome.pairs.iter().map(|(r, m)| (r, m)).collect();
    crate::plot::mode::section(&pairs, &outcome.units, &outcome.failures, command)
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
        let page = crate::plot::html::Page {
            title: format!("kimech mode — {}", args.file),
            intro: vec![format!("Inhibition mechanism of {} compound(s) from {}.", outcome.total, args.file)],
            sections: vec![report_section(outcome, &format!("kimech mode {}", args.file))?],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
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

/// What the reader needs from the arguments.
fn read_options(args: &Args) -> ReadOptions {
    ReadOptions {
        substrate_unit: args.substrate_unit,
        inhibitor_unit: args.inhibitor_unit,
        sd_required: args.weighting == WeightingArg::Sd,
    }
}
