//! The command line: one file per subcommand, each with its own `Args` and
//! `run`. This module only lists them and holds the options they share.

use std::ffi::OsString;
use std::path::PathBuf;

use clap::{Parser, Subcommand};

use crate::error::{Error, Result};
use crate::io::Format;

pub mod demo;
pub mod ic50;
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;
pub mod rates;

/// Enzyme-inhibitor potency and mechanism analysis.
///
/// Results are research estimates whose validity rests on the stated
/// assumptions; follow your laboratory's validated procedures for decisions.
#[derive(Debug, Parser)]
#[command(name = "kimech", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Initial rates from progress curves (output feeds `km`).
    Rates(rates::Args),
    /// Fit Michaelis–Menten to substrate series: Vmax, Km, kcat.
    Km(km::Args),
    /// Fit dose-response curves: IC50, pIC50, Hill coefficient, quality flags.
    Ic50(ic50::Args),
    /// Say how a compound inhibits: global fits of five rate laws to an [S]×[I] rate matrix.
    Mode(mode::Args),
    /// Convert IC50 values to Ki with the relation, mechanism and assumption checks behind each.
    Ki(ki::Args),
    /// Time-dependent inhibition from progress curves: onset, kinact, KI, kinact/KI.
    Onset(onset::Args),
    /// Before the experiment: how likely is an [S]×[I] grid to tell the mechanisms apart, and which grid would.
    Plan(plan::Args),
    /// Aggregate, rank and export Ki results: the registry table.
    Rank(rank::Args),
    /// Run the whole chain on the bundled invented demo scenario.
    Demo(demo::Args),
}

/// Parses `args` and runs the chosen subcommand.
pub fn run(args: impl IntoIterator<Item = impl Into<OsString> + Clone>) -> Result<()> {
    let args: Vec<OsString> = args.into_iter().map(Into::into).collect();
    crate::io::provenance::start(args.iter().map(|a| a.to_string_lossy().into_owned()).collect());
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version are not errors; usage mistakes are.
            if e.use_stderr() {
                return Err(Error::Usage(e.render().to_string().trim_end().to_string()));
            }
            let _ = e.print();
            return Ok(());
        }
    };
    match cli.command {
        Command::Rates(args) => rates::run(&args),
        Command::Km(args) => km::run(&args),
        Command::Ic50(args) => ic50::run(&args),
        Command::Ki(args) => ki::run(&args),
        Command::Rank(args) => rank::run(&args),
        Command::Demo(args) => demo::run(&args),
        Command::Mode(args) => mode::run(&args),
        Command::Onset(args) => onset::run(&args),
        Command::Plan(args) => plan::run(&args),
    }
}

/// Output options every command shares.
#[derive(Debug, Clone, clap::Args)]
pub struct OutputArgs {
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// Write to this file instead of stdout (written atomically; never over an input).
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// Picture options of the commands that fit curves.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct PictureArgs {
    /// Write one SVG chart per series or compound into this directory (created if missing).
    #[arg(long, value_name = "DIR")]
    pub plot: Option<PathBuf>,
    /// Write a self-contained HTML report (tables, warnings and charts) to this file.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Parses a level or fraction strictly between 0 and 1 (confidence, significance, conversion).
pub fn parse_fraction(text: &str) -> std::result::Result<f64, String> {
    let c: f64 = text.parse().map_err(|_| format!("'{text}' is not a number; use one between 0 and 1, e.g. 0.95"))?;
    if c > 0.0 && c < 1.0 { Ok(c) } else { Err(format!("{c} is not between 0 and 1 (exclusive)")) }
}

/// How a model is chosen among nested candidates, and the confidence of its
/// intervals: the same three options for `mode` and `onset`.
#[derive(Debug, Clone, Copy, clap::Args)]
pub struct ModelChoiceArgs {
    /// How the model is chosen: aicc (lowest AICc; simplest within 2 units) or f-test (forward F-test steps).
    #[arg(long, value_enum, default_value_t = mode::CriterionArg::Aicc)]
    pub criterion: mode::CriterionArg,
    /// Significance level of the F-test steps (with --criterion f-test).
    #[arg(long, default_value_t = 0.05, value_parser = parse_fraction)]
    pub alpha_level: f64,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
}

impl Default for ModelChoiceArgs {
    /// The command-line defaults.
    fn default() -> Self {
        ModelChoiceArgs {
            criterion: mode::CriterionArg::Aicc,
            alpha_level: 0.05,
            confidence: crate::report::DEFAULT_CONFIDENCE,
        }
    }
}

/// Parses a concentration with its unit, such as `10 nM`, for a flag.
pub fn parse_flag_concentration(text: &str) -> std::result::Result<crate::units::ConcentrationArg, String> {
    crate::units::ConcentrationArg::parse(text)
}

/// Reports per-group failures on stderr and turns them into the exit status.
pub fn finish(failures: &[Error], total: usize, what: &'static str) -> Result<()> {
    for f in failures {
        eprintln!("kimech: {f}");
    }
    if failures.is_empty() { Ok(()) } else { Err(Error::Partial { failed: failures.len(), total, what }) }
}

/// The sentence every human-readable report ends with (held by the views).
pub use crate::view::CAUTION;
