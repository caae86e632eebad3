//! `kimech ic50`: reference fit, simulated curves, Morrison, bad input, streaming.
//!
//! Sources: ryegrass data (Inderjit, Streibig & Olofsdotter, Physiol. Plant.
//! 114, 422–428, 2002) against scipy (tests/reference/logistic_reference.py →
//! fixtures/reference/ryegrass_4pl.json); Morrison, Biochim. Biophys. Acta
//! 185, 269–286 (1969) and IC50 = Ki,app + Et/2 (Copeland 2013); Z′ (Zhang,
//! Chung & Oldenburg 1999). Simulated data use fixed seeds.

use assert_cmd::Command;
use kimech::analysis::ic50::{
    Carried, Curve, Ic50Result, IntervalMethod, Location, Options, Thresholds, analyse, screening_settings,
};
use kimech::fit::FitSettings;
use kimech::units::{ConcUnit, Qualifier};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};
use serde_json::Value;

fn options() -> Options {
    Options {
        fix_lower: None,
        fix_upper: None,
        enzyme: None,
        unit: ConcUnit::Nanomolar,
        response_unit: None,
        confidence: 0.95,
        intervals: IntervalMethod::Wald,
        thresholds: Thresholds::default(),
        settings: screening_settings(),
        percent: false,
        outliers: kimech::analysis::ic50::OutlierMode::Exclude,
    }
}

fn curve(name: &str, x: Vec<f64>, y: Vec<f64>) -> Curve {
    Curve {
        compound: name.into(),
        location: Location::described("test"),
        x,
        y,
        carried: Carried::default(),
        read_flags: vec![],
    }
}

fn ryegrass() -> (Vec<f64>, Vec<f64>) {
    let text = std::fs::read_to_string("fixtures/ryegrass.csv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let (a, b) = l.split_once(',').unwrap();
            (a.parse::<f64>().unwrap(), b.parse::<f64>().unwrap())
        })
        .unzip()
}

