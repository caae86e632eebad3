//! Scale invariance (DESIGN §2, issue 9): multiplying every response by
//! 10^k, k = −6..=7, multiplies the response parameters by 10^k (SSE by
//! 10^2k, reciprocal quantities by 10^−k) and leaves everything else —
//! IC50, Km, Ki, windows, flags, calls, p-values — unchanged. Checked
//! through the real binary on data at instrument scale (counts 10³–10⁷),
//! for `rates`, `km`, `mode` and `ic50` (logistic and Morrison).
//!
//! The data are simulated here with fixed seeds (scale is the property under
//! test, not the values); `mode` uses the committed competitive matrix.

mod common;

use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};
use serde_json::Value;

/// Runs `kimech <args> FILE --format json` on `text`, returning the JSON.
fn run_json(dir: &tempfile::TempDir, text: &str, args: &[&str]) -> Value {
    let path = dir.path().join("in.csv");
    std::fs::write(&path, text).unwrap();
    let out = common::kimech(dir.path()).args(args).arg(&path).args(["--format", "json"]).output().unwrap();
    assert!(out.status.success() || out.status.code() == Some(3), "{}", String::from_utf8_lossy(&out.stderr));
    let mut doc: Value =
        serde_json::from_slice(&out.stdout).unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&out.stdout)));
    // The provenance record names the input file's bytes, hash and the run's
    // time: it must differ between scales, and is checked in tests/registry.rs.
    let provenance = doc.as_object_mut().and_then(|o| o.remove("provenance"));
    assert!(provenance.is_some(), "every JSON output carries its provenance");
    doc
}

/// How a quantity moves when the response is multiplied by f: by f^power.
struct Scaling<'a> {
    /// Keys whose whole subtree scales by f^power.
    scaled: &'a [(&'a str, i32)],
    /// Keys not compared (they move by an additive constant, e.g. AICc).
    skipped: &'a [&'a str],
    /// Keys not compared in a result whose IC50 is a bound (`>` or `<`):
    /// beyond the range the slope is not determined by the data (the fit
    /// stops somewhere in a flat valley), so its value and the fitted IC50
    /// quoted in the bound's note are not measurements.
    undetermined_beyond_range: &'a [&'a str],
}

impl Scaling<'_> {
    fn compare(&self, base: &Value, scaled: &Value, f: f64, power: i32, path: &str) {
        self.compare_in(base, scaled, f, power, path, false);
    }

    /// `bound`: inside a result whose IC50 is a bound.
    fn compare_in(&self, base: &Value, scaled: &Value, f: f64, power: i32, path: &str, bound: bool) {
        match (base, scaled) {
            (Value::Object(a), Value::Object(b)) => {
                assert_eq!(a.len(), b.len(), "{path}: different fields {a:?} vs {b:?}");
                let bound = bound || matches!(a.get("qualifier").and_then(Value::as_str), Some(">" | "<"));
                for (key, va) in a {
                    if self.skipped.contains(&key.as_str())
                        || (bound && self.undetermined_beyond_range.contains(&key.as_str()))
                    {
                        continue;
                    }
                    let vb = b.get(key).unwrap_or_else(|| panic!("{path}/{key} missing at scale {f:e}"));
                    let p = self.scaled.iter().find(|(k, _)| k == key).map_or(power, |(_, p)| *p);
                    self.compare_in(va, vb, f, p, &format!("{path}/{key}"), bound);
                }
            }
            (Value::Array(a), Value::Array(b)) => {
                assert_eq!(a.len(), b.len(), "{path}: lengths differ at scale {f:e}");
                for (k, (va, vb)) in a.iter().zip(b).enumerate() {
                    self.compare_in(va, vb, f, power, &format!("{path}[{k}]"), bound);
                }
            }
            (Value::Number(a), Value::Number(b)) => {
                let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
                let want = a * f.powi(power);
                assert!(
                    (b - want).abs() <= 1e-6 * want.abs() + 1e-12 * f.powi(power).abs(),
                    "{path}: {b} at scale {f:e}, expected {want} (= {a} × {f:e}^{power})"
                );
            }
            (a, b) => assert_eq!(a, b, "{path} at scale {f:e}"),
        }
    }
}

/// Scales the last column of a CSV (after the header) by f.
fn scale_last_column(text: &str, f: f64) -> String {
    let mut out = String::new();
    for (i, line) in text.lines().enumerate() {
        if i == 0 || line.starts_with('#') || line.trim().is_empty() {
            out.push_str(line);
        } else {
            let (head, last) = line.rsplit_once(',').unwrap();
            let y: f64 = last.trim().parse().unwrap();
            out.push_str(&format!("{head},{:e}", y * f));
        }
        out.push('\n');
    }
    out
}

fn check_every_scale(text: &str, args: &[&str], scaling: &Scaling) {
    let dir = tempfile::tempdir().unwrap();
    let base = run_json(&dir, text, args);
    assert!(!base["results"].as_array().unwrap().is_empty());
    for k in -6..=7 {
        let f = 10f64.powi(k);
        let scaled = run_json(&dir, &scale_last_column(text, f), args);
        scaling.compare(&base, &scaled, f, 0, "");
    }
}

/// The example from issue 9: a fluorescence rise of ≈ 1000 per minute.
const RISE: &str = "time (min),fluorescence\n0,3\n1,1002\n2,1999\n3,3004\n4,3998\n5,5001\n";

