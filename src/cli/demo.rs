//! `kimech demo`: the whole chain on the bundled invented scenario. Each
//! stage's output is parsed as the next stage's input, exactly as a user
//! would pipe the commands.

use super::{OutputArgs, km, rates};
use crate::error::Result;
use crate::io::{Format, Table};

/// Invented progress curves (see demo-compounds/README.md).
const PROGRESS_CURVES: &str = include_str!("../../demo-compounds/progress-curves.csv");

/// Run every stage on the invented demo scenario and print a summary.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {}

fn stdout_table() -> OutputArgs {
    OutputArgs { format: Format::Table, output: None }
}

/// Runs the demo.
pub fn run(_args: &Args) -> Result<()> {
    println!("kimech demo — an invented scenario: the fictional enzyme veridase-7 (VRD7)");
    println!("and fictional compounds KX-101 … (see demo-compounds/README.md). Nothing here is real data.\n");
    let rate_table = rates_stage()?;
    km_stage(&rate_table)
}

/// Stage 1: progress curves → initial rates; returns the rates as the table `km` reads.
fn rates_stage() -> Result<Table> {
    println!("Stage 1 — progress curves → initial rates");
    println!("  $ kimech rates demo-compounds/progress-curves.csv --format csv -o rates.csv\n");
    let input = Table::parse("demo-compounds/progress-curves.csv", PROGRESS_CURVES.as_bytes(), b',')?;
    let args = rates::Args {
        file: "demo-compounds/progress-curves.csv".into(),
        min_points: 4,
        curvature_alpha: 0.05,
        max_conversion: 0.1,
        confidence: 0.95,
        output: stdout_table(),
    };
    let outcome = rates::process(&input, &args)?;
    print!("{}", String::from_utf8_lossy(&rates::render(&outcome, Format::Table)?));
    println!();
    super::finish(&outcome.failures, outcome.total, "curves")?;
    Table::parse("rates.csv", &rates::render(&outcome, Format::Csv)?, b',')
}

/// Stage 2: initial rates → Km, Vmax, kcat.
fn km_stage(rate_table: &Table) -> Result<()> {
    println!("Stage 2 — initial rates → Km, Vmax, kcat");
    println!("  $ kimech km rates.csv --enzyme \"5 nM\"\n");
    let args = km::Args {
        file: "rates.csv".into(),
        substrate_unit: None,
        enzyme: crate::units::ConcentrationArg::parse("5 nM").ok(),
        weighting: km::WeightingArg::None,
        confidence: 0.95,
        output: stdout_table(),
    };
    let outcome = km::process(rate_table, &args)?;
    print!("{}", km::human(&outcome.results));
    super::finish(&outcome.failures, outcome.total, "series")
}
