//! `kimech mode`: the scipy reference, identities of the rate laws, the JSON
//! contract, and bad input — each check names its source.

use std::path::Path;

use assert_cmd::Command;
use kimech::analysis::mode::fit_all;
use kimech::fit::{Data, FitSettings, Model, fit};
use kimech::models::inhibition::{Mechanism, Point, RateLaw, implied_ic50};
use serde_json::Value;

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn kimech() -> Command {
    Command::cargo_bin("kimech").expect("binary built")
}

/// A fixture matrix (substrate uM, inhibitor uM, rate) as engine data.
fn fixture(name: &str) -> Data<Point> {
    let text = std::fs::read_to_string(Path::new(ROOT).join("fixtures/mode").join(name)).unwrap();
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for line in text.lines().skip(1) {
        let f: Vec<f64> = line.split(',').map(|c| c.parse().unwrap()).collect();
        x.push((f[0], f[1]));
        y.push(f[2]);
    }
    Data::unweighted(x, y)
}

fn json_of(args: &[&str]) -> Value {
    let out = kimech().args(args).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

// ---------------------------------------------------------------------------
// scipy reference: tests/reference/mode_reference.py → fixtures/reference/mode_scipy.json
// (scipy.optimize.least_squares 'lm', multi-start, scipy 1.17.1).

#[test]
fn sse_and_constants_match_scipy_multistart_fits() {
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(Path::new(ROOT).join("fixtures/reference/mode_scipy.json")).unwrap(),
    )
    .unwrap();
    let doc = json_of(&["mode", &format!("{ROOT}/fixtures/mode/all.csv"), "--format", "json"]);
    let results = doc["results"].as_array().unwrap();
    assert_eq!(results.len(), 4);
    for r in results {
        let name = r["compound"].as_str().unwrap();
        let expected = &reference["datasets"][name]["models"];
        for m in r["models"].as_array().unwrap() {
            let model = m["model"].as_str().unwrap();
            let scipy = &expected[model];
            let (sse, scipy_sse) = (m["sse"].as_f64().unwrap(), scipy["sse"].as_f64().unwrap());
            assert!(sse <= scipy_sse * (1.0 + 1e-9), "{name}/{model}: SSE {sse} above scipy's {scipy_sse}");
            assert!(sse >= scipy_sse * (1.0 - 1e-6), "{name}/{model}: SSE {sse} far below scipy's {scipy_sse}?");
            let limit = scipy["limit"].as_str();
            let diverging: &[&str] = match limit {
                Some(l) if l.starts_with("competitive") => &["alpha", "kiu"],
                Some(l) if l.starts_with("uncompetitive") => &["ki", "alpha"],
                _ => &[],
            };
            for (key, value) in scipy["params"].as_object().unwrap() {
                let p = &m["params"][key];
                if diverging.contains(&key.as_str()) {
                    // At infinity: reported as not determined, never as a huge number.
                    assert!(p["value"].is_null(), "{name}/{model}/{key}: {p}");
                    assert!(p["note"].as_str().unwrap().contains("not determined"), "{p}");
                    continue;
                }
                let (ours, theirs) = (p["value"].as_f64().unwrap(), value.as_f64().unwrap());
                assert!(rel(ours, theirs) < 1e-6, "{name}/{model}/{key}: {ours} vs scipy {theirs}");
            }
            assert_eq!(m["df"].as_u64().unwrap(), 60 - scipy["n_params"].as_u64().unwrap());
            let aicc = m["aicc"].as_f64().unwrap();
            assert!((aicc - scipy["aicc"].as_f64().unwrap()).abs() < 1e-6, "{name}/{model} AICc");
        }
        if let Some(limit) = r["models"][4]["limit"].as_str() {
            // The unbounded side of α (competitive) / Ki (uncompetitive) says so.
            let key = if limit == "competitive" { "alpha" } else { "ki" };
            assert!(r["models"][4]["params"][key]["high"].is_null());
            assert!(r["models"][4]["params"][key]["note"].as_str().unwrap().contains("no upper bound"));
        }
    }
}

