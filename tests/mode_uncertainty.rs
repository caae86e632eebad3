//! Model uncertainty, the headline and the diagnoses, measured by simulation
//! (issue 10). Matrices are drawn as an assay biologist would design them:
//! 5–8 substrate levels log-spaced from 0.1–0.3 × Km to 4–10 × Km, 4–6
//! inhibitor levels (0 and log-spaced from 0.3–0.7 × to 3–8 × a guess of
//! the IC50 at S = Km that is up to ~3-fold off), duplicates, 3–8 % noise, half proportional (fitted
//! with relative weighting) and half constant (sd = that share of Vmax/2,
//! fitted unweighted). Rate laws from Segel (*Enzyme Kinetics*, 1975,
//! ch. 3–4) and Haldane (1930) as in `kimech::models::inhibition`; the data
//! are simulated here (fixed seed), nobody measured them.
//!
//! The full figures in the README come from the ignored test
//! `full_simulation_figures` (`cargo test --release --test mode_uncertainty
//! -- --ignored --nocapture`); the in-suite tests run a smaller sample with
//! bounds loosened by about 2 binomial SEs.

use std::collections::BTreeMap;

use kimech::analysis::mode::{Basis, Matrix, ModeResult, Options, Units, analyse, extension_starts, fit_all};
use kimech::fit::{Data, FitSettings, Model, Weighting, fit_from, weights};
use kimech::models::inhibition::{Extension, ExtensionLaw, Mechanism, RateLaw, implied_ic50};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal};

const SEED: u64 = 20261202;
const VMAX: f64 = 10.0;
const KM: f64 = 50.0;

/// The simulated classes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Class {
    Competitive,
    Uncompetitive,
    Noncompetitive,
    /// Mixed with α in 0.2–0.5.
    MixedLow,
    /// Mixed with α in 2–10.
    MixedHigh,
    /// Partial noncompetitive-type inhibition, residual activity β 30–50 %.
    Partial,
    /// Mild partial inhibition, β 10–40 %, α in 0.5–2.
    MildPartial,
    /// Mixed inhibition with substrate inhibition, Ksi 1.5–4 Km.
    SubstrateInhibition,
}

impl Class {
    const FIVE: [Class; 5] =
        [Class::Competitive, Class::Uncompetitive, Class::Noncompetitive, Class::MixedLow, Class::MixedHigh];

    fn name(self) -> &'static str {
        match self {
            Class::Competitive => "competitive",
            Class::Uncompetitive => "uncompetitive",
            Class::Noncompetitive => "noncompetitive",
            Class::MixedLow | Class::MixedHigh => "mixed",
            Class::Partial | Class::MildPartial => "partial-inhibition",
            Class::SubstrateInhibition => "substrate-inhibition",
        }
    }
}

/// One simulated matrix with its true Kic and Kiu (∞ where absent).
struct Case {
    matrix: Matrix,
    options: Options,
    ki: f64,
    kiu: f64,
}

fn log_levels(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n).map(|k| (lo.ln() + (hi / lo).ln() * k as f64 / (n - 1) as f64).exp()).collect()
}

/// A true rate law v(S, I).
type Law = Box<dyn Fn(f64, f64) -> f64>;

