//! `kimech onset`: the global fit against scipy, the scheme choice and the
//! substrate correction against hand-worked cases of the published relations,
//! located errors for bad input, and the output shapes.

mod common;

use common::{fixture, fixture_json, kimech};
use kimech::analysis::onset::{
    Compound, Conditions, Curve, IntervalBasis, Onset, OnsetWarning, Options, Rates, SubstrateMechanism, Units, analyse,
};
use kimech::units::Qualifier;
use predicates::prelude::*;

fn units() -> Units {
    Units { inhibitor: Some("uM".into()), time: Some("min".into()), signal: None }
}

/// Curves from the integrated equation (Morrison & Walsh 1988) with a small
/// deterministic zig-zag (±0.1 % of the final signal) so that the fits have
/// residual degrees of freedom with a known, tiny error.
fn curves(inhibitor: &[f64], curve: impl Fn(f64) -> (f64, f64, f64)) -> Compound {
    let curves = inhibitor
        .iter()
        .map(|&i| {
            let (vi, vs, kobs) = curve(i);
            let time: Vec<f64> = (0..31).map(|k| k as f64 * 2.0).collect();
            let signal = time
                .iter()
                .enumerate()
                .map(|(k, &t)| {
                    let g = if kobs > 0.0 { (1.0 - (-kobs * t).exp()) / kobs } else { t };
                    let wiggle = if (k * 7 + (i * 8.0) as usize).is_multiple_of(3) { 1.0 } else { -0.5 };
                    vs * t + (vi - vs) * g + 1000.0 + wiggle * 50.0
                })
                .collect();
            Curve { inhibitor: i, time, signal, origin: format!("[I] = {i}") }
        })
        .collect();
    Compound { label: Some("hand".into()), origin: "test".into(), curves, conditions: Conditions::default() }
}

const LEVELS: [f64; 7] = [0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0];

/// Copeland (2013), ch. 9: kobs = kinact·[I]/(KI + [I]); at [I] = KI kobs is
/// kinact/2, and with KI within the tested range the hyperbola is chosen.
#[test]
fn saturating_kobs_is_two_step_with_half_kinact_at_ki() {
    let (kinact, ki) = (0.1, 1.0);
    let c = curves(&LEVELS, |i| (800.0 / (1.0 + i / ki), 0.0, kinact * i / (ki + i)));
    let r = analyse(&c, &units(), &Options::default()).unwrap();
    assert_eq!(r.onset, Onset::TwoStep, "{}", r.evidence);
    assert_eq!(r.reversible, Some(false));
    let at_ki = r.curves.iter().find(|c| (c.inhibitor - ki).abs() < 1e-12).unwrap();
    assert!((at_ki.kobs.value / (kinact / 2.0) - 1.0).abs() < 0.02, "kobs at KI = {}", at_ki.kobs.value);
    assert!((r.kinact.as_ref().unwrap().value / kinact - 1.0).abs() < 0.02);
    assert!((r.ki_app.as_ref().unwrap().value / ki - 1.0).abs() < 0.05);
    assert!((r.kinact_ki.as_ref().unwrap().value / (kinact / ki) - 1.0).abs() < 0.03);
}

/// The F-test path with tied rates (Bates & Watts 1988, §3.10): onset is
/// tested as none against two-step irreversible (kinact → 0 is the
/// rapid-reversible lines), then one-step against two-step, then the return.
#[test]
fn f_test_path_names_the_same_classes_with_tied_rates() {
    let options = Options { criterion: kimech::analysis::mode::Criterion::FTest, ..Options::default() };
    let covalent = curves(&LEVELS, |i| (800.0 / (1.0 + i), 0.0, 0.1 * i / (1.0 + i)));
    let r = analyse(&covalent, &units(), &options).unwrap();
    assert_eq!((r.onset, r.reversible, r.rates), (Onset::TwoStep, Some(false), Rates::Tied), "{}", r.evidence);
    assert!(r.evidence.contains("two-step vs none") && r.evidence.contains("F test of the tie"), "{}", r.evidence);
    let straight = curves(&LEVELS, |i| {
        let v = 800.0 / (1.0 + i);
        (v, v, 0.0)
    });
    let r = analyse(&straight, &units(), &options).unwrap();
    assert_eq!(r.onset, Onset::None, "{}", r.evidence);
}