// ---------------------------------------------------------------------------
// JSON contract (issue 3).

#[test]
fn json_contract_holds() {
    let doc = json_of(&["mode", &format!("{ROOT}/fixtures/mode/all.csv"), "--format", "json"]);
    for r in doc["results"].as_array().unwrap() {
        for key in ["compound", "n", "chosen", "criterion", "models", "tests", "warnings"] {
            assert!(r.get(key).is_some(), "missing {key}");
        }
        assert_eq!(r["criterion"], "aicc");
        assert_eq!(r["chosen"], r["compound"], "the simulated mechanism is chosen");
        let names: Vec<&str> = r["models"].as_array().unwrap().iter().map(|m| m["model"].as_str().unwrap()).collect();
        assert_eq!(names, ["none", "competitive", "uncompetitive", "noncompetitive", "mixed"]);
        let weights: f64 = r["models"].as_array().unwrap().iter().map(|m| m["weight"].as_f64().unwrap()).sum();
        assert!((weights - 1.0).abs() < 1e-12);
        for m in r["models"].as_array().unwrap() {
            for key in ["sse", "df", "aicc", "weight", "converged", "params"] {
                assert!(m.get(key).is_some(), "missing {key}");
            }
            assert_eq!(m["converged"], true);
            let params = m["params"].as_object().unwrap();
            let expected: &[&str] = match m["model"].as_str().unwrap() {
                "none" => &["vmax", "km"],
                "competitive" | "noncompetitive" => &["vmax", "km", "ki"],
                "uncompetitive" => &["vmax", "km", "kiu"],
                _ => &["vmax", "km", "ki", "alpha", "kiu"],
            };
            let mut keys: Vec<&str> = params.keys().map(String::as_str).collect();
            keys.sort_unstable();
            let mut want = expected.to_vec();
            want.sort_unstable();
            assert_eq!(keys, want);
            for (k, p) in params {
                for field in ["value", "se", "low", "high", "unit"] {
                    assert!(p.get(field).is_some(), "{k} lacks {field}");
                }
            }
            assert_eq!(params["km"]["unit"], "uM");
            if let Some(ki) = params.get("ki") {
                assert_eq!(ki["unit"], "uM");
            }
        }
        let pairs: Vec<(String, String)> = r["tests"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| (t["simpler"].as_str().unwrap().to_string(), t["fuller"].as_str().unwrap().to_string()))
            .collect();
        assert_eq!(pairs.len(), 6);
        for one in ["competitive", "uncompetitive", "noncompetitive"] {
            assert!(pairs.contains(&("none".into(), one.into())));
            assert!(pairs.contains(&(one.into(), "mixed".into())));
        }
    }
}

#[test]
fn ki_is_reported_in_the_inhibitor_unit() {
    // Same matrix with the inhibitor column in nM: Ki must come out 1000× larger, in nM.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(format!("{ROOT}/fixtures/mode/competitive.csv")).unwrap();
    let mut out = String::from("substrate (uM),inhibitor (nM),rate\n");
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        out.push_str(&format!("{},{},{}\n", f[0], f[1].parse::<f64>().unwrap() * 1000.0, f[2]));
    }
    let path = dir.path().join("nm.csv");
    std::fs::write(&path, out).unwrap();
    let doc = json_of(&["mode", path.to_str().unwrap(), "--format", "json"]);
    let ki = &doc["results"][0]["models"][1]["params"]["ki"];
    assert_eq!(ki["unit"], "nM");
    assert!(rel(ki["value"].as_f64().unwrap(), 2345.8546733790078) < 1e-6, "{ki}");
}

