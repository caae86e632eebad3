//! `kimech ki`: the Cheng–Prusoff relations, the Morrison tight-binding
//! correction, the assumption flags and the per-row error handling.
//!
//! Sources named beside each check: Cheng & Prusoff, Biochem. Pharmacol. 22,
//! 3099–3108 (1973); Morrison, Biochim. Biophys. Acta 185, 269–286 (1969);
//! Copeland, *Evaluation of Enzyme Inhibitors in Drug Discovery*, 2nd ed.
//! (2013); the rate laws of Segel, *Enzyme Kinetics* (1975), as in DESIGN §4.

use approx::assert_relative_eq;
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;
use assert_cmd::Command;
use kimech::convert::relations::{self, Mechanism, apparent_constant, morrison_fraction};
use kimech::convert::{Assay, Conditions, Measurement, Settings, convert};
use kimech::units::Qualifier;
use serde_json::Value;

const NM: f64 = 1e-9;
const UM: f64 = 1e-6;
const MM: f64 = 1e-3;

fn kimech() -> Command {
    Command::cargo_bin("kimech").unwrap()
}

fn conditions(mechanism: Mechanism) -> Conditions {
    Conditions {
        assay: Assay::Enzyme,
        mechanism: Some(mechanism),
        substrate: None,
        km: None,
        km_se: None,
        enzyme: None,
        alpha: None,
        ligand: None,
        kd: None,
    }
}

fn exact(ic50: f64) -> Measurement {
    Measurement { qualifier: Qualifier::Equal, ic50, low: None, high: None, hill: None }
}

/// Runs `kimech ki` on `csv` with extra arguments and returns (exit code, JSON results).
fn run_json(csv: &str, args: &[&str]) -> (i32, Vec<Value>) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("in.csv");
    std::fs::write(&path, csv).unwrap();
    let out = kimech().arg("ki").arg(&path).args(args).args(["--format", "json"]).output().unwrap();
    let doc: Value = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {}", String::from_utf8_lossy(&out.stdout)));
    (out.status.code().unwrap_or(-1), doc["results"].as_array().unwrap().clone())
}

fn flags(row: &Value) -> Vec<String> {
    row["flags"].as_array().unwrap().iter().map(|f| f.as_str().unwrap().to_string()).collect()
}

// --- the relations against hand-worked numbers (Cheng & Prusoff 1973) ---------------------

/// Hand-worked example, mixed units: IC50 = 250 nM, S = 150 µM, Km = 0.05 mM (= 50 µM),
/// so S/Km = 3 and Km/S = 1/3. Cheng & Prusoff (1973), eqs. for each mechanism:
///   competitive     Ki  = 250 / (1 + 3)                    = 62.5 nM
///   uncompetitive   Kiu = 250 / (1 + 1/3)                  = 187.5 nM
///   noncompetitive  Ki  = 250 nM
///   mixed, α = 4    Ki  = 250 · (50 + 150/4) / (50 + 150)  = 250 · 87.5/200 = 109.375 nM
///   binding         Ki  = 40 nM / (1 + 2 nM / 0.5 nM)      = 8 nM
#[test]
fn each_relation_matches_hand_worked_numbers_in_mixed_units() {
    let (ic50, s, km) = (250.0 * NM, 150.0 * UM, 0.05 * MM);
    assert_relative_eq!(relations::competitive(ic50, s, km), 62.5 * NM, max_relative = 1e-14);
    assert_relative_eq!(relations::uncompetitive(ic50, s, km), 187.5 * NM, max_relative = 1e-14);
    assert_relative_eq!(relations::noncompetitive(ic50), 250.0 * NM, max_relative = 1e-14);
    assert_relative_eq!(relations::mixed(ic50, s, km, 4.0), 109.375 * NM, max_relative = 1e-14);
    assert_relative_eq!(relations::binding(40.0 * NM, 2.0 * NM, 0.5 * NM), 8.0 * NM, max_relative = 1e-14);
}

/// A row whose mechanism column says "none" (what `kimech mode` names a
/// compound that does not inhibit) keeps its place with an error: no Ki
/// follows from an IC50 without inhibition.
#[test]
fn a_row_stated_as_no_inhibition_is_an_error_row() {
    let csv = "compound,ic50 (nM),substrate (uM),km (uM),mechanism\nA,100,10,10,none\nB,100,10,10,Non-competitive\n";
    let (code, rows) = run_json(csv, &[]);
    assert_eq!(code, 3);
    assert!(rows[0]["ki"]["value"].is_null());
    assert!(rows[0]["error"].as_str().unwrap().contains("no inhibition"), "{}", rows[0]["error"]);
    assert_relative_eq!(rows[1]["ki"]["value"].as_f64().unwrap(), 100.0, max_relative = 1e-12);
}