fn simulate(class: Class, rng: &mut StdRng) -> Case {
    let ki = 10f64.powf(rng.random_range(-1.0..1.0));
    let (value, ki_true, kiu_true): (Law, f64, f64) = match class {
        Class::Competitive | Class::Uncompetitive | Class::Noncompetitive => {
            let m = match class {
                Class::Competitive => Mechanism::Competitive,
                Class::Uncompetitive => Mechanism::Uncompetitive,
                _ => Mechanism::Noncompetitive,
            };
            let (kic, kiu) = match m {
                Mechanism::Competitive => (ki, f64::INFINITY),
                Mechanism::Uncompetitive => (f64::INFINITY, ki),
                _ => (ki, ki),
            };
            (Box::new(move |s, i| RateLaw(m).value(&[VMAX, KM, ki], &(s, i))), kic, kiu)
        }
        Class::MixedLow | Class::MixedHigh => {
            let alpha = if class == Class::MixedLow { rng.random_range(0.2..0.5) } else { rng.random_range(2.0..10.0) };
            let f = move |s, i| RateLaw(Mechanism::Mixed).value(&[VMAX, KM, ki, alpha], &(s, i));
            (Box::new(f), ki, ki * alpha)
        }
        Class::Partial | Class::MildPartial => {
            let (beta, alpha) = if class == Class::Partial {
                (rng.random_range(0.3..0.5), 1.0)
            } else {
                (rng.random_range(0.1..0.4), rng.random_range(0.5..2.0))
            };
            let f = move |s, i| ExtensionLaw(Extension::Partial).value(&[VMAX, KM, ki, alpha, beta], &(s, i));
            (Box::new(f), ki, ki * alpha)
        }
        Class::SubstrateInhibition => {
            let alpha = 10f64.powf(rng.random_range(-0.5..1.0));
            let ksi = rng.random_range(1.5..4.0) * KM;
            let f =
                move |s, i| ExtensionLaw(Extension::SubstrateInhibition).value(&[VMAX, KM, ki, alpha, ksi], &(s, i));
            (Box::new(f), ki, ki * alpha)
        }
    };
    // Inhibitor levels around the IC50 implied at S = Km (by the plain part of the law).
    let ic50 = match (ki_true.is_finite(), kiu_true.is_finite()) {
        (true, true) => implied_ic50(Mechanism::Mixed, &[VMAX, KM, ki_true, kiu_true / ki_true], KM),
        (true, false) => implied_ic50(Mechanism::Competitive, &[VMAX, KM, ki_true], KM),
        _ => implied_ic50(Mechanism::Uncompetitive, &[VMAX, KM, kiu_true], KM),
    }
    .unwrap_or(ki)
        // The potency is only roughly known when the matrix is designed: up to ~3-fold off.
        * 10f64.powf(rng.random_range(-0.5..0.5));
    let n_s = rng.random_range(5..=8);
    let n_i = rng.random_range(4..=6);
    let s_levels = log_levels(KM * rng.random_range(0.1..0.3), KM * rng.random_range(4.0..10.0), n_s);
    let mut i_levels = vec![0.0];
    i_levels.extend(log_levels(ic50 * rng.random_range(0.3..0.7), ic50 * rng.random_range(3.0..8.0), n_i - 1));
    let share = rng.random_range(0.03..0.08);
    let proportional = rng.random_bool(0.5);
    let z = Normal::new(0.0, 1.0).unwrap();
    let mut m = Matrix {
        label: None,
        origin: "simulation".into(),
        lines: Vec::new(),
        substrate: Vec::new(),
        inhibitor: Vec::new(),
        rate: Vec::new(),
        sd: None,
    };
    for &i in &i_levels {
        for &s in &s_levels {
            for _ in 0..2 {
                let v = value(s, i);
                let noisy = if proportional {
                    v * (1.0 + share * z.sample(rng))
                } else {
                    v + share * VMAX / 2.0 * z.sample(rng)
                };
                m.lines.push(m.rate.len() as u64 + 2);
                m.substrate.push(s);
                m.inhibitor.push(i);
                m.rate.push(noisy.max(1e-6 * VMAX));
            }
        }
    }
    let weighting = if proportional { Weighting::Relative } else { Weighting::None };
    Case { matrix: m, options: Options { weighting, ..Options::default() }, ki: ki_true, kiu: kiu_true }
}

/// Whether an interval (None = open end) holds a true value (∞ = absent).
fn covers(p: Option<&kimech::report::Param>, truth: f64) -> bool {
    match p {
        None => !truth.is_finite(),
        Some(p) => {
            if !truth.is_finite() {
                return p.high.is_none();
            }
            p.low.unwrap_or(0.0) <= truth && truth <= p.high.unwrap_or(f64::INFINITY)
        }
    }
}

fn headline_covers(r: &ModeResult, case: &Case) -> bool {
    let ki_ok = !case.ki.is_finite() || covers(r.headline.ki.as_ref(), case.ki);
    let kiu_ok = !case.kiu.is_finite() || covers(r.headline.kiu.as_ref(), case.kiu);
    ki_ok && kiu_ok
}

fn fired(r: &ModeResult, code: &str) -> bool {
    r.warnings.iter().any(|w| w.code == code)
}

#[derive(Default)]
struct Tally {
    n: usize,
    covered: usize,
    right: usize,
    right_flagged: usize,
    wrong: usize,
    wrong_flagged: usize,
    choices: BTreeMap<String, usize>,
    /// Wrong plain calls with neither `mechanism-uncertain` nor `partial-inhibition-possible`.
    plain_unwarned: usize,
    /// Matrices (any call) carrying `partial-inhibition-possible`.
    partial_cautioned: usize,
    spans: usize,
}

