//! Criterion benchmarks of the fits behind each command.

use criterion::{Criterion, criterion_group, criterion_main};
use kimech::analysis::km::{Options, Series, Units, analyse};
use kimech::fit::{FitSettings, Weighting};

/// Puromycin, treated cells (Treloar 1974; Bates & Watts 1988): a real
/// 12-point substrate series, so the benchmark fits realistic data.
fn puromycin_treated() -> Series {
    Series {
        label: None,
        origin: "benchmark".into(),
        substrate: vec![0.02, 0.02, 0.06, 0.06, 0.11, 0.11, 0.22, 0.22, 0.56, 0.56, 1.1, 1.1],
        rate: vec![76.0, 47.0, 97.0, 107.0, 123.0, 139.0, 159.0, 152.0, 191.0, 201.0, 207.0, 200.0],
        sd: None,
    }
}

fn michaelis_menten(c: &mut Criterion) {
    let series = puromycin_treated();
    let units = Units { substrate: Some("ppm".into()), rate: None };
    let options =
        Options { weighting: Weighting::None, confidence: 0.95, enzyme: None, settings: FitSettings::default() };
    c.bench_function("km: one Michaelis-Menten fit with profile intervals", |b| {
        b.iter(|| analyse(std::hint::black_box(&series), &units, &options))
    });
}

/// An 8 × 6 [S]×[I] matrix in duplicate (96 rates), simulated from mixed
/// inhibition (Vmax 10, Km 50, Ki 2, α 4) with 5% proportional noise and a
/// fixed seed — the design of tests/mode_simulation.rs, widened.
fn rate_matrix() -> kimech::analysis::mode::Matrix {
    use kimech::fit::Model;
    use kimech::models::inhibition::{Mechanism, RateLaw};
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let mut rng = rand::rngs::StdRng::seed_from_u64(20261201);
    let noise = Normal::new(0.0, 0.05).expect("valid normal");
    let law = RateLaw(Mechanism::Mixed);
    let mut m = kimech::analysis::mode::Matrix {
        label: None,
        origin: "benchmark".into(),
        lines: Vec::new(),
        substrate: Vec::new(),
        inhibitor: Vec::new(),
        rate: Vec::new(),
        sd: None,
    };
    for i in [0.0, 0.5, 1.0, 2.0, 4.0, 8.0] {
        for s in [10.0, 17.5, 25.0, 50.0, 100.0, 175.0, 250.0, 400.0] {
            for _ in 0..2 {
                m.lines.push(m.rate.len() as u64 + 2);
                m.substrate.push(s);
                m.inhibitor.push(i);
                m.rate.push(law.value(&[10.0, 50.0, 2.0, 4.0], &(s, i)) * (1.0 + noise.sample(&mut rng)));
            }
        }
    }
    m
}

fn inhibition_mode(c: &mut Criterion) {
    let matrix = rate_matrix();
    let units = kimech::analysis::mode::Units::default();
    let options = kimech::analysis::mode::Options::default();
    c.bench_function("mode: five global models with profile intervals, 8x6 matrix in duplicate", |b| {
        b.iter(|| kimech::analysis::mode::analyse(std::hint::black_box(&matrix), &units, &options))
    });
}

criterion_group!(benches, michaelis_menten, inhibition_mode);
criterion_main!(benches);