#[test]
fn rates_of_a_thousand_counts_per_minute_are_not_clamped() {
    let dir = tempfile::tempdir().unwrap();
    let v = run_json(&dir, RISE, &["rates"]);
    let r = &v["results"][0];
    let rate = r["rate"]["value"].as_f64().unwrap();
    // Least-squares slope through the six points by hand: Σ(t−t̄)y/Σ(t−t̄)² = 17491.5/17.5 = 999.514…
    assert!((rate - 17491.5 / 17.5).abs() < 1e-6, "rate {rate}");
    let codes: Vec<&str> = r["warnings"].as_array().unwrap().iter().map(|w| w["code"].as_str().unwrap()).collect();
    assert!(!codes.contains(&"no-detectable-change"), "{codes:?}");
}

#[test]
fn rates_scale_with_the_signal() {
    let mut rng = StdRng::seed_from_u64(91);
    let noise = Normal::new(0.0, 400.0).unwrap();
    let mut text = String::from("curve,time (min),signal\n");
    for (curve, v0) in [("A", 2.0e4), ("B", 6.0e4), ("C", 1.5e3)] {
        for t in 0..20 {
            let t = t as f64 * 0.5;
            // Exponential approach to a plateau of 1e6 counts: curves after a while.
            let y = 2.0e4 + 1.0e6 * (1.0 - (-v0 * t / 1.0e6).exp()) + noise.sample(&mut rng);
            text.push_str(&format!("{curve},{t},{y}\n"));
        }
    }
    check_every_scale(
        &text,
        &["rates"],
        &Scaling { scaled: &[("rate", 1), ("intercept", 1)], skipped: &[], undetermined_beyond_range: &[] },
    );
    check_every_scale(
        RISE,
        &["rates"],
        &Scaling { scaled: &[("rate", 1), ("intercept", 1)], skipped: &[], undetermined_beyond_range: &[] },
    );
}

#[test]
fn km_scales_with_the_rate() {
    let mut rng = StdRng::seed_from_u64(92);
    let mut text = String::from("series,substrate (uM),rate\n");
    for (series, vmax, km) in [("counts", 8.0e4, 35.0), ("bright", 3.0e6, 4.0)] {
        let noise = Normal::new(0.0, 0.03 * vmax).unwrap();
        for s in [1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0, 200.0] {
            for _ in 0..2 {
                let v: f64 = vmax * s / (km + s) + noise.sample(&mut rng);
                text.push_str(&format!("{series},{s},{v}\n"));
            }
        }
    }
    let scaling = Scaling {
        scaled: &[("vmax", 1), ("sse", 2), ("residual_sd", 1), ("slope", -1), ("y_intercept", -1)],
        skipped: &[],
        undetermined_beyond_range: &[],
    };
    check_every_scale(&text, &["km"], &scaling);
}

#[test]
fn mode_scales_with_the_rate() {
    // The committed competitive matrix, at instrument scale (× 10⁴ counts).
    let text = scale_last_column(&common::fixture_text("mode/competitive.csv"), 1.0e4);
    let scaling = Scaling { scaled: &[("vmax", 1), ("sse", 2)], skipped: &["aicc"], undetermined_beyond_range: &[] };
    check_every_scale(&text, &["mode"], &scaling);
}

/// Raw dose-response counts: a full curve, a weak one, a partial one, an
/// inactive one and a potent one, 10 concentrations in duplicate plus zero.
fn raw_plate(seed: u64) -> String {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut text = String::from("compound,concentration (nM),response\n");
    let concs: Vec<f64> = (0..10).map(|i| 1.0 * 3f64.powi(i)).collect();
    let cases = [
        ("full", 120.0, 1.1, 4.0e3),
        ("steep", 300.0, 2.6, 4.0e3),
        ("weak", 6.0e4, 1.0, 4.0e3),
        ("partial", 200.0, 1.0, 9.0e4),
        ("inactive", 1.0e9, 1.0, 4.0e3),
    ];
    for (name, ic50, hill, lower) in cases {
        let upper = 2.0e5;
        let noise = Normal::new(0.0, 0.03 * upper).unwrap();
        for &x in std::iter::once(&0.0).chain(&concs) {
            for _ in 0..2 {
                let y: f64 = lower + (upper - lower) / (1.0 + (x / ic50).powf(hill)) + noise.sample(&mut rng);
                text.push_str(&format!("{name},{x},{y}\n"));
            }
        }
    }
    text
}

const IC50_SCALING: Scaling = Scaling {
    scaled: &[("upper", 1), ("lower", 1), ("residual_sd", 1), ("response", 1)],
    // The reason quotes levels in response units (e.g. "half (1.02e5)"); the call itself is compared.
    skipped: &["reason"],
    undetermined_beyond_range: &["hill", "note"],
};

#[test]
fn ic50_logistic_scales_with_the_response() {
    check_every_scale(&raw_plate(93), &["ic50"], &IC50_SCALING);
    check_every_scale(&raw_plate(94), &["ic50", "--outliers", "keep"], &IC50_SCALING);
}

#[test]
fn ic50_morrison_scales_with_the_background_subtracted_signal() {
    let mut rng = StdRng::seed_from_u64(95);
    let mut text = String::from("compound,inhibitor (nM),response\n");
    let et = 2.0;
    for (name, k) in [("tight", 0.4), ("moderate", 6.0), ("loose", 80.0)] {
        let v0 = 5.0e3;
        let noise = Normal::new(0.0, 0.02 * v0).unwrap();
        for i in 0..12 {
            let x = if i == 0 { 0.0 } else { 0.05 * 2f64.powi(i) };
            let b: f64 = et + x + k;
            let bound = (b - (b * b - 4.0 * et * x).sqrt()) / (2.0 * et);
            let y = v0 * (1.0 - bound) + noise.sample(&mut rng);
            text.push_str(&format!("{name},{x},{y}\n"));
        }
    }
    check_every_scale(&text, &["ic50", "--enzyme", "2 nM"], &IC50_SCALING);
}
