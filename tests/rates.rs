//! `kimech rates` against an independent implementation (numpy/scipy), the
//! integrated Michaelis–Menten equation, and bad input.

mod common;

use approx::assert_relative_eq;
use common::{fixture, fixture_json, kimech};
use predicates::prelude::*;

fn rates_json(path: &std::path::Path) -> serde_json::Value {
    let dir = tempfile::tempdir().unwrap();
    let out = kimech(dir.path()).arg("rates").arg(path).args(["--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn windows_and_slopes_match_the_numpy_reference() {
    // fixtures/reference/rates_scipy.json: the same rule written with numpy.polyfit and
    // scipy.stats.f by tests/reference/rates_reference.py.
    let reference = &fixture_json("reference/rates_scipy.json")["curves"];
    let json = rates_json(&fixture("rates/progress.csv"));
    for r in json["results"].as_array().unwrap() {
        let name = r["curve"].as_str().unwrap();
        let expect = &reference[name];
        assert_eq!(r["points_used"], expect["points_used"], "{name}");
        assert_relative_eq!(
            r["rate"]["value"].as_f64().unwrap(),
            expect["slope"].as_f64().unwrap(),
            max_relative = 1e-9
        );
        assert_relative_eq!(
            r["rate"]["se"].as_f64().unwrap(),
            expect["se_slope"].as_f64().unwrap(),
            max_relative = 1e-8
        );
    }
}

#[test]
fn unflagged_rates_recover_the_true_initial_rate() {
    // The curves follow the closed-form integrated Michaelis–Menten equation
    // (Schnell & Mendoza, J. Theor. Biol. 187, 207–212, 1997), so the true
    // initial rate is Vmax·S0/(Km + S0); a straight-line window on a curve
    // that bends is biased low, which is why such curves must be flagged.
    let reference = &fixture_json("reference/rates_scipy.json")["curves"];
    let json = rates_json(&fixture("rates/progress.csv"));
    for r in json["results"].as_array().unwrap() {
        let truth = reference[r["curve"].as_str().unwrap()]["true_v0"].as_f64().unwrap();
        let rate = r["rate"]["value"].as_f64().unwrap();
        let flagged = !r["warnings"].as_array().unwrap().is_empty();
        if flagged {
            assert!(rate < truth, "a flagged window underestimates: {rate} vs {truth}");
        } else {
            assert_relative_eq!(rate, truth, max_relative = 0.02);
        }
    }
    let first = &json["results"][0];
    let codes: Vec<&str> = first["warnings"].as_array().unwrap().iter().map(|w| w["code"].as_str().unwrap()).collect();
    assert!(codes.contains(&"high-conversion"), "{codes:?}");
}

#[test]
fn output_feeds_km_directly() {
    let dir = tempfile::tempdir().unwrap();
    let out =
        kimech(dir.path()).arg("rates").arg(fixture("rates/progress.csv")).args(["--format", "csv"]).output().unwrap();
    assert!(out.status.success());
    let csv = String::from_utf8(out.stdout).unwrap();
    assert!(csv.starts_with("curve,series,substrate (uM),rate (uM/min),"), "{csv}");
    kimech(dir.path())
        .args(["km", "-", "--format", "json"])
        .write_stdin(csv)
        .assert()
        .success()
        .stdout(predicate::str::contains("\"series\": \"sim\"").and(predicate::str::contains("\"unit\": \"uM/min\"")));
}

fn run_rates(csv: &str) -> std::process::Output {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    kimech(dir.path()).args(["rates", "in.csv", "--format", "json"]).output().unwrap()
}

#[test]
fn fails_when_a_carried_column_changes_within_a_curve() {
    let out = run_rates("curve,substrate (uM),time (min),product (uM)\nA,10,0,0\nA,10,1,1\nA,20,2,2\n");
    assert_eq!(out.status.code(), Some(2));
    let e = String::from_utf8(out.stderr).unwrap();
    assert!(e.contains("line 4") && e.contains("'substrate (uM)'") && e.contains("differs from '10' on line 2"), "{e}");
}

#[test]
fn a_curve_with_two_time_points_fails_alone() {
    let csv = "curve,time (min),product (uM)\nA,0,0\nA,1,1\nB,0,0\nB,1,1.1\nB,2,2.0\nB,3,3.1\n";
    let out = run_rates(csv);
    assert_eq!(out.status.code(), Some(3));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["results"].as_array().unwrap().len(), 1);
    let e = String::from_utf8(out.stderr).unwrap();
    assert!(
        e.contains("curve 'A' (") && e.contains(".csv, lines 2-3)") && e.contains("only 2 distinct time point"),
        "{e}"
    );
}

#[test]
fn fails_on_a_non_numeric_time() {
    let out = run_rates("time (min),product (uM)\n0,0\n1,1\nsoon,2\n");
    let e = String::from_utf8(out.stderr).unwrap();
    assert!(e.contains("line 4") && e.contains("'time (min)'") && e.contains("soon"), "{e}");
}

#[test]
fn says_when_conversion_could_not_be_checked() {
    // Absorbance is no concentration: the 10% conversion limit cannot be applied.
    let out = run_rates("time (min),absorbance\n0,0.10\n1,0.15\n2,0.20\n3,0.25\n4,0.30\n");
    assert!(out.status.success());
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["results"][0]["warnings"][0]["code"], "conversion-not-checked");
    assert_relative_eq!(json["results"][0]["rate"]["value"].as_f64().unwrap(), 0.05, max_relative = 1e-12);
    assert_eq!(json["results"][0]["rate"]["unit"], serde_json::Value::Null);
}
