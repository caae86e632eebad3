//! `kimech km` against certified and published values, by simulation, and on bad input.

mod common;

use approx::assert_relative_eq;
use common::{agreeing_digits, fixture_json, fixture_text, kimech};
use kimech::analysis::km::{Options, Series, Units, analyse};
use kimech::fit::{Data, FitSettings, Weighting, fit_from};
use kimech::models::MichaelisMenten;
use predicates::prelude::*;

/// NIST StRD Misra1d certified values (fixtures/README.md): b1 = Vmax, b2 = 1/Km.
const MISRA1D_B1: f64 = 4.3736970754E+02;
const MISRA1D_B2: f64 = 3.0227324449E-04;
const MISRA1D_SE_B1: f64 = 3.6489174345E+00;
const MISRA1D_SSE: f64 = 5.6419295283E-02;

fn misra1d() -> Data<f64> {
    let text = fixture_text("misra1d.csv");
    let (x, y): (Vec<f64>, Vec<f64>) = text
        .lines()
        .skip(1)
        .map(|l| {
            let (a, b) = l.split_once(',').unwrap();
            (a.parse::<f64>().unwrap(), b.parse::<f64>().unwrap())
        })
        .unzip();
    Data::unweighted(x, y)
}

fn options() -> Options {
    Options { weighting: Weighting::None, confidence: 0.95, enzyme: None, settings: FitSettings::default() }
}

#[test]
fn misra1d_reproduces_nist_certified_values_from_every_start() {
    let data = misra1d();
    // NIST's two published starting points (b1, b2) → (Vmax, Km = 1/b2), and our own default starts.
    let nist_starts = [vec![500.0, 1.0 / 1e-4], vec![450.0, 1.0 / 3e-4]];
    let model = MichaelisMenten;
    let fits = [
        fit_from(&model, &data, &nist_starts[..1], &[None, None], &FitSettings::default()),
        fit_from(&model, &data, &nist_starts[1..], &[None, None], &FitSettings::default()),
        kimech::fit::fit(&model, &data, &[None, None], &FitSettings::default()),
    ];
    for f in &fits {
        assert!(f.converged(), "{:?}", f.termination);
        let (vmax, km) = (f.theta[0], f.theta[1]);
        // NIST prints 11 significant digits; we ask for 10 (the floor is 8 and 6).
        assert!(agreeing_digits(vmax, MISRA1D_B1) >= 10.0, "Vmax {vmax}");
        assert!(agreeing_digits(km, 1.0 / MISRA1D_B2) >= 10.0, "Km {km}");
        assert!(agreeing_digits(f.se[0].unwrap(), MISRA1D_SE_B1) >= 9.0, "SE Vmax {:?}", f.se[0]);
        assert!(agreeing_digits(f.sse, MISRA1D_SSE) >= 10.0, "SSE {}", f.sse);
        assert_eq!(f.df, 12);
    }
}

#[test]
fn misra1d_km_standard_error_matches_delta_method_of_certified_b2() {
    // SE(Km) = SE(b2)/b2² (first-order transform of NIST's certified SE of b2).
    let se_b2 = 2.9334354479E-06;
    let f = kimech::fit::fit(&MichaelisMenten, &misra1d(), &[None, None], &FitSettings::default());
    assert_relative_eq!(f.se[1].unwrap(), se_b2 / (MISRA1D_B2 * MISRA1D_B2), max_relative = 1e-8);
}

#[test]
fn misra1d_profile_intervals_match_scipy_reference() {
    let reference = &fixture_json("reference/mm_scipy.json")["datasets"]["misra1d"];
    let data = misra1d();
    let series = Series { label: None, origin: "misra1d".into(), substrate: data.x, rate: data.y, sd: None };
    let r = analyse(&series, &Units { substrate: None, rate: None }, &options()).unwrap();
    for (p, name) in [(&r.params.vmax, "vmax"), (&r.params.km, "km")] {
        let expected = &reference[format!("profile95_{name}")];
        assert_relative_eq!(p.low.unwrap(), expected[0].as_f64().unwrap(), max_relative = 1e-8);
        assert_relative_eq!(p.high.unwrap(), expected[1].as_f64().unwrap(), max_relative = 1e-8);
    }
}

