//! `onset` by simulation (issue 16): progress curves drawn from the
//! integrated equation P(t) = vs·t + (vi − vs)(1 − e^(−kobs·t))/kobs + P0
//! (Morrison & Walsh, Adv. Enzymol. 61, 201–301, 1988) for four classes —
//! two-step covalent, one-step covalent, two-step slow-binding (reversible)
//! and rapid reversible (no onset) — with Gaussian noise of 0.5 % of the
//! uninhibited curve's final signal on instrument-like counts. The class must
//! be named in ≥ 90 % of datasets, kinact/KI be within 20 % of the truth in
//! ≥ 90 %, and the 95 % profile intervals of kinact and KI cover the truth in
//! 93–97 % (two-step classes). The seed is fixed.
//!
//! The slow-binding class is simulated as a slow-binding experiment must be
//! run: every curve reaches its steady state and the return from the final
//! complex shows within the run (koff × run > 1). A fifth class, measured but
//! not a target, has koff × run = 0.3: it shows how often a compound whose
//! reversibility lies beyond the run is called irreversible.
//!
//! The global fits tie each curve's initial rate to v0 by the scheme unless
//! the data reject the tie (`Rates`); the measurement prints how often the tie
//! was kept. The in-suite test runs a few datasets per class in seconds; the
//! full measurement is `cargo test --release --test onset_simulation -- --ignored --nocapture`.

use kimech::analysis::onset::{
    Compound, Conditions, Curve, Onset, OnsetResult, Options, Rates, RatesPolicy, Units, analyse,
};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

/// Uninhibited rate, counts per minute, and the starting signal.
const V0: f64 = 800.0;
const P0: f64 = 2000.0;
/// Readings every 2 min for an hour.
const TIMES: usize = 31;
const STEP: f64 = 2.0;
/// Noise SD as a fraction of the uninhibited curve's final signal.
const NOISE: f64 = 0.005;
const SEED: u64 = 20261202;

/// The simulated classes with their true constants (time in min, [I] in µM).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Class {
    /// kinact 0.1 /min, KI 1 µM, irreversible.
    TwoStepCovalent,
    /// kinact/KI 0.02 /(µM·min), KI far above the tested range.
    OneStepCovalent,
    /// k5 0.15 /min, KI 1 µM, k6 0.02 /min: reversible slow binding whose
    /// reversibility shows within the hour: k6 × run = 1.2 (the return from
    /// EI* has a half-life of 35 min) and kobs × run ≥ 3 at the lowest [I], so
    /// every curve reaches its steady-state rate vs within the run, as a
    /// slow-binding experiment must (Morrison & Walsh 1988; Copeland 2013).
    SlowBinding,
    /// The same with k6 0.005 /min: k6 × run = 0.3, the return from EI* has a
    /// half-life of 139 min, longer than the run, and vs at the highest [I] is
    /// 0.4 % of v0. Not a target class: it measures how often such a compound
    /// is (honestly) called irreversible within the run.
    SlowBindingBeyondRun,
    /// Rapid reversible, Ki 1 µM: straight curves.
    Rapid,
}

impl Class {
    const ALL: [Class; 4] = [Class::TwoStepCovalent, Class::OneStepCovalent, Class::SlowBinding, Class::Rapid];

    fn inhibitor(self) -> [f64; 7] {
        match self {
            Class::OneStepCovalent => [0.0, 0.1, 0.2, 0.5, 1.0, 2.0, 4.0],
            _ => [0.0, 0.125, 0.25, 0.5, 1.0, 2.0, 4.0].map(|i| i * 2.0),
        }
    }

    /// (vi, vs, kobs) at [I].
    fn curve(self, i: f64) -> (f64, f64, f64) {
        match self {
            Class::TwoStepCovalent => (V0 / (1.0 + i / 1.0), 0.0, 0.1 * i / (1.0 + i)),
            Class::OneStepCovalent => (V0, 0.0, 0.02 * i),
            Class::SlowBinding | Class::SlowBindingBeyondRun => {
                let k6 = if self == Class::SlowBinding { 0.02 } else { 0.005 };
                let (k5, ki) = (0.15, 1.0);
                let ki_star = ki * k6 / (k5 + k6);
                (V0 / (1.0 + i / ki), V0 / (1.0 + i / ki_star), k6 + k5 * i / (ki + i))
            }
            Class::Rapid => {
                let v = V0 / (1.0 + i / 1.0);
                (v, v, 0.0)
            }
        }
    }

    fn expected(self) -> (Onset, Option<bool>) {
        match self {
            Class::TwoStepCovalent => (Onset::TwoStep, Some(false)),
            Class::OneStepCovalent => (Onset::OneStep, Some(false)),
            Class::SlowBinding | Class::SlowBindingBeyondRun => (Onset::TwoStep, Some(true)),
            Class::Rapid => (Onset::None, None),
        }
    }

