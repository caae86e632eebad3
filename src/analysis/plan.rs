//! Planning an [S]×[I] experiment before any data exist: with this grid, these
//! expected constants and this noise, how often will `mode` name the right
//! mechanism, and how wide will the headline Ki interval be?
//!
//! The answer is measured by simulation (a Monte Carlo power analysis): for
//! each true mechanism, rates are drawn from its rate law on the grid
//! ([`crate::models::inhibition`]; Segel, *Enzyme Kinetics*, 1975, ch. 3–4;
//! partial inhibition as in Cornish-Bowden, *Fundamentals of Enzyme
//! Kinetics*, 4th ed., 2012, ch. 6), Gaussian noise is added, and each matrix
//! is analysed by [`crate::analysis::mode::analyse`] itself — the same
//! criterion, headline and `mechanism-uncertain` rule a user will get. The
//! theory of optimal designs for these laws is older (Duggleby, J. Theor.
//! Biol. 81, 671–684, 1979; Atkinson, Donev & Tobias, *Optimum Experimental
//! Designs*, 2007); simulation answers the practical question including the
//! model choice, which the asymptotic theory leaves out.
//!
//! Noise: proportional (`v·(1 + c·z)`, analysed with relative weighting, as
//! `mode --weighting relative`) or constant (`v + sd·z`, analysed unweighted,
//! as `mode --weighting none`), z standard normal. A proportional draw is
//! floored at 10⁻⁶·Vmax so that relative weights exist (it takes z < −1/c).
//!
//! Reproducibility: simulation k of true mechanism m draws from its own
//! generator seeded by (seed, m, k), and results are gathered in index order,
//! so a run depends on the seed only — not on the number of threads. The same
//! (m, k) gives the same deviates on every candidate grid (common random
//! numbers), so candidates in [`suggest`] differ by their design, not by luck.

use crate::report::Code;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;
use serde::Serialize;
use serde::ser::SerializeMap;

use crate::analysis::mode::{Matrix, ModeResult, Options, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::{Model, Weighting};
use crate::models::inhibition::{Extension, ExtensionLaw, Mechanism, RateLaw};
use crate::report::Param;

mod suggest;

pub use suggest::{Candidate, Search, SearchSettings, Suggestion, candidates, suggest, workload as search_workload};

/// The Ki factors of the sensitivity line: the expected Ki may well be off by 3×.
pub const SENSITIVITY_FACTORS: [f64; 2] = [1.0 / 3.0, 3.0];

/// The grid of one experiment, in the reporting units (substrate in Km's
/// unit, inhibitor in Ki's unit).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Design {
    /// Substrate concentrations, ascending.
    pub substrate: Vec<f64>,
    /// Inhibitor concentrations, ascending (0 = the uninhibited series).
    pub inhibitor: Vec<f64>,
    /// Wells per (S, I) pair.
    pub replicates: usize,
}

impl Design {
    /// Number of wells: substrate levels × inhibitor levels × replicates.
    pub fn wells(&self) -> usize {
        self.substrate.len() * self.inhibitor.len() * self.replicates
    }
}

/// The constants the plan assumes: guesses, before the experiment.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Constants {
    /// Limiting rate, in rate units.
    pub vmax: f64,
    /// Michaelis constant, in the substrate's unit.
    pub km: f64,
    /// Kic (Kiu for the uncompetitive truth, which has no Kic), in the inhibitor's unit.
    pub ki: f64,
    /// α = Kiu/Kic of the mixed truth.
    pub alpha: f64,
    /// Residual activity β of the partial truth (ESI keeps β of ES's activity);
    /// `None`: partial inhibition is not simulated.
    pub partial_beta: Option<f64>,
}

/// The noise of a simulated rate.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", content = "value", rename_all = "kebab-case")]
pub enum Noise {
    /// SD a fixed fraction of the rate (0.05 = 5 %); analysed with relative weighting.
    Proportional(f64),
    /// SD fixed in rate units; analysed unweighted.
    Constant(f64),
}

