//! `kimech km`: Michaelis–Menten fits of substrate series.

use super::{CAUTION, OutputArgs, PictureArgs, finish, parse_flag_concentration, parse_fraction};
use crate::analysis::km::{Enzyme, KmResult, Options, Series, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::{FitSettings, Weighting};
use crate::io::km::{ReadOptions, read};
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
    let outcome = process(&table, args)?;
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
        let section = crate::plot::km::section(&outcome.results, &outcome.failures, &command_line(args))?;
        let page = crate::plot::html::Page {
            title: format!("kimech km — {}", args.file),
            intro: vec![format!("Michaelis–Menten fits of {} series from {}.", outcome.total, args.file)],
            sections: vec![section],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}

/// The command line that reproduces this run's numbers, for the report.
pub fn command_line(args: &Args) -> String {
    let mut line = format!("kimech km {}", args.file);
    if let Some(u) = args.substrate_unit {
        line.push_str(&format!(" --substrate-unit {}", u.symbol()));
    }
    if let Some(e) = &args.enzyme {
        let value = format!("{:.6}", e.unit.from_molar(e.molar));
        let value = value.trim_end_matches('0').trim_end_matches('.');
        line.push_str(&format!(" --enzyme \"{value} {}\"", e.unit.symbol()));
    }
    match args.weighting {
        WeightingArg::None => {}
        WeightingArg::Relative => line.push_str(" --weighting relative"),
        WeightingArg::Sd => line.push_str(" --weighting sd"),
    }
    if (args.confidence - crate::report::DEFAULT_CONFIDENCE).abs() > 1e-12 {
        line.push_str(&format!(" --confidence {}", args.confidence));
    }
    line
}

/// What one run produced: results for the series that could be fitted and
/// the errors of those that could not.
pub struct Outcome {
    /// Results, in input order.
    pub results: Vec<KmResult>,
    /// One error per series that failed.
    pub failures: Vec<Error>,
    /// Number of series in the input.
    pub total: usize,
}

/// Reads the series from `table` and fits each one.
pub fn process(table: &Table, args: &Args) -> Result<Outcome> {
    let read_options =
        ReadOptions { substrate_unit: args.substrate_unit, sd_required: args.weighting == WeightingArg::Sd };
    let (series, units) = read(table, &read_options)?;
    let options = Options {
        weighting: args.weighting.into(),
        confidence: args.confidence,
        enzyme: args.enzyme.map(|e| Enzyme { molar: e.molar, unit: e.unit }),
        settings: FitSettings::default(),
    };
    let (results, failures) = analyse_all(&series, &units, &options);
    Ok(Outcome { results, failures, total: series.len() })
}

/// Fits every series; failures are collected, not fatal.
fn analyse_all(series: &[Series], units: &Units, options: &Options) -> (Vec<KmResult>, Vec<Error>) {
    let mut results = Vec::new();
    let mut failures = Vec::new();
    for s in series {
        match analyse(s, units, options) {
            Ok(r) => results.push(r),
            Err(e) => failures.push(e),
        }
    }
    (results, failures)
}
