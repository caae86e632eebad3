//! `kimech demo`: the whole chain on the bundled invented scenario.

use super::{ki, km, rank};
use crate::error::Result;

/// The invented substrate series (see demo-compounds/README.md).
const SUBSTRATE_SERIES: &str = include_str!("../../demo-compounds/substrate-series.csv");

/// The invented IC50 table of a second assay at other conditions (see its header comments).
const SECOND_ASSAY: &str = include_str!("../../demo-compounds/second-assay-ic50.csv");

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
    let second = "demo-compounds/second-assay-ic50.csv";
    let ki_status = ki_and_rank(&[(second, SECOND_ASSAY, ki_args(second))]);
    km_status.and(ki_status)
}

/// The `ki` and `rank` stages: each IC50 table (name, CSV text, `ki` options) goes through
/// `kimech ki` and its CSV output, and all of them together through `kimech rank`,
/// exactly as a user would pipe them.
pub fn ki_and_rank(tables: &[(&str, &str, ki::Args)]) -> Result<()> {
    let mut ki_csv = Vec::new();
    let mut failures = Vec::new();
    let mut total = 0;
    for (name, text, args) in tables {
        println!("\nStage — IC50 table → Ki (conditions from the table's columns)");
        println!("  $ kimech ki {name}\n");
        let table = crate::io::Table::parse(name, text.as_bytes(), b',')?;
        let (rows, carried, row_failures) = ki::convert_table(&table, args)?;
        print!("{}", ki::human(&rows));
        total += rows.len();
        failures.extend(row_failures);
        ki_csv.push((
            format!("{}-ki.csv", name.trim_end_matches(".csv")),
            ki::render(&rows, &carried, crate::io::Format::Csv)?,
        ));
    }
    let names: Vec<&str> = ki_csv.iter().map(|(n, _)| n.as_str()).collect();
    println!("\nStage — Ki → one ranked, flagged, registry-ready table (selectivity against VRD3)");
    for ((n, _), (name, _, _)) in ki_csv.iter().zip(tables) {
        println!("  $ kimech ki {name} --format csv -o {n}");
    }
    println!("  $ kimech rank {} --versus VRD3\n", names.join(" "));
    let mut entries = Vec::new();
    for (n, bytes) in &ki_csv {
        let table = crate::io::Table::parse(n, bytes, b',')?;
        let (e, f) = rank::read_entries(&table, None)?;
        entries.extend(e);
        failures.extend(f);
    }
    let options = crate::analysis::rank::Options { versus: Some("VRD3".into()), confidence: 0.95 };
    let ranked = crate::analysis::rank::aggregate(&entries, &options);
    print!(
        "{}",
        String::from_utf8_lossy(&rank::render(&ranked, crate::units::ConcUnit::Nanomolar, crate::io::Format::Table)?)
    );
    println!("(`kimech rank … --format csv` writes the same rows as the registry export; columns in README.md.)");
    super::finish(&failures, total, "rows")
}

/// `kimech ki NAME` with every default: conditions come from the table.
pub fn ki_args(name: &str) -> ki::Args {
    ki::Args {
        file: name.to_string(),
        substrate: None,
        km: None,
        km_se: None,
        enzyme: None,
        mechanism: crate::convert::Mechanism::Unknown,
        alpha: None,
        assay: crate::convert::Assay::Enzyme,
        ligand: None,
        kd: None,
        unit: crate::units::ConcUnit::Nanomolar,
        ic50_unit: None,
        conc_unit: None,
        hill_tolerance: 0.5,
        confidence: 0.95,
        output: super::OutputArgs { format: crate::io::Format::Table, output: None },
    }
}