/// The same numbers through the command, units written in cells and headers.
#[test]
fn the_command_converts_mixed_units() {
    let csv = "compound,ic50,substrate,km (mM),mechanism,alpha\n\
               A,250 nM,150 uM,0.05,competitive,\n\
               B,0.25 uM,150 uM,0.05,uncompetitive,\n\
               C,250 nM,150 uM,0.05,noncompetitive,\n\
               D,250 nM,0.15 mM,0.05,mixed,4\n";
    let (code, rows) = run_json(csv, &["--enzyme", "0.001 pM"]);
    assert_eq!(code, 0);
    let expect = [(62.5, "Ki"), (187.5, "Kiu"), (250.0, "Ki"), (109.375, "Ki")];
    for (row, (ki, endpoint)) in rows.iter().zip(expect) {
        // Et = 1 fM shifts the IC50 by 5e-7 nM: below the tolerance.
        assert_relative_eq!(row["ki"]["value"].as_f64().unwrap(), ki, max_relative = 1e-8);
        assert_eq!(row["ki"]["unit"], "nM");
        assert_eq!(row["endpoint"], endpoint);
        assert_eq!(row["mechanism_source"], "measured");
        assert_relative_eq!(row["pki"].as_f64().unwrap(), -(ki * NM).log10(), max_relative = 1e-8);
    }
    let (_, rows) = run_json(
        "compound,ic50 (nM),ligand (nM),kd (nM)\nE,40,2,0.5\n",
        &["--assay", "binding", "--mechanism", "competitive"],
    );
    assert_relative_eq!(rows[0]["ki"]["value"].as_f64().unwrap(), 8.0, max_relative = 1e-12);
    // --unit changes the reported unit only.
    let (_, rows) = run_json(
        "compound,ic50,substrate,km\nA,250 nM,150 uM,0.05 mM\n",
        &["--unit", "uM", "--mechanism", "competitive"],
    );
    assert_relative_eq!(rows[0]["ki"]["value"].as_f64().unwrap(), 0.0625, max_relative = 1e-12);
    assert_eq!(rows[0]["ki"]["unit"], "uM");
}

/// Independent check of every relation: the constant it returns, put back into
/// the rate law of its mechanism (DESIGN §4; Segel 1975), halves the rate at I = IC50.
#[test]
fn each_relation_halves_the_rate_law_at_the_ic50() {
    let (ic50, s, km, alpha) = (250.0 * NM, 150.0 * UM, 50.0 * UM, 4.0);
    let rate = |i: f64, kic: f64, kiu: f64| s / (km * (1.0 + i / kic) + s * (1.0 + i / kiu));
    let v0 = rate(0.0, f64::INFINITY, f64::INFINITY);
    let ki = relations::competitive(ic50, s, km);
    assert_relative_eq!(rate(ic50, ki, f64::INFINITY) / v0, 0.5, max_relative = 1e-12);
    let kiu = relations::uncompetitive(ic50, s, km);
    assert_relative_eq!(rate(ic50, f64::INFINITY, kiu) / v0, 0.5, max_relative = 1e-12);
    let ki = relations::noncompetitive(ic50);
    assert_relative_eq!(rate(ic50, ki, ki) / v0, 0.5, max_relative = 1e-12);
    let ki = relations::mixed(ic50, s, km, alpha);
    assert_relative_eq!(rate(ic50, ki, alpha * ki) / v0, 0.5, max_relative = 1e-12);
}

// --- limits (Cheng & Prusoff 1973; nesting of DESIGN §4) -----------------------------------

#[test]
fn limits_of_the_relations() {
    let (ic50, km) = (100.0 * NM, 10.0 * UM);
    // Competitive Ki → IC50 as S/Km → 0.
    for (ratio, tol) in [(1e-3, 1.1e-3), (1e-6, 1.1e-6), (1e-9, 1.1e-9)] {
        assert_relative_eq!(relations::competitive(ic50, ratio * km, km), ic50, max_relative = tol);
    }
    // Uncompetitive Kiu → IC50 as S/Km → ∞.
    for (ratio, tol) in [(1e3, 1.1e-3), (1e6, 1.1e-6), (1e9, 1.1e-9)] {
        assert_relative_eq!(relations::uncompetitive(ic50, ratio * km, km), ic50, max_relative = tol);
    }
    for s in [0.1 * km, km, 10.0 * km] {
        // Mixed at α = 1 is noncompetitive.
        assert_relative_eq!(relations::mixed(ic50, s, km, 1.0), relations::noncompetitive(ic50), max_relative = 1e-15);
        // Mixed → competitive as α → ∞.
        let comp = relations::competitive(ic50, s, km);
        assert_relative_eq!(relations::mixed(ic50, s, km, 1e3), comp, max_relative = 1e-2);
        assert_relative_eq!(relations::mixed(ic50, s, km, 1e9), comp, max_relative = 1e-8);
    }
}