    /// True (kinact, KI, kinact/KI).
    fn constants(self) -> (Option<f64>, Option<f64>, Option<f64>) {
        match self {
            Class::TwoStepCovalent => (Some(0.1), Some(1.0), Some(0.1)),
            Class::OneStepCovalent => (None, None, Some(0.02)),
            Class::SlowBinding | Class::SlowBindingBeyondRun => (Some(0.15), Some(1.0), Some(0.15)),
            Class::Rapid => (None, None, None),
        }
    }
}

fn signal(vi: f64, vs: f64, kobs: f64, t: f64) -> f64 {
    let onset = if kobs > 0.0 { (1.0 - (-kobs * t).exp()) / kobs } else { t };
    vs * t + (vi - vs) * onset + P0
}

fn simulate(class: Class, rng: &mut StdRng, scale: f64) -> Compound {
    let sd = NOISE * (V0 * STEP * (TIMES - 1) as f64 + P0);
    let noise = Normal::new(0.0, sd).unwrap();
    let curves = class
        .inhibitor()
        .iter()
        .map(|&i| {
            let (vi, vs, kobs) = class.curve(i);
            let time: Vec<f64> = (0..TIMES).map(|k| k as f64 * STEP).collect();
            let signal = time.iter().map(|&t| (signal(vi, vs, kobs, t) + noise.sample(rng)) * scale).collect();
            Curve { inhibitor: i, time, signal, origin: format!("[I] = {i}") }
        })
        .collect();
    Compound { label: None, origin: "simulation".into(), curves, conditions: Conditions::default() }
}

fn units() -> Units {
    Units { inhibitor: Some("uM".into()), time: Some("min".into()), signal: None }
}

/// Tallies of one class.
#[derive(Default, Debug)]
struct Tally {
    n: usize,
    named: usize,
    ratio_within: usize,
    /// The 95 % interval of kinact/KI covers the truth.
    ratio_covered: usize,
    kinact_covered: usize,
    ki_covered: usize,
    intervals: usize,
    /// What the datasets were named, as "onset reversible".
    names: std::collections::BTreeMap<String, usize>,
    /// [two-step fits, kinact covered, KI covered] among those named reversible.
    reversible_coverage: [usize; 3],
    /// Datasets whose answer has tied initial rates.
    tied: usize,
    /// Among the datasets whose class was named: the kinact/KI interval covers the truth.
    ratio_covered_named: usize,
}

fn covers(p: &Option<kimech::report::Param>, truth: f64) -> bool {
    p.as_ref().is_some_and(|p| p.low.is_none_or(|l| l <= truth) && p.high.is_none_or(|h| h >= truth))
}

fn score(class: Class, r: &OnsetResult, tally: &mut Tally) {
    tally.n += 1;
    tally.tied += usize::from(r.rates == Rates::Tied);
    let name = match r.reversible {
        None => r.onset.name().to_string(),
        Some(rev) => format!("{} {}", r.onset.name(), if rev { "reversible" } else { "irreversible" }),
    };
    *tally.names.entry(name).or_insert(0) += 1;
    let (onset, reversible) = class.expected();
    let named = r.onset == onset && r.reversible == reversible;
    tally.named += usize::from(named);
    let (kinact, ki, ratio) = class.constants();
    if let Some(ratio) = ratio {
        tally.ratio_covered_named += usize::from(named && covers(&r.kinact_ki, ratio));
    }
    if let Some(ratio) = ratio {
        tally.ratio_covered += usize::from(covers(&r.kinact_ki, ratio));
    }
    if let Some(ratio) = ratio
        && r.kinact_ki.as_ref().is_some_and(|p| (p.value / ratio - 1.0).abs() <= 0.2)
    {
        tally.ratio_within += 1;
    }
    if let (Some(kinact), Some(ki)) = (kinact, ki)
        && r.onset == Onset::TwoStep
    {
        tally.intervals += 1;
        tally.kinact_covered += usize::from(covers(&r.kinact, kinact));
        tally.ki_covered += usize::from(covers(&r.ki, ki));
        if r.reversible == Some(true) {
            tally.reversible_coverage[0] += 1;
            tally.reversible_coverage[1] += usize::from(covers(&r.kinact, kinact));
            tally.reversible_coverage[2] += usize::from(covers(&r.ki, ki));
        }
    }
}

fn run(class: Class, datasets: usize, seed: u64) -> Tally {
    run_with(class, datasets, seed, &Options::default())
}

fn run_with(class: Class, datasets: usize, seed: u64, options: &Options) -> Tally {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut tally = Tally::default();
    for _ in 0..datasets {
        let compound = simulate(class, &mut rng, 1.0);
        let r = analyse(&compound, &units(), options).unwrap();
        score(class, &r, &mut tally);
    }
    tally
}

fn percent(k: usize, n: usize) -> f64 {
    100.0 * k as f64 / n.max(1) as f64
}