fn run(class: Class, n: usize, seed: u64) -> Tally {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut t = Tally::default();
    for _ in 0..n {
        let case = simulate(class, &mut rng);
        let r = analyse(&case.matrix, &Units::default(), &case.options).expect("simulated matrix");
        t.n += 1;
        *t.choices.entry(r.chosen.clone()).or_insert(0) += 1;
        t.covered += usize::from(headline_covers(&r, &case));
        t.spans += usize::from(r.headline.basis == Basis::SpanOverPlausibleModels);
        let flagged = fired(&r, "mechanism-uncertain");
        if std::env::var("KIMECH_SIM_DEBUG").is_ok()
            && class == Class::SubstrateInhibition
            && r.chosen == "no-model-adequate"
        {
            eprintln!("{}", serde_json::to_string(&r.extensions).unwrap());
        }
        if let Ok(path) = std::env::var("KIMECH_SIM_DUMP") {
            dump(&path, class, &r, &case);
        }
        t.partial_cautioned += usize::from(fired(&r, "partial-inhibition-possible"));
        let cautioned = ["mechanism-uncertain", "partial-inhibition-possible"].iter().any(|c| fired(&r, c));
        let plain = Mechanism::ALL.iter().any(|m| m.name() == r.chosen);
        if plain {
            if r.chosen == class.name() {
                t.right += 1;
                t.right_flagged += usize::from(flagged);
            } else {
                t.wrong += 1;
                t.wrong_flagged += usize::from(flagged);
                t.plain_unwarned += usize::from(!cautioned);
            }
        }
    }
    t
}

/// One line per matrix for studying the rules (only when KIMECH_SIM_DUMP names a file).
fn dump(path: &str, class: Class, r: &ModeResult, case: &Case) {
    use std::io::Write;
    let chosen = r.models.iter().find(|m| m.model == r.chosen);
    let p = |a: &str, b: &str| r.tests.iter().find(|t| t.simpler == a && t.fuller == b).and_then(|t| t.p);
    let codes: Vec<&str> = r.warnings.iter().map(|w| w.code.as_str()).collect();
    let line = format!(
        "{:?},{},{:?},{},{},{},{:?},{:?},{:?},{:?},{:?},{:?},{:?},{:?},{}\n",
        class,
        r.chosen,
        r.headline.basis,
        !case.ki.is_finite() || covers(r.headline.ki.as_ref(), case.ki),
        !case.kiu.is_finite() || covers(r.headline.kiu.as_ref(), case.kiu),
        chosen.map_or(f64::NAN, |m| m.weight),
        p("competitive", "mixed"),
        p("uncompetitive", "mixed"),
        p("noncompetitive", "mixed"),
        r.extensions[0].p_vs_mixed,
        r.extensions[1].p_vs_mixed,
        r.adequacy.runs_p,
        r.adequacy.lack_of_fit_p,
        r.models.iter().map(|m| m.weight).collect::<Vec<_>>(),
        codes.join(" ")
    );
    let mut f = std::fs::OpenOptions::new().create(true).append(true).open(path).expect("dump file");
    f.write_all(line.replace(", ", ";").as_bytes()).expect("dump");
}

fn pct(a: usize, b: usize) -> f64 {
    if b == 0 { f64::NAN } else { 100.0 * a as f64 / b as f64 }
}

/// Every simulated class, in the order the tables list them.
const ALL_CLASSES: [Class; 8] = [
    Class::Competitive,
    Class::Uncompetitive,
    Class::Noncompetitive,
    Class::MixedLow,
    Class::MixedHigh,
    Class::Partial,
    Class::MildPartial,
    Class::SubstrateInhibition,
];

/// Runs every class and prints the confusion matrix and rates; returns the tallies.
fn simulate_all(n: usize) -> Vec<(Class, Tally)> {
    let classes = ALL_CLASSES;
    let only = std::env::var("KIMECH_SIM_ONLY").ok();
    let out: Vec<(Class, Tally)> = classes
        .iter()
        .enumerate()
        .filter(|(_, c)| only.as_ref().is_none_or(|o| *o == format!("{c:?}")))
        .map(|(k, &c)| (c, run(c, n, SEED + 1000 * k as u64)))
        .collect();
    for (c, t) in &out {
        eprintln!(
            "{c:?}: n {} | headline covers {:.1}% | right {} (flagged {:.1}%) wrong {} (flagged {:.1}%, uncautioned {}) | partial-inhibition-possible {} | spans {} | {:?}",
            t.n,
            pct(t.covered, t.n),
            t.right,
            pct(t.right_flagged, t.right),
            t.wrong,
            pct(t.wrong_flagged, t.wrong),
            t.plain_unwarned,
            t.partial_cautioned,
            t.spans,
            t.choices
        );
    }
    out
}

