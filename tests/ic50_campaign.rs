//! A simulated screening campaign (issue 9): raw counts with plate controls
//! (fitted with `--normalise`) and the same curves as % activity (a
//! `response (%)` header), through the real binary. Nine kinds of curve;
//! the calls per kind form a confusion table, and the targets of issue 9
//! are asserted:
//! inactive called `>` in ≥ 95 % and never `<`; potent never `>`;
//! one-aberrant-well curves within 0.3 log10 units of the true IC50 in
//! ≥ 80 % and the aberrant well listed in ≥ 80 %; wells excluded from ≤ 5 %
//! of clean curves; 95 % intervals covering 93–97 % of clean full curves.
//!
//! Invented data (fixed seed), as the developer guide asks for a statistical
//! claim: the full run (`cargo test --release --test ic50_campaign -- --ignored
//! --nocapture`, 3,060 curves) gives the table in the README; the quick run
//! (a few seconds) checks the same targets with margins for its smaller size.

mod common;

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal};
use serde_json::Value;

/// Kinds of curve in the campaign.
const KINDS: [&str; 9] =
    ["normal", "steep", "shallow", "partial", "inactive", "weak", "potent", "one-aberrant", "two-aberrant"];

/// Ten concentrations, threefold from 10 µM down (nM), each in duplicate.
fn concentrations() -> Vec<f64> {
    (0..10).map(|k| 10_000.0 / 3f64.powi(k)).collect()
}

/// One simulated compound: its kind, true IC50 (nM) and wells
/// (concentration, % activity without noise, aberrant?).
struct Compound {
    name: String,
    kind: &'static str,
    ic50: f64,
    wells: Vec<(f64, f64, bool)>,
}

fn log_uniform(rng: &mut StdRng, lo: f64, hi: f64) -> f64 {
    (rng.random_range(lo.ln()..hi.ln())).exp()
}

fn compound(rng: &mut StdRng, kind: &'static str, k: usize) -> Compound {
    let (mut ic50, mut hill, mut bottom) = (log_uniform(rng, 5.0, 1000.0), rng.random_range(0.8..1.5), 0.0);
    match kind {
        "steep" => hill = rng.random_range(2.5..4.0),
        "shallow" => hill = rng.random_range(0.4..0.6),
        "partial" => bottom = rng.random_range(30.0..45.0),
        "inactive" => ic50 = f64::INFINITY,
        "weak" => ic50 = log_uniform(rng, 3.0e4, 3.0e5),
        "potent" => ic50 = log_uniform(rng, 0.005, 0.05),
        _ => {}
    }
    let mut wells = Vec::new();
    for x in concentrations() {
        let activity =
            if ic50.is_infinite() { 100.0 } else { bottom + (100.0 - bottom) / (1.0 + (x / ic50).powf(hill)) };
        wells.push((x, activity, false));
        wells.push((x, activity, false));
    }
    let aberrant = match kind {
        "one-aberrant" => 1,
        "two-aberrant" => 2,
        _ => 0,
    };
    for _ in 0..aberrant {
        // A dispense failure: the well reads 40–80 % activity off, either way.
        let i = loop {
            let i = rng.random_range(0..wells.len());
            if !wells[i].2 {
                break i;
            }
        };
        let shift = rng.random_range(40.0..80.0) * if rng.random_bool(0.5) { 1.0 } else { -1.0 };
        wells[i].1 += shift;
        wells[i].2 = true;
    }
    Compound { name: format!("{kind}-{k:04}"), kind, ic50, wells }
}

/// Raw counts on plates of 16 compounds with 16 + 16 control wells
/// (uninhibited ≈ 1.0e5, inhibited ≈ 5e3, SD 4 % of the window, Z′ ≈ 0.75),
/// and the same wells as % activity from the true plate levels.
/// Returns (raw CSV, % CSV, compounds, line of each well in either file).
fn campaign(per_kind: usize, seed: u64) -> (String, String, Vec<Compound>) {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut compounds = Vec::new();
    for k in 0..per_kind {
        for kind in KINDS {
            compounds.push(compound(&mut rng, kind, k));
        }
    }
    let (high, low) = (1.0e5, 5.0e3);
    let sd = 0.04 * (high - low);
    let noise = Normal::new(0.0, sd).unwrap();
    let mut raw = String::from("plate,compound,control,concentration (nM),response\n");
    let mut percent = String::from("compound,concentration (nM),response (%)\n");
    for (p, chunk) in compounds.chunks(16).enumerate() {
        for _ in 0..16 {
            raw.push_str(&format!("P{p},,uninhibited,,{:.1}\n", high + noise.sample(&mut rng)));
            raw.push_str(&format!("P{p},,inhibited,,{:.1}\n", low + noise.sample(&mut rng)));
        }
        for c in chunk {
            for &(x, activity, _) in &c.wells {
                let e = noise.sample(&mut rng);
                let counts = low + (high - low) * activity / 100.0 + e;
                raw.push_str(&format!("P{p},{},,{x},{counts:.1}\n", c.name));
                percent.push_str(&format!("{},{x},{:.4}\n", c.name, 100.0 * (counts - low) / (high - low)));
            }
        }
    }
    (raw, percent, compounds)
}