/// Puromycin (Treloar 1974, in Bates & Watts 1988) with `state` renamed to
/// `series`; the substrate was in ppm, which is no molar unit, so the header
/// here just labels it — the numbers, and hence Km in ppm, are unchanged.
fn puromycin_csv() -> String {
    fixture_text("puromycin.csv").replacen("state,conc,rate", "series,substrate (uM),rate", 1)
}

#[test]
fn puromycin_series_match_bates_watts_and_scipy() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("p.csv"), puromycin_csv()).unwrap();
    let out = kimech(dir.path()).args(["km", "p.csv", "--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let reference = &fixture_json("reference/mm_scipy.json")["datasets"];
    let results = json["results"].as_array().unwrap();
    assert_eq!(results.len(), 2);
    for (result, key) in results.iter().zip(["puromycin_treated", "puromycin_untreated"]) {
        let expect = &reference[key];
        let p = &result["params"];
        for (field, json_field) in [("vmax", "vmax"), ("km", "km")] {
            let got = p[json_field]["value"].as_f64().unwrap();
            assert_relative_eq!(got, expect[field].as_f64().unwrap(), max_relative = 1e-8);
            let se = p[json_field]["se"].as_f64().unwrap();
            assert_relative_eq!(se, expect[format!("se_{field}")].as_f64().unwrap(), max_relative = 1e-6);
            let profile = &expect[format!("profile95_{field}")];
            assert_relative_eq!(
                p[json_field]["low"].as_f64().unwrap(),
                profile[0].as_f64().unwrap(),
                max_relative = 1e-7
            );
            assert_relative_eq!(
                p[json_field]["high"].as_f64().unwrap(),
                profile[1].as_f64().unwrap(),
                max_relative = 1e-7
            );
        }
        assert_relative_eq!(
            result["residual_sd"].as_f64().unwrap(),
            expect["residual_sd"].as_f64().unwrap(),
            max_relative = 1e-8
        );
        assert_eq!(result["df"], expect["df"]);
    }
    // Bates & Watts (1988) print the treated fit to four digits.
    let treated = &results[0]["params"];
    assert_eq!(results[0]["series"], "treated");
    assert_relative_eq!(treated["vmax"]["value"].as_f64().unwrap(), 212.7, max_relative = 5e-4);
    assert_relative_eq!(treated["km"]["value"].as_f64().unwrap(), 0.06412, max_relative = 5e-4);
    assert_relative_eq!(treated["vmax"]["se"].as_f64().unwrap(), 6.947, max_relative = 5e-4);
    assert_relative_eq!(treated["km"]["se"].as_f64().unwrap(), 0.008281, max_relative = 5e-4);
}

#[test]
fn kcat_is_vmax_over_enzyme_in_per_time_units() {
    // Michaelis–Menten rates computed from the rate law itself (Vmax 2 uM/min, Km 10 uM).
    let rows: String = [2.0, 5.0, 10.0, 20.0, 40.0, 80.0]
        .iter()
        .map(|s| format!("{s},{}\n", 2.0 * s / (10.0 + s) * if *s < 30.0 { 1.01 } else { 0.99 }))
        .collect();
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("s.csv"), format!("substrate (uM),rate (uM/min)\n{rows}")).unwrap();
    let out = kimech(dir.path()).args(["km", "s.csv", "--enzyme", "5 nM", "--format", "json"]).output().unwrap();
    assert!(out.status.success());
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let p = &json["results"][0]["params"];
    let (vmax, km) = (p["vmax"]["value"].as_f64().unwrap(), p["km"]["value"].as_f64().unwrap());
    // kcat = Vmax/Et: (Vmax uM/min · 1e-6 M/uM) / 5e-9 M, per minute.
    assert_relative_eq!(p["kcat"]["value"].as_f64().unwrap(), vmax * 1e-6 / 5e-9, max_relative = 1e-12);
    assert_eq!(p["kcat"]["unit"], "1/min");
    assert_relative_eq!(p["kcat_km"]["value"].as_f64().unwrap(), vmax * 1e-6 / 5e-9 / km, max_relative = 1e-12);
}

