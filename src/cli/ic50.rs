//! `kimech ic50`: dose-response curves to IC50, streamed in bounded memory.
//! Reads with [`crate::io::ic50`], fits with [`crate::analysis::ic50`] in
//! batches on all cores ([`crate::batch::ic50`]), writes with
//! [`crate::view::ic50`]. This page holds the flags and what they mean.

use super::{OutputArgs, parse_flag_concentration, parse_fraction};
use crate::analysis::ic50::{IntervalMethod, OutlierMode, Thresholds};
use crate::batch::ic50::{Pictures, Settings, run_checked};
use crate::error::Result;
use crate::io::ic50::{Input, ReadOptions};
use crate::io::stream::OutputSink;
use crate::units::{ConcUnit, ConcentrationArg};

/// Fit dose-response curves: IC50 (with qualifier and interval), pIC50, Hill
/// coefficient, asymptotes and quality flags, one result per compound.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns compound, concentration, response; optional plate and
    /// control (uninhibited / inhibited); other columns are carried through. `-` reads stdin.
    pub file: String,
    /// Unit of concentrations that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub concentration_unit: Option<ConcUnit>,
    /// Hold the lower asymptote at this response (e.g. 0 for % activity).
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub fix_lower: Option<f64>,
    /// Hold the upper asymptote at this response (e.g. 100 for % activity).
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub fix_upper: Option<f64>,
    /// Turn raw signal into % activity from each plate's control wells; reports Z′ per plate.
    #[arg(long, visible_alias = "normalize")]
    pub normalise: bool,
    /// Total active enzyme, e.g. "2 nM": fit Morrison's tight-binding equation (apparent Ki and
    /// IC50); the response must be % activity or background-subtracted (zero at full inhibition).
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = crate::report::DEFAULT_CONFIDENCE, value_parser = parse_fraction)]
    pub confidence: f64,
    /// IC50 interval: wald (on ln IC50, fast) or profile (likelihood, several refits per curve).
    #[arg(long, value_enum, default_value_t = IntervalArg::Wald)]
    pub intervals: IntervalArg,
    /// Flag `hill-steep` above this |Hill coefficient| (common practice).
    #[arg(long, default_value_t = Thresholds::default().hill_steep)]
    pub hill_steep: f64,
    /// Flag `hill-shallow` below this |Hill coefficient| (common practice).
    #[arg(long, default_value_t = Thresholds::default().hill_shallow)]
    pub hill_shallow: f64,
    /// Flag `partial-inhibition` when lower/upper exceeds this (common practice).
    #[arg(long, default_value_t = Thresholds::default().partial_above)]
    pub partial_above: f64,
    /// Flag `no-inhibition` when the fitted inhibition at the top concentration is below this fraction (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_inhibition)]
    pub min_inhibition: f64,
    /// Flag `poor-fit` below this R² (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_r2)]
    pub min_r2: f64,
    /// Flag `too-few-points` below this many distinct concentrations (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_concentrations)]
    pub min_concentrations: usize,
    /// Flag plates (and their compounds) whose Z′ is below this (Zhang et al. 1999: 0.5).
    #[arg(long, default_value_t = Thresholds::default().min_z_prime)]
    pub min_z_prime: f64,
    /// Wells the outlier rule marks (externally studentized residual beyond the Bonferroni
    /// bound, Cook & Weisberg 1982): exclude and refit, flag only, or keep (plain least squares).
    #[arg(long, value_enum, default_value_t = OutlierArg::Exclude)]
    pub outliers: OutlierArg,
    /// Family-wise level of the outlier rule, per curve.
    #[arg(long, default_value_t = Thresholds::default().outlier_alpha, value_parser = parse_fraction)]
    pub outlier_alpha: f64,
    /// Most wells one curve may lose to the outlier rule (flag `too-many-outliers` beyond).
    #[arg(long, default_value_t = Thresholds::default().max_outliers)]
    pub max_outliers: usize,
    /// Level of the F test of a flat line against the curve: p at or above it is "no significant inhibition".
    #[arg(long, default_value_t = Thresholds::default().flat_alpha, value_parser = parse_fraction)]
    pub flat_alpha: f64,
    /// % activity: lowest plausible fitted upper asymptote (else held at 100, flag `upper-outside-window`).
    #[arg(long, default_value_t = Thresholds::default().upper_window.0, allow_negative_numbers = true)]
    pub upper_min: f64,
    /// % activity: highest plausible fitted upper asymptote.
    #[arg(long, default_value_t = Thresholds::default().upper_window.1, allow_negative_numbers = true)]
    pub upper_max: f64,
    /// % activity: lowest plausible fitted lower asymptote (else held at 0, flag `lower-outside-window`).
    #[arg(long, default_value_t = Thresholds::default().lower_window.0, allow_negative_numbers = true)]
    pub lower_min: f64,
    /// % activity: highest plausible fitted lower asymptote.
    #[arg(long, default_value_t = Thresholds::default().lower_window.1, allow_negative_numbers = true)]
    pub lower_max: f64,
    /// Curves per parallel batch (memory and progress granularity).
    #[arg(long, default_value_t = 8192, hide = true)]
    pub batch_size: usize,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per compound and a thumbnail grid) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