#[test]
fn f_test_criterion_steps_to_the_simulated_mechanism() {
    let doc = json_of(&["mode", &format!("{ROOT}/fixtures/mode/all.csv"), "--format", "json", "--criterion", "f-test"]);
    for r in doc["results"].as_array().unwrap() {
        assert_eq!(r["criterion"], "f-test");
        assert_eq!(r["chosen"], r["compound"]);
        assert!(r["evidence"].as_str().unwrap().contains("F test"));
    }
}

#[test]
fn human_output_has_one_block_per_compound_and_the_caution() {
    let out = kimech().args(["mode", &format!("{ROOT}/fixtures/mode/all.csv")]).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(text.matches("Inhibition mode — ").count(), 4);
    assert!(text.contains("choice (AICc): competitive (Akaike weight"), "{text}");
    assert!(text.contains("competitive inhibition, global fit, 95% profile-likelihood intervals: Ki = 2.35 µM"));
    assert!(text.trim_end().ends_with(kimech::cli::CAUTION));
}

// ---------------------------------------------------------------------------
// Identities of the rate laws (Cornish-Bowden 2012, ch. 6; DESIGN §4).

#[test]
fn mixed_at_alpha_one_is_noncompetitive() {
    let (mixed, non) = (RateLaw(Mechanism::Mixed), RateLaw(Mechanism::Noncompetitive));
    for x in [(10.0, 0.0), (50.0, 2.0), (400.0, 8.0)] {
        let (a, b) = (mixed.value(&[9.0, 40.0, 1.7, 1.0], &x), non.value(&[9.0, 40.0, 1.7], &x));
        assert!(rel(a, b) < 1e-15);
    }
    // Fitted: mixed with α held at 1 reproduces the noncompetitive fit.
    let data = fixture("noncompetitive.csv");
    let settings = FitSettings::default();
    let held = fit(&mixed, &data, &[None, None, None, Some(1.0)], &settings);
    let free = fit(&non, &data, &[None, None, None], &settings);
    assert!(rel(held.sse, free.sse) < 1e-10, "{} vs {}", held.sse, free.sse);
    for j in 0..3 {
        assert!(rel(held.theta[j], free.theta[j]) < 1e-7, "param {j}");
    }
    assert_eq!(held.df, free.df);
}

/// I at which the rate law gives half the uninhibited rate at S, by bisection
/// on log I — uses only the rate law, not the Cheng–Prusoff formula.
fn half_rate_inhibitor(law: &RateLaw, theta: &[f64], s: f64) -> f64 {
    let v0 = law.value(theta, &(s, 0.0));
    let (mut lo, mut hi) = (-30.0f64, 30.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if law.value(theta, &(s, mid.exp())) > 0.5 * v0 { lo = mid } else { hi = mid }
    }
    (0.5 * (lo + hi)).exp()
}

#[test]
fn implied_ic50_equals_cheng_prusoff() {
    // Cheng & Prusoff, Biochem. Pharmacol. 22, 3099–3108 (1973), solved for IC50
    // (DESIGN §4): competitive Ki(1+S/Km); uncompetitive Kiu(1+Km/S);
    // noncompetitive Ki; mixed Ki(Km+S)/(Km+S/α).
    let data = fixture("mixed.csv");
    let fits = fit_all(&data, &FitSettings::default());
    for (k, m) in Mechanism::ALL.iter().enumerate().skip(1) {
        let t = &fits[k].theta;
        for s in [10.0, 50.0, 400.0] {
            let cheng_prusoff = match m {
                Mechanism::Competitive => t[2] * (1.0 + s / t[1]),
                Mechanism::Uncompetitive => t[2] * (1.0 + t[1] / s),
                Mechanism::Noncompetitive => t[2],
                _ => t[2] * (t[1] + s) / (t[1] + s / t[3]),
            };
            let numeric = half_rate_inhibitor(&RateLaw(*m), t, s);
            assert!(rel(numeric, cheng_prusoff) < 1e-9, "{m:?} at S={s}: {numeric} vs {cheng_prusoff}");
            assert!(rel(implied_ic50(*m, t, s).unwrap(), cheng_prusoff) < 1e-12);
        }
    }
}