/// Interval honesty by simulation: with 5% proportional noise and relative
/// weighting, the 95% profile interval for Km should cover the true Km in
/// about 95% of datasets (93–97% accepted for 1000 datasets: ±2 binomial SE
/// is ±1.4%).
#[test]
fn profile_interval_for_km_covers_truth_at_nominal_rate() {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let (vmax, km) = (5.0, 20.0);
    let substrate: Vec<f64> = [2.0, 4.0, 8.0, 16.0, 32.0, 64.0, 128.0].iter().flat_map(|s| [*s, *s]).collect();
    let noise = Normal::new(0.0, 0.05).unwrap();
    let mut rng = rand::rngs::StdRng::seed_from_u64(20261201);
    let opts = Options { weighting: Weighting::Relative, ..options() };
    let units = Units { substrate: None, rate: None };
    let trials = 1000;
    let mut covered = 0;
    for _ in 0..trials {
        let rate = substrate.iter().map(|s| vmax * s / (km + s) * (1.0 + noise.sample(&mut rng))).collect();
        let series = Series { label: None, origin: "simulation".into(), substrate: substrate.clone(), rate, sd: None };
        let r = analyse(&series, &units, &opts).unwrap();
        let (lo, hi) = (r.params.km.low.unwrap_or(0.0), r.params.km.high.unwrap_or(f64::INFINITY));
        if lo <= km && km <= hi {
            covered += 1;
        }
    }
    let rate = covered as f64 / trials as f64;
    eprintln!("profile-interval coverage of Km: {rate}");
    assert!((0.93..=0.97).contains(&rate), "coverage {rate}");
}

fn km_error(csv: &str, extra: &[&str]) -> String {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    let out = kimech(dir.path()).arg("km").arg("in.csv").args(extra).output().unwrap();
    assert!(!out.status.success(), "should fail: {csv}");
    String::from_utf8(out.stderr).unwrap()
}

#[test]
fn fails_on_empty_file() {
    assert!(km_error("", &[]).contains("no data rows"));
    assert!(km_error("substrate (uM),rate\n", &[]).contains("no data rows"));
}

#[test]
fn fails_on_missing_column() {
    let e = km_error("substrate (uM),speed\n1,2\n", &[]);
    assert!(e.contains("no column 'rate'") && e.contains("speed"), "{e}");
}

#[test]
fn fails_on_non_numeric_cell_naming_line_and_column() {
    let e = km_error("substrate (uM),rate\n1,2\n2,fast\n", &[]);
    assert!(e.contains("line 3") && e.contains("'rate'") && e.contains("fast"), "{e}");
}

#[test]
fn fails_on_unknown_unit() {
    let e = km_error("substrate,rate\n1 furlong,2\n", &[]);
    assert!(e.contains("unknown unit 'furlong'") && e.contains("line 2"), "{e}");
    let e = km_error("substrate (mg/L),rate\n1,2\n", &[]);
    assert!(e.contains("not a concentration unit") && e.contains("mg/L"), "{e}");
}

#[test]
fn fails_without_any_substrate_unit() {
    let e = km_error("substrate,rate\n1,2\n2,3\n4,4\n", &[]);
    assert!(e.contains("no concentration unit") && e.contains("--substrate-unit"), "{e}");
}

#[test]
fn fails_on_zero_or_negative_concentration() {
    for bad in ["0", "-5"] {
        let e = km_error(&format!("substrate (uM),rate\n1,2\n{bad},3\n4,4\n"), &[]);
        assert!(e.contains("must be positive") && e.contains("line 3"), "{e}");
    }
}

