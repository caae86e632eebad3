//! `kimech rates`: initial rates from progress curves, written so that the
//! output feeds `kimech km` (and the rate-matrix command) directly.

use super::{OutputArgs, finish, parse_fraction};
use crate::analysis::rates::{Options, analyse};
use crate::error::{Error, Result};
use crate::io::rates::read;
use crate::io::{Table, write_output};
use crate::view::rates::{CarriedResult, RateTable, render};

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

/// What one run produced.
pub struct Outcome {
    /// The rates, as the views show them.
    pub table: RateTable,
    /// Errors of curves that could not be used.
    pub failures: Vec<Error>,
    /// Number of curves.
    pub total: usize,
}

/// Runs `kimech rates`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, args)?;
    let bytes = render(&outcome.table, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    finish(&outcome.failures, outcome.total, "curves")
}

/// Reads the curves of `table` and finds each one's initial rate.
pub fn process(table: &Table, args: &Args) -> Result<Outcome> {
    let input = read(table)?;
    let options = Options {
        min_points: args.min_points,
        curvature_alpha: args.curvature_alpha,
        max_conversion: args.max_conversion,
        confidence: args.confidence,
        rate_unit: input.rate_unit.clone(),
    };
    let mut results = Vec::new();
    let mut failures = Vec::new();
    let total = input.curves.len();
    for (curve, carried) in input.curves {
        match analyse(&curve, &options) {
            Ok(result) => results.push(CarriedResult { result, carried }),
            Err(e) => failures.push(e),
        }
    }
    let table = RateTable { results, carried_headers: input.carried_headers, has_curve_column: input.has_curve_column };
    Ok(Outcome { table, failures, total })
}
