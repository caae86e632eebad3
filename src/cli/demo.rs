//! `kimech demo`: the whole chain on the bundled invented scenario. Each
//! stage's output is parsed as the next stage's input, exactly as a user
//! would pipe the commands.

use super::{OutputArgs, ic50, km, rates};
use crate::error::Result;
use crate::io::{Format, Table};

/// Invented progress curves (see demo-compounds/README.md).
const PROGRESS_CURVES: &str = include_str!("../../demo-compounds/progress-curves.csv");

/// The invented dose-response plates (demo-compounds/make_dose_response.py).
const DOSE_RESPONSE: &str = include_str!("../../demo-compounds/dose-response.csv");

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
    let km_status = km_stage(&rate_table);
    let (_ic50_csv, ic50_status) = dose_response_stage()?;
    km_status.and(ic50_status)
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

/// Stage 3: dose-response plates → IC50 table. Prints the human report and
/// returns the CSV a user would pass on to `kimech ki`, with the stage's status.
pub fn dose_response_stage() -> Result<(String, Result<()>)> {
    let name = "demo-compounds/dose-response.csv";
    println!("\nStage 3 — dose-response plates → IC50, Hill coefficient, quality flags (Z′ per plate)");
    println!("  $ kimech ic50 {name} --normalise\n");
    let mut args = ic50::Args::new(name, Format::Table);
    args.normalise = true;
    let (human, summary) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &args)?;
    print!("{}", String::from_utf8_lossy(&human));
    args.output.format = Format::Csv;
    let (csv, _) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &args)?;
    Ok((String::from_utf8_lossy(&csv).into_owned(), summary.into_result()))
}