/// The double-reciprocal line 1/v = a·(1/S) + b of a rate law at inhibitor I,
/// through two of its own points (the rate laws are linear in 1/S there).
fn reciprocal_line(law: &RateLaw, theta: &[f64], i: f64) -> (f64, f64) {
    let (s1, s2) = (10.0, 100.0);
    let (y1, y2) = (1.0 / law.value(theta, &(s1, i)), 1.0 / law.value(theta, &(s2, i)));
    let a = (y1 - y2) / (1.0 / s1 - 1.0 / s2);
    (a, y1 - a / s1)
}

fn intersection(l1: (f64, f64), l2: (f64, f64)) -> (f64, f64) {
    let x = (l2.1 - l1.1) / (l1.0 - l2.0);
    (x, l1.0 * x + l1.1)
}

#[test]
fn double_reciprocal_lines_meet_where_the_textbooks_say() {
    // Lineweaver & Burk, J. Am. Chem. Soc. 56, 658–666 (1934); Cornish-Bowden
    // 2012, §6.2–6.4: competitive lines meet on the 1/v axis (at 1/Vmax),
    // noncompetitive lines on the 1/S axis (at −1/Km).
    let settings = FitSettings::default();
    let comp = fit(&RateLaw(Mechanism::Competitive), &fixture("competitive.csv"), &[None; 3], &settings);
    let non = fit(&RateLaw(Mechanism::Noncompetitive), &fixture("noncompetitive.csv"), &[None; 3], &settings);
    for (i1, i2) in [(0.0, 1.0), (1.0, 8.0), (2.0, 4.0)] {
        let law = RateLaw(Mechanism::Competitive);
        let (x, y) = intersection(reciprocal_line(&law, &comp.theta, i1), reciprocal_line(&law, &comp.theta, i2));
        assert!(x.abs() < 1e-9 / comp.theta[1], "competitive lines meet at 1/S = {x}");
        assert!(rel(y, 1.0 / comp.theta[0]) < 1e-9);
        let law = RateLaw(Mechanism::Noncompetitive);
        let (x, y) = intersection(reciprocal_line(&law, &non.theta, i1), reciprocal_line(&law, &non.theta, i2));
        assert!(y.abs() < 1e-9 / non.theta[0], "noncompetitive lines meet at 1/v = {y}");
        assert!(rel(x, -1.0 / non.theta[1]) < 1e-9);
    }
}

// ---------------------------------------------------------------------------
// Bad input (issue 3): each a clear message; the other compounds still get results.

/// The competitive fixture as compound "GOOD", followed by `bad` lines.
fn with_bad_compound(dir: &Path, header: &str, bad: &str) -> std::path::PathBuf {
    let text = std::fs::read_to_string(format!("{ROOT}/fixtures/mode/competitive.csv")).unwrap();
    let mut out = format!("{header}\n");
    for line in text.lines().skip(1) {
        out.push_str(&format!("GOOD,{line}\n"));
    }
    out.push_str(bad);
    let path = dir.join("matrix.csv");
    std::fs::write(&path, out).unwrap();
    path
}

const HEADER: &str = "compound,substrate (uM),inhibitor (uM),rate";

fn run_partial(path: &Path, extra: &[&str]) -> (Value, String) {
    let out = kimech().arg("mode").arg(path).args(["--format", "json"]).args(extra).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "partial failure exits 3");
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["results"].as_array().unwrap().len(), 1, "the good compound still gets its result");
    assert_eq!(doc["results"][0]["compound"], "GOOD");
    (doc, String::from_utf8(out.stderr).unwrap())
}

