//! `kimech demo`: the whole chain on the bundled invented scenario. Each
//! stage's output is parsed as the next stage's input, exactly as a user
//! would pipe the commands.

use std::path::PathBuf;

mod chain;
mod plan_stage;

use chain::{IC50_CSV, ki_rank_stage};

use crate::batch::ic50;
use crate::batch::{km, mode};
use crate::error::Result;
use crate::io::{Format, Table};
use crate::page::{Page, Section};

/// Invented progress curves (see demo-compounds/README.md).
const PROGRESS_CURVES: &str = include_str!("../../../demo-compounds/progress-curves.csv");

/// The invented rate matrix of five compounds (demo-compounds/make_rate_matrix.py).
const RATE_MATRIX: &str = include_str!("../../../demo-compounds/rate-matrix.csv");
/// Two matrices the five rate laws cannot settle (demo-compounds/make_difficult_matrices.py).
const DIFFICULT_MATRIX: &str = include_str!("../../../demo-compounds/rate-matrix-difficult.csv");

/// The invented dose-response plates (demo-compounds/make_dose_response.py).
const DOSE_RESPONSE: &str = include_str!("../../../demo-compounds/dose-response.csv");

/// The invented IC50 table of a second assay at other conditions (see its header comments).
const SECOND_ASSAY: &str = include_str!("../../../demo-compounds/second-assay-ic50.csv");

/// Invented progress curves of a covalent and a slow-binding compound (demo-compounds/make_onset_curves.py).
const ONSET_CURVES: &str = include_str!("../../../demo-compounds/onset-curves.csv");

/// Where the report goes when `--report` is not given.
const DEFAULT_REPORT: &str = "kimech-demo-report.html";

/// Run every stage on the invented demo scenario, print a summary and write
/// an HTML report with the tables and charts.
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
    let rate_table = rates_stage(&mut sections)?;
    let km_status = km_stage(&rate_table, &mut sections);
    let mode_status = mode_stage(&mut sections).and(difficult_mode_stage(&mut sections));
    let mode_status = mode_status.and(plan_stage::plan_stage(RATE_MATRIX, &mut sections));
    let (ic50_csv, ic50_status) = dose_response_stage_into(&mut sections)?;
    let ki_status = ki_rank_stage(&ic50_csv, &mut sections);
    let onset_status = onset_stage(&mut sections);
    let path = args.report.clone().unwrap_or_else(|| PathBuf::from(DEFAULT_REPORT));
    write_report(&path, sections)?;
    println!("\nReport written to {}", path.display());
    km_status.and(mode_status).and(ic50_status).and(ki_status).and(onset_status)
}

/// Time-dependent inhibition: a covalent and a slow-binding compound.
fn onset_stage(sections: &mut Vec<Section>) -> Result<()> {
    let path = "demo-compounds/onset-curves.csv";
    println!(
        "\nStage 7 — time-dependent inhibition: progress curves → onset, kinact, KI, kinact/KI (a covalent and a slow-binding compound)"
    );
    println!("  $ kimech onset {path}\n");
    let table = Table::parse(path, ONSET_CURVES.as_bytes(), b',')?;
    let outcome = crate::batch::onset::process(&table, &crate::batch::onset::Settings::default())?;
    print!("{}", crate::view::onset::human(&outcome.results()));
    sections.push(outcome.section(&format!("kimech onset {path}"))?);
    super::finish(&outcome.failures, outcome.pairs.len() + outcome.failures.len(), "compounds")
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
        caution: crate::view::CAUTION.to_string(),
    };
    crate::io::write_output(Some(path), crate::page::render(&page).as_bytes(), &[])
}

/// Stage 1: progress curves → initial rates; returns the rates as the table `km` reads.
fn rates_stage(sections: &mut Vec<Section>) -> Result<Table> {
    println!("Stage 1 — progress curves → initial rates");
    println!("  $ kimech rates demo-compounds/progress-curves.csv --format csv -o rates.csv\n");
    let input = Table::parse("demo-compounds/progress-curves.csv", PROGRESS_CURVES.as_bytes(), b',')?;
    let outcome = crate::batch::rates::process(&input, &crate::batch::rates::Settings::default())?;
    let text = String::from_utf8_lossy(&crate::view::rates::render(&outcome.table, Format::Table)?).into_owned();
    print!("{text}");
    println!();
    sections.push(Section {
        heading: "Initial rates".into(),
        command: Some("kimech rates demo-compounds/progress-curves.csv --format csv -o rates.csv".into()),
        blocks: crate::page::blocks_of(&crate::view::rates::parts(&outcome.table)),
    });
    super::finish(&outcome.failures, outcome.total, "curves")?;
    Table::parse("rates.csv", &crate::view::rates::render(&outcome.table, Format::Csv)?, b',')
}