// --- Morrison round trip (Morrison 1969; Copeland 2013) ------------------------------------

struct HalfActivity {
    enzyme: f64,
    kapp: f64,
}

impl CostFunction for HalfActivity {
    type Param = f64;
    type Output = f64;
    /// v/v0 − 1/2 at I = 10^u M.
    fn cost(&self, u: &f64) -> Result<f64, argmin::core::Error> {
        Ok(morrison_fraction(10f64.powf(*u), self.enzyme, self.kapp) - 0.5)
    }
}

/// Simulates v/v0 over a dilution series with the Morrison equation, brackets
/// the half-activity point on the grid, and refines it with Brent's method.
fn simulated_ic50(enzyme: f64, kapp: f64) -> f64 {
    let grid: Vec<f64> = (0..=240).map(|k| -13.0 + k as f64 * 0.05).collect(); // 1e-13 … 1e-1 M
    let curve: Vec<f64> = grid.iter().map(|&u| morrison_fraction(10f64.powf(u), enzyme, kapp)).collect();
    assert!(curve.windows(2).all(|w| w[1] <= w[0]), "v/v0 must fall with [I]");
    let k = curve.iter().position(|&f| f < 0.5).expect("the curve crosses 1/2");
    let (lo, hi) = (grid[k - 1], grid[k]);
    let run = Executor::new(HalfActivity { enzyme, kapp }, BrentRoot::new(lo, hi, 1e-14))
        .configure(|s| s.param(0.5 * (lo + hi)).max_iters(200))
        .run()
        .unwrap();
    10f64.powf(run.state.best_param.unwrap())
}

#[test]
fn morrison_round_trip_recovers_ki_and_shows_the_plain_error() {
    let (s, km, alpha) = (100.0 * UM, 50.0 * UM, 3.0);
    let enzyme = 10.0 * NM;
    for (mechanism, ki_true) in [
        (Mechanism::Competitive, 2.0 * NM),
        (Mechanism::Uncompetitive, 2.0 * NM),
        (Mechanism::Noncompetitive, 2.0 * NM),
        (Mechanism::Mixed, 2.0 * NM),
    ] {
        let kapp = apparent_constant(Some(mechanism), ki_true, s, km, alpha);
        let ic50 = simulated_ic50(enzyme, kapp);
        // Copeland (2013): IC50 = Kapp + Et/2 exactly under the Morrison model.
        assert_relative_eq!(ic50, kapp + enzyme / 2.0, max_relative = 1e-10);
        let c = Conditions {
            substrate: Some(s),
            km: Some(km),
            enzyme: Some(enzyme),
            alpha: Some(alpha),
            ..conditions(mechanism)
        };
        let back = convert(&exact(ic50), &c, &Settings::default()).unwrap();
        assert_relative_eq!(back.ki, ki_true, max_relative = 1e-9);
        assert!(back.flags.iter().any(|f| f.code == "tight-binding"), "{mechanism:?}");
        // Plain Cheng–Prusoff, Et ignored: for Ki = 2 nM at Et = 10 nM the answer is several-fold too high.
        let plain = convert(&exact(ic50), &Conditions { enzyme: None, ..c }, &Settings::default()).unwrap();
        // Ignoring Et overstates the constant by exactly (Kapp + Et/2)/Kapp.
        let off = plain.ki / ki_true;
        eprintln!(
            "{mechanism:?}: Et-corrected Ki = {:.9} nM, plain Cheng–Prusoff {:.4} nM ({off:.2}-fold too high)",
            back.ki / NM,
            plain.ki / NM
        );
        assert_relative_eq!(off, 1.0 + enzyme / (2.0 * kapp), max_relative = 1e-9);
        assert!(off > 1.5, "{mechanism:?}: plain Cheng–Prusoff is {off}-fold off");
    }
    // A weak binder (Ki = 5 µM, Et = 1 nM): the correction is negligible and both agree to 1e-4.
    let kapp = apparent_constant(Some(Mechanism::Competitive), 5.0 * UM, s, km, alpha);
    let ic50 = simulated_ic50(1.0 * NM, kapp);
    let c =
        Conditions { substrate: Some(s), km: Some(km), enzyme: Some(1.0 * NM), ..conditions(Mechanism::Competitive) };
    let with = convert(&exact(ic50), &c, &Settings::default()).unwrap().ki;
    let without = convert(&exact(ic50), &Conditions { enzyme: None, ..c }, &Settings::default()).unwrap().ki;
    assert_relative_eq!(with, 5.0 * UM, max_relative = 1e-9);
    assert_relative_eq!(without, with, max_relative = 1e-4);
}

