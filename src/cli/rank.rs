//! `kimech rank`: aggregate Ki results per compound and target, rank them by
//! pKi, add selectivity and ligand efficiency, and write the registry export.
//!
//! Reads the CSV `kimech ki` writes, or any table with `compound`, a Ki
//! (unit in the cell, the header, a `unit` column or `--ki-unit`) and an
//! optional `qualifier` column. The numbers come from
//! [`crate::analysis::rank`]; this file reads and writes.
//!
//! `--format csv` is the registry export, a versioned contract whose columns
//! are declared in [`crate::view::registry`] (and listed in README.md).
//!
//! Rows are read one at a time and folded into one accumulator per compound ×
//! target × endpoint ([`Aggregator`]), so memory grows with the groups, not
//! the rows; outputs are written as they are produced.

use super::{OutputArgs, parse_fraction};
use crate::analysis::rank::{Aggregator, Options, RankRow};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::rank::{Columns, entry_for_row};
use crate::io::stream::{OutputSink, RowStream};
use crate::io::write_output;
use crate::units::ConcUnit;
use crate::view::rank::render_to;

/// Aggregate repeats per compound and target (mean pKi, SD, n, geometric-mean
/// Ki; bounds handled honestly), rank by pKi, and export a registry table.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSVs from `kimech ki`, or any tables with compound, ki and optionally qualifier; `-` reads stdin.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<String>,
    /// Counter-target: adds selectivity ΔpKi = pKi(target) − pKi(this target).
    #[arg(long, value_name = "TARGET")]
    pub versus: Option<String>,
    /// Unit of the reported Ki.
    #[arg(long, value_name = "UNIT", default_value_t = ConcUnit::Nanomolar)]
    pub unit: ConcUnit,
    /// Unit of Ki cells that carry none in the cell, the header or a unit column.
    #[arg(long, value_name = "UNIT")]
    pub ki_unit: Option<ConcUnit>,
    /// Confidence level of the interval of a geometric mean.
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination (csv is the registry export).
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per target) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

/// At most this many failure messages are kept for the HTML report (all go to stderr).
const KEPT_FAILURES: usize = 200;

/// Runs `kimech rank`.
pub fn run(args: &Args) -> Result<()> {
    let mut aggregator = Aggregator::new();
    let (mut total, mut failed) = (0, 0);
    let mut failures = Vec::new();
    for file in &args.files {
        let mut stream = RowStream::open(file)?;
        let cols = Columns::find(stream.table())?;
        let mut record = Record { line: 0, cells: Vec::new() };
        while stream.next_into(&mut record)? {
            total += 1;
            let (entry, failure) = entry_for_row(stream.table(), &cols, &record, args.ki_unit);
            if let Some(e) = &entry {
                aggregator.add(e);
            }
            if let Some(f) = failure {
                eprintln!("kimech: {f}");
                failed += 1;
                if failures.len() < KEPT_FAILURES {
                    failures.push(f);
                }
            }
        }
    }
    let ranking = aggregator.rank(&Options { versus: args.versus.clone(), confidence: args.confidence });
    if let Some(v) = &args.versus
        && !ranking.targets().contains(&v.as_str())
    {
        let targets = ranking.targets();
        return Err(Error::Option {
            option: "--versus".into(),
            value: v.clone(),
            problem: "no row has this target".into(),
            expected: format!("use one of the targets in the input: {}", targets.join(", ")),
        });
    }
    let inputs: Vec<&str> = args.files.iter().map(String::as_str).collect();
    let mut sink = OutputSink::create(args.output.output.as_deref(), &inputs)?;
    render_to(ranking.rows(), args.unit, args.output.format, &mut sink)?;
    sink.commit()?;
    if args.pictures.plot.is_some() || args.pictures.report.is_some() {
        let rows: Vec<RankRow> = ranking.rows().collect();
        write_pictures(&rows, &failures, args, &inputs)?;
    }
    if failed == 0 { Ok(()) } else { Err(Error::Partial { failed, total, what: "rows" }) }
}

/// Writes `--plot` SVGs (one per target and endpoint) and the `--report` page.
fn write_pictures(rows: &[RankRow], failures: &[Error], args: &Args, inputs: &[&str]) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let groups = crate::plot::rank::groups(rows);
        let ids: Vec<String> = groups.iter().map(|((t, e), _)| format!("{t}-{e}")).collect();
        let names = crate::plot::files::unique_names("rank", &ids.iter().map(|s| Some(s.as_str())).collect::<Vec<_>>());
        let mut files = Vec::with_capacity(names.len());
        for (name, ((target, endpoint), group)) in names.into_iter().zip(&groups) {
            files.push((name, crate::plot::rank::group_figure(target, endpoint, group)?.text));
        }
        crate::plot::files::write_plots(dir, &files, inputs)?;
    }
    if let Some(path) = &args.pictures.report {
        let mut command = format!("kimech rank {}", args.files.join(" "));
        if let Some(v) = &args.versus {
            command.push_str(&format!(" --versus {v}"));
        }
        let page = crate::page::Page {
            title: format!("kimech rank — {}", args.files.join(", ")),
            intro: vec![format!("{} ranked rows from {}.", rows.len(), args.files.join(", "))],
            sections: vec![crate::page::rank::section(rows, args.unit, failures, &command)?],
            caution: crate::view::CAUTION.to_string(),
        };
        write_output(Some(path), crate::page::render(&page).as_bytes(), inputs)?;
    }
    Ok(())
}