fn reference() -> Value {
    let text = std::fs::read_to_string("fixtures/reference/ryegrass_4pl.json").unwrap();
    serde_json::from_str::<Value>(&text).unwrap()["fit"].clone()
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// Ryegrass (Inderjit et al. 2002), all 24 rows including the six at zero
/// concentration, against scipy.optimize.curve_fit: with the engine's tight
/// tolerances the estimates agree to 1e-8 (scipy's own tolerance) and the SEs to 1e-7.
#[test]
fn ryegrass_matches_scipy_with_zero_concentration_rows() {
    let (x, y) = ryegrass();
    assert_eq!(x.iter().filter(|v| **v == 0.0).count(), 6);
    let mut o = options();
    o.unit = ConcUnit::Millimolar;
    o.settings = FitSettings::default();
    let r = analyse(&curve("ferulic acid", x, y), &o).unwrap();
    let f = reference();
    let hill = r.hill.as_ref().unwrap();
    for (got, key) in [(r.ic50.value, "ic50"), (hill.value, "hill"), (r.lower.value, "lower"), (r.upper.value, "upper")]
    {
        let want = f[key].as_f64().unwrap();
        assert!(rel(got, want) < 1e-8, "{key}: {got} vs scipy {want}");
    }
    for (got, key) in [
        (r.ic50.se.unwrap(), "se_ic50"),
        (hill.se.unwrap(), "se_hill"),
        (r.lower.se.unwrap(), "se_lower"),
        (r.upper.se.unwrap(), "se_upper"),
    ] {
        let want = f[key].as_f64().unwrap();
        assert!(rel(got, want) < 1e-7, "{key}: {got} vs scipy {want}");
    }
    assert!(rel(r.residual_sd, f["residual_sd"].as_f64().unwrap()) < 1e-8);
    assert_eq!((r.n, r.qualifier, r.converged), (24, Qualifier::Equal, true));
    // pIC50 of 3.0579552 mM.
    assert!((r.pic50 - (-(3.057955169335372e-3f64).log10())).abs() < 1e-8);
}

/// The same through the command line, with the screening tolerances (1e-6).
#[test]
fn ryegrass_through_the_cli_json_contract() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rg.csv");
    let (x, y) = ryegrass();
    let mut text = String::from("compound,concentration (mM),response,target\n");
    for (a, b) in x.iter().zip(&y) {
        text.push_str(&format!("ferulic acid,{a},{b},ryegrass root\n"));
    }
    std::fs::write(&path, text).unwrap();
    let out = Command::cargo_bin("kimech")
        .unwrap()
        .args(["ic50", path.to_str().unwrap(), "--format", "json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let c = &v["results"][0];
    let f = reference();
    for key in ["ic50", "hill", "lower", "upper"] {
        let got = c[key]["value"].as_f64().unwrap();
        assert!(rel(got, f[key].as_f64().unwrap()) < 1e-6, "{key}: {got}");
    }
    assert_eq!(c["ic50"]["unit"], "mM");
    assert_eq!(c["qualifier"], "=");
    assert_eq!(c["n"], 24);
    assert_eq!(c["converged"], true);
    assert_eq!(c["carried"]["target"], "ryegrass root");
    for key in ["compound", "pic50", "residual_sd", "r2", "flags"] {
        assert!(c.get(key).is_some(), "missing {key}");
    }
}

const DILUTION: [f64; 10] = [10000.0, 3333.3, 1111.1, 370.37, 123.46, 41.152, 13.717, 4.5725, 1.5242, 0.50805];

fn simulate(rng: &mut StdRng, ic50: f64, hill: f64, lower: f64, sd: f64) -> (Vec<f64>, Vec<f64>) {
    let noise = Normal::new(0.0, sd).unwrap();
    let mut x = vec![0.0, 0.0];
    x.extend(DILUTION);
    let y = x.iter().map(|c| lower + (100.0 - lower) / (1.0 + (c / ic50).powf(hill)) + noise.sample(rng)).collect();
    (x, y)
}

fn run_sim(seed: u64, ic50: f64, hill: f64, lower: f64) -> Ic50Result {
    let mut rng = StdRng::seed_from_u64(seed);
    let (x, y) = simulate(&mut rng, ic50, hill, lower, 2.0);
    analyse(&curve("sim", x, y), &options()).unwrap()
}

/// Simulated curves (seeded, SD 2 % activity) across IC50 positions: the
/// qualifier and flags follow the true curve in every replicate.
#[test]
fn simulated_curves_get_the_right_qualifier_and_flags() {
    for seed in 0..20 {
        let inside = run_sim(seed, 100.0, 1.0, 0.0);
        assert_eq!(inside.qualifier, Qualifier::Equal, "{:?}", inside.flags);
        assert!(inside.flags.is_empty(), "seed {seed}: {:?}", inside.flags);
        assert!(rel(inside.ic50.value, 100.0) < 0.25);
        let (low, high) = (inside.ic50.low.unwrap(), inside.ic50.high.unwrap());
        assert!(low < inside.ic50.value && inside.ic50.value < high);

        let above = run_sim(seed, 1e6, 1.0, 0.0);
        assert_eq!(above.qualifier, Qualifier::Greater);
        assert!(above.flags.iter().any(|c| *c == "ic50-above-range"), "{:?}", above.flags);
        assert!(rel(above.ic50.value, 10000.0) < 1e-12, "the bound is the top concentration");
        assert_eq!(above.ic50.interval, "bound");

        let below = run_sim(seed, 0.005, 1.0, 0.0);
        assert_eq!(below.qualifier, Qualifier::Less, "{:?}", below.flags);
        assert!(below.flags.iter().any(|c| *c == "ic50-below-range"));
        assert!(rel(below.ic50.value, 0.50805) < 1e-12);

        let partial = run_sim(seed, 100.0, 1.0, 45.0);
        assert!(partial.flags.iter().any(|c| *c == "partial-inhibition"), "{:?}", partial.flags);
        assert_eq!(partial.qualifier, Qualifier::Equal);

        let steep = run_sim(seed, 100.0, 4.0, 0.0);
        assert!(steep.flags.iter().any(|c| *c == "hill-steep"), "{:?}", steep.flags);
        let shallow = run_sim(seed, 100.0, 0.3, 0.0);
        assert!(shallow.flags.iter().any(|c| *c == "hill-shallow"), "{:?}", shallow.flags);

        let flat = run_sim(seed, 1e9, 1.0, 0.0);
        assert!(flat.flags.iter().any(|c| *c == "no-inhibition"), "{:?}", flat.flags);
        assert_eq!(flat.qualifier, Qualifier::Greater);
    }
}

/// Claim: the default Wald interval on ln IC50 is a 95% interval. Checked by
/// simulation (seeded; 400 curves of 12 points, SD 3): coverage within
/// binomial error of 0.95 (±3.5 percentage points ≈ 3 SE).
#[test]
fn wald_interval_on_log_ic50_covers_about_95_percent() {
    let mut rng = StdRng::seed_from_u64(20261202);
    let mut covered = 0;
    let trials = 400;
    for _ in 0..trials {
        let (x, y) = simulate(&mut rng, 60.0, 1.0, 0.0, 3.0);
        let r = analyse(&curve("sim", x, y), &options()).unwrap();
        if r.ic50.low.unwrap() <= 60.0 && 60.0 <= r.ic50.high.unwrap() {
            covered += 1;
        }
    }
    let coverage = covered as f64 / trials as f64;
    assert!((coverage - 0.95).abs() < 0.035, "coverage {coverage}");
}

fn morrison_data(et: f64, k: f64) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0];
    x.extend((0..12).map(|i| 0.3 * 2f64.powi(i)));
    let y = x
        .iter()
        .map(|i| {
            let b = et + i + k;
            100.0 * (1.0 - (b - (b * b - 4.0 * et * i).sqrt()) / (2.0 * et))
        })
        .collect();
    (x, y)
}