// --- mechanism unknown ----------------------------------------------------------------------

#[test]
fn unknown_mechanism_gives_competitive_flagged_with_the_range() {
    let (code, rows) = run_json("compound,ic50,substrate,km\nA,250 nM,150 uM,50 uM\n", &[]);
    assert_eq!(code, 0);
    let r = &rows[0];
    assert_eq!(r["mechanism"], "competitive");
    assert_eq!(r["mechanism_source"], "assumed");
    assert!(flags(r).contains(&"mechanism-assumed".to_string()));
    assert_relative_eq!(r["ki"]["value"].as_f64().unwrap(), 62.5, max_relative = 1e-12);
    // Range over competitive (62.5), noncompetitive (250) and uncompetitive (187.5): 62.5 – 250 nM.
    assert_relative_eq!(r["range"]["low"].as_f64().unwrap(), 62.5, max_relative = 1e-12);
    assert_relative_eq!(r["range"]["high"].as_f64().unwrap(), 250.0, max_relative = 1e-12);
    assert!(r["method"].as_str().unwrap().contains("assumed"));
}

// --- qualifiers -----------------------------------------------------------------------------

#[test]
fn qualified_ic50_gives_a_qualified_ki_without_interval() {
    let csv = "compound,ic50,ic50_low,ic50_high,substrate,km\n\
               A,> 10 uM,,,50 uM,50 uM\n\
               B,<5nM,,,50 uM,50 uM\n\
               C,>=2 uM,,,50 uM,50 uM\n\
               D,~200 nM,150 nM,260 nM,50 uM,50 uM\n";
    let (_, rows) = run_json(csv, &["--mechanism", "competitive"]);
    // `~200 nM` stays approximate: `~` 100 nM, never a number pretending to be exact.
    let expect = [(">", 5000.0), ("<", 2.5), (">=", 1000.0), ("~", 100.0)];
    for (r, (q, v)) in rows.iter().zip(expect) {
        assert_eq!(r["ki"]["qualifier"], q, "{r}");
        assert_relative_eq!(r["ki"]["value"].as_f64().unwrap(), v, max_relative = 1e-12);
    }
    for r in &rows[..3] {
        assert!(r["ki"]["low"].is_null() && r["ki"]["high"].is_null());
        assert!(flags(r).contains(&"qualified-input".to_string()));
    }
    assert!(flags(&rows[3]).contains(&"approximate-input".to_string()));
    assert!(!flags(&rows[3]).contains(&"qualified-input".to_string()));
    assert!(rows[3]["ki"]["low"].is_number());
}

/// A curve `kimech ic50` called partial gives an error row naming the `call`
/// cell, never a Ki; the call column and the outlier flag are carried (issue 9).
#[test]
fn partial_curve_gives_an_error_row_and_the_outlier_flag_is_carried() {
    let csv = "compound,call,ic50,substrate,km,flags\n\
               A,partial,200 nM,50 uM,50 uM,partial-inhibition\n\
               B,full,200 nM,50 uM,50 uM,outlier-excluded\n";
    let (code, rows) = run_json(csv, &["--mechanism", "competitive"]);
    assert_eq!(code, 3);
    assert!(rows[0]["error"].as_str().unwrap().contains("column 'call'"), "{}", rows[0]);
    assert!(rows[0]["ki"].is_null() || rows[0]["ki"]["value"].is_null(), "{}", rows[0]);
    assert!(rows[1]["error"].is_null());
    assert!(flags(&rows[1]).contains(&"ic50-outlier-excluded".to_string()));
}

// --- flags: each fired by a row built for it, none by a clean row ---------------------------