/// Copeland (2013), ch. 9: at [I] ≪ KI, kobs ≈ (kinact/KI)·[I]; the line is
/// chosen, only kinact/KI is reported, and the user is told why.
#[test]
fn linear_kobs_is_one_step_and_reports_only_the_ratio() {
    let (kinact, ki) = (0.5, 500.0);
    let c = curves(&LEVELS, |i| (800.0, 0.0, kinact * i / (ki + i)));
    let r = analyse(&c, &units(), &Options::default()).unwrap();
    assert_eq!(r.onset, Onset::OneStep, "{}", r.evidence);
    assert!(r.kinact.is_none() && r.ki.is_none());
    let ratio = r.kinact_ki.as_ref().unwrap();
    assert!((ratio.value / (kinact / ki) - 1.0).abs() < 0.03, "{}", ratio.value);
    assert_eq!(ratio.unit.as_deref(), Some("1/(uM·min)"));
    assert!(r.warnings.iter().any(|w| w.code == OnsetWarning::KiBeyondTested.code()));
}

/// Morrison & Walsh (1988): with the first step rapid, vi = v0/(1 + [I]/KI,app)
/// with the KI,app of kobs, so the tie of the initial rates holds and is used.
/// A mixing dead time (readings start 6 min after enzyme and inhibitor met)
/// makes the first readings' slope vs + (vi − vs)·e^(−kobs·td), not vi: the
/// tie is rejected, each curve keeps its own vi, and the user is told.
#[test]
fn a_dead_time_breaks_the_tie_of_the_initial_rates() {
    let (kinact, ki) = (0.1, 1.0);
    let c = curves(&LEVELS, |i| (800.0 / (1.0 + i / ki), 0.0, kinact * i / (ki + i)));
    let r = analyse(&c, &units(), &Options::default()).unwrap();
    assert_eq!(r.rates, Rates::Tied, "{}", r.evidence);
    assert!(!r.warnings.iter().any(|w| w.code == OnsetWarning::RatesNotTied.code()));
    let dead = 6.0;
    let delayed = curves(&LEVELS, |i| {
        let kobs = kinact * i / (ki + i);
        (800.0 / (1.0 + i / ki) * (-kobs * dead).exp(), 0.0, kobs)
    });
    let r = analyse(&delayed, &units(), &Options::default()).unwrap();
    assert_eq!(r.rates, Rates::Free, "{}", r.evidence);
    assert!(r.warnings.iter().any(|w| w.code == OnsetWarning::RatesNotTied.code()), "{:?}", r.warnings);
    assert!(r.evidence.contains("free: the tie is rejected"), "{}", r.evidence);
}

/// An irreversible call reports koff as an upper bound (the upper end of its
/// profile interval in the reversible form), never as an estimate. The bound
/// means what it says: on the same design, a compound whose koff is four
/// times the bound shows its return within the run and is called reversible,
/// with koff estimated.
#[test]
fn an_irreversible_call_bounds_koff_from_above() {
    let (kinact, ki) = (0.1, 1.0);
    let with_koff = |koff: f64| {
        curves(&LEVELS, move |i| {
            let kobs = koff + kinact * i / (ki + i);
            let vi = 800.0 / (1.0 + i / ki);
            // The uninhibited curve of a covalent inhibitor: no onset, vs = vi.
            if kobs > 0.0 { (vi, vi * koff / kobs, kobs) } else { (vi, vi, 0.0) }
        })
    };
    let r = analyse(&with_koff(0.0), &units(), &Options::default()).unwrap();
    assert_eq!(r.reversible, Some(false), "{}", r.evidence);
    assert_eq!(r.koff_qualifier, Qualifier::Less);
    let bound = r.koff.as_ref().unwrap();
    assert!(bound.value > 0.0 && bound.value < 0.01, "koff < {}", bound.value);
    assert_eq!(bound.interval, "profile-upper");
    assert!(bound.low.is_none() && bound.note.as_deref().unwrap_or("").contains("no return"));
    let koff = 4.0 * bound.value;
    let r = analyse(&with_koff(koff), &units(), &Options::default()).unwrap();
    assert_eq!(r.reversible, Some(true), "koff {koff}: {}", r.evidence);
    assert_eq!(r.koff_qualifier, Qualifier::Equal);
    assert!((r.koff.as_ref().unwrap().value / koff - 1.0).abs() < 0.2, "{:?}", r.koff);
}