impl Noise {
    /// The weighting `mode` should use for rates with this noise.
    pub fn weighting(self) -> Weighting {
        match self {
            Noise::Proportional(_) => Weighting::Relative,
            Noise::Constant(_) => Weighting::None,
        }
    }

    /// One noisy rate from the true rate `v` and a standard normal deviate `z`.
    fn apply(self, v: f64, z: f64, vmax: f64) -> f64 {
        match self {
            Noise::Proportional(c) => (v * (1.0 + c * z)).max(1e-6 * vmax),
            Noise::Constant(sd) => v + sd * z,
        }
    }
}

/// A mechanism the data are simulated from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Truth {
    /// No inhibition.
    None,
    /// Competitive, Kic = Ki.
    Competitive,
    /// Uncompetitive, Kiu = Ki.
    Uncompetitive,
    /// Noncompetitive, Kic = Kiu = Ki.
    Noncompetitive,
    /// Mixed, Kic = Ki, Kiu = α·Ki.
    Mixed,
    /// Partial (noncompetitive-type, α = 1), residual activity β.
    PartialInhibition,
}

impl Truth {
    /// The five plain mechanisms, in `mode`'s order.
    pub const FIVE: [Truth; 5] =
        [Truth::None, Truth::Competitive, Truth::Uncompetitive, Truth::Noncompetitive, Truth::Mixed];

    /// The name, which is also what `mode` calls it when it names it right.
    pub fn name(self) -> &'static str {
        match self {
            Truth::None => "none",
            Truth::Competitive => "competitive",
            Truth::Uncompetitive => "uncompetitive",
            Truth::Noncompetitive => "noncompetitive",
            Truth::Mixed => "mixed",
            Truth::PartialInhibition => "partial-inhibition",
        }
    }

    /// The call that counts as right.
    pub fn right_call(self) -> Call {
        match self {
            Truth::None => Call::Plain(Mechanism::None),
            Truth::Competitive => Call::Plain(Mechanism::Competitive),
            Truth::Uncompetitive => Call::Plain(Mechanism::Uncompetitive),
            Truth::Noncompetitive => Call::Plain(Mechanism::Noncompetitive),
            Truth::Mixed => Call::Plain(Mechanism::Mixed),
            Truth::PartialInhibition => Call::Diagnosis(Extension::Partial),
        }
    }

    /// Which headline constant is "the Ki" of this truth: Kic, except for the
    /// uncompetitive truth, whose only constant is Kiu; none without inhibition.
    fn constant(self) -> Option<Headline> {
        match self {
            Truth::None => None,
            Truth::Uncompetitive => Some(Headline::Kiu),
            _ => Some(Headline::Ki),
        }
    }

    /// Index used in the per-simulation seed (stable: part of the seed contract).
    fn seed_index(self) -> u64 {
        match self {
            Truth::None => 0,
            Truth::Competitive => 1,
            Truth::Uncompetitive => 2,
            Truth::Noncompetitive => 3,
            Truth::Mixed => 4,
            Truth::PartialInhibition => 5,
        }
    }

    /// The true rate at (S, I).
    pub fn rate(self, c: &Constants, s: f64, i: f64) -> f64 {
        let x = (s, i);
        match self {
            Truth::None => RateLaw(Mechanism::None).value(&[c.vmax, c.km], &x),
            Truth::Competitive => RateLaw(Mechanism::Competitive).value(&[c.vmax, c.km, c.ki], &x),
            Truth::Uncompetitive => RateLaw(Mechanism::Uncompetitive).value(&[c.vmax, c.km, c.ki], &x),
            Truth::Noncompetitive => RateLaw(Mechanism::Noncompetitive).value(&[c.vmax, c.km, c.ki], &x),
            Truth::Mixed => RateLaw(Mechanism::Mixed).value(&[c.vmax, c.km, c.ki, c.alpha], &x),
            Truth::PartialInhibition => {
                ExtensionLaw(Extension::Partial).value(&[c.vmax, c.km, c.ki, 1.0, c.partial_beta.unwrap_or(0.0)], &x)
            }
        }
    }
}

