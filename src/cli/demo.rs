//! `kimech demo`: the whole chain on the bundled invented scenario.

use super::km;
use super::mode;
use crate::error::Result;

/// The invented substrate series (see demo-compounds/README.md).
const SUBSTRATE_SERIES: &str = include_str!("../../demo-compounds/substrate-series.csv");

/// The invented rate matrix of five compounds (demo-compounds/make_rate_matrix.py).
const RATE_MATRIX: &str = include_str!("../../demo-compounds/rate-matrix.csv");

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
    super::finish(&failures, series.len(), "series")?;
    mode_stage()
}

/// Stage 2: the [S]×[I] rate matrix of five invented compounds → mechanism, Ki, α.
fn mode_stage() -> Result<()> {
    println!("\nStage 2 — [S]×[I] rate matrices → mechanism, Ki, α (five invented compounds, one per mechanism)");
    println!("  $ kimech mode demo-compounds/rate-matrix.csv\n");
    let path = "demo-compounds/rate-matrix.csv";
    let table = crate::io::Table::parse(path, RATE_MATRIX.as_bytes(), b',')?;
    let args = mode::Args {
        file: path.into(),
        substrate_unit: None,
        inhibitor_unit: None,
        weighting: km::WeightingArg::None,
        criterion: mode::CriterionArg::Aicc,
        alpha_level: 0.05,
        confidence: 0.95,
        output: super::OutputArgs { format: crate::io::Format::Table, output: None },
    };
    let (results, failures, total) = mode::analyse_table(&table, &args)?;
    print!("{}", mode::human(&results));
    super::finish(&failures, total, "compounds")
}