#[test]
fn every_flag_fires_on_its_row_and_not_on_a_clean_row() {
    let csv = "compound,ic50,substrate,km,enzyme,mechanism,hill,assay,ligand,kd\n\
               clean,500 nM,50 uM,50 uM,1 nM,competitive,1.0,,,\n\
               tight,15 nM,50 uM,50 uM,5 nM,competitive,1.0,,,\n\
               unchecked,40 nM,50 uM,50 uM,,competitive,1.0,,,\n\
               assumed,500 nM,50 uM,50 uM,1 nM,,1.0,,,\n\
               steep,500 nM,50 uM,50 uM,1 nM,competitive,1.6,,,\n\
               shallow,500 nM,50 uM,50 uM,1 nM,competitive,0.6,,,\n\
               lowS,500 nM,2 uM,50 uM,1 nM,competitive,1.0,,,\n\
               highS,500 nM,1 mM,50 uM,1 nM,uncompetitive,1.0,,,\n\
               bound,> 30 uM,50 uM,50 uM,1 nM,competitive,1.0,,,\n\
               about,~500 nM,50 uM,50 uM,1 nM,competitive,1.0,,,\n\
               ligand,500 nM,,,,competitive,1.0,binding,50 nM,1 nM\n\
               cleanbinding,500 nM,,,,competitive,1.0,binding,1 nM,1 nM\n\
               noncomp-far,500 nM,1 mM,50 uM,1 nM,noncompetitive,1.0,,,\n";
    let (code, rows) = run_json(csv, &[]);
    assert_eq!(code, 0);
    let expect: [(&str, &[&str]); 13] = [
        ("clean", &[]),
        ("tight", &["tight-binding"]),
        ("unchecked", &["tight-binding-not-checked"]),
        ("assumed", &["mechanism-assumed"]),
        ("steep", &["hill-far-from-one"]),
        ("shallow", &["hill-far-from-one"]),
        ("lowS", &["substrate-far-from-km"]),
        ("highS", &["substrate-far-from-km"]),
        ("bound", &["qualified-input"]),
        ("about", &["approximate-input"]),
        ("ligand", &["ligand-far-from-kd"]),
        ("cleanbinding", &[]),
        // Noncompetitive Ki does not depend on S/Km, so S far from Km does not matter.
        ("noncomp-far", &[]),
    ];
    for (r, (name, want)) in rows.iter().zip(expect) {
        assert_eq!(r["compound"], name);
        assert_eq!(flags(r), want.iter().map(|s| s.to_string()).collect::<Vec<_>>(), "{name}: {r}");
        assert!(r["error"].is_null(), "{name}: {r}");
        assert_eq!(r["messages"].as_array().unwrap().len(), want.len());
    }
    // |log2 h| > 0.5 means h outside 2^±0.5 = 0.7071…1.4142 (common practice); 1.4 and 0.72 pass.
    let (_, rows) = run_json(
        "compound,ic50,hill\na,500 nM,1.4\nb,500 nM,0.72\nc,500 nM,1.5\n",
        &["--mechanism", "noncompetitive", "--enzyme", "1 nM"],
    );
    let hill = |r: &Value| flags(r).contains(&"hill-far-from-one".to_string());
    assert!(!hill(&rows[0]) && !hill(&rows[1]) && hill(&rows[2]));
    // The tolerance is an option.
    let (_, rows) = run_json(
        "compound,ic50,hill\nc,500 nM,1.5\n",
        &["--mechanism", "noncompetitive", "--enzyme", "1 nM", "--hill-tolerance", "0.6"],
    );
    assert!(!hill(&rows[0]));
}

// --- bad input ------------------------------------------------------------------------------