#[derive(Clone, Copy)]
enum Headline {
    Ki,
    Kiu,
}

/// What `mode` said about one matrix.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Call {
    /// One of the five mechanisms.
    Plain(Mechanism),
    /// A diagnosis (partial or substrate inhibition).
    Diagnosis(Extension),
    /// No model describes the data.
    NoModelAdequate,
    /// The analysis refused the matrix (an error; should not happen on a valid design).
    Failed,
}

impl Call {
    /// Every call, in the order they are reported.
    pub const ALL: [Call; 9] = [
        Call::Plain(Mechanism::None),
        Call::Plain(Mechanism::Competitive),
        Call::Plain(Mechanism::Uncompetitive),
        Call::Plain(Mechanism::Noncompetitive),
        Call::Plain(Mechanism::Mixed),
        Call::Diagnosis(Extension::Partial),
        Call::Diagnosis(Extension::SubstrateInhibition),
        Call::NoModelAdequate,
        Call::Failed,
    ];

    /// Its name as `mode` writes it in `chosen` (`failed` for a refused matrix).
    pub fn name(self) -> &'static str {
        match self {
            Call::Plain(m) => m.name(),
            Call::Diagnosis(e) => e.name(),
            Call::NoModelAdequate => "no-model-adequate",
            Call::Failed => "failed",
        }
    }

    /// The call from `mode`'s `chosen` field.
    fn from_chosen(chosen: &str) -> Call {
        Call::ALL.iter().copied().find(|c| c.name() == chosen).unwrap_or(Call::Failed)
    }

    fn index(self) -> usize {
        Call::ALL.iter().position(|&c| c == self).unwrap_or(Call::ALL.len() - 1)
    }
}

/// The share of simulations that got each call (a row of the confusion
/// matrix); serialised as `{name: share}` in [`Call::ALL`] order.
#[derive(Debug, Clone, PartialEq)]
pub struct Shares(pub [f64; 9]);

impl Shares {
    /// The share of one call.
    pub fn of(&self, call: Call) -> f64 {
        self.0[call.index()]
    }
}

impl Serialize for Shares {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> std::result::Result<S::Ok, S::Error> {
        let mut map = serializer.serialize_map(Some(Call::ALL.len()))?;
        for (call, share) in Call::ALL.iter().zip(self.0) {
            map.serialize_entry(call.name(), &share)?;
        }
        map.end()
    }
}

/// What the simulations of one true mechanism predict.
#[derive(Debug, Clone, Serialize)]
pub struct PowerRow {
    /// The mechanism the rates were drawn from.
    pub truth: Truth,
    /// Number of simulated matrices.
    pub simulations: usize,
    /// Share of matrices given each call (a confusion-matrix row).
    pub named: Shares,
    /// Share named right (`named[truth]`).
    pub right: f64,
    /// Binomial standard error of `right`, √(p(1−p)/n).
    pub right_se: f64,
    /// Share of matrices on which `mechanism-uncertain` fired.
    pub uncertain: f64,
    /// Median width (high/low) of the headline interval of the truth's
    /// constant (Kiu for uncompetitive, Kic otherwise); null when the truth
    /// has none (no inhibition) or when at least half the intervals are open.
    pub ki_width_median: Option<f64>,
    /// 90th percentile of that width; null when the truth has no constant or
    /// more than 10 % of the intervals are open.
    pub ki_width_p90: Option<f64>,
    /// Share of matrices whose headline interval for that constant has an
    /// open end or is missing (infinite width); null when the truth has no constant.
    pub ki_open: Option<f64>,
}

/// Chance of naming each mechanism right when the real Ki is 3× lower or
/// higher than expected.
#[derive(Debug, Clone, Serialize)]
pub struct SensitivityRow {
    /// The true mechanism.
    pub truth: Truth,
    /// Share named right if Ki is 3× lower than expected.
    pub ki_third: f64,
    /// Share named right at the expected Ki.
    pub ki_expected: f64,
    /// Share named right if Ki is 3× higher than expected.
    pub ki_triple: f64,
    /// Simulations behind each share.
    pub simulations: usize,
}