/// Tight binding (Morrison 1969), Et = 10 nM known: the Morrison fit recovers
/// the apparent Ki of simulated curves to 1e-6, and IC50 = Ki,app + Et/2,
/// where the logistic reports an IC50 near Et/2 whatever the Ki.
#[test]
fn morrison_recovers_apparent_ki_where_the_logistic_sees_half_the_enzyme() {
    let et = 10.0;
    for k in [0.05, 0.2, 1.0, 3.0] {
        let (x, y) = morrison_data(et, k);
        let mut o = options();
        o.enzyme = Some(et);
        let r = analyse(&curve("tight", x.clone(), y.clone()), &o).unwrap();
        let ki = r.ki_app.as_ref().unwrap().value;
        assert!(rel(ki, k) < 1e-6, "Ki,app {ki} vs {k}");
        assert!(rel(r.ic50.value, k + et / 2.0) < 1e-6);
        assert!(r.hill.is_none());
        assert_eq!(r.model, "morrison");
        let logistic = analyse(&curve("tight", x, y), &options()).unwrap();
        assert!(rel(logistic.ic50.value, et / 2.0) < 0.7, "logistic IC50 {}", logistic.ic50.value);
        if k < 0.5 {
            assert!(logistic.ic50.value > 8.0 * k, "the logistic IC50 is dominated by Et/2, not Ki");
        }
    }
}

fn kimech() -> Command {
    Command::cargo_bin("kimech").unwrap()
}