/// `--intervals` values (the core's [`IntervalMethod`] knows no flag).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum IntervalArg {
    /// Wald on ln IC50 (fast; the default).
    Wald,
    /// Profile likelihood for IC50 (or Ki,app): several refits per end.
    Profile,
}

impl From<IntervalArg> for IntervalMethod {
    fn from(a: IntervalArg) -> Self {
        match a {
            IntervalArg::Wald => IntervalMethod::Wald,
            IntervalArg::Profile => IntervalMethod::Profile,
        }
    }
}

/// `--outliers` values (the core's [`OutlierMode`] knows no flag).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum OutlierArg {
    /// Refit without them and list them (the default).
    Exclude,
    /// List them, but fit every well.
    Flag,
    /// No outlier rule: plain least squares on every well.
    Keep,
}

impl From<OutlierArg> for OutlierMode {
    fn from(a: OutlierArg) -> Self {
        match a {
            OutlierArg::Exclude => OutlierMode::Exclude,
            OutlierArg::Flag => OutlierMode::Flag,
            OutlierArg::Keep => OutlierMode::Keep,
        }
    }
}

impl Args {
    fn thresholds(&self) -> Thresholds {
        Thresholds {
            hill_steep: self.hill_steep,
            hill_shallow: self.hill_shallow,
            partial_above: self.partial_above,
            min_inhibition: self.min_inhibition,
            min_r2: self.min_r2,
            min_concentrations: self.min_concentrations,
            min_z_prime: self.min_z_prime,
            flat_alpha: self.flat_alpha,
            outlier_alpha: self.outlier_alpha,
            max_outliers: self.max_outliers,
            upper_window: (self.upper_min, self.upper_max),
            lower_window: (self.lower_min, self.lower_max),
        }
    }

    /// The library's settings from the flags.
    pub fn settings(&self) -> Settings {
        Settings {
            read: ReadOptions {
                normalise: self.normalise,
                concentration_unit: self.concentration_unit,
                unit_flag: "--concentration-unit",
            },
            format: self.output.format,
            batch_size: self.batch_size,
            fix_lower: self.fix_lower,
            fix_upper: self.fix_upper,
            enzyme: self.enzyme.map(|e| e.molar),
            confidence: self.confidence,
            intervals: self.intervals.into(),
            outliers: self.outliers.into(),
            thresholds: self.thresholds(),
        }
    }

    fn pictures(&self) -> Pictures {
        Pictures::new(&self.file, self.pictures.plot.clone(), self.pictures.report.clone())
    }
}

/// Runs `kimech ic50`.
pub fn run(args: &Args) -> Result<()> {
    let settings = args.settings();
    settings.check()?;
    let (input, _spool) = match args.file == "-" && args.normalise {
        // Normalising reads the input twice: stdin is spooled to a file first.
        true => Input::spool_stdin().map(|(input, spool)| (input, Some(spool)))?,
        false => (Input::Path(args.file.clone()), None),
    };
    let mut sink = OutputSink::create(args.output.output.as_deref(), &[&args.file])?;
    let wanted = args.pictures.plot.is_some() || args.pictures.report.is_some();
    let mut pictures = wanted.then(|| args.pictures());
    let summary = run_checked(&input, &settings, &mut sink, true, pictures.as_mut())?;
    sink.commit()?;
    if let Some(p) = &pictures {
        p.finish()?;
    }
    summary.into_result()
}