struct Rates {
    coverage: f64,
    mixed_coverage: f64,
    fires_right: f64,
    fires_wrong: f64,
}

fn five_rates(all: &[(Class, Tally)]) -> Rates {
    let five: Vec<&Tally> = all.iter().filter(|(c, _)| Class::FIVE.contains(c)).map(|(_, t)| t).collect();
    let sum = |f: &dyn Fn(&Tally) -> usize, ts: &[&Tally]| ts.iter().map(|t| f(t)).sum::<usize>();
    let mixed: Vec<&Tally> =
        all.iter().filter(|(c, _)| matches!(c, Class::MixedLow | Class::MixedHigh)).map(|(_, t)| t).collect();
    Rates {
        coverage: pct(sum(&|t| t.covered, &five), sum(&|t| t.n, &five)),
        mixed_coverage: pct(sum(&|t| t.covered, &mixed), sum(&|t| t.n, &mixed)),
        fires_right: pct(sum(&|t| t.right_flagged, &five), sum(&|t| t.right, &five)),
        fires_wrong: pct(sum(&|t| t.wrong_flagged, &five), sum(&|t| t.wrong, &five)),
    }
}

#[test]
#[ignore = "the full measurement (≥ 200 matrices per class) behind the README figures; run in release"]
fn full_simulation_figures() {
    let n = std::env::var("KIMECH_SIM_N").ok().and_then(|v| v.parse().ok()).unwrap_or(200);
    let all = simulate_all(n);
    let r = five_rates(&all);
    eprintln!(
        "five laws: headline coverage {:.1}% (mixed {:.1}%); mechanism-uncertain on right calls {:.1}%, on wrong calls {:.1}%",
        r.coverage, r.mixed_coverage, r.fires_right, r.fires_wrong
    );
    if let Some((_, t)) = all.iter().find(|(c, _)| *c == Class::MildPartial) {
        eprintln!(
            "mild partial: {} of {} named, {} plain calls, {} of them without any caution",
            t.choices.get(Class::MildPartial.name()).copied().unwrap_or(0),
            t.n,
            t.wrong,
            t.plain_unwarned
        );
    }
    let (cautioned, n) = partial_caution_on_full_inhibition(&all);
    eprintln!(
        "partial-inhibition-possible on full-inhibition matrices (the five laws): {cautioned} of {n} ({:.1}%)",
        pct(cautioned, n)
    );
}

/// How many matrices simulated from the five (complete-inhibition) laws carry `partial-inhibition-possible`.
fn partial_caution_on_full_inhibition(all: &[(Class, Tally)]) -> (usize, usize) {
    let five = all.iter().filter(|(c, _)| Class::FIVE.contains(c)).map(|(_, t)| t);
    five.fold((0, 0), |(a, b), t| (a + t.partial_cautioned, b + t.n))
}

/// Mild partial inhibition (β 0.1–0.4) is never given a plain mechanism
/// without a caution. The first 35 matrices of the full simulation's mild
/// class (same seed) include one that a test of the partial fit against mixed
/// alone could not catch (F p 0.63: the data neither show nor rule out the
/// plateau): it is named mixed and must carry `partial-inhibition-possible`.
/// About 2 s in release.
#[test]
fn mild_partial_inhibition_never_gets_a_plain_call_without_a_caution() {
    let t = run(Class::MildPartial, 35, SEED + 1000 * 6);
    assert!(t.wrong >= 1, "the sample must contain plain calls to test the rule: {:?}", t.choices);
    assert_eq!(
        t.plain_unwarned, 0,
        "{} of {} plain calls without a caution: {:?}",
        t.plain_unwarned, t.wrong, t.choices
    );
}

fn named(all: &[(Class, Tally)], class: Class) -> (usize, usize) {
    let t = &all.iter().find(|(c, _)| *c == class).unwrap().1;
    (t.choices.get(class.name()).copied().unwrap_or(0), t.n)
}