#[test]
fn bad_rows_get_an_error_and_the_others_still_convert() {
    let csv = "compound,ic50,substrate,km,enzyme,mechanism,alpha,assay,kd,ligand\n\
               good,500 nM,50 uM,50 uM,1 nM,competitive,,,,\n\
               below-et,4 nM,50 uM,50 uM,10 nM,competitive,,,,\n\
               zero,0 nM,50 uM,50 uM,1 nM,competitive,,,,\n\
               negative,-3 nM,50 uM,50 uM,1 nM,competitive,,,,\n\
               badunit,5 mg/L,50 uM,50 uM,1 nM,competitive,,,,\n\
               mixed-no-alpha,500 nM,50 uM,50 uM,1 nM,mixed,,,,\n\
               binding-no-kd,500 nM,,,,competitive,,binding,,2 nM\n\
               no-km,500 nM,50 uM,,1 nM,uncompetitive,,,,\n\
               zero-km,500 nM,50 uM,0 uM,1 nM,competitive,,,,\n\
               bad-mechanism,500 nM,50 uM,50 uM,1 nM,allosteric,,,,\n\
               good2,800 nM,50 uM,50 uM,1 nM,competitive,,,,\n";
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.csv");
    std::fs::write(&path, csv).unwrap();
    let out = kimech().arg("ki").arg(&path).args(["--format", "json"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "exit status says some rows failed");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        stderr.lines().filter(|l| l.starts_with("kimech: ") && l.contains(", line ")).count(),
        9,
        "one message per bad row: {stderr}"
    );
    assert!(stderr.contains("9 of 11 rows could not be processed"), "{stderr}");
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = doc["results"].as_array().unwrap();
    assert_eq!(rows.len(), 11, "one result per input row, in order");
    let error = |i: usize| rows[i]["error"].as_str().unwrap_or("").to_string();
    for i in [0, 10] {
        assert!(rows[i]["error"].is_null());
        assert!(rows[i]["ki"]["value"].is_number());
    }
    for (i, row) in rows.iter().enumerate().take(10).skip(1) {
        assert!(row["ki"]["value"].is_null(), "{row}");
        assert!(row["pki"].is_null());
        assert!(error(i).contains(&format!("line {}", i + 2)), "{}", error(i));
    }
    assert!(error(1).contains("Et/2") && error(1).contains("not above"), "{}", error(1));
    assert!(error(2).contains("IC50 is 0 nM") && error(2).contains("not positive"), "{}", error(2));
    assert!(error(3).contains("IC50 is -3.000 nM, not positive"), "{}", error(3));
    assert!(error(4).contains("mg/L") && error(4).contains("'ic50'"), "{}", error(4));
    assert!(error(5).contains("'alpha'") && error(5).contains("--alpha"), "{}", error(5));
    assert!(error(6).contains("'kd'") && error(6).contains("--kd"), "{}", error(6));
    assert!(error(7).contains("'km'") && error(7).contains("uncompetitive"), "{}", error(7));
    assert!(error(8).contains("Km is 0 nM"), "{}", error(8));
    assert!(error(9).contains("allosteric") && error(9).contains("competitive, uncompetitive"), "{}", error(9));
    // The row numbers are the input's line numbers.
    assert_eq!(rows[0]["row"], 2);
    assert_eq!(rows[10]["row"], 12);
}

#[test]
fn a_missing_condition_names_its_column_and_flag() {
    let (code, rows) = run_json("compound,ic50\nA,250 nM\n", &["--mechanism", "competitive"]);
    assert_eq!(code, 3);
    let e = rows[0]["error"].as_str().unwrap();
    assert!(e.contains("'substrate'") && e.contains("--substrate"), "{e}");
    // Km's SE without a unit of its own is read in Km's header unit: (0.25 / 4) with SE 10% of Km.
    let (_, rows) =
        run_json("compound,ic50,substrate (uM),km (uM),km_se\nA,250 nM,150,50,5\n", &["--mechanism", "competitive"]);
    assert!(rows[0]["error"].is_null(), "{}", rows[0]);
    assert!(rows[0]["ki"]["low"].is_number());
    // The flag default fills the gap.
    let (code, rows) = run_json(
        "compound,ic50\nA,250 nM\n",
        &["--mechanism", "competitive", "--substrate", "150 uM", "--km", "0.05 mM"],
    );
    assert_eq!(code, 0);
    assert_relative_eq!(rows[0]["ki"]["value"].as_f64().unwrap(), 62.5, max_relative = 1e-12);
}