/// How the simulations run.
#[derive(Debug, Clone)]
pub struct Settings {
    /// Simulated matrices per true mechanism.
    pub simulations: usize,
    /// Simulated matrices per true mechanism for each Ki factor of the sensitivity line.
    pub sensitivity_simulations: usize,
    /// Seed of the whole run.
    pub seed: u64,
    /// The noise model.
    pub noise: Noise,
    /// `mode`'s options (criterion, levels); the weighting is set from the noise.
    pub mode: Options,
}

/// Called once per analysed matrix (for a progress bar; must be cheap and thread-safe).
pub trait Tick: Sync {
    /// One matrix done.
    fn tick(&self);
}

impl Tick for () {
    fn tick(&self) {}
}

/// The whole plan of one design.
#[derive(Debug, Clone, Serialize)]
pub struct PlanResult {
    /// The design as analysed.
    pub design: Design,
    /// The expected constants.
    pub constants: Constants,
    /// The noise model.
    pub noise: Noise,
    /// The weighting `mode` used on the simulations.
    pub weighting: Weighting,
    /// Simulations per true mechanism.
    pub simulations: usize,
    /// The seed.
    pub seed: u64,
    /// One row per true mechanism.
    pub power: Vec<PowerRow>,
    /// Mean of `right` over the true mechanisms.
    pub mean_right: f64,
    /// The same at Ki ×1/3 and ×3.
    pub sensitivity: Vec<SensitivityRow>,
}

/// The true mechanisms simulated under these constants.
pub fn truths(constants: &Constants) -> Vec<Truth> {
    let mut t = Truth::FIVE.to_vec();
    if constants.partial_beta.is_some() {
        t.push(Truth::PartialInhibition);
    }
    t
}

/// Rejects designs and constants no simulation can use, saying what would be right.
pub fn check(design: &Design, constants: &Constants, settings: &Settings) -> Result<()> {
    let bad = |what: &str, problem: String, expected: &str| {
        Err(Error::Data { group: what.to_string(), problem, expected: expected.to_string() })
    };
    let positive = |v: f64| v.is_finite() && v > 0.0;
    for (name, v) in [("Vmax", constants.vmax), ("Km", constants.km), ("Ki", constants.ki), ("α", constants.alpha)] {
        if !positive(v) {
            return bad("the expected constants", format!("{name} = {v}"), "a positive, finite number");
        }
    }
    if let Some(b) = constants.partial_beta
        && !(b > 0.0 && b < 1.0)
    {
        return bad("the expected constants", format!("residual activity β = {b}"), "a fraction between 0 and 1");
    }
    let distinct = |v: &[f64]| {
        let mut d = v.to_vec();
        d.sort_by(f64::total_cmp);
        d.dedup();
        d.len()
    };
    if design.substrate.iter().any(|s| !positive(*s)) || distinct(&design.substrate) < 2 {
        return bad(
            "the substrate levels",
            format!("{:?}", design.substrate),
            "at least 2 distinct positive concentrations (5 or more spanning Km is common practice)",
        );
    }
    if design.inhibitor.iter().any(|i| !(i.is_finite() && *i >= 0.0)) || distinct(&design.inhibitor) < 2 {
        return bad(
            "the inhibitor levels",
            format!("{:?}", design.inhibitor),
            "at least 2 distinct concentrations ≥ 0 (0 and 3 or more around Ki is common practice)",
        );
    }
    if design.replicates == 0 {
        return bad("the design", "0 replicates".into(), "1 or more wells per (S, I) pair");
    }
    if design.wells() < crate::analysis::mode::MIN_ROWS {
        return bad(
            "the design",
            format!("{} wells", design.wells()),
            "at least 7 wells: comparing all five models needs n > 6 (mixed's AICc)",
        );
    }
    match settings.noise {
        Noise::Proportional(c) | Noise::Constant(c) if positive(c) => {}
        _ => return bad("the noise", format!("{:?}", settings.noise), "a positive SD, e.g. '5%' or '0.2'"),
    }
    if settings.simulations == 0 {
        return bad("the simulations", "0".into(), "1 or more simulations per mechanism (200 is the default)");
    }
    Ok(())
}