fn write(dir: &tempfile::TempDir, name: &str, text: &str) -> String {
    let p = dir.path().join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

/// A good compound of 10 points as CSV rows.
fn good_rows(name: &str, ic50: f64, extra: &str) -> String {
    DILUTION.iter().map(|c| format!("{name},{c},{:.3}{extra}\n", 100.0 / (1.0 + c / ic50) + (c * 7.0).sin())).collect()
}

#[test]
fn bad_compounds_are_named_with_their_line_and_the_rest_come_out() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response\n");
    text.push_str(&good_rows("KX-GOOD1", 100.0, ""));
    text.push_str("KX-ONE,10,50\nKX-ONE,10,52\nKX-ONE,10,49\nKX-ONE,10,51\nKX-ONE,10,50\nKX-ONE,10,48\n");
    text.push_str(&DILUTION.iter().map(|c| format!("KX-FLAT,{c},42\n")).collect::<String>());
    text.push_str(&good_rows("KX-NEG", 100.0, "").replacen("KX-NEG,10000,", "KX-NEG,-5,", 1));
    text.push_str(&good_rows("KX-TEXT", 100.0, ""));
    text.push_str(&good_rows("KX-GOOD2", 30.0, ""));
    // Make one KX-TEXT response cell non-numeric.
    let text: String = text
        .lines()
        .map(|l| if l.starts_with("KX-TEXT,1111.1,") { "KX-TEXT,1111.1,n/a".to_string() } else { l.to_string() })
        .map(|l| l + "\n")
        .collect();
    let path = write(&dir, "bad.csv", &text);
    let out = kimech().args(["ic50", &path, "--format", "csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "partial failure is exit 3");
    let stdout = String::from_utf8(out.stdout).unwrap();
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stdout.contains("KX-GOOD1") && stdout.contains("KX-GOOD2"), "{stdout}");
    for bad in ["KX-ONE", "KX-FLAT", "KX-NEG", "KX-TEXT"] {
        assert!(!stdout.contains(bad), "{bad} must not be in the results");
        assert!(stderr.contains(bad), "{bad} must be named: {stderr}");
    }
    assert!(stderr.contains("only one concentration"), "{stderr}");
    assert!(stderr.contains("all 10 responses are equal"), "{stderr}");
    assert!(stderr.contains("negative concentration") && stderr.contains("'-5'"), "{stderr}");
    assert!(stderr.contains("'n/a'") && stderr.contains("column 'response'"), "{stderr}");
    // Lines: KX-ONE starts on line 12, KX-NEG's first row is line 28.
    assert!(stderr.contains("lines 12-17"), "{stderr}");
    assert!(stderr.contains("line 28"), "{stderr}");
}

fn plate_rows(plate: &str, name: &str, ic50: f64, z_noise: f64, inhibited: bool) -> String {
    let mut rows = String::new();
    for k in 0..4 {
        let wobble = z_noise * if k % 2 == 0 { 1.0 } else { -1.0 };
        rows.push_str(&format!("{plate},,{},{:.2},uninhibited\n", 0, 20000.0 + wobble));
        if inhibited {
            rows.push_str(&format!("{plate},,{},{:.2},inhibited\n", 0, 2000.0 - wobble));
        }
    }
    for c in DILUTION {
        let activity = 1.0 / (1.0 + c / ic50);
        rows.push_str(&format!("{plate},{name},{c},{:.2},\n", 2000.0 + 18000.0 * activity));
    }
    rows
}

/// --normalise: % activity from each plate's controls (Z′ per plate, flagged
/// below 0.5); a plate without inhibited wells fails its compounds by name.
#[test]
fn normalise_uses_plate_controls_and_reports_z_prime() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("plate,compound,concentration (nM),response,control\n");
    text.push_str(&plate_rows("P1", "KX-A", 100.0, 100.0, true));
    text.push_str(&plate_rows("P2", "KX-B", 50.0, 2500.0, true));
    text.push_str(&plate_rows("P3", "KX-C", 50.0, 100.0, false));
    let path = write(&dir, "plates.csv", &text);
    let out = kimech().args(["ic50", &path, "--normalise", "--format", "json"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stderr.contains("KX-C") && stderr.contains("plate 'P3' has 4 uninhibited and 0 inhibited"), "{stderr}");
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let results = v["results"].as_array().unwrap();
    assert_eq!(results.len(), 2);
    // Noise-free % activity: upper 100, lower 0, IC50 as simulated.
    let a = &results[0];
    assert!(rel(a["ic50"]["value"].as_f64().unwrap(), 100.0) < 1e-3, "{a}");
    assert!((a["upper"]["value"].as_f64().unwrap() - 100.0).abs() < 0.1);
    assert!(a["lower"]["value"].as_f64().unwrap().abs() < 0.1);
    // Z′ by hand (Zhang et al. 1999): SD of ±w over 4 wells is w·√(4/3).
    let plates = v["plates"].as_array().unwrap();
    let sd = |w: f64| w * (4.0f64 / 3.0).sqrt();
    let z1 = 1.0 - 3.0 * (2.0 * sd(100.0)) / 18000.0;
    assert!((plates[0]["z_prime"].as_f64().unwrap() - z1).abs() < 1e-9);
    let z2 = 1.0 - 3.0 * (2.0 * sd(2500.0)) / 18000.0;
    assert!(z2 < 0.5);
    assert!((plates[1]["z_prime"].as_f64().unwrap() - z2).abs() < 1e-9);
    assert_eq!(plates[1]["flags"][0], "plate-z-prime-low");
    assert!(results[1]["flags"].as_array().unwrap().iter().any(|f| f == "plate-z-prime-low"));
    assert!(results[0]["flags"].as_array().unwrap().iter().all(|f| f != "plate-z-prime-low"));
}

/// Output order and content do not depend on threads or batch size.
#[test]
fn output_is_the_same_whatever_the_threads_and_batches() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response\n");
    for i in 0..40 {
        text.push_str(&good_rows(&format!("KX-{i:03}"), 5.0 * (i + 1) as f64, ""));
    }
    let path = write(&dir, "many.csv", &text);
    let run = |threads: &str, batch: &str| {
        let out = kimech()
            .env("RAYON_NUM_THREADS", threads)
            .args(["ic50", &path, "--format", "csv", "--batch-size", batch])
            .output()
            .unwrap();
        assert!(out.status.success());
        out.stdout
    };
    let reference = run("1", "1000");
    assert_eq!(run("2", "3"), reference);
    assert_eq!(run("2", "1"), reference);
    let text = String::from_utf8(reference).unwrap();
    let names: Vec<&str> = text.lines().skip(1).map(|l| l.split(',').next().unwrap()).collect();
    assert_eq!(names, (0..40).map(|i| format!("KX-{i:03}")).collect::<Vec<_>>());
}