#[test]
fn each_class_is_named_on_a_few_datasets() {
    for (k, class) in Class::ALL.iter().enumerate() {
        let t = run(*class, 6, SEED + k as u64);
        assert!(t.named >= 5, "{class:?}: named {} of {}", t.named, t.n);
        // With the initial rates tied to the scheme kinact/KI is within 20 %
        // of the truth for every class with an onset, slow binders included
        // (README), and its interval covers the truth.
        if class.constants().2.is_some() {
            assert!(t.ratio_covered >= 5, "{class:?}: kinact/KI interval covers in {} of {}", t.ratio_covered, t.n);
            assert!(t.ratio_within >= 5, "{class:?}: kinact/KI within 20 % in {} of {}", t.ratio_within, t.n);
            assert!(t.tied >= 5, "{class:?}: initial rates tied in {} of {}", t.tied, t.n);
        }
    }
}

/// Multiplying the signal by 10^k changes nothing but the rates and offsets.
#[test]
fn scale_free_over_thirteen_decades() {
    let mut rng = StdRng::seed_from_u64(SEED);
    let base = simulate(Class::TwoStepCovalent, &mut rng, 1.0);
    let reference = analyse(&base, &units(), &Options::default()).unwrap();
    let kinact = reference.kinact.as_ref().unwrap().value;
    let ki = reference.ki.as_ref().unwrap().value;
    for k in -6..=7 {
        let factor = 10f64.powi(k);
        let mut scaled = base.clone();
        for c in &mut scaled.curves {
            c.signal.iter_mut().for_each(|s| *s *= factor);
        }
        let r = analyse(&scaled, &units(), &Options::default()).unwrap();
        assert_eq!(r.onset, reference.onset, "10^{k}");
        let p = r.kinact.as_ref().unwrap();
        assert!((p.value / kinact - 1.0).abs() < 1e-6, "10^{k}: kinact {} vs {kinact}", p.value);
        assert!((r.ki.as_ref().unwrap().value / ki - 1.0).abs() < 1e-6, "10^{k}");
        let vi = r.curves[0].vi.value / factor;
        assert!((vi / reference.curves[0].vi.value - 1.0).abs() < 1e-6, "10^{k}: vi");
    }
}

#[test]
#[ignore = "measurement run: about four minutes of CPU in release"]
fn full_measurement() {
    let datasets = 200;
    let classes = Class::ALL.iter().chain(&[Class::SlowBindingBeyondRun]);
    for (k, class) in classes.enumerate() {
        let t = run(*class, datasets, SEED + k as u64);
        println!(
            "{class:?}: named {:.1} %, kinact/KI within 20 % {:.1} %, coverage kinact {:.1} % KI {:.1} % (of {} two-step fits)",
            percent(t.named, t.n),
            percent(t.ratio_within, t.n),
            percent(t.kinact_covered, t.intervals),
            percent(t.ki_covered, t.intervals),
            t.intervals
        );
        println!(
            "  kinact/KI interval covers {:.1} % (among the {} named: {:.1} %); initial rates tied in {:.1} %",
            percent(t.ratio_covered, t.n),
            t.named,
            percent(t.ratio_covered_named, t.named),
            percent(t.tied, t.n)
        );
        let [n, kinact, ki] = t.reversible_coverage;
        println!(
            "  named {:?}; among the {n} named reversible, coverage kinact {:.1} % KI {:.1} %",
            t.names,
            percent(kinact, n),
            percent(ki, n)
        );
    }
}

#[test]
#[ignore = "diagnostic"]
fn probe() {
    for (k, class) in Class::ALL.iter().enumerate() {
        let mut rng = StdRng::seed_from_u64(SEED + k as u64);
        for _ in 0..2 {
            let compound = simulate(*class, &mut rng, 1.0);
            let start = std::time::Instant::now();
            let r = analyse(&compound, &units(), &Options::default()).unwrap();
            println!("{class:?} {:?} {:?} {} {:?}", r.onset, r.reversible, r.evidence, start.elapsed());
            for m in &r.models {
                println!("   {:?} {} sse {:.4e} aicc {:?} conv {}", m.onset, m.reversible, m.sse, m.aicc, m.converged);
            }
            println!(
                "   kinact {:?}\n   ki {:?}\n   ratio {:?}",
                r.kinact.as_ref().map(|p| (p.value, p.low, p.high)),
                r.ki.as_ref().map(|p| (p.value, p.low, p.high)),
                r.kinact_ki.as_ref().map(|p| (p.value, p.low, p.high))
            );
        }
    }
}

/// The covalent classes with the initial rates forced free (`--initial-rates
/// free`), the estimator before the tie: where its kinact/KI intervals missed.
#[test]
#[ignore = "measurement run: about a minute of CPU in release"]
fn free_rates_measurement() {
    let options = Options { initial_rates: RatesPolicy::Free, ..Options::default() };
    for (k, class) in Class::ALL.iter().enumerate().take(2) {
        let t = run_with(*class, 200, SEED + k as u64, &options);
        println!(
            "{class:?} (free rates): named {:.1} %, kinact/KI within 20 % {:.1} %, interval covers {:.1} % (among the {} named: {:.1} %)",
            percent(t.named, t.n),
            percent(t.ratio_within, t.n),
            percent(t.ratio_covered, t.n),
            t.named,
            percent(t.ratio_covered_named, t.named)
        );
        println!("  named {:?}", t.names);
    }
}
