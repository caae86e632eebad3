//! `kimech demo`: the whole chain on the bundled invented scenario.

use super::{ic50, km};
use crate::error::Result;

/// The invented substrate series (see demo-compounds/README.md).
const SUBSTRATE_SERIES: &str = include_str!("../../demo-compounds/substrate-series.csv");

/// The invented dose-response plates (demo-compounds/make_dose_response.py).
const DOSE_RESPONSE: &str = include_str!("../../demo-compounds/dose-response.csv");

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
    let (series, units) = km::read_series(&table, &args)?;
    let options = crate::analysis::km::Options {
        weighting: args.weighting.into(),
        confidence: args.confidence,
        enzyme: args.enzyme.map(|e| crate::analysis::km::Enzyme { molar: e.molar, unit: e.unit }),
        settings: crate::fit::FitSettings::default(),
    };
    let (results, failures) = km::analyse_all(&series, &units, &options);
    print!("{}", km::human(&results));
    let km_status = super::finish(&failures, series.len(), "series");
    let (_ic50_csv, ic50_status) = dose_response_stage()?;
    km_status.and(ic50_status)
}

/// The dose-response stage: plates → IC50 table. Prints the human report and
/// returns the CSV a user would pass on to `kimech ki`, with the stage's status.
pub fn dose_response_stage() -> Result<(String, Result<()>)> {
    let name = "demo-compounds/dose-response.csv";
    println!("\nStage 2 — dose-response plates → IC50, Hill coefficient, quality flags (Z′ per plate)");
    println!("  $ kimech ic50 {name} --normalise\n");
    let mut args = ic50::Args::new(name, crate::io::Format::Table);
    args.normalise = true;
    let (human, summary) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &args)?;
    print!("{}", String::from_utf8_lossy(&human));
    args.output.format = crate::io::Format::Csv;
    let (csv, _) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &args)?;
    Ok((String::from_utf8_lossy(&csv).into_owned(), summary.into_result()))
}
