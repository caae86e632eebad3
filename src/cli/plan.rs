//! `kimech plan`: before the experiment, how likely is an [S]×[I] grid to
//! tell the mechanisms apart, and which grid within a budget would do better.
//! Parses the flags, runs [`crate::analysis::plan`], writes with
//! [`crate::view::plan`] and draws with [`crate::plot::plan`].

use super::{OutputArgs, parse_flag_concentration};
use crate::analysis::plan::{
    Constants, Design, Noise, PlanResult, Search, SearchSettings, Settings, plan, search_workload, suggest, workload,
};
use crate::batch::CountProgress;
use crate::error::{Error, Result};
use crate::io::write_output;
use crate::units::{ACCEPTED_UNITS, ConcUnit, ConcentrationArg, Qualifier, parse_written};
use crate::view::plan::{PlanView, render};

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

/// A list of concentrations with the unit each was written in.
#[derive(Debug, Clone, PartialEq)]
pub struct Levels {
    /// In mol/L, ascending, without duplicates.
    pub molar: Vec<f64>,
    /// The unit written (the last one in the list).
    pub unit: ConcUnit,
}

fn parse_positive(text: &str) -> std::result::Result<f64, String> {
    let v: f64 = text.trim().parse().map_err(|_| format!("'{text}' is not a number; give a positive one"))?;
    if v.is_finite() && v > 0.0 { Ok(v) } else { Err(format!("{v} is not a positive, finite number")) }
}

/// Parses "5,10,20 uM" or "5 uM, 10 uM": comma-separated levels; a bare number
/// takes the unit written last in the list. Every level must be ≥ 0.
pub fn parse_levels(text: &str) -> std::result::Result<Levels, String> {
    let items: Vec<&str> = text.split([',', ';']).map(str::trim).collect();
    let mut written = Vec::new();
    for (k, item) in items.iter().enumerate() {
        let w = parse_written(item)
            .map_err(|p| format!("item {} ('{item}'): {}; expected e.g. \"5,10,20 uM\"", k + 1, p.describe()))?;
        if w.qualifier != Qualifier::Equal {
            return Err(format!("item {} ('{item}'): a qualifier makes no sense in a design; give the level", k + 1));
        }
        if w.value < 0.0 {
            return Err(format!("item {} ('{item}') is negative; a concentration must be ≥ 0", k + 1));
        }
        written.push(w);
    }
    let unit = written.iter().rev().find_map(|w| w.unit).ok_or_else(|| {
        format!("'{text}' has no unit; write one after the list, e.g. \"{text} uM\" ({ACCEPTED_UNITS})")
    })?;
    let mut molar: Vec<f64> = written.iter().map(|w| w.unit.unwrap_or(unit).to_molar(w.value)).collect();
    molar.sort_by(f64::total_cmp);
    let before = molar.len();
    molar.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs());
    if molar.len() < before {
        return Err(format!("'{text}' lists a level twice; give each level once and set --replicates"));
    }
    Ok(Levels { molar, unit })
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

/// Everything a run produced, for the views.
pub struct Outcome {
    /// The plan of the grid given.
    pub plan: PlanResult,
    /// The search, with --suggest.
    pub search: Option<Search>,
    /// Unit of substrate and Km.
    pub substrate_unit: ConcUnit,
    /// Unit of inhibitor and Ki.
    pub inhibitor_unit: ConcUnit,
}

impl Outcome {
    /// The view of this outcome.
    pub fn view(&self) -> PlanView<'_> {
        PlanView {
            plan: &self.plan,
            search: self.search.as_ref(),
            substrate_unit: self.substrate_unit.symbol(),
            inhibitor_unit: self.inhibitor_unit.symbol(),
        }
    }
}

/// A concentration in `unit`, rounded to 12 significant digits so that a
/// conversion (250 nM → 0.25 uM → 250.00000000000003 nM) prints as written.
fn in_unit(molar: f64, unit: ConcUnit) -> f64 {
    let v = unit.from_molar(molar);
    format!("{v:.11e}").parse().unwrap_or(v)
}

/// The design in the units of Km and Ki.
pub fn design(args: &Args) -> Design {
    let s_unit = args.km.unit;
    let i_unit = args.ki.unit;
    Design {
        substrate: args.substrate.molar.iter().map(|m| in_unit(*m, s_unit)).collect(),
        inhibitor: args.inhibitor.molar.iter().map(|m| in_unit(*m, i_unit)).collect(),
        replicates: args.replicates as usize,
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

/// Runs the plan (and the search) without writing anything.
pub fn compute(args: &Args) -> Result<Outcome> {
    let design = design(args);
    let constants = Constants {
        vmax: args.vmax,
        km: in_unit(args.km.molar, args.km.unit),
        ki: in_unit(args.ki.molar, args.ki.unit),
        alpha: args.alpha,
        partial_beta: args.partial,
    };
    let settings = settings(args);
    let bar = CountProgress::new(workload(&constants, &settings), "simulating");
    let result = plan(&design, &constants, &settings, &bar);
    bar.finish();
    let plan = result?;
    let search = match (args.suggest, args.wells) {
        (true, Some(wells)) => {
            let search_settings =
                SearchSettings { wells: wells as usize, screening: args.screening as usize, finalists: 3 };
            let bar = CountProgress::new(search_workload(&constants, &settings, &search_settings), "searching");
            let found = suggest(&plan, &settings, &search_settings, &bar);
            bar.finish();
            Some(found?)
        }
        (true, None) => {
            return Err(Error::Usage("--suggest needs --wells N, the well budget per compound".into()));
        }
        _ => None,
    };
    Ok(Outcome { plan, search, substrate_unit: args.km.unit, inhibitor_unit: args.ki.unit })
}

/// Runs `kimech plan`.
pub fn run(args: &Args) -> Result<()> {
    let outcome = compute(args)?;
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
        let page = crate::plot::html::Page {
            title: "kimech plan — chance of naming the mechanism".into(),
            intro: vec![crate::view::plan::GUESS_CAUTION.to_string()],
            sections: vec![crate::plot::plan::section(&view, &command)?],
            caution: crate::view::CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[])?;
    }
    Ok(())
}