#[test]
fn fails_with_one_inhibitor_level_only() {
    let dir = tempfile::tempdir().unwrap();
    let bad: String = [10, 20, 50, 100, 200, 400, 800].iter().map(|s| format!("BAD,{s},0,{}\n", s / 10)).collect();
    let (_, err) = run_partial(&with_bad_compound(dir.path(), HEADER, &bad), &[]);
    assert!(
        err.contains("compound 'BAD' (")
            && err.contains("matrix.csv, lines 62-68)")
            && err.contains("only one inhibitor concentration"),
        "{err}"
    );
}

#[test]
fn fails_without_an_inhibitor_column() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("no-inhibitor.csv");
    std::fs::write(&path, "substrate (uM),rate\n10,1\n20,2\n").unwrap();
    kimech().arg("mode").arg(&path).assert().code(2).stderr(
        predicates::str::contains("no column 'inhibitor'").and(predicates::str::contains("substrate (uM), rate")),
    );
}

#[test]
fn fails_on_negative_rates_with_relative_weighting() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(format!("{ROOT}/fixtures/mode/mixed.csv")).unwrap();
    let mut bad: String = text.lines().skip(1).map(|l| format!("BAD,{l}\n")).collect();
    bad = bad.replacen("BAD,400,8,", "BAD,400,8,-", 1);
    let path = with_bad_compound(dir.path(), HEADER, &bad);
    let line = 1 + std::fs::read_to_string(&path).unwrap().lines().position(|l| l.contains(",-")).unwrap();
    let (_, err) = run_partial(&path, &["--weighting", "relative"]);
    assert!(err.contains("compound 'BAD'") && err.contains(&format!("line {line}: rate -")), "{err}");
    assert!(err.contains("relative weighting"), "{err}");
}

#[test]
fn fails_on_rows_with_missing_cells() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(format!("{ROOT}/fixtures/mode/mixed.csv")).unwrap();
    let mut bad: String = text.lines().skip(1).map(|l| format!("BAD,{l}\n")).collect();
    bad.push_str("BAD,50,,3.1\n");
    let path = with_bad_compound(dir.path(), HEADER, &bad);
    let (_, err) = run_partial(&path, &[]);
    assert!(err.contains("line 122, column 'inhibitor (uM)'"), "{err}");
}

#[test]
fn fails_on_too_few_points_for_the_mixed_model() {
    let dir = tempfile::tempdir().unwrap();
    let bad = "BAD,10,0,1\nBAD,100,0,5\nBAD,10,1,0.5\nBAD,100,1,4\nBAD,10,2,0.4\nBAD,100,2,3\n";
    let (_, err) = run_partial(&with_bad_compound(dir.path(), HEADER, bad), &[]);
    assert!(err.contains("compound 'BAD'") && err.contains("only 6 rows") && err.contains("at least 7"), "{err}");
}

#[test]
fn fails_without_a_unit_naming_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nounit.csv");
    std::fs::write(&path, "substrate (uM),inhibitor,rate\n10,0,1\n").unwrap();
    kimech().arg("mode").arg(&path).assert().code(2).stderr(predicates::str::contains("--inhibitor-unit"));
}

use predicates::prelude::PredicateBooleanExt;

// ---------------------------------------------------------------------------
// The invented demo (demo-compounds/make_rate_matrix.py states each compound's mechanism).

#[test]
fn demo_matrix_names_each_compound_s_mechanism() {
    let doc = json_of(&["mode", &format!("{ROOT}/demo-compounds/rate-matrix.csv"), "--format", "json"]);
    let chosen: Vec<(String, String)> = doc["results"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| (r["compound"].as_str().unwrap().into(), r["chosen"].as_str().unwrap().into()))
        .collect();
    let made_with = [
        ("KX-201", "competitive"),
        ("KX-202", "uncompetitive"),
        ("KX-203", "noncompetitive"),
        ("KX-204", "mixed"),
        ("KX-205", "none"),
    ];
    assert_eq!(chosen, made_with.map(|(a, b)| (a.to_string(), b.to_string())));
    let inactive = &doc["results"][4]["warnings"];
    assert!(inactive.as_array().unwrap().iter().any(|w| w["code"] == "no-inhibition-detected"), "{inactive}");
    let demo = kimech().arg("demo").output().unwrap();
    let text = String::from_utf8(demo.stdout).unwrap();
    assert!(text.contains("$ kimech mode demo-compounds/rate-matrix.csv") && text.contains("Inhibition mode — KX-204"));
}