#[test]
fn a_bad_unit_on_the_command_line_is_a_usage_error() {
    let out = kimech().args(["ki", "x.csv", "--substrate", "50 mg"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
}

// --- the JSON contract ----------------------------------------------------------------------

#[test]
fn json_follows_the_contract() {
    let (_, rows) = run_json(
        "compound,ic50,substrate,km\nA,250 nM,150 uM,50 uM\nB,,150 uM,50 uM\n",
        &["--mechanism", "competitive", "--enzyme", "1 nM"],
    );
    for r in &rows {
        let o = r.as_object().unwrap();
        for key in
            ["row", "compound", "ki", "pki", "endpoint", "method", "mechanism", "mechanism_source", "flags", "error"]
        {
            assert!(o.contains_key(key), "missing {key}: {r}");
        }
        let ki = r["ki"].as_object().unwrap();
        for key in ["value", "unit", "qualifier", "low", "high"] {
            assert!(ki.contains_key(key), "missing ki.{key}");
        }
        assert!(r["row"].is_u64());
        assert!(["=", ">", "<", ">=", "<="].contains(&r["ki"]["qualifier"].as_str().unwrap()));
        assert!(["Ki", "Kiu"].contains(&r["endpoint"].as_str().unwrap()));
        assert!(["measured", "assumed"].contains(&r["mechanism_source"].as_str().unwrap()));
        assert!(r["method"].is_string() && r["mechanism"].is_string() && r["flags"].is_array());
    }
    assert!(rows[0]["error"].is_null());
    assert!(rows[1]["error"].as_str().unwrap().contains("empty cell"));
    assert!(rows[1]["ki"]["value"].is_null());
    // When the IC50 step left an error column, that reason is passed on.
    let (_, rows) = run_json(
        "compound,ic50 (nM),error
A,,fit did not converge
",
        &["--mechanism", "noncompetitive"],
    );
    let e = rows[0]["error"].as_str().unwrap();
    assert!(e.contains("fit did not converge") && e.contains("line 2"), "{e}");
}

// --- reading what `kimech ic50` writes ------------------------------------------------------

#[test]
fn reads_the_ic50_output_layout_and_carries_unknown_columns() {
    let csv = "compound,target,ic50 (nM),ic50_low (nM),ic50_high (nM),hill,pic50,substrate (uM),km (uM),enzyme (nM),warnings\n\
               KX-101,VRD7,120,100,150,1.02,6.92,50,50,2,\n\
               KX-102,VRD7,>10000,,,,,50,50,2,ic50-above-range\n\
               KX-103,VRD7,=HYPERLINK(1),,,,,50,50,2,\n";
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ic50.csv");
    std::fs::write(&path, csv).unwrap();
    let out = kimech().arg("ki").arg(&path).args(["--mechanism", "competitive", "--format", "csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "KX-103 has no IC50 number");
    let mut reader = csv::Reader::from_reader(&out.stdout[..]);
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    assert!(header.contains(&"ki (nM)".to_string()), "{header:?}");
    assert!(header.contains(&"pic50".to_string()) && header.contains(&"warnings".to_string()), "{header:?}");
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    // (120 − 1)/(1 + 1) = 59.5 nM; interval (100 − 1)/2 … (150 − 1)/2 = 49.5 … 74.5 nM.
    assert_relative_eq!(rows[0][col("ki (nM)")].parse::<f64>().unwrap(), 59.5, max_relative = 1e-12);
    assert_relative_eq!(rows[0][col("ki_low (nM)")].parse::<f64>().unwrap(), 49.5, max_relative = 1e-12);
    assert_relative_eq!(rows[0][col("ki_high (nM)")].parse::<f64>().unwrap(), 74.5, max_relative = 1e-12);
    assert_eq!(&rows[0][col("target")], "VRD7");
    assert_eq!(&rows[0][col("qualifier")], "", "exact is an empty qualifier cell");
    assert_eq!(&rows[1][col("qualifier")], ">");
    assert_relative_eq!(rows[1][col("ki (nM)")].parse::<f64>().unwrap(), 4999.5, max_relative = 1e-12);
    assert_eq!(&rows[1][col("warnings")], "ic50-above-range");
    assert!(rows[1][col("flags")].contains("qualified-input"));
    assert!(!rows[2][col("error")].is_empty());
    for row in &rows {
        for cell in row.iter() {
            assert!(!cell.starts_with(['=', '+', '-', '@', '\t', '\r']), "unguarded cell {cell:?}");
        }
    }
}

// --- uncertainty ----------------------------------------------------------------------------

/// Hand calculation of the propagated interval (module docs of src/convert):
/// competitive, IC50 250 nM (200 … 320 nM), S 150 µM, Km 50 ± 5 µM.
/// ∂ln Ki/∂ln Km = r/(1 + r) = 0.75 (r = S/Km = 3); SE(ln Km) = 0.1; z = 1.959964;
/// Km part k = 0.75·0.1·1.959964 = 0.1469973; IC50 parts ln(250/200), ln(320/250).
#[test]
fn the_interval_adds_km_error_in_quadrature_on_the_log_scale() {
    let m = Measurement {
        qualifier: Qualifier::Equal,
        ic50: 250.0 * NM,
        low: Some(200.0 * NM),
        high: Some(320.0 * NM),
        hill: None,
    };
    let c = Conditions {
        substrate: Some(150.0 * UM),
        km: Some(50.0 * UM),
        km_se: Some(5.0 * UM),
        ..conditions(Mechanism::Competitive)
    };
    let r = convert(&m, &c, &Settings::default()).unwrap();
    let k = 0.75 * 0.1 * 1.959_963_985;
    let low = 62.5 * NM * (-(1.25f64.ln()).hypot(k)).exp();
    let high = 62.5 * NM * (1.28f64.ln()).hypot(k).exp();
    assert_relative_eq!(r.low.unwrap(), low, max_relative = 1e-8);
    assert_relative_eq!(r.high.unwrap(), high, max_relative = 1e-8);
    // A lower IC50 end of zero (or at or below Et/2) leaves the Ki interval open towards zero.
    let open = Measurement { low: Some(0.0), ..m };
    let r = convert(&open, &c, &Settings::default()).unwrap();
    assert!(r.low.is_none() && r.high.is_some());
    let below = Measurement { low: Some(0.4 * NM), ..m };
    let r = convert(&below, &Conditions { enzyme: Some(1.0 * NM), ..c }, &Settings::default()).unwrap();
    assert!(r.low.is_none() && r.high.is_some());
    // A negative end is an error.
    assert!(convert(&Measurement { low: Some(-NM), ..m }, &c, &Settings::default()).is_err());
    // Without Km's SE the IC50 ends map straight through the relation: 50 … 80 nM.
    let r = convert(&m, &Conditions { km_se: None, ..c }, &Settings::default()).unwrap();
    assert_relative_eq!(r.low.unwrap(), 50.0 * NM, max_relative = 1e-12);
    assert_relative_eq!(r.high.unwrap(), 80.0 * NM, max_relative = 1e-12);
}

/// Simulation (fixed seed): the IC50 is measured with log-normal error of known
/// σ and reported with its 95% interval; Km is estimated with normal error of
/// known SE. The propagated 95% Ki interval should cover the true Ki about 95% of the time.
#[test]
fn the_propagated_interval_covers_the_true_ki_in_simulation() {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let mut rng = rand::rngs::StdRng::seed_from_u64(20261201);
    let (ki_true, s, km_true, km_se) = (40.0 * NM, 100.0 * UM, 50.0 * UM, 7.0 * UM);
    let ic50_true = ki_true * (1.0 + s / km_true);
    let sigma: f64 = 0.10; // ln-scale SE of the IC50
    let z = 1.959_963_985;
    let e: Normal<f64> = Normal::new(0.0, 1.0).unwrap();
    let trials = 4000;
    let mut covered = 0;
    for _ in 0..trials {
        let ic50 = ic50_true * (sigma * e.sample(&mut rng)).exp();
        let km = km_true + km_se * e.sample(&mut rng);
        let m = Measurement {
            qualifier: Qualifier::Equal,
            ic50,
            low: Some(ic50 * (-z * sigma).exp()),
            high: Some(ic50 * (z * sigma).exp()),
            hill: None,
        };
        let c =
            Conditions { substrate: Some(s), km: Some(km), km_se: Some(km_se), ..conditions(Mechanism::Competitive) };
        let r = convert(&m, &c, &Settings::default()).unwrap();
        if r.low.unwrap() <= ki_true && ki_true <= r.high.unwrap() {
            covered += 1;
        }
    }
    let coverage = covered as f64 / trials as f64;
    eprintln!("coverage of the 95% Ki interval: {coverage:.4} over {trials} trials");
    // Binomial SE at 0.95 over 4000 trials is 0.0034; the band also allows for the delta
    // method's linearisation, which errs on the conservative side here (0.963 with this seed).
    // Leaving Km's SE out would give about 0.85 (σ 0.100 instead of 0.137).
    assert!((0.935..=0.97).contains(&coverage), "coverage {coverage}");
}

#[test]
fn the_human_report_states_method_mechanism_and_caution() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.csv");
    std::fs::write(&path, "compound,ic50,substrate,km\nA,250 nM,150 uM,50 uM\n").unwrap();
    let out = kimech().arg("ki").arg(&path).output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("competitive (assumed)"), "{text}");
    assert!(text.contains("Ki = IC50/(1 + S/Km) (Cheng & Prusoff 1973)"), "{text}");
    assert!(text.contains(kimech::cli::CAUTION), "{text}");
    // Writing over the input is refused.
    let out = kimech().arg("ki").arg(&path).arg("-o").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(std::fs::read_to_string(&path).unwrap().starts_with("compound,ic50"));
}

#[test]
fn dose_response_flags_that_undermine_the_conversion_are_carried_into_ki() {
    // Cheng & Prusoff (1973) assume complete inhibition: a partial inhibitor's
    // IC50 converts to a number that is not a Ki of a full inhibitor.
    let csv = "compound,ic50 (nM),substrate (uM),km (uM),mechanism,flags\n\
               partial,100,10,10,competitive,partial-inhibition;hill-shallow\n\
               clean,100,10,10,competitive,\n";
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ic50.csv");
    std::fs::write(&path, csv).unwrap();
    let out = kimech().arg("ki").arg(&path).args(["--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let flags = |i: usize| {
        doc["results"][i]["flags"]
            .as_array()
            .unwrap()
            .iter()
            .map(|f| f.as_str().unwrap().to_string())
            .collect::<Vec<_>>()
    };
    assert!(flags(0).contains(&"partial-inhibition".to_string()), "{:?}", flags(0));
    assert!(!flags(1).contains(&"partial-inhibition".to_string()), "{:?}", flags(1));
}