/// Curves are fitted in chunks of a batch, each rendered into one buffer:
/// across chunk and batch boundaries, with failures among the curves, the
/// rows come out in input order, the failures are named in input order, and
/// every format and the pictures see the same curves whatever the threads
/// and batch size.
#[test]
fn chunked_batches_keep_order_failures_and_pictures() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response\n");
    let failing = |i: usize| i % 23 == 5;
    for i in 0..150 {
        let name = format!("KX-{i:03}");
        match failing(i) {
            // One concentration: refused with a message naming the compound.
            true => text.push_str(&(0..4).map(|_| format!("{name},10,50\n")).collect::<String>()),
            false => text.push_str(&good_rows(&name, 5.0 * (i + 1) as f64, "")),
        }
    }
    let path = write(&dir, "chunks.csv", &text);
    let run = |threads: &str, batch: &str, format: &str, plots: &str| {
        let plot_dir = dir.path().join(plots);
        let out = kimech()
            .env("RAYON_NUM_THREADS", threads)
            .args(["ic50", &path, "--format", format, "--batch-size", batch, "--plot", plot_dir.to_str().unwrap()])
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(3), "{}", String::from_utf8_lossy(&out.stderr));
        let svgs = std::fs::read_dir(&plot_dir).unwrap().count();
        (out.stdout, String::from_utf8(out.stderr).unwrap(), svgs)
    };
    let ok: Vec<String> = (0..150).filter(|&i| !failing(i)).map(|i| format!("KX-{i:03}")).collect();
    let bad: Vec<String> = (0..150).filter(|&i| failing(i)).map(|i| format!("KX-{i:03}")).collect();
    for format in ["csv", "json", "table"] {
        let (reference, stderr, svgs) = run("1", "1000", format, &format!("{format}-a"));
        // One SVG per fitted compound, and the overview grid.
        assert_eq!(svgs, ok.len() + 1, "{format}");
        let named: Vec<&str> =
            stderr.lines().filter_map(|l| l.split("compound '").nth(1)?.split('\'').next()).collect();
        assert_eq!(named, bad, "{format}: {stderr}");
        for (threads, batch, tag) in [("2", "1000", "b"), ("2", "7", "c"), ("2", "100", "d")] {
            // The table for people is laid out batch by batch (column widths), so only threads vary there.
            if format == "table" && batch != "1000" {
                continue;
            }
            let (out, err, svgs) = run(threads, batch, format, &format!("{format}-{tag}"));
            // JSON ends with its provenance, which names the command line: compare the results.
            let results = |bytes: &[u8]| match format {
                "json" => {
                    serde_json::from_slice::<serde_json::Value>(bytes).unwrap()["results"].to_string().into_bytes()
                }
                _ => bytes.to_vec(),
            };
            assert!(results(&out) == results(&reference), "{format}, {threads} threads, batch {batch}");
            assert_eq!(err, stderr, "{format}, {threads} threads, batch {batch}");
            assert_eq!(svgs, ok.len() + 1);
        }
        if format == "csv" {
            let text = String::from_utf8(reference).unwrap();
            let names: Vec<&str> = text.lines().skip(1).map(|l| l.split(',').next().unwrap()).collect();
            assert_eq!(names, ok);
        }
    }
}