#[test]
fn fails_on_nan_or_infinity() {
    for bad in ["NaN", "inf", "-inf"] {
        let e = km_error(&format!("substrate (uM),rate\n1,2\n2,{bad}\n4,4\n"), &[]);
        assert!(e.contains("not a finite number") && e.contains("line 3"), "{bad}: {e}");
    }
}

#[test]
fn fails_on_single_distinct_substrate() {
    let e = km_error("substrate (uM),rate\n5,2\n5,2.1\n5,1.9\n", &[]);
    assert!(e.contains("only 1 distinct substrate"), "{e}");
}

#[test]
fn fails_when_all_rates_are_zero() {
    let e = km_error("substrate (uM),rate\n1,0\n2,0\n4,0\n", &[]);
    assert!(e.contains("no positive rate"), "{e}");
}

#[test]
fn fails_on_more_cells_than_header() {
    let e = km_error("substrate (uM),rate\n1,2\n2,3,9\n", &[]);
    assert!(e.contains("line 3") && e.contains("3 fields but the header has 2"), "{e}");
}

#[test]
fn fails_on_unreadable_path() {
    let dir = tempfile::tempdir().unwrap();
    kimech(dir.path())
        .args(["km", "no-such-file.csv"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("no-such-file.csv: cannot read"));
}

#[test]
fn other_series_still_come_out_when_one_fails() {
    let dir = tempfile::tempdir().unwrap();
    let csv =
        "series,substrate (uM),rate\ngood,1,1\ngood,2,1.6\ngood,4,2.2\ngood,8,2.7\nbad,5,1\nbad,5,1.1\nbad,5,0.9\n";
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    let out = kimech(dir.path()).args(["km", "in.csv", "--format", "json"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["results"].as_array().unwrap().len(), 1);
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.contains("series 'bad' (") && stderr.contains(".csv, lines 6-8)") && stderr.contains("1 of 2 series"),
        "{stderr}"
    );
}

#[test]
fn reads_stdin_and_refuses_to_overwrite_its_input() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "substrate (uM),rate\n1,1\n2,1.6\n4,2.2\n8,2.7\n16,3.0\n";
    kimech(dir.path())
        .args(["km", "-", "--format", "csv"])
        .write_stdin(csv)
        .assert()
        .success()
        .stdout(predicate::str::starts_with("series,n,df,vmax"));
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    kimech(dir.path())
        .args(["km", "in.csv", "-o", "in.csv"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("refusing to write the output over an input"));
    assert_eq!(std::fs::read_to_string(dir.path().join("in.csv")).unwrap(), csv);
}

#[test]
fn warns_about_substrate_inhibition_and_unbracketed_km() {
    let dir = tempfile::tempdir().unwrap();
    // Rates rise then fall by a third at the top: no hyperbola does that.
    let csv = "substrate (uM),rate\n1,1\n2,1.7\n4,2.5\n8,3.0\n16,3.1\n32,2.0\n";
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    kimech(dir.path())
        .args(["km", "in.csv"])
        .assert()
        .success()
        .stdout(predicate::str::contains("substrate-inhibition"));
    let csv = "substrate (uM),rate\n1,0.1\n2,0.2\n3,0.3\n4,0.41\n5,0.5\n";
    std::fs::write(dir.path().join("lin.csv"), csv).unwrap();
    kimech(dir.path()).args(["km", "lin.csv"]).assert().success().stdout(predicate::str::contains("km-not-bracketed"));
}

#[test]
fn t_and_f_quantiles_match_scipy() {
    // scipy.stats.t.ppf(0.975, df) and scipy.stats.f.ppf(0.95, 1, df), from tests/reference/mm_reference.py.
    use kimech::fit::intervals::{f_quantile, t_quantile};
    let reference = &fixture_json("reference/mm_scipy.json")["datasets"];
    for key in ["misra1d", "puromycin_treated", "puromycin_untreated"] {
        let d = &reference[key];
        let df = d["df"].as_u64().unwrap() as usize;
        assert_relative_eq!(t_quantile(0.95, df).unwrap(), d["t_0975"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(f_quantile(0.95, 1, df).unwrap(), d["f_095"].as_f64().unwrap(), max_relative = 1e-10);
    }
}

#[test]
fn wald_interval_is_symmetric_on_the_log_scale_for_positive_parameters() {
    use kimech::fit::intervals::{Bound, wald};
    let f = kimech::fit::fit(&MichaelisMenten, &misra1d(), &[None, None], &FitSettings::default());
    let w = wald(&MichaelisMenten, &f, 0, 0.95);
    let (Bound::At(lo), Bound::At(hi)) = (w.low, w.high) else { panic!("{w:?}") };
    // ln(Vmax) ± t·SE/Vmax, t from scipy (tests/reference/mm_reference.py): 2.1788128296672284.
    let half = 2.1788128296672284 * f.se[0].unwrap() / f.theta[0];
    assert_relative_eq!(lo, f.theta[0] * (-half).exp(), max_relative = 1e-10);
    assert_relative_eq!(hi, f.theta[0] * half.exp(), max_relative = 1e-10);
}

#[test]
fn profile_reports_unbounded_when_the_data_cannot_bound_km() {
    // All substrate far below Km: only Vmax/Km is determined, so Km (and Vmax)
    // have no upper bound. Rates from v = 10·S/(1000 + S) with ±1% alternating error.
    let s: Vec<f64> = (1..=8).map(f64::from).collect();
    let v: Vec<f64> =
        s.iter().enumerate().map(|(i, s)| 10.0 * s / (1000.0 + s) * if i % 2 == 0 { 1.01 } else { 0.99 }).collect();
    let series = Series { label: None, origin: "test".into(), substrate: s, rate: v, sd: None };
    let r = analyse(&series, &Units { substrate: None, rate: None }, &options()).unwrap();
    assert_eq!(r.params.km.high, None, "{:?}", r.params.km);
    assert!(r.params.km.note.as_deref().unwrap_or("").contains("no upper bound"), "{:?}", r.params.km);
    assert!(r.warnings.iter().any(|w| w.code == "km-not-bracketed"));
}

#[test]
fn json_output_keeps_the_documented_contract() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("p.csv"), puromycin_csv()).unwrap();
    let out = kimech(dir.path()).args(["km", "p.csv", "--format", "json", "--enzyme", "1 nM"]).output().unwrap();
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &json["results"][0];
    for key in ["series", "n", "df", "sse", "residual_sd", "r2", "converged", "params", "warnings"] {
        assert!(r.get(key).is_some(), "missing {key}");
    }
    assert!(r["n"].is_u64() && r["df"].is_u64() && r["converged"].is_boolean() && r["warnings"].is_array());
    for p in ["vmax", "km", "kcat", "kcat_km"] {
        for key in ["value", "se", "low", "high", "unit"] {
            assert!(r["params"][p].get(key).is_some(), "params.{p}.{key}");
        }
    }
    assert_eq!(r["params"]["km"]["unit"], "uM");
}

#[test]
fn sd_weighting_names_the_row_without_a_usable_sd() {
    let e = km_error("substrate (uM),rate,sd\n1,1,0.1\n2,1.6,\n4,2.2,0.1\n8,2.7,0.1\n", &["--weighting", "sd"]);
    assert!(e.contains("line 3") && e.contains("'sd'") && e.contains("positive sd"), "{e}");
    let e = km_error("substrate (uM),rate,sd\n1,1,0.1\n2,1.6,0.1\n4,2.2,-1\n8,2.7,0.1\n", &["--weighting", "sd"]);
    assert!(e.contains("line 4") && e.contains("-1"), "{e}");
}
