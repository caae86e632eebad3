//! `kimech plan`: the checks on simulated designs, agreement with an
//! independent simulation (numpy matrices named by `kimech mode`,
//! tests/reference/plan_reference.py → fixtures/reference/plan_reference.json),
//! the suggestion within a budget, determinism for a seed whatever the thread
//! count, and the output shapes.
//!
//! Every data set here is simulated (fixed seeds); nobody measured it. The
//! counts are modest so that the file runs in seconds in release; the bounds
//! leave room for the binomial error of those counts (stated at each check).
//! Larger runs for the README figures are in the ignored `measured_figures`.

mod common;

use common::{fixture_json, kimech};
use kimech::analysis::mode::Options;
use kimech::analysis::plan::{
    Constants, Design, Noise, PlanResult, SearchSettings, Settings, Truth, plan, run_truth, suggest, tally,
};
use predicates::prelude::*;

const KM: f64 = 20.0;
const KI: f64 = 0.5;

fn constants() -> Constants {
    Constants { vmax: 10.0, km: KM, ki: KI, alpha: 4.0, partial_beta: None }
}

fn settings(simulations: usize, noise: Noise, seed: u64) -> Settings {
    Settings { simulations, sensitivity_simulations: 0, seed, noise, mode: Options::default() }
}

fn log_levels(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n).map(|k| (lo.ln() + (hi / lo).ln() * k as f64 / (n - 1) as f64).exp()).collect()
}

/// The classic grid of the issue: S 0.25–8 × Km (6 levels), I 0–4 × Ki
/// (0, 0.5, 1, 2, 4 × Ki), duplicates.
fn classic() -> Design {
    Design {
        substrate: log_levels(0.25 * KM, 8.0 * KM, 6),
        inhibitor: [0.0, 0.5, 1.0, 2.0, 4.0].iter().map(|f| f * KI).collect(),
        replicates: 2,
    }
}

/// Share of `n` simulated matrices of `truth` on which `mode` names it.
fn right_share(design: &Design, truth: Truth, n: usize, noise: Noise, seed: u64) -> f64 {
    tally(truth, &run_truth(design, &constants(), truth, n, &settings(n, noise, seed), &())).right
}

/// Issue check: inhibitor ≤ 0.05 × Ki cannot show competitive inhibition.
/// Measured 0.075 (3 of these 40 matrices); the bound is the 0.5.
#[test]
fn inhibitor_far_below_ki_gives_a_low_chance_of_naming_competitive() {
    let design = Design {
        substrate: log_levels(0.25 * KM, 8.0 * KM, 6),
        inhibitor: [0.0, 0.0125, 0.025, 0.05].iter().map(|f| f * KI).collect(),
        replicates: 2,
    };
    let share = right_share(&design, Truth::Competitive, 40, Noise::Proportional(0.05), 11);
    println!("inhibitor ≤ 0.05 × Ki: competitive named in {share:.3}");
    assert!(share <= 0.5, "competitive named in {share} of matrices with I ≤ 0.05 × Ki");
}

/// Issue check: the classic grid with 5 % noise names competitive ≥ 0.85 of
/// the time (the README's `mode` simulation measured 97.8 % on a similar grid;
/// 60 matrices here, so the binomial SE at 0.95 is ≈ 0.03).
#[test]
fn classic_grid_gives_a_high_chance_of_naming_competitive() {
    let share = right_share(&classic(), Truth::Competitive, 60, Noise::Proportional(0.05), 12);
    println!("classic grid: competitive named in {share:.3}");
    assert!(share >= 0.85, "competitive named in only {share} of classic-grid matrices");
}

/// The predicted shares agree with the independent numpy simulation within
/// 3 combined binomial SEs (pooled p; a floor of one matrix in either count
/// keeps a 0-vs-0 or 1-vs-1 comparison from demanding exact equality).
#[test]
fn shares_agree_with_the_independent_simulation() {
    let reference = fixture_json("reference/plan_reference.json");
    let designs = reference["designs"].as_object().expect("designs");
    assert!(designs.len() >= 2);
    let n = 40;
    for (name, entry) in designs {
        let d = &entry["design"];
        let list = |k: &str| d[k].as_array().unwrap().iter().map(|v| v.as_f64().unwrap()).collect::<Vec<_>>();
        let design = Design { substrate: list("substrate"), inhibitor: list("inhibitor"), replicates: 2 };
        let size = d["noise"][1].as_f64().unwrap();
        let noise = if d["noise"][0] == "proportional" { Noise::Proportional(size) } else { Noise::Constant(size) };
        let c = Constants {
            vmax: d["vmax"].as_f64().unwrap(),
            km: d["km"].as_f64().unwrap(),
            ki: d["ki"].as_f64().unwrap(),
            alpha: d["alpha"].as_f64().unwrap(),
            partial_beta: None,
        };
        let result = plan(&design, &c, &settings(n, noise, 2026), &()).unwrap();
        for row in &result.power {
            let truth = &entry["truths"][row.truth.name()];
            let n_ref = truth["n"].as_f64().unwrap();
            for (call, ours) in serde_json::to_value(&row.named).unwrap().as_object().unwrap() {
                let ours = ours.as_f64().unwrap();
                let theirs = truth["named"][call].as_f64().unwrap_or(0.0);
                let pooled = (ours * n as f64 + theirs * n_ref) / (n as f64 + n_ref);
                let floor = 1.0 / n as f64;
                let se = (pooled * (1.0 - pooled) * (1.0 / n as f64 + 1.0 / n_ref)).sqrt().max(floor);
                assert!(
                    (ours - theirs).abs() <= 3.0 * se,
                    "{name}, truth {}: '{call}' {ours:.3} here vs {theirs:.3} in numpy (3 SE = {:.3})",
                    row.truth.name(),
                    3.0 * se
                );
            }
        }
    }
}

