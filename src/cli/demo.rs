//! `kimech demo`: the whole chain on the bundled invented scenario.

use std::path::PathBuf;

use super::km;
use crate::error::Result;
use crate::plot::html::{Page, Section};

/// The invented substrate series (see demo-compounds/README.md).
const SUBSTRATE_SERIES: &str = include_str!("../../demo-compounds/substrate-series.csv");

/// Where the report goes when `--report` is not given.
const DEFAULT_REPORT: &str = "kimech-demo-report.html";

/// Run every stage on the invented demo scenario and print a summary.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// Write the HTML report here (default: kimech-demo-report.html in the current directory).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Runs the demo.
pub fn run(args: &Args) -> Result<()> {
    println!("kimech demo — an invented scenario: the fictional enzyme veridase-7 (VRD7)");
    println!("and fictional compounds KX-101 … (see demo-compounds/README.md). Nothing here is real data.\n");
    let mut sections = Vec::new();
    let km_outcome = km_stage(&mut sections)?;
    let path = args.report.clone().unwrap_or_else(|| PathBuf::from(DEFAULT_REPORT));
    write_report(&path, sections)?;
    println!("\nReport written to {}", path.display());
    super::finish(&km_outcome.failures, km_outcome.total, "series")
}

/// Stage 1: substrate series → Km, Vmax, kcat.
fn km_stage(sections: &mut Vec<Section>) -> Result<km::Outcome> {
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
        pictures: super::PictureArgs::default(),
    };
    let outcome = km::process(&table, &args)?;
    print!("{}", km::human(&outcome.results));
    sections.push(crate::plot::km::section(&outcome.results, &outcome.failures, &km::command_line(&args))?);
    Ok(outcome)
}

/// Writes the demo's report page.
fn write_report(path: &std::path::Path, sections: Vec<Section>) -> Result<()> {
    let page = Page {
        title: "kimech demo report — veridase-7 (VRD7)".into(),
        intro: vec![
            "An invented scenario: the fictional enzyme veridase-7 (VRD7) and fictional compounds KX-101 …; nothing here is real data.".into(),
            "Each section shows the command that produced it, its tables, warnings and charts.".into(),
        ],
        sections,
        caution: super::CAUTION.to_string(),
    };
    crate::io::write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[])
}
