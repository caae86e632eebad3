//! `kimech km`: Michaelis–Menten fits of substrate series.

use super::{CAUTION, OutputArgs, PictureArgs, finish, parse_flag_concentration, parse_fraction};
use crate::batch::km::{Outcome, Settings, command_line, process};
use crate::error::Result;
use crate::fit::Weighting;
use crate::io::{Table, write_output};
use crate::units::{ConcUnit, ConcentrationArg};
use crate::view::km::render;

/// Fit Michaelis–Menten to initial rates: Vmax, Km (with profile-likelihood
/// intervals), kcat and kcat/Km when the enzyme concentration is given.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns substrate, rate and optionally series and sd; `-` reads stdin.
    pub file: String,
    /// Unit of substrate values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub substrate_unit: Option<ConcUnit>,
    /// Total active enzyme concentration, e.g. "10 nM": adds kcat and kcat/Km.
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// Residual weighting: none, relative (1/rate²) or sd (1/sd² from the sd column).
    #[arg(long, value_enum, default_value_t = WeightingArg::None)]
    pub weighting: WeightingArg,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures and the HTML report.
    #[command(flatten)]
    pub pictures: PictureArgs,
}

/// `--weighting` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum WeightingArg {
    /// Ordinary least squares.
    None,
    /// 1/rate²: constant relative error.
    Relative,
    /// 1/sd² from the sd column.
    Sd,
}

impl From<WeightingArg> for Weighting {
    fn from(w: WeightingArg) -> Self {
        match w {
            WeightingArg::None => Weighting::None,
            WeightingArg::Relative => Weighting::Relative,
            WeightingArg::Sd => Weighting::Sd,
        }
    }
}

/// Runs `kimech km`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, &settings(args))?;
    let bytes = render(&outcome.results, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.total, "series")
}

/// Writes `--plot` SVGs (one per series) and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = outcome.results.iter().map(|r| r.series.as_deref()).collect();
        let names = crate::plot::files::unique_names("km", &ids);
        let mut files = Vec::with_capacity(names.len());
        for (name, r) in names.into_iter().zip(&outcome.results) {
            files.push((name, crate::plot::km::series_figure(r)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let section =
            crate::page::km::section(&outcome.results, &outcome.failures, &command_line(&args.file, &settings(args)))?;
        let page = crate::page::Page {
            title: format!("kimech km — {}", args.file),
            intro: vec![format!("Michaelis–Menten fits of {} series from {}.", outcome.total, args.file)],
            sections: vec![section],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::page::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}

/// The library's settings from the flags.
pub fn settings(args: &Args) -> Settings {
    Settings {
        substrate_unit: args.substrate_unit,
        enzyme: args.enzyme,
        weighting: args.weighting.into(),
        confidence: args.confidence,
    }
}