/// The CSV output is valid input for the next step: `ic50 (unit)` with the
/// qualifier in the cell, interval and Hill columns, carried columns.
#[test]
fn csv_output_carries_columns_and_writes_bounds_with_their_qualifier() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response,target,substrate (uM),km (uM)\n");
    text.push_str(&good_rows("KX-101", 80.0, ",VRD7,20,10"));
    text.push_str(&good_rows("KX-102", 1e8, ",VRD7,20,10"));
    let path = write(&dir, "carry.csv", &text);
    let out = kimech().args(["ic50", &path, "--format", "csv"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let table = kimech::io::Table::parse("out.csv", &out.stdout, b',').unwrap();
    let col = |name: &str| table.columns.iter().position(|c| c.header == name).unwrap_or_else(|| panic!("{name}"));
    let (ic50, q) = (col("ic50 (nM)"), col("qualifier"));
    for name in ["compound", "ic50_low (nM)", "ic50_high (nM)", "hill", "target", "substrate (uM)", "km (uM)"] {
        col(name);
    }
    let weak = &table.rows[1];
    assert_eq!(table.text(weak, q), ">");
    assert_eq!(table.text(weak, ic50), ">10000");
    let c = table.concentration(weak, ic50, None, "--x").unwrap();
    assert_eq!(c.qualifier, Qualifier::Greater);
    assert!(rel(c.molar, 1e-5) < 1e-12);
    assert_eq!(table.text(&table.rows[0], col("target")), "VRD7");
    assert_eq!(table.text(weak, col("hill")), "", "no slope for a curve beyond the range");
    assert!(!table.text(&table.rows[0], col("hill")).is_empty());
    assert_eq!(table.text(&table.rows[0], col("substrate (uM)")), "20");
}

#[test]
fn a_compound_split_across_the_file_is_an_error_not_a_silent_merge() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response\n");
    text.push_str(&good_rows("KX-1", 80.0, ""));
    text.push_str(&good_rows("KX-2", 80.0, ""));
    text.push_str(&good_rows("KX-1", 80.0, ""));
    let path = write(&dir, "split.csv", &text);
    let out = kimech().args(["ic50", &path, "--format", "csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.contains("split.csv, line 22)")
            && stderr.contains("compound 'KX-1' (")
            && stderr.contains("sort the file"),
        "{stderr}"
    );
}

#[test]
fn fixed_asymptotes_are_reported_as_fixed() {
    let mut rng = StdRng::seed_from_u64(7);
    let (x, y) = simulate(&mut rng, 100.0, 1.0, 0.0, 2.0);
    let mut o = options();
    o.fix_lower = Some(0.0);
    o.fix_upper = Some(100.0);
    let r = analyse(&curve("fixed", x, y), &o).unwrap();
    assert_eq!((r.lower.interval, r.upper.interval), ("fixed", "fixed"));
    assert!(r.lower.value.abs() < 1e-15 && (r.upper.value - 100.0).abs() < 1e-12);
    assert!(rel(r.ic50.value, 100.0) < 0.2);
}