/// Issue check: for a poor grid (inhibitor up to 0.1 × Ki, substrate only
/// above Km, single wells) the best suggestion within the same budget raises
/// the mean chance of naming the right mechanism by ≥ 0.3.
#[test]
fn suggestion_raises_the_chance_within_the_budget() {
    let poor = Design {
        substrate: vec![40.0, 60.0, 80.0, 120.0, 160.0],
        inhibitor: vec![0.0, 0.0125, 0.025, 0.05],
        replicates: 2,
    };
    let s = settings(12, Noise::Proportional(0.05), 5);
    let base = plan(&poor, &constants(), &s, &()).unwrap();
    let search = SearchSettings { wells: poor.wells(), screening: 4, finalists: 1 };
    let found = suggest(&base, &s, &search, &()).unwrap();
    let best = &found.suggestions[0];
    println!("poor grid {:.2} → suggestion {:.2}: {:?}", base.mean_right, best.mean_right, best.reasons);
    assert!(best.wells <= poor.wells());
    assert!(
        best.mean_right >= base.mean_right + 0.3,
        "suggestion {:.2} vs given {:.2}: {:?}",
        best.mean_right,
        base.mean_right,
        best.reasons
    );
    assert!(best.reasons.iter().any(|r| r.contains("inhibitor range now reaches")), "{:?}", best.reasons);
}

fn plan_args(dir: &std::path::Path, extra: &[&str]) -> assert_cmd::Command {
    let mut flags: Vec<(&str, &str)> = vec![
        ("--km", "20 uM"),
        ("--ki", "500 nM"),
        ("--substrate", "5,10,20,40,80,160 uM"),
        ("--inhibitor", "0,250,500,1000,2000 nM"),
        ("--replicates", "2"),
        ("--noise", "5%"),
        ("--simulations", "6"),
        ("--sensitivity-simulations", "2"),
    ];
    let mut rest = Vec::new();
    let mut k = 0;
    while k < extra.len() {
        match flags.iter_mut().find(|(name, _)| *name == extra[k]) {
            Some(flag) if k + 1 < extra.len() => {
                flag.1 = extra[k + 1];
                k += 2;
            }
            _ => {
                rest.push(extra[k]);
                k += 1;
            }
        }
    }
    let mut cmd = kimech(dir);
    cmd.arg("plan");
    for (name, value) in flags {
        cmd.args([name, value]);
    }
    cmd.args(rest);
    cmd
}

fn without_provenance(mut v: serde_json::Value) -> serde_json::Value {
    v.as_object_mut().unwrap().remove("provenance");
    v
}

/// The same seed gives the same answer with one thread or two; another seed does not.
#[test]
fn deterministic_for_a_seed_whatever_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let run = |threads: &str, seed: &str| {
        let out = plan_args(dir.path(), &["--format", "json", "--seed", seed])
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        without_provenance(serde_json::from_slice(&out.stdout).unwrap())
    };
    let one = run("1", "7");
    assert_eq!(one, run("2", "7"));
    // A different seed draws different matrices: the Ki widths differ.
    let widths = |v: &serde_json::Value| {
        v["power"].as_array().unwrap().iter().map(|r| r["ki_width_median"].clone()).collect::<Vec<_>>()
    };
    assert_ne!(widths(&one), widths(&run("2", "8")));
}

/// JSON holds the fields, the design in the flags' units converted to Km's and Ki's, and provenance.
#[test]
fn json_has_design_power_sensitivity_and_provenance() {
    let dir = tempfile::tempdir().unwrap();
    let out = plan_args(dir.path(), &["--format", "json"]).output().unwrap();
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["design"]["inhibitor"], serde_json::json!([0.0, 250.0, 500.0, 1000.0, 2000.0]));
    assert_eq!(v["design"]["inhibitor_unit"], "nM");
    assert_eq!(v["design"]["wells"], 60);
    assert_eq!(v["design"]["weighting"], "relative");
    let power = v["power"].as_array().unwrap();
    let truths: Vec<&str> = power.iter().map(|r| r["truth"].as_str().unwrap()).collect();
    assert_eq!(truths, ["none", "competitive", "uncompetitive", "noncompetitive", "mixed"]);
    for r in power {
        let total: f64 = r["named"].as_object().unwrap().values().map(|s| s.as_f64().unwrap()).sum();
        assert!((total - 1.0).abs() < 1e-12);
        assert!(r["uncertain"].is_number());
        assert!(r.get("ki_width_median").is_some() && r.get("ki_width_p90").is_some());
    }
    assert_eq!(v["sensitivity"].as_array().unwrap().len(), 5);
    assert!(v.get("suggestions").is_none());
    assert!(v["caution"].as_str().unwrap().contains("guesses"));
    assert!(v["provenance"]["command"].is_array());
}