/// Tallies of one run.
#[derive(Default)]
struct Tally {
    /// (kind, call, qualifier) → count.
    calls: std::collections::BTreeMap<(String, String), usize>,
    inactive_greater: usize,
    inactive_less: usize,
    inactive: usize,
    potent_greater: usize,
    one_within: usize,
    one_listed: usize,
    one: usize,
    clean: usize,
    clean_excluded: usize,
    covered: usize,
    coverable: usize,
    /// (covered, coverable) per kind of clean full curve.
    coverage_by_kind: std::collections::BTreeMap<String, (usize, usize)>,
    /// Results reported `~` (Hill held).
    approximate: usize,
    /// |log10(estimate/true)| of exact IC50s, per kind.
    errors: std::collections::BTreeMap<String, Vec<f64>>,
}

fn run(dir: &tempfile::TempDir, name: &str, text: &str, args: &[&str]) -> Vec<Value> {
    let path = dir.path().join(name);
    std::fs::write(&path, text).unwrap();
    // For measurements by hand: KIMECH_CAMPAIGN_KEEP=DIR keeps a copy of the inputs.
    if let Ok(keep) = std::env::var("KIMECH_CAMPAIGN_KEEP") {
        std::fs::write(std::path::Path::new(&keep).join(name), text).unwrap();
    }
    let out = common::kimech(dir.path()).arg("ic50").arg(&path).args(args).args(["--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    v["results"].as_array().unwrap().clone()
}

fn tally(results: &[Value], compounds: &[Compound]) -> Tally {
    let mut t = Tally::default();
    assert_eq!(results.len(), compounds.len());
    for (r, c) in results.iter().zip(compounds) {
        assert_eq!(r["compound"], c.name.as_str());
        let q = r["qualifier"].as_str().unwrap().to_string();
        let call = format!("{} {q}", r["call"].as_str().unwrap());
        *t.calls.entry((c.kind.to_string(), call)).or_default() += 1;
        let ic50 = r["ic50"]["value"].as_f64().unwrap();
        let error = (ic50 / c.ic50).log10().abs();
        let listed: Vec<(f64, f64)> = r["outliers"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| (o["concentration"].as_f64().unwrap(), o["response"].as_f64().unwrap()))
            .collect();
        if q == "=" || q == "~" {
            t.errors.entry(c.kind.to_string()).or_default().push(error);
        }
        // A held slope is never reported as exact: `~`, flagged, with the reason (issue 9).
        let flags: Vec<&str> = r["flags"].as_array().unwrap().iter().map(|f| f.as_str().unwrap()).collect();
        if flags.contains(&"hill-fixed") {
            assert_ne!(q, "=", "{}: h held but IC50 exact: {r}", c.name);
        }
        if q == "~" {
            t.approximate += 1;
            assert!(flags.contains(&"hill-fixed"), "{}: {r}", c.name);
            assert!(r["ic50"]["note"].as_str().unwrap().contains("held at 1"), "{}: {r}", c.name);
        }
        match c.kind {
            "inactive" => {
                t.inactive += 1;
                t.inactive_greater += usize::from(q == ">");
                t.inactive_less += usize::from(q == "<");
            }
            "potent" => t.potent_greater += usize::from(q == ">"),
            "one-aberrant" => {
                t.one += 1;
                t.one_within += usize::from(q != ">" && q != "<" && error <= 0.3);
                let aberrant = c.wells.iter().find(|w| w.2).unwrap();
                t.one_listed += usize::from(listed.iter().any(|l| (l.0 - aberrant.0).abs() <= 1e-9 * aberrant.0));
            }
            _ => {}
        }
        if !c.kind.ends_with("aberrant") {
            t.clean += 1;
            t.clean_excluded += usize::from(!listed.is_empty());
        }
        if matches!(c.kind, "normal" | "steep" | "shallow") && q == "=" {
            t.coverable += 1;
            let (lo, hi) = (r["ic50"]["low"].as_f64(), r["ic50"]["high"].as_f64());
            let hit = usize::from(lo.is_some_and(|l| l <= c.ic50) && hi.is_some_and(|h| h >= c.ic50));
            t.covered += hit;
            let e = t.coverage_by_kind.entry(c.kind.to_string()).or_default();
            e.0 += hit;
            e.1 += 1;
        }
    }
    t
}

fn fraction(a: usize, b: usize) -> f64 {
    a as f64 / b.max(1) as f64
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    if v.is_empty() { f64::NAN } else { v[v.len() / 2] }
}

/// The confusion table (kind × call) as Markdown, with the IC50 error.
fn table(t: &mut Tally) -> String {
    let calls: Vec<String> = {
        let mut c: Vec<String> = t.calls.keys().map(|k| k.1.clone()).collect();
        c.sort();
        c.dedup();
        c
    };
    let mut s = format!("| kind | {} | median \\|log10 error\\| of `=`/`~` |\n|---|", calls.join(" | "));
    s.push_str(&"---|".repeat(calls.len() + 1));
    s.push('\n');
    for kind in KINDS {
        let cells: Vec<String> = calls
            .iter()
            .map(|c| t.calls.get(&(kind.to_string(), c.clone())).copied().unwrap_or(0).to_string())
            .collect();
        let err = t.errors.get_mut(kind).map_or(f64::NAN, |v| median(v));
        s.push_str(&format!("| {kind} | {} | {:.3} |\n", cells.join(" | "), err));
    }
    s
}

fn summary(t: &Tally) -> String {
    let by_kind: Vec<String> =
        t.coverage_by_kind.iter().map(|(k, (a, b))| format!("{k} {:.1} %", 100.0 * fraction(*a, *b))).collect();
    format!(
        "inactive `>` {:.1} % (`<` {}); potent `>` {}; one aberrant well: within 0.3 log {:.1} %, listed {:.1} %; clean curves with a well excluded {:.1} %; 95 % interval coverage {:.1} % of {} clean full curves ({}); {} IC50s approximate (`~`, Hill held)",
        100.0 * fraction(t.inactive_greater, t.inactive),
        t.inactive_less,
        t.potent_greater,
        100.0 * fraction(t.one_within, t.one),
        100.0 * fraction(t.one_listed, t.one),
        100.0 * fraction(t.clean_excluded, t.clean),
        100.0 * fraction(t.covered, t.coverable),
        t.coverable,
        by_kind.join(", "),
        t.approximate
    )
}

/// Runs both ways and checks the targets; `slack` widens the bands for small runs.
fn check(per_kind: usize, seed: u64, slack: f64) {
    let dir = tempfile::tempdir().unwrap();
    let (raw, percent, compounds) = campaign(per_kind, seed);
    let mut failures = Vec::new();
    for (name, text, args) in [("raw.csv", &raw, vec!["--normalise"]), ("percent.csv", &percent, vec![])] {
        let results = run(&dir, name, text, &args);
        let mut t = tally(&results, &compounds);
        println!("{name} ({} curves):\n{}\n{}\n", compounds.len(), table(&mut t), summary(&t));
        let s = summary(&t);
        let coverage = fraction(t.covered, t.coverable);
        let checks = [
            ("inactive called >", fraction(t.inactive_greater, t.inactive) >= 0.95 - slack),
            ("inactive never <", t.inactive_less == 0),
            ("potent never >", t.potent_greater == 0),
            ("one aberrant well within 0.3 log", fraction(t.one_within, t.one) >= 0.80 - slack),
            ("aberrant well listed", fraction(t.one_listed, t.one) >= 0.80 - slack),
            ("few clean curves lose a well", fraction(t.clean_excluded, t.clean) <= 0.05 + slack),
            ("interval coverage", (0.93 - slack..=0.97 + slack).contains(&coverage)),
        ];
        for (what, ok) in checks {
            if !ok {
                failures.push(format!("{name}: {what}: {s}"));
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}

#[test]
fn quick_campaign_meets_the_targets() {
    check(40, 2026, 0.05);
}

#[test]
#[ignore = "the full campaign (3,060 curves, both ways); run with --ignored --nocapture for the README table"]
fn full_campaign_meets_the_targets() {
    check(340, 9, 0.0);
}
