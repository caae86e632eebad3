//! `kimech plan`: before the experiment, how likely is an [S]×[I] grid to
//! tell the mechanisms apart, and which grid within a budget would do better.
//! Parses the flags, runs [`crate::batch::plan::compute`], writes with
//! [`crate::view::plan`] and draws with [`crate::plot::plan`].

use super::{OutputArgs, parse_flag_concentration};
use crate::analysis::plan::{Noise, SearchSettings, Settings};
pub use crate::batch::plan::{Levels, parse_levels};
use crate::batch::plan::{Outcome, Request, compute};
use crate::error::{Error, Result};
use crate::io::write_output;
use crate::units::ConcentrationArg;
use crate::view::plan::render;

/// Predict, by simulation, how often `mode` will name each mechanism on a
/// planned [S]×[I] grid, how wide the Ki interval will be, and (with
/// --suggest) which grid within a budget of wells would do better.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// Expected Km, e.g. "20 uM" (a guess: see the sensitivity line).
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub km: ConcentrationArg,
    /// Expected Ki (Kic; Kiu for the uncompetitive case), e.g. "0.5 uM".
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub ki: ConcentrationArg,
    /// α = Kiu/Kic of the simulated mixed inhibitor.
    #[arg(long, default_value_t = 4.0, value_parser = parse_positive)]
    pub alpha: f64,
    /// Expected Vmax in rate units (the scale a constant --noise is given in).
    #[arg(long, default_value_t = 10.0, value_parser = parse_positive)]
    pub vmax: f64,
    /// Also simulate partial inhibition with this residual activity β (0–1, e.g. 0.3).
    #[arg(long, value_name = "BETA", value_parser = super::parse_fraction)]
    pub partial: Option<f64>,
    /// Substrate levels, e.g. "5,10,20,40,80,160 uM" (a unit at the end applies to bare numbers).
    #[arg(long, value_name = "LIST", value_parser = parse_levels)]
    pub substrate: Levels,
    /// Inhibitor levels, e.g. "0,0.25,0.5,1,2 uM".
    #[arg(long, value_name = "LIST", value_parser = parse_levels)]
    pub inhibitor: Levels,
    /// Wells per (S, I) pair.
    #[arg(long, default_value_t = 2, value_parser = clap::value_parser!(u32).range(1..=100))]
    pub replicates: u32,
    /// Rate noise: "5%" is proportional (analysed with --weighting relative), a bare
    /// number a constant SD in rate units (analysed with --weighting none).
    #[arg(long, value_parser = parse_noise)]
    pub noise: Noise,
    /// Simulated matrices per mechanism.
    #[arg(long, default_value_t = 200, value_parser = clap::value_parser!(u32).range(1..=100_000))]
    pub simulations: u32,
    /// Simulated matrices per mechanism at Ki ×1/3 and ×3 for the sensitivity line
    /// (default: a quarter of --simulations; 0 leaves the line out).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(0..=100_000))]
    pub sensitivity_simulations: Option<u32>,
    /// Seed of the simulations: the same seed gives the same answer on any machine and thread count.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Search grids within --wells for a better chance of naming the right mechanism.
    #[arg(long, requires = "wells")]
    pub suggest: bool,
    /// The well budget per compound for --suggest.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(1..=100_000))]
    pub wells: Option<u32>,
    /// Simulations per mechanism when screening candidate grids (the best few are rerun at --simulations).
    #[arg(long, value_name = "N", default_value_t = 30, value_parser = clap::value_parser!(u32).range(1..=10_000))]
    pub screening: u32,
    /// Model choice and confidence level, as for `mode`.
    #[command(flatten)]
    pub choice: super::ModelChoiceArgs,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (confusion heatmap; with --suggest the proposed grid) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

fn parse_positive(text: &str) -> std::result::Result<f64, String> {
    let v: f64 = text.trim().parse().map_err(|_| format!("'{text}' is not a number; give a positive one"))?;
    if v.is_finite() && v > 0.0 { Ok(v) } else { Err(format!("{v} is not a positive, finite number")) }
}

/// "5%" → proportional 0.05; "0.2" → constant SD 0.2 in rate units.
pub fn parse_noise(text: &str) -> std::result::Result<Noise, String> {
    let t = text.trim();
    let (number, percent) = match t.strip_suffix('%') {
        Some(n) => (n.trim(), true),
        None => (t, false),
    };
    let v: f64 = number.parse().map_err(|_| {
        format!("'{text}' is neither a percentage (\"5%\", proportional noise) nor a number (\"0.2\", a constant SD)")
    })?;
    if !(v.is_finite() && v > 0.0) {
        return Err(format!("'{text}': the noise must be positive"));
    }
    if percent {
        if v >= 100.0 {
            return Err(format!("'{text}': proportional noise must be below 100%"));
        }
        Ok(Noise::Proportional(v / 100.0))
    } else {
        Ok(Noise::Constant(v))
    }
}

/// The simulation settings from the flags.
pub fn settings(args: &Args) -> Settings {
    let mode = crate::analysis::mode::Options {
        criterion: args.choice.criterion.into(),
        alpha_level: args.choice.alpha_level,
        confidence: args.choice.confidence,
        ..Default::default()
    };
    Settings {
        simulations: args.simulations as usize,
        sensitivity_simulations: args.sensitivity_simulations.map_or(args.simulations.div_ceil(4), |n| n) as usize,
        seed: args.seed,
        noise: args.noise,
        mode,
    }
}

/// The library's request from the flags.
pub fn request(args: &Args) -> Result<Request> {
    let search = match (args.suggest, args.wells) {
        (true, Some(wells)) => {
            Some(SearchSettings { wells: wells as usize, screening: args.screening as usize, finalists: 3 })
        }
        (true, None) => {
            return Err(Error::Usage("--suggest needs --wells N, the well budget per compound".into()));
        }
        _ => None,
    };
    Ok(Request {
        km: args.km,
        ki: args.ki,
        alpha: args.alpha,
        vmax: args.vmax,
        partial: args.partial,
        substrate: args.substrate.clone(),
        inhibitor: args.inhibitor.clone(),
        replicates: args.replicates as usize,
        settings: settings(args),
        search,
    })
}

/// Runs `kimech plan`.
pub fn run(args: &Args) -> Result<()> {
    let outcome = compute(&request(args)?)?;
    let bytes = render(&outcome.view(), args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[])?;
    write_pictures(&outcome, args)
}

/// Writes the `--plot` SVGs and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    let view = outcome.view();
    if let Some(dir) = &args.pictures.plot {
        crate::plot::files::write_plots(dir, &crate::plot::plan::figures(&view)?, &[])?;
    }
    if let Some(path) = &args.pictures.report {
        let command = std::env::args().collect::<Vec<_>>().join(" ");
        let page = crate::page::Page {
            title: "kimech plan — chance of naming the mechanism".into(),
            intro: vec![crate::view::plan::GUESS_CAUTION.to_string()],
            sections: vec![crate::page::plan::section(&view, &command)?],
            caution: crate::view::CAUTION.to_string(),
        };
        write_output(Some(path), crate::page::render(&page).as_bytes(), &[])?;
    }
    Ok(())
}
