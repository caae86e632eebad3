//! Classification by simulation (issue 3): with S spanning 0.2–8 × Km, I
//! spanning 0–4 × Ki, duplicates and 5% proportional noise, `mode` must name
//! the true mechanism in ≥ 90% of 400 datasets per mechanism, and the 95%
//! profile interval of the inhibition constant (fitted under the true
//! mechanism) must cover the truth in 92–98% of them.
//!
//! Design and noise follow tests/reference/mode_reference.py (Vmax 10, Km 50,
//! S = 0.2, 0.5, 1, 2, 4, 8 × Km), with I = 0, 0.5, 1, 2, 4 × Ki and Ki = 2;
//! the mixed truth has α = 4 (Kiu = 8) as there. The seed is fixed.

use kimech::analysis::mode::{Matrix, Options, Units, analyse};
use kimech::fit::Model;
use kimech::models::inhibition::{Mechanism, RateLaw};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const VMAX: f64 = 10.0;
const KM: f64 = 50.0;
const KI: f64 = 2.0;
const ALPHA: f64 = 4.0;
const DATASETS: usize = 400;
/// 400 datasets per mechanism (the issue asks for at least 200): a coverage
/// estimate from 200 has SE ≈ 1.5%, so the 92–98% window is only ±2 SE and
/// about one seed in five misses it for one of four mechanisms by chance
/// (measured over eleven seeds: mean 94.3%, range 90.5–97.5%). With 400 the
/// window is ±2.8 SE. The seed is the one fixed before the first run
/// (+ k per mechanism); measured with it: coverage 95.5, 92.5, 94.0, 94.0%.
const SEED: u64 = 20261201;

fn truth(m: Mechanism) -> Vec<f64> {
    match m {
        Mechanism::Mixed => vec![VMAX, KM, KI, ALPHA],
        Mechanism::None => vec![VMAX, KM],
        _ => vec![VMAX, KM, KI],
    }
}

fn simulate(m: Mechanism, rng: &mut StdRng) -> Matrix {
    let law = RateLaw(m);
    let theta = truth(m);
    let noise = Normal::new(0.0, 0.05).unwrap();
    let mut mx = Matrix {
        label: None,
        origin: "simulation".into(),
        lines: Vec::new(),
        substrate: Vec::new(),
        inhibitor: Vec::new(),
        rate: Vec::new(),
        sd: None,
    };
    for i in [0.0, 0.5, 1.0, 2.0, 4.0].map(|f| f * KI) {
        for s in [0.2, 0.5, 1.0, 2.0, 4.0, 8.0].map(|f| f * KM) {
            for _ in 0..2 {
                let v = law.value(&theta, &(s, i)) * (1.0 + noise.sample(rng));
                mx.lines.push(mx.rate.len() as u64 + 2);
                mx.substrate.push(s);
                mx.inhibitor.push(i);
                mx.rate.push(v);
            }
        }
    }
    mx
}

/// Datasets are fitted with relative weighting (1/rate²), which matches the
/// proportional noise; unweighted fits of such data give intervals that are
/// too narrow where rates are small (coverage 77–83% measured).
/// (share chosen right, share of Ki intervals covering the truth, share judged inadequate)
fn run(m: Mechanism, seed: u64) -> (f64, f64, f64) {
    let mut rng = StdRng::seed_from_u64(seed);
    let options = Options { weighting: kimech::fit::Weighting::Relative, ..Options::default() };
    let units = Units::default();
    let (mut right, mut covered, mut inadequate) = (0, 0, 0);
    let k = match m {
        Mechanism::Uncompetitive => "kiu",
        _ => "ki",
    };
    let mut choices = std::collections::BTreeMap::new();
    for _ in 0..DATASETS {
        let r = analyse(&simulate(m, &mut rng), &units, &options).expect("simulated data fit");
        *choices.entry(r.chosen.clone()).or_insert(0) += 1;
        right += usize::from(r.chosen == m.name());
        inadequate += usize::from(r.chosen == "no-model-adequate");
        let model = r.models.iter().find(|x| x.model == m.name()).unwrap();
        let p = if k == "kiu" { model.params.kiu.as_ref() } else { model.params.ki.as_ref() }.unwrap();
        let low = p.low.unwrap_or(0.0);
        let high = p.high.unwrap_or(f64::INFINITY);
        covered += usize::from(low <= KI && KI <= high);
    }
    eprintln!("{}: {choices:?}, Ki covered {covered}/{DATASETS}", m.name());
    let n = DATASETS as f64;
    (right as f64 / n, covered as f64 / n, inadequate as f64 / n)
}

#[test]
fn true_mechanism_is_chosen_and_ki_intervals_cover() {
    let mut failures = Vec::new();
    let mut pooled = 0.0;
    for (k, m) in [Mechanism::Competitive, Mechanism::Uncompetitive, Mechanism::Noncompetitive, Mechanism::Mixed]
        .into_iter()
        .enumerate()
    {
        let (right, coverage, inadequate) = run(m, SEED + k as u64);
        if right < 0.90 {
            failures.push(format!("{}: chosen right in {:.1}% (< 90%)", m.name(), 100.0 * right));
        }
        pooled += coverage / 4.0;
        if !(0.92..=0.98).contains(&coverage) {
            failures.push(format!("{}: Ki coverage {:.1}% (outside 92–98%)", m.name(), 100.0 * coverage));
        }
        if inadequate > 0.05 {
            failures.push(format!("{}: a correct model judged inadequate in {:.1}%", m.name(), 100.0 * inadequate));
        }
    }
    if !(0.93..=0.97).contains(&pooled) {
        failures.push(format!("pooled Ki coverage {:.1}% (outside 93–97%)", 100.0 * pooled));
    }
    assert!(failures.is_empty(), "{failures:#?}");
}

/// A matrix no rate law here describes: competitive inhibition on top of
/// strong substrate inhibition, v = Vmax·S/(Km(1 + I/Ki) + S + S²/Ksi) with
/// Ksi = 2 Km (Cornish-Bowden 2012, §5.9). No plain mechanism may be named:
/// the matrix is diagnosed as substrate inhibition (issue 10) in at least 49
/// of 50 such datasets, and otherwise refused as `no-model-adequate`.
#[test]
fn substrate_inhibition_is_diagnosed_not_forced_into_a_mechanism() {
    let mut rng = StdRng::seed_from_u64(SEED + 100);
    let noise = Normal::new(0.0, 0.05).unwrap();
    let options = Options { weighting: kimech::fit::Weighting::Relative, ..Options::default() };
    let mut refused = 0;
    for _ in 0..50 {
        let mut mx = simulate(Mechanism::None, &mut rng);
        for k in 0..mx.rate.len() {
            let (s, i) = (mx.substrate[k], mx.inhibitor[k]);
            let v = VMAX * s / (KM * (1.0 + i / KI) + s + s * s / (2.0 * KM));
            mx.rate[k] = v * (1.0 + noise.sample(&mut rng));
        }
        let r = analyse(&mx, &Units::default(), &options).expect("fit");
        assert!(["substrate-inhibition", "no-model-adequate"].contains(&r.chosen.as_str()), "{}", r.chosen);
        refused += usize::from(r.chosen == "substrate-inhibition");
        assert!(r.warnings.iter().any(|w| w.code == r.chosen.as_str()));
    }
    assert!(refused >= 49, "only {refused}/50 substrate-inhibition matrices diagnosed");
}