/// A seed for simulation `k` of truth `t`: SplitMix64 (Steele, Lea & Flood,
/// OOPSLA 2014) over the run's seed and the indices, so that neighbouring
/// simulations get unrelated streams.
fn stream_seed(seed: u64, truth: Truth, k: usize) -> u64 {
    let mut x = seed ^ truth.seed_index().wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ (k as u64).wrapping_shl(20);
    for _ in 0..2 {
        x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = x;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        x = z ^ (z >> 31);
    }
    x
}

/// One simulated matrix: wells in the order inhibitor, substrate, replicate,
/// one standard normal deviate each from the stream of (seed, truth, k).
pub fn simulate(design: &Design, constants: &Constants, truth: Truth, noise: Noise, seed: u64, k: usize) -> Matrix {
    let mut rng = StdRng::seed_from_u64(stream_seed(seed, truth, k));
    let n = design.wells();
    let mut m = Matrix {
        label: None,
        origin: crate::report::Origin::new(&format!("simulation {} of {}", k + 1, truth.name()), []),
        lines: Vec::with_capacity(n),
        substrate: Vec::with_capacity(n),
        inhibitor: Vec::with_capacity(n),
        rate: Vec::with_capacity(n),
        sd: None,
    };
    for &i in &design.inhibitor {
        for &s in &design.substrate {
            let v = truth.rate(constants, s, i);
            for _ in 0..design.replicates {
                let z: f64 = StandardNormal.sample(&mut rng);
                m.lines.push(m.rate.len() as u64 + 2);
                m.substrate.push(s);
                m.inhibitor.push(i);
                m.rate.push(noise.apply(v, z, constants.vmax));
            }
        }
    }
    m
}

/// What one analysis of one simulated matrix says, reduced to what the plan counts.
#[derive(Debug, Clone, Copy)]
pub struct Outcome {
    /// The call.
    pub call: Call,
    /// Whether `mechanism-uncertain` fired.
    pub uncertain: bool,
    /// Width high/low of the headline interval of the truth's constant (∞ when open or missing).
    pub width: f64,
}

fn width(p: Option<&Param>) -> f64 {
    match p.and_then(|p| p.low.zip(p.high)) {
        Some((low, high)) if low > 0.0 && high.is_finite() => high / low,
        _ => f64::INFINITY,
    }
}

fn outcome(result: Result<ModeResult>, truth: Truth) -> Outcome {
    match result {
        Ok(r) => Outcome {
            call: Call::from_chosen(&r.chosen),
            uncertain: r.warnings.iter().any(|w| w.code == Code::MechanismUncertain),
            width: match truth.constant() {
                Some(Headline::Ki) => width(r.headline.ki.as_ref()),
                Some(Headline::Kiu) => width(r.headline.kiu.as_ref()),
                None => f64::INFINITY,
            },
        },
        Err(_) => Outcome { call: Call::Failed, uncertain: false, width: f64::INFINITY },
    }
}

/// Simulates and analyses `n` matrices of `truth`, in parallel, in index order.
pub fn run_truth(
    design: &Design,
    constants: &Constants,
    truth: Truth,
    n: usize,
    settings: &Settings,
    tick: &dyn Tick,
) -> Vec<Outcome> {
    let options = Options { weighting: settings.noise.weighting(), ..settings.mode.clone() };
    let units = Units::default();
    (0..n)
        .into_par_iter()
        .map(|k| {
            let m = simulate(design, constants, truth, settings.noise, settings.seed, k);
            let o = outcome(analyse(&m, &units, &options), truth);
            tick.tick();
            o
        })
        .collect()
}

