//! `kimech rates`: initial rates from progress curves, written so that the
//! output feeds `kimech km` (and the rate-matrix command) directly.

use super::{OutputArgs, finish, parse_fraction};
use crate::batch::rates::{Settings, process};
use crate::error::Result;
use crate::io::{Table, write_output};
use crate::view::rates::render;

/// Initial rates from progress curves: the slope of the longest initial
/// window that a straight line describes. Other columns (substrate,
/// inhibitor, compound…) must be constant per curve and are carried to the
/// output, so it can be given to `kimech km` as it is.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns time, signal and optionally curve; `-` reads stdin.
    pub file: String,
    /// The smallest initial window tried, in points (at least 3).
    #[arg(long, default_value_t = 4)]
    pub min_points: usize,
    /// Significance level of the t² term at which the window stops growing.
    #[arg(long, default_value_t = 0.05, value_parser = parse_fraction)]
    pub curvature_alpha: f64,
    /// Largest fraction of the substrate converted inside the window (common practice: 0.1);
    /// checked when the signal is a product concentration and a substrate column has a unit.
    #[arg(long, default_value_t = 0.1, value_parser = parse_fraction)]
    pub max_conversion: f64,
    /// Confidence level of the rate intervals.
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Runs `kimech rates`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, &settings(args))?;
    let bytes = render(&outcome.table, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    finish(&outcome.failures, outcome.total, "curves")
}

/// The library's settings from the flags.
pub fn settings(args: &Args) -> Settings {
    Settings {
        min_points: args.min_points,
        curvature_alpha: args.curvature_alpha,
        max_conversion: args.max_conversion,
        confidence: args.confidence,
    }
}