/// Stage 2: initial rates → Km, Vmax, kcat.
fn km_stage(rate_table: &Table, sections: &mut Vec<Section>) -> Result<()> {
    println!("Stage 2 — initial rates → Km, Vmax, kcat");
    println!("  $ kimech km rates.csv --enzyme \"5 nM\"\n");
    let settings =
        km::Settings { enzyme: crate::units::ConcentrationArg::parse("5 nM").ok(), ..km::Settings::default() };
    let outcome = km::process(rate_table, &settings)?;
    print!("{}", crate::view::km::human(&outcome.results));
    let command = km::command_line("rates.csv", &settings);
    sections.push(crate::page::km::section(&outcome.results, &outcome.failures, &command)?);
    super::finish(&outcome.failures, outcome.total, "series")
}

/// Stage 3: the [S]×[I] rate matrix of five invented compounds → mechanism, Ki, α.
fn mode_stage(sections: &mut Vec<Section>) -> Result<()> {
    println!("\nStage 3 — [S]×[I] rate matrices → mechanism, Ki, α (five invented compounds, one per mechanism)");
    println!("  $ kimech mode demo-compounds/rate-matrix.csv\n");
    mode_file_stage(sections, "demo-compounds/rate-matrix.csv", RATE_MATRIX)
}

/// Stage 3b: an uncertain mechanism and partial inhibition → what mode says about each.
fn difficult_mode_stage(sections: &mut Vec<Section>) -> Result<()> {
    println!("\nStage 3b — two harder matrices: a thin design that cannot settle the mechanism (KX-206),");
    println!("and an inhibitor that leaves a third of the activity (KX-207)");
    println!("  $ kimech mode demo-compounds/rate-matrix-difficult.csv\n");
    mode_file_stage(sections, "demo-compounds/rate-matrix-difficult.csv", DIFFICULT_MATRIX)
}

/// Runs `mode` on one bundled file, prints the table and adds the report section.
fn mode_file_stage(sections: &mut Vec<Section>, path: &str, text: &str) -> Result<()> {
    let table = crate::io::Table::parse(path, text.as_bytes(), b',')?;
    let outcome = mode::process(&table, &mode::Settings::default())?;
    print!("{}", crate::view::mode::human(&outcome.results()));
    sections.push(outcome.section(&format!("kimech mode {path}"))?);
    super::finish(&outcome.failures, outcome.total, "compounds")
}

/// Stage 4: dose-response plates → IC50 table. Prints the human report, adds
/// the report section (table and thumbnails) and returns the CSV a user would
/// pass on to `kimech ki`, with the stage's status.
fn dose_response_stage_into(sections: &mut Vec<Section>) -> Result<(String, Result<()>)> {
    let name = "demo-compounds/dose-response.csv";
    println!("\nStage 4 — dose-response plates → IC50, Hill coefficient, quality flags (Z′ per plate)");
    println!("  $ kimech ic50 {name} --normalise");
    println!("  $ kimech ic50 {name} --normalise --format csv -o {IC50_CSV}\n");
    let mut settings = ic50::Settings::defaults(Format::Table);
    settings.read.normalise = true;
    let mut pictures = ic50::Pictures::new(name, None, None);
    let (human, summary) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &settings, Some(&mut pictures))?;
    print!("{}", String::from_utf8_lossy(&human));
    sections.push(pictures.section(&format!("kimech ic50 {name} --normalise"))?);
    settings.format = Format::Csv;
    let (csv, _) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), &settings, None)?;
    println!("{}", raw_and_normalised_agree(name, &settings)?);
    Ok((String::from_utf8_lossy(&csv).into_owned(), summary.into_result()))
}

/// Fits the same plates as raw signal (no `--normalise`) and says whether the
/// calls and IC50s agree with the % activity run: per plate, % activity is an
/// affine map of the signal, which moves the asymptotes but not the IC50 or
/// the call (the engine is scale-free).
fn raw_and_normalised_agree(name: &str, normalised: &ic50::Settings) -> Result<String> {
    let results = |settings: &ic50::Settings| -> Result<Vec<serde_json::Value>> {
        let (json, _) = ic50::run_bytes(name, DOSE_RESPONSE.as_bytes(), settings, None)?;
        let doc: serde_json::Value =
            serde_json::from_slice(&json).map_err(|e| crate::error::Error::Serialise(e.to_string()))?;
        Ok(doc["results"].as_array().cloned().unwrap_or_default())
    };
    let mut settings = normalised.clone();
    settings.format = Format::Json;
    let percent = results(&settings)?;
    settings.read.normalise = false;
    let raw = results(&settings)?;
    let mut same_call = 0;
    let mut worst: f64 = 0.0;
    for (p, r) in percent.iter().zip(&raw) {
        if p["call"] == r["call"] && p["qualifier"] == r["qualifier"] {
            same_call += 1;
            if p["qualifier"] == "=" {
                let (a, b) =
                    (p["ic50"]["value"].as_f64().unwrap_or(f64::NAN), r["ic50"]["value"].as_f64().unwrap_or(f64::NAN));
                worst = worst.max((a - b).abs() / a.abs());
            }
        }
    }
    Ok(format!(
        "  $ kimech ic50 {name}   (the same plates as raw signal, without --normalise)\n  raw and normalised runs: the same call and qualifier for {same_call} of {} compounds; exact IC50s agree to {} relative at worst\n",
        percent.len(),
        crate::io::output::sig(worst, 2)
    ))
}
