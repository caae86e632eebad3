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

criterion_group!(benches, michaelis_menten);
criterion_main!(benches);