#[test]
fn human_report_ends_with_the_caution() {
    let dir = tempfile::tempdir().unwrap();
    let path =
        write(&dir, "one.csv", &format!("compound,concentration (nM),response\n{}", good_rows("KX-1", 80.0, "")));
    let out = kimech().args(["ic50", &path]).output().unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.trim_end().ends_with(kimech::cli::CAUTION), "{text}");
    assert!(text.contains("IC50 (nM)") && text.contains("KX-1"));
}

/// The invented demo plates (demo-compounds/make_dose_response.py): the
/// awkward curves built into them come out with their flags.
#[test]
fn demo_plates_come_out_with_the_planted_flags() {
    let out = kimech()
        .args(["ic50", "demo-compounds/dose-response.csv", "--normalise", "--format", "json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let results = v["results"].as_array().unwrap();
    assert_eq!(results.len(), 30);
    let by = |name: &str| results.iter().find(|r| r["compound"] == name).unwrap().clone();
    let has = |name: &str, flag: &str| by(name)["flags"].as_array().unwrap().iter().any(|f| f == flag);
    assert!(has("KX-109", "hill-shallow"));
    assert!(has("KX-113", "partial-inhibition"));
    assert!(has("KX-117", "no-inhibition") && by("KX-117")["qualifier"] == ">");
    assert!(has("KX-121", "hill-steep"));
    assert!(has("KX-125", "plate-z-prime-low") && !has("KX-101", "plate-z-prime-low"));
    assert_eq!(by("KX-101")["carried"]["enzyme (nM)"], "2");
    assert_eq!(by("KX-101")["upper"]["unit"], "%");
    assert_eq!(v["plates"][2]["flags"][0], "plate-z-prime-low");
    let demo = kimech().arg("demo").output().unwrap();
    let text = String::from_utf8(demo.stdout).unwrap();
    assert!(text.contains("kimech ic50 demo-compounds/dose-response.csv --normalise") && text.contains("KX-130"));
}

/// --normalise reads the file twice; from stdin it is spooled first.
#[test]
fn normalise_works_from_stdin() {
    let mut text = String::from("plate,compound,concentration (nM),response,control\n");
    text.push_str(&plate_rows("P1", "KX-A", 100.0, 100.0, true));
    let out = kimech().args(["ic50", "-", "--normalise", "--format", "csv"]).write_stdin(text).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.lines().nth(1).is_some_and(|l| l.starts_with("KX-A,")), "{text}");
}

#[test]
fn morrison_with_a_fixed_lower_asymptote_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(&dir, "m.csv", &format!("compound,concentration (nM),response\n{}", good_rows("KX-1", 80.0, "")));
    let out = kimech().args(["ic50", &path, "--enzyme", "2 nM", "--fix-lower", "0"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--fix-lower"));
}

/// Profile-likelihood IC50 interval (Bates & Watts 1988, §6.1): at each end
/// the SSE minimised over the other parameters equals SSE_min·(1 + F(0.95; 1, df)/df).
#[test]
fn profile_interval_ends_sit_on_the_f_threshold() {
    use kimech::fit::{Data, fit};
    use kimech::models::{Dose, Logistic};
    let (x, y) = ryegrass();
    let mut o = options();
    o.unit = ConcUnit::Millimolar;
    o.intervals = IntervalMethod::Profile;
    let r = analyse(&curve("ferulic acid", x.clone(), y.clone()), &o).unwrap();
    assert_eq!(r.ic50.interval, "profile");
    let data = Data::unweighted(x.iter().map(|v| Dose::new(*v)).collect(), y);
    let best = fit(&Logistic, &data, &[None, None, None, None], &FitSettings::default());
    let f = kimech::fit::intervals::f_quantile(0.95, 1, best.df).unwrap();
    let threshold = best.sse * (1.0 + f / best.df as f64);
    for end in [r.ic50.low.unwrap(), r.ic50.high.unwrap()] {
        let held = fit(&Logistic, &data, &[Some(end), None, None, None], &FitSettings::default());
        assert!(rel(held.sse, threshold) < 1e-6, "SSE at {end}: {} vs {threshold}", held.sse);
    }
    assert!(r.ic50.low.unwrap() < r.ic50.value && r.ic50.value < r.ic50.high.unwrap());
}

#[test]
fn a_file_without_any_concentration_unit_stops_with_one_message() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration,response\n");
    text.push_str(&good_rows("KX-1", 80.0, ""));
    text.push_str(&good_rows("KX-2", 80.0, ""));
    let path = write(&dir, "nounit.csv", &text);
    let out = kimech().args(["ic50", &path]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(stderr.matches("no concentration unit").count(), 1, "{stderr}");
    assert!(stderr.contains("--concentration-unit"));
}

/// An aberrant well (a dispense failure at ~0 % in the middle of the upper
/// plateau) is found by the outlier rule (Cook & Weisberg 1982), named by
/// its input line in JSON, counted in CSV, and the curve refitted without
/// it; `--outliers flag` lists it but fits it; `--outliers keep` is plain
/// least squares. Also: a `response (%)` header makes the data % activity,
/// so a potent compound (every well near 0 %) is `<`, never `>`.
#[test]
fn an_aberrant_well_is_excluded_named_and_counted() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response (%)\n");
    let doses: Vec<f64> = (0..10).map(|k| 10_000.0 / 3f64.powi(k)).collect();
    let mut line = 1;
    let mut aberrant_line = 0;
    for (k, x) in doses.iter().enumerate() {
        for rep in 0..2 {
            line += 1;
            let wobble = if (k + rep) % 2 == 0 { 1.5 } else { -1.5 };
            let mut y = 100.0 / (1.0 + x / 100.0) + wobble;
            if k == 8 && rep == 0 {
                y = 2.0; // should read ≈ 97 %
                aberrant_line = line;
            }
            text.push_str(&format!("clean-but-one,{x},{y}\n"));
        }
    }
    for x in &doses {
        for rep in 0..2 {
            text.push_str(&format!("potent,{x},{}\n", if rep == 0 { 1.2 } else { -0.8 }));
        }
    }
    let path = write(&dir, "plate.csv", &text);
    let json = |mode: &str| -> Value {
        let out = kimech().args(["ic50", &path, "--outliers", mode, "--format", "json"]).output().unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let excluded = json("exclude");
    let r = &excluded["results"][0];
    assert_eq!(r["outliers"].as_array().unwrap().len(), 1, "{r}");
    assert_eq!(r["outliers"][0]["line"], aberrant_line);
    assert_eq!(r["outliers"][0]["response"], 2.0);
    assert_eq!(r["n"], 19);
    assert!(r["flags"].as_array().unwrap().iter().any(|f| f == "outlier-excluded"));
    assert!(rel(r["ic50"]["value"].as_f64().unwrap(), 100.0) < 0.05, "{r}");
    assert_eq!(r["call"], "full");
    let potent = &excluded["results"][1];
    assert_eq!(potent["qualifier"], "<", "{potent}");
    assert_eq!(potent["call"], "complete");
    let flagged = json("flag");
    assert_eq!(flagged["results"][0]["n"], 20);
    assert_eq!(flagged["results"][0]["outliers"][0]["line"], aberrant_line);
    assert!(flagged["results"][0]["flags"].as_array().unwrap().iter().any(|f| f == "outlier-flagged"));
    let kept = json("keep");
    assert!(kept["results"][0]["outliers"].as_array().unwrap().is_empty());
    assert_eq!(kept["results"][0]["n"], 20);
    let csv = kimech().args(["ic50", &path, "--format", "csv"]).output().unwrap();
    let text = String::from_utf8(csv.stdout).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let row: Vec<&str> = text.lines().nth(1).unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    assert_eq!(row[col("outliers")], "1");
    assert_eq!(row[col("call")], "full");
}
