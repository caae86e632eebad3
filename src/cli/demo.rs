//! `kimech demo`: the whole chain on the bundled invented scenario.

use super::km;
use crate::error::Result;

/// The invented substrate series (see demo-compounds/README.md).
const SUBSTRATE_SERIES: &str = include_str!("../../demo-compounds/substrate-series.csv");

/// Run every stage on the invented demo scenario and print a summary.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {}

/// Runs the demo.
pub fn run(_args: &Args) -> Result<()> {
    println!("kimech demo — an invented scenario: the fictional enzyme veridase-7 (VRD7)");
    println!("and fictional compounds KX-101 … (see demo-compounds/README.md). Nothing here is real data.\n");
    println!("Stage 1 — substrate series → Km, Vmax, kcat");
    println!("  $ kimech km demo-compounds/substrate-series.csv --enzyme \"5 nM\"\n");
    let table = crate::io::Table::parse("demo-compounds/substrate-series.csv", SUBSTRATE_SERIES.as_bytes(), b',')?;
    let args = km::Args {
        file: "demo-compounds/substrate-series.csv".into(),
        substrate_unit: None,
        enzyme: crate::units::ConcentrationArg::parse("5 nM").ok(),
        weighting: km::WeightingArg::None,
        confidence: 0.95,
        output: super::OutputArgs { format: crate::io::Format::Table, output: None },
    };
    let outcome = km::process(&table, &args)?;
    print!("{}", km::human(&outcome.results));
    super::finish(&outcome.failures, outcome.total, "series")
}