/// Model uncertainty is part of the answer (Burnham & Anderson 2002, §4.2, as
/// `mode` does): the reversible twin of an irreversible call whose fitted koff
/// is small and positive keeps an Akaike weight of about 0.27 (one nearly idle
/// parameter), so it is in the 95 % confidence set of models and the intervals
/// span both fits; a slow binder whose return shows
/// clearly leaves the irreversible fit no weight and keeps its own intervals.
#[test]
fn intervals_span_both_reversibilities_only_when_both_are_plausible() {
    // A return too slow to show within the hour (koff 0.0003 /min, half-life 39 h).
    let covalent = curves(&LEVELS, |i| {
        let kobs = 0.0003 + 0.1 * i / (1.0 + i);
        let vi = 800.0 / (1.0 + i);
        (vi, vi * 0.0003 / kobs, kobs)
    });
    let r = analyse(&covalent, &units(), &Options::default()).unwrap();
    assert_eq!(r.reversible, Some(false), "{}", r.evidence);
    let twin = r.models.iter().find(|m| m.rates == r.rates && m.onset == r.onset && m.reversible).unwrap();
    assert!(twin.weight > 0.05, "{}", twin.weight);
    assert_eq!(r.interval_basis, IntervalBasis::SpanOverReversibility);
    for p in [&r.kinact, &r.ki, &r.kinact_ki] {
        let p = p.as_ref().unwrap();
        assert_eq!(p.interval, "profile-span");
        assert!(p.low.unwrap() < p.value && p.value < p.high.unwrap());
        assert!(p.note.as_deref().unwrap_or("").contains("two-step reversible"), "{:?}", p.note);
    }
    let slow = curves(&LEVELS, |i| {
        let kobs = 0.02 + 0.15 * i / (1.0 + i);
        let vi = 800.0 / (1.0 + i);
        (vi, vi * 0.02 / kobs, kobs)
    });
    let r = analyse(&slow, &units(), &Options::default()).unwrap();
    assert_eq!(r.reversible, Some(true), "{}", r.evidence);
    assert_eq!(r.interval_basis, IntervalBasis::ChosenModel);
    assert_eq!(r.kinact.as_ref().unwrap().interval, "profile");
}