/// The in-suite sample: 30 matrices per class (about 15 s in release). Bounds
/// are the targets loosened by about two binomial SEs at this size;
/// the full figures (200 per class) are in the README.
#[test]
fn headline_covers_uncertainty_fires_and_diagnoses_are_named() {
    let all = simulate_all(30);
    let r = five_rates(&all);
    let mut failures = Vec::new();
    if r.coverage < 88.0 {
        failures.push(format!("headline coverage {:.1}% < 88%", r.coverage));
    }
    if r.mixed_coverage < 80.0 {
        failures.push(format!("mixed headline coverage {:.1}% < 80%", r.mixed_coverage));
    }
    if r.fires_right > 25.0 {
        failures.push(format!("mechanism-uncertain on {:.1}% of right calls > 25%", r.fires_right));
    }
    if r.fires_wrong < 50.0 {
        failures.push(format!("mechanism-uncertain on {:.1}% of wrong calls < 50%", r.fires_wrong));
    }
    let (partial, n) = named(&all, Class::Partial);
    if partial * 100 < 70 * n {
        failures.push(format!("partial inhibition named in {partial}/{n}"));
    }
    let (substrate, n) = named(&all, Class::SubstrateInhibition);
    if substrate + 1 < n {
        failures.push(format!("substrate inhibition named in {substrate}/{n}"));
    }
    let mild = &all.iter().find(|(c, _)| *c == Class::MildPartial).unwrap().1;
    if mild.plain_unwarned > 0 {
        failures.push(format!("{} mild-partial matrices given a plain call without a caution", mild.plain_unwarned));
    }
    let (cautioned, n) = partial_caution_on_full_inhibition(&all);
    if cautioned * 100 > 25 * n {
        failures.push(format!("partial-inhibition-possible on {cautioned} of {n} full-inhibition matrices > 25%"));
    }
    assert!(failures.is_empty(), "{failures:#?}");
}

/// The extension fits of `mode` start only from the mixed optimum and the
/// data's own Vmax/Km guess (`extension_starts`, 5–9 starts). This compares
/// them, matrix by matrix, with the same fit from those starts plus the
/// generic grid of `ExtensionLaw::starts` (the mixed grid crossed with the
/// extra constant: 27 and 18 more), on every simulated class; a miss is an
/// SSE above the grid's × (1 + 10⁻⁶), the tolerance of the scipy check.
/// `KIMECH_SIM_N` matrices per class (default 200), `KIMECH_SIM_SEED_OFFSET`
/// shifts the seeds.
#[test]
#[ignore = "measurement behind the README's statement on the extension starts; run in release"]
fn extension_starts_reach_the_grid_optimum() {
    let n = std::env::var("KIMECH_SIM_N").ok().and_then(|v| v.parse().ok()).unwrap_or(200);
    let offset: u64 = std::env::var("KIMECH_SIM_SEED_OFFSET").ok().and_then(|v| v.parse().ok()).unwrap_or(0);
    let classes = ALL_CLASSES;
    let settings = FitSettings::default();
    let (mut ours_time, mut grid_time, mut misses, mut fits) = (0.0, 0.0, 0, 0);
    let only = std::env::var("KIMECH_SIM_ONLY").ok();
    for (k, &class) in classes.iter().enumerate() {
        if only.as_ref().is_some_and(|o| *o != format!("{class:?}")) {
            continue;
        }
        let mut rng = StdRng::seed_from_u64(SEED + 1000 * k as u64 + offset);
        for j in 0..n {
            let case = simulate(class, &mut rng);
            let m = &case.matrix;
            let w = weights(case.options.weighting, &m.rate, None).expect("positive simulated rates");
            let x = m.substrate.iter().cloned().zip(m.inhibitor.iter().cloned()).collect();
            let data = Data { x, y: m.rate.clone(), weights: w };
            let mixed = fit_all(&data, &settings).swap_remove(4);
            for e in Extension::ALL {
                let law = ExtensionLaw(e);
                let ours_starts = extension_starts(e, &data, &mixed.theta);
                let mut grid_starts = law.starts(&data);
                grid_starts.extend(ours_starts.iter().cloned());
                let timed = |mut starts: Vec<Vec<f64>>, clock: &mut f64| {
                    starts.retain(|s| s.iter().all(|v| v.is_finite() && *v > 0.0));
                    let t = std::time::Instant::now();
                    let f = fit_from(&law, &data, &starts, &[None; 5], &settings);
                    *clock += t.elapsed().as_secs_f64();
                    f
                };
                let ours = timed(ours_starts, &mut ours_time);
                let grid = timed(grid_starts, &mut grid_time);
                fits += 1;
                if ours.sse > grid.sse * (1.0 + 1e-6) {
                    misses += 1;
                    eprintln!("{class:?} #{j} {}: SSE {} against the grid's {}", e.name(), ours.sse, grid.sse);
                }
            }
        }
    }
    eprintln!(
        "extension fits: {misses} of {fits} above the grid's optimum; time {:.0} ms (mode's starts) against {:.0} ms (with the grid)",
        ours_time * 1e3,
        grid_time * 1e3
    );
    assert_eq!(misses, 0);
}