/// The `q` quantile (nearest rank, q in (0, 1]) of widths that may be infinite;
/// `None` when it is infinite.
fn quantile(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let rank = ((q * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    Some(sorted[rank - 1]).filter(|w| w.is_finite())
}

/// Tallies the outcomes of one truth into its power row.
pub fn tally(truth: Truth, outcomes: &[Outcome]) -> PowerRow {
    let n = outcomes.len().max(1) as f64;
    let mut counts = [0usize; 9];
    for o in outcomes {
        counts[o.call.index()] += 1;
    }
    let named = Shares(counts.map(|c| c as f64 / n));
    let right = named.of(truth.right_call());
    let uncertain = outcomes.iter().filter(|o| o.uncertain).count() as f64 / n;
    let has_constant = truth.constant().is_some();
    let mut widths: Vec<f64> = outcomes.iter().map(|o| o.width).collect();
    widths.sort_by(f64::total_cmp);
    let open = widths.iter().filter(|w| !w.is_finite()).count() as f64 / n;
    PowerRow {
        truth,
        simulations: outcomes.len(),
        named,
        right,
        right_se: (right * (1.0 - right) / n).sqrt(),
        uncertain,
        ki_width_median: quantile(&widths, 0.5).filter(|_| has_constant),
        ki_width_p90: quantile(&widths, 0.9).filter(|_| has_constant),
        ki_open: has_constant.then_some(open),
    }
}

/// The power rows of one design: every truth, `n` simulations each.
pub fn power(design: &Design, constants: &Constants, n: usize, settings: &Settings, tick: &dyn Tick) -> Vec<PowerRow> {
    truths(constants).into_iter().map(|t| tally(t, &run_truth(design, constants, t, n, settings, tick))).collect()
}

/// Mean chance of naming the right mechanism over the rows.
pub fn mean_right(rows: &[PowerRow]) -> f64 {
    rows.iter().map(|r| r.right).sum::<f64>() / rows.len().max(1) as f64
}

/// How many matrices [`plan`] analyses (for a progress bar).
pub fn workload(constants: &Constants, settings: &Settings) -> u64 {
    let t = truths(constants);
    let with_constant = t.iter().filter(|t| t.constant().is_some()).count() as u64;
    t.len() as u64 * settings.simulations as u64
        + with_constant * SENSITIVITY_FACTORS.len() as u64 * settings.sensitivity_simulations as u64
}

/// Plans one design: the power rows and the sensitivity line.
pub fn plan(design: &Design, constants: &Constants, settings: &Settings, tick: &dyn Tick) -> Result<PlanResult> {
    check(design, constants, settings)?;
    let power = power(design, constants, settings.simulations, settings, tick);
    let sensitivity = sensitivity(design, constants, settings, &power, tick);
    Ok(PlanResult {
        design: design.clone(),
        constants: *constants,
        noise: settings.noise,
        weighting: settings.noise.weighting(),
        simulations: settings.simulations,
        seed: settings.seed,
        mean_right: mean_right(&power),
        power,
        sensitivity,
    })
}

/// The chance of naming each truth right at Ki ×1/3 and ×3 (the constant
/// is a guess before the experiment). The expected-Ki column repeats the main
/// rows; without inhibition Ki plays no part, so that row repeats them throughout.
fn sensitivity(
    design: &Design,
    constants: &Constants,
    settings: &Settings,
    main: &[PowerRow],
    tick: &dyn Tick,
) -> Vec<SensitivityRow> {
    let n = settings.sensitivity_simulations;
    if n == 0 {
        return Vec::new();
    }
    let right_at = |factor: f64, truth: Truth| {
        if truth.constant().is_none() {
            return main.iter().find(|r| r.truth == truth).map_or(0.0, |r| r.right); // Ki plays no part
        }
        let c = Constants { ki: constants.ki * factor, ..*constants };
        tally(truth, &run_truth(design, &c, truth, n, settings, tick)).right
    };
    main.iter()
        .map(|row| SensitivityRow {
            truth: row.truth,
            ki_third: right_at(SENSITIVITY_FACTORS[0], row.truth),
            ki_expected: row.right,
            ki_triple: right_at(SENSITIVITY_FACTORS[1], row.truth),
            simulations: n,
        })
        .collect()
}