#[test]
fn csv_writes_the_koff_bound_with_its_qualifier() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("q.csv"), table(&[0.0, 0.5, 1.0, 2.0, 4.0], 12)).unwrap();
    let out = kimech(dir.path()).args(["onset", "q.csv", "--format", "csv"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    let mut rows = csv::Reader::from_reader(text.as_bytes());
    let header = rows.headers().unwrap().clone();
    let row = rows.records().next().unwrap().unwrap();
    let get = |name: &str| row.get(header.iter().position(|h| h == name).unwrap()).unwrap().to_string();
    assert_eq!(get("reversible"), "false");
    assert_eq!(get("koff_qualifier"), "<");
    assert!(get("koff").parse::<f64>().unwrap() > 0.0);
    assert_eq!(get("koff_unit"), "1/min");
    assert_eq!(get("rates"), "tied");
}

#[test]
fn straight_curves_have_no_onset_and_point_to_mode() {
    let c = curves(&LEVELS, |i| {
        let v = 800.0 / (1.0 + i);
        (v, v, 0.0)
    });
    let r = analyse(&c, &units(), &Options::default()).unwrap();
    assert_eq!(r.onset, Onset::None, "{}", r.evidence);
    assert!(r.reversible.is_none() && r.kinact_ki.is_none());
    let w = r.warnings.iter().find(|w| w.code == OnsetWarning::NoOnset.code()).unwrap();
    assert!(w.message.contains("mode"), "{}", w.message);
}

/// The Cheng–Prusoff forms (Cheng & Prusoff 1973; Copeland 2013 §9.3 for
/// covalent inhibitors), worked by hand: S = 60, Km = 20 → competitive factor
/// 1 + 3 = 4, uncompetitive 1 + 1/3 = 4/3, noncompetitive 1.
#[test]
fn substrate_correction_matches_hand_worked_factors() {
    assert!((SubstrateMechanism::Competitive.factor(60.0, 20.0) - 4.0).abs() < 1e-15);
    assert!((SubstrateMechanism::Uncompetitive.factor(60.0, 20.0) - 4.0 / 3.0).abs() < 1e-15);
    assert!((SubstrateMechanism::Noncompetitive.factor(60.0, 20.0) - 1.0).abs() < 1e-15);
    let mut c = curves(&LEVELS, |i| (800.0 / (1.0 + i), 0.0, 0.1 * i / (1.0 + i)));
    c.conditions.substrate = Some(60e-6);
    c.conditions.km = Some(20e-6);
    for (mechanism, factor) in [
        (SubstrateMechanism::Competitive, 4.0),
        (SubstrateMechanism::Uncompetitive, 4.0 / 3.0),
        (SubstrateMechanism::Noncompetitive, 1.0),
    ] {
        let options = Options { substrate_mechanism: mechanism, ..Options::default() };
        let r = analyse(&c, &units(), &options).unwrap();
        let (ki, ki_app) = (r.ki.as_ref().unwrap(), r.ki_app.as_ref().unwrap());
        assert!((ki.value * factor / ki_app.value - 1.0).abs() < 1e-12, "{mechanism:?}");
        assert!((ki.high.unwrap() * factor / ki_app.high.unwrap() - 1.0).abs() < 1e-12);
        let kinact = r.kinact.as_ref().unwrap().value;
        assert!((r.kinact_ki.as_ref().unwrap().value / (kinact / ki.value) - 1.0).abs() < 1e-6, "{mechanism:?}");
        assert!(!r.warnings.iter().any(|w| w.code == OnsetWarning::KiApparent.code()));
    }
}

/// tests/reference/onset_reference.py fits the same equations with
/// scipy.optimize.least_squares, with free initial rates (one vi per curve)
/// and with vi tied to v0 by the scheme (Morrison & Walsh 1988): the answer
/// (tied two-step, as the tie is not rejected) agrees to 1e-6 in kinact, KI,
/// every vi and P0 and the SSE; the other three fits in their SSE; with
/// `--initial-rates free` the free two-step fit in every estimate.
#[test]
fn global_fit_matches_scipy() {
    let reference = fixture_json("reference/onset_scipy.json");
    let out = kimech(&std::env::temp_dir())
        .args(["onset", fixture("onset/two_step.csv").to_str().unwrap(), "--format", "json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &json["results"][0];
    assert_eq!(r["onset"], "two-step");
    assert_eq!(r["rates"], "tied");
    let close = |a: f64, b: f64, what: &str| assert!((a / b - 1.0).abs() < 1e-6, "{what}: {a} vs scipy {b}");
    let tied = &reference["two_step_tied"];
    close(r["kinact"]["value"].as_f64().unwrap(), tied["kinact"].as_f64().unwrap(), "kinact");
    close(r["ki_app"]["value"].as_f64().unwrap(), tied["ki"].as_f64().unwrap(), "KI");
    for (k, c) in r["curves"].as_array().unwrap().iter().enumerate() {
        close(c["global"]["vi"].as_f64().unwrap(), tied["vi"][k].as_f64().unwrap(), "vi");
        close(c["global"]["p0"].as_f64().unwrap(), tied["p0"][k].as_f64().unwrap(), "P0");
    }
    // models: free none, one-step, two-step, … then tied none, one-step, two-step, …
    let models = r["models"].as_array().unwrap();
    for (k, name, rates) in
        [(1, "one_step", "free"), (2, "two_step", "free"), (6, "one_step_tied", "tied"), (7, "two_step_tied", "tied")]
    {
        assert_eq!(models[k]["rates"], rates);
        assert_eq!(models[k]["reversible"], false);
        close(models[k]["sse"].as_f64().unwrap(), reference[name]["sse"].as_f64().unwrap(), name);
    }
    // `--initial-rates free`: the answer is the free two-step fit, whose
    // estimates agree with scipy's free fit too, and no tie warning is given.
    let out = kimech(&std::env::temp_dir())
        .args(["onset", fixture("onset/two_step.csv").to_str().unwrap(), "--format", "json", "--initial-rates", "free"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &json["results"][0];
    assert_eq!(r["rates"], "free");
    assert!(!r["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "rates-not-tied"));
    let free = &reference["two_step"];
    close(r["kinact"]["value"].as_f64().unwrap(), free["kinact"].as_f64().unwrap(), "free kinact");
    close(r["ki_app"]["value"].as_f64().unwrap(), free["ki"].as_f64().unwrap(), "free KI");
    for (k, c) in r["curves"].as_array().unwrap().iter().enumerate() {
        close(c["global"]["vi"].as_f64().unwrap(), free["vi"][k].as_f64().unwrap(), "free vi");
        close(c["global"]["p0"].as_f64().unwrap(), free["p0"][k].as_f64().unwrap(), "free P0");
    }
}

fn run_csv(name: &str, text: &str) -> assert_cmd::assert::Assert {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(name), text).unwrap();
    kimech(dir.path()).args(["onset", name]).assert()
}

/// A table of two-step curves written as CSV text.
fn table(levels: &[f64], points: usize) -> String {
    let mut out = String::from("compound,inhibitor (uM),time (min),signal\n");
    for &i in levels {
        for k in 0..points {
            let t = k as f64 * 3.0;
            let kobs = 0.1 * i / (1.0 + i);
            let g = if kobs > 0.0 { (1.0 - (-kobs * t).exp()) / kobs } else { t };
            let wiggle = if k.is_multiple_of(3) { 20.0 } else { -10.0 };
            out.push_str(&format!("KX-1,{i},{t},{}\n", 900.0 / (1.0 + i) * g + 1500.0 + wiggle));
        }
    }
    out
}

#[test]
fn fails_with_a_single_inhibitor_concentration() {
    run_csv("one.csv", &table(&[0.0, 2.0], 12)).failure().stderr(
        predicate::str::contains("compound 'KX-1'")
            .and(predicate::str::contains("lines 2-25"))
            .and(predicate::str::contains("only 2")),
    );
}

#[test]
fn fails_with_a_curve_of_four_points() {
    let mut text = table(&[0.0, 1.0, 4.0], 12);
    text.push_str("KX-1,8,0,1500\nKX-1,8,3,2100\nKX-1,8,6,2500\nKX-1,8,9,2800\n");
    run_csv("short.csv", &text).failure().stderr(
        predicate::str::contains("[I] = 8")
            .and(predicate::str::contains("lines 38-41"))
            .and(predicate::str::contains("4 readings"))
            .and(predicate::str::contains("at least 5")),
    );
}

#[test]
fn fails_when_times_do_not_increase() {
    let text = table(&[0.0, 1.0, 4.0], 12).replacen("KX-1,1,9,", "KX-1,1,2,", 1);
    run_csv("order.csv", &text).failure().stderr(
        predicate::str::contains("order.csv, line 17, column 'time (min)'")
            .and(predicate::str::contains("found '2'"))
            .and(predicate::str::contains("follows 6 on line 16")),
    );
}

#[test]
fn fails_with_an_unknown_time_unit() {
    let text = table(&[0.0, 1.0, 4.0], 12).replacen("KX-1,1,9,", "KX-1,1,9 fortnights,", 1);
    run_csv("unit.csv", &text)
        .failure()
        .stderr(predicate::str::contains("line 17").and(predicate::str::contains("unknown unit of time")));
}

/// Times in seconds in some cells are converted to the header's minutes;
/// CRLF line ends are read as LF.
#[test]
fn reads_mixed_time_units_and_crlf() {
    let plain = table(&[0.0, 0.5, 1.0, 2.0, 4.0], 12);
    let mixed = plain.replacen("KX-1,1,9,", "KX-1,1,540 s,", 1).replace('\n', "\r\n");
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("a.csv"), &plain).unwrap();
    std::fs::write(dir.path().join("b.csv"), &mixed).unwrap();
    let json = |name: &str| {
        let out = kimech(dir.path()).args(["onset", name, "--format", "json"]).output().unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        serde_json::from_slice::<serde_json::Value>(&out.stdout).unwrap()
    };
    let (a, b) = (json("a.csv"), json("b.csv"));
    assert_eq!(a["results"][0]["kinact_ki"]["value"], b["results"][0]["kinact_ki"]["value"]);
    assert_eq!(a["results"][0]["kinact_ki"]["unit"], "1/(uM·min)");
}

#[test]
fn csv_has_one_row_per_compound_and_guards_text() {
    let two = table(&[0.0, 0.5, 1.0, 2.0, 4.0], 12);
    let second = two.lines().skip(1).map(|l| l.replacen("KX-1", "=KX-2", 1)).collect::<Vec<_>>().join("\n");
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.csv"), format!("{two}{second}\n")).unwrap();
    let out = kimech(dir.path()).args(["onset", "c.csv", "--format", "csv"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 3, "{text}");
    assert!(lines[0].starts_with("compound,onset,reversible,kinact,"));
    assert!(lines[2].starts_with("'=KX-2,two-step,false,"), "{}", lines[2]);
}

#[test]
fn json_has_the_documented_fields() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("j.csv"), table(&[0.0, 0.5, 1.0, 2.0, 4.0], 12)).unwrap();
    let out = kimech(dir.path())
        .args(["onset", "j.csv", "--format", "json", "--substrate", "50 uM", "--km", "25 uM", "--enzyme", "0.2 uM"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &json["results"][0];
    for key in ["compound", "onset", "reversible", "kinact", "ki", "kinact_ki", "curves", "warnings"] {
        assert!(r.get(key).is_some(), "missing {key}");
    }
    for key in ["inhibitor", "kobs", "vi", "vs"] {
        assert!(r["curves"][1].get(key).is_some(), "curves: missing {key}");
    }
    // Et = 0.2 µM and the lowest [I] is 0.5 µM: not a tenfold excess (common practice).
    let codes: Vec<&str> = r["warnings"].as_array().unwrap().iter().map(|w| w["code"].as_str().unwrap()).collect();
    assert!(codes.contains(&"inhibitor-not-in-excess"), "{codes:?}");
    // Competitive, S/Km = 2: KI = KI,app/3.
    let ratio = r["ki_app"]["value"].as_f64().unwrap() / r["ki"]["value"].as_f64().unwrap();
    assert!((ratio - 3.0).abs() < 1e-12, "{ratio}");
}

#[test]
fn every_warning_code_is_in_the_readme() {
    let readme = std::fs::read_to_string(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    for w in OnsetWarning::ALL {
        assert!(readme.contains(&format!("`{}`", w.code())), "README lacks {}", w.code());
    }
}

/// `ki` refuses an exact Ki for a row that says the inhibitor is
/// time-dependent (Copeland 2013, ch. 9) and converts the others.
#[test]
fn ki_refuses_a_time_dependent_row() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("k.csv"), "compound,ic50 (nM),time_dependent\nKX-1,100,yes\nKX-2,100,no\n").unwrap();
    let out = kimech(dir.path())
        .args(["ki", "k.csv", "--substrate", "10 uM", "--km", "10 uM", "--format", "csv"])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success());
    assert!(
        stderr.contains("k.csv, line 2") && stderr.contains("time-dependent") && stderr.contains("onset"),
        "{stderr}"
    );
    let stdout = String::from_utf8_lossy(&out.stdout);
    let kx2 = stdout.lines().find(|l| l.contains("KX-2")).unwrap();
    assert!(kx2.contains(",50,"), "{kx2}");
    let kx1 = stdout.lines().find(|l| l.contains("KX-1")).unwrap();
    assert!(!kx1.contains(",50,"), "{kx1}");
}

#[test]
fn plot_and_report_draw_both_panels() {
    let dir = tempfile::tempdir().unwrap();
    kimech(dir.path())
        .args(["onset", fixture("onset/two_step.csv").to_str().unwrap(), "--plot", "plots", "--report", "r.html"])
        .args(["-o", "out.txt"])
        .assert()
        .success();
    let svg = std::fs::read_to_string(dir.path().join("plots/onset-KX-sim.svg")).unwrap();
    assert!(svg.contains("Progress curves") && svg.contains("kobs vs [I]"), "panels missing");
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    assert!(html.contains("Time-dependent inhibition") && html.contains("<svg") && html.contains("research estimates"));
}

#[test]
fn fails_when_the_substrate_changes_within_a_compound() {
    let text = table(&[0.0, 1.0, 4.0], 12).replace("signal\n", "signal,substrate (uM)\n");
    let text: String = text
        .lines()
        .enumerate()
        .map(|(k, l)| match k {
            0 => format!("{l}\n"),
            5 => format!("{l},30\n"),
            _ => format!("{l},20\n"),
        })
        .collect();
    run_csv("s.csv", &text).failure().stderr(
        predicate::str::contains("s.csv, line 6, column 'substrate (uM)'")
            .and(predicate::str::contains("found '30'"))
            .and(predicate::str::contains("line 2")),
    );
}