/// The table says the constants are guesses, gives the sensitivity line; CSV has one row per truth.
#[test]
fn table_and_csv_carry_the_caution_and_one_row_per_truth() {
    let dir = tempfile::tempdir().unwrap();
    plan_args(dir.path(), &[])
        .assert()
        .success()
        .stdout(predicate::str::contains("guesses"))
        .stdout(predicate::str::contains("if Ki is 3× lower"))
        .stdout(predicate::str::contains("research estimates"));
    let out = plan_args(dir.path(), &["--format", "csv", "-o", "plan.csv"]).output().unwrap();
    assert!(out.status.success());
    let text = std::fs::read_to_string(dir.path().join("plan.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert!(lines[0].starts_with("grid,substrate,inhibitor,replicates,wells,truth,simulations,named_none"));
    assert_eq!(lines.len(), 6);
}

/// `--plot` writes the confusion heatmaps and the grid chart; `--report` a page with the tables.
#[test]
fn plot_and_report_show_the_confusion_and_the_proposed_grid() {
    let dir = tempfile::tempdir().unwrap();
    let flags = ["--simulations", "2", "--sensitivity-simulations", "0", "--suggest", "--wells", "30"];
    plan_args(dir.path(), &flags)
        .args(["--screening", "1", "--plot", "pics", "--report", "plan.html", "-o", "plan.txt"])
        .assert()
        .success();
    let heatmap = std::fs::read_to_string(dir.path().join("pics/plan-confusion.svg")).unwrap();
    assert!(heatmap.contains("<svg") && heatmap.contains("noncompetitive") && heatmap.contains("share of calls"));
    let grid = std::fs::read_to_string(dir.path().join("pics/plan-grid.svg")).unwrap();
    assert!(grid.contains("proposed") && grid.contains("substrate (uM)") && grid.contains("inhibitor (nM)"));
    assert!(dir.path().join("pics/plan-suggestion-1.svg").exists());
    let page = std::fs::read_to_string(dir.path().join("plan.html")).unwrap();
    assert!(page.contains("Suggested grids within 30 wells") && page.contains("<svg") && page.contains("guesses"));
    let text = std::fs::read_to_string(dir.path().join("plan.txt")).unwrap();
    assert!(text.contains("Suggested grids within 30 wells"));
}

#[test]
fn fails_with_a_list_without_unit() {
    let dir = tempfile::tempdir().unwrap();
    kimech(dir.path())
        .args(["plan", "--km", "20 uM", "--ki", "0.5 uM", "--substrate", "5,10,20", "--inhibitor", "0,1 uM"])
        .args(["--noise", "5%"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("has no unit"));
}

#[test]
fn fails_with_unreadable_noise_and_suggest_without_budget() {
    let dir = tempfile::tempdir().unwrap();
    plan_args(dir.path(), &["--noise", "five"]).assert().failure().stderr(predicate::str::contains("percentage"));
    plan_args(dir.path(), &["--suggest"]).assert().failure().stderr(predicate::str::contains("--wells"));
}

#[test]
fn fails_with_one_inhibitor_level() {
    let dir = tempfile::tempdir().unwrap();
    plan_args(dir.path(), &["--inhibitor", "0 uM"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("inhibitor levels"));
}

/// Figures for the README: the classic and issue-example grids at 400
/// simulations per mechanism (`cargo test --release --test plan -- --ignored --nocapture`).
#[test]
#[ignore]
fn measured_figures() {
    for (name, design) in [
        ("classic", classic()),
        (
            "issue example",
            Design {
                substrate: vec![5.0, 10.0, 20.0, 40.0, 80.0, 160.0],
                inhibitor: vec![0.0, 0.25, 0.5, 1.0, 2.0],
                replicates: 2,
            },
        ),
    ] {
        let t = std::time::Instant::now();
        let r: PlanResult = plan(&design, &constants(), &settings(400, Noise::Proportional(0.05), 1), &()).unwrap();
        for row in &r.power {
            println!(
                "{name}: {} right {:.3} ± {:.3}, uncertain {:.3}, width median {:?} p90 {:?}",
                row.truth.name(),
                row.right,
                row.right_se,
                row.uncertain,
                row.ki_width_median,
                row.ki_width_p90
            );
        }
        println!("{name}: mean {:.3} in {:.1} s", r.mean_right, t.elapsed().as_secs_f64());
    }
}