#[test]
fn warns_about_a_design_that_cannot_decide() {
    // Only two non-zero inhibitor levels and no uninhibited series (issue 3's design warnings).
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(format!("{ROOT}/fixtures/mode/competitive.csv")).unwrap();
    let kept: String =
        text.lines().skip(1).filter(|l| l.contains(",2,") || l.contains(",8,")).map(|l| format!("{l}\n")).collect();
    let path = dir.path().join("thin.csv");
    std::fs::write(&path, format!("substrate (uM),inhibitor (uM),rate\n{kept}")).unwrap();
    let doc = json_of(&["mode", path.to_str().unwrap(), "--format", "json"]);
    let codes: Vec<&str> =
        doc["results"][0]["warnings"].as_array().unwrap().iter().map(|w| w["code"].as_str().unwrap()).collect();
    assert!(codes.contains(&"few-inhibitor-levels") && codes.contains(&"no-uninhibited-series"), "{codes:?}");
}

#[test]
fn reads_stdin_and_writes_csv_to_a_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("mode.csv");
    let input = std::fs::read(format!("{ROOT}/fixtures/mode/all.csv")).unwrap();
    kimech().args(["mode", "-", "--format", "csv", "-o"]).arg(&out).write_stdin(input).assert().success();
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(text.lines().count(), 1 + 4 * 7, "a header and one row per compound and model (five + two extensions)");
    let header = text.lines().next().unwrap();
    assert!(header.starts_with("compound,model,chosen,choice"));
    for column in
        ["weighting", "runs_p", "lack_of_fit_p", "headline_basis", "headline_ki_low", "ki_se", "rate_unit", "beta"]
    {
        assert!(header.split(',').any(|c| c == column), "CSV lacks {column}: {header}");
    }
    assert!(text.contains("mixed,true,mixed"));
}

// ---------------------------------------------------------------------------
// scipy reference for the extension models (issue 10):
// tests/reference/mode_extensions_reference.py → fixtures/reference/mode_extensions_scipy.json
// (scipy.optimize.least_squares 'lm', 392 starts per model, scipy 1.17.1), four simulated matrices.

#[test]
fn extension_fits_reach_scipy_multistart_optima_and_are_named() {
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(Path::new(ROOT).join("fixtures/reference/mode_extensions_scipy.json")).unwrap(),
    )
    .unwrap();
    let doc = json_of(&["mode", &format!("{ROOT}/fixtures/mode/extensions.csv"), "--format", "json"]);
    let results = doc["results"].as_array().unwrap();
    assert_eq!(results.len(), 4);
    for r in results {
        let name = r["compound"].as_str().unwrap();
        let dataset = &reference["datasets"][name];
        for e in r["extensions"].as_array().unwrap() {
            let model = e["model"].as_str().unwrap();
            let scipy_sse = dataset["models"][model]["sse"].as_f64().unwrap();
            let sse = e["sse"].as_f64().unwrap();
            assert!(sse <= scipy_sse * (1.0 + 1e-6), "{name}/{model}: SSE {sse} above scipy's {scipy_sse}");
        }
        // Each matrix is named as the law it was simulated from, with its warning and a headline from it.
        let law = dataset["law"].as_str().unwrap();
        assert_eq!(r["chosen"], law, "{name}");
        assert!(r["warnings"].as_array().unwrap().iter().any(|w| w["code"] == law), "{name}");
        assert_eq!(r["headline"]["basis"], "diagnosis", "{name}");
        assert!(r["headline"]["ki"]["value"].as_f64().is_some(), "{name}");
    }
}
