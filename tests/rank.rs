//! `kimech rank`: aggregation against hand-computed means, the censoring
//! rules, ranking, selectivity, ligand efficiency (Hopkins, Groom & Alex,
//! Drug Discov. Today 9, 430–431, 2004), and the registry export with its
//! formula-injection guard (OWASP, "CSV Injection").

use approx::assert_relative_eq;
use assert_cmd::Command;
use serde_json::Value;

fn kimech() -> Command {
    Command::cargo_bin("kimech").unwrap()
}

struct Run {
    code: i32,
    stdout: Vec<u8>,
    stderr: String,
}

fn run(csv: &str, args: &[&str]) -> Run {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ki.csv");
    std::fs::write(&path, csv).unwrap();
    let out = kimech().arg("rank").arg(&path).args(args).output().unwrap();
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: out.stdout,
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn json(csv: &str, args: &[&str]) -> (i32, Vec<Value>) {
    let r = run(csv, &[args, &["--format", "json"]].concat());
    let doc: Value = serde_json::from_slice(&r.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {} {}", String::from_utf8_lossy(&r.stdout), r.stderr));
    (r.code, doc["results"].as_array().unwrap().clone())
}

fn find<'a>(rows: &'a [Value], compound: &str, target: &str) -> &'a Value {
    rows.iter().find(|r| r["compound"] == compound && r["target"] == target).unwrap()
}

fn codes(row: &Value) -> Vec<String> {
    row["flags"].as_array().unwrap().iter().map(|f| f["code"].as_str().unwrap().to_string()).collect()
}

fn registry(csv: &str, args: &[&str]) -> (Vec<String>, Vec<csv::StringRecord>) {
    let r = run(csv, &[args, &["--format", "csv"]].concat());
    assert_eq!(r.code, 0, "{}", r.stderr);
    let mut reader = csv::Reader::from_reader(&r.stdout[..]);
    let header = reader.headers().unwrap().iter().map(String::from).collect();
    (header, reader.records().map(Result::unwrap).collect())
}

/// Hand computation: Ki 10, 100, 1000 nM → pKi 8, 7, 6; mean 7, sample SD 1,
/// geometric mean 100 nM, n = 3. 95% interval: t(0.975; 2) = 4.302653 (any
/// t table), half-width 4.302653/√3 = 2.484138 in pKi, so Ki from
/// 10^(2 − 2.484138) = 0.32803 nM to 10^(2 + 2.484138) = 30484 nM.
#[test]
fn aggregates_repeats_on_the_log_scale() {
    let csv = "compound,target,ki (nM),method,mechanism\n\
               A,T,10,m,competitive\n\
               A,T,100,m,competitive\n\
               A,T,1000,m,competitive\n\
               B,T,30,m,competitive\n\
               B,T,0.3 uM,m,competitive\n";
    let (code, rows) = json(csv, &[]);
    assert_eq!(code, 0);
    let a = find(&rows, "A", "T");
    assert_relative_eq!(a["pki"].as_f64().unwrap(), 7.0, max_relative = 1e-12);
    assert_relative_eq!(a["pki_sd"].as_f64().unwrap(), 1.0, max_relative = 1e-12);
    assert_relative_eq!(a["ki"].as_f64().unwrap(), 100.0, max_relative = 1e-12);
    assert_eq!(a["n"], 3);
    assert_relative_eq!(a["low"].as_f64().unwrap(), 10f64.powf(2.0 - 2.484138), max_relative = 1e-5);
    assert_relative_eq!(a["high"].as_f64().unwrap(), 10f64.powf(2.0 + 2.484138), max_relative = 1e-5);
    // B: 30 nM and 300 nM (unit in the cell) → pKi 7.5229 and 6.5229, mean 7.0229, geometric mean √(30·300) = 94.868 nM,
    // SD = 1/√2 = 0.70711 → flagged as disagreeing repeats (more than 0.5, common practice).
    let b = find(&rows, "B", "T");
    assert_relative_eq!(b["ki"].as_f64().unwrap(), (30.0f64 * 300.0).sqrt(), max_relative = 1e-12);
    assert_relative_eq!(b["pki_sd"].as_f64().unwrap(), 0.5f64.sqrt(), max_relative = 1e-12);
    assert!(codes(b).contains(&"replicates-disagree".to_string()));
    // Ranked most potent first: B (7.0229) above A (7.0).
    assert_eq!(b["rank"], 1);
    assert_eq!(a["rank"], 2);
}

#[test]
fn exact_values_are_averaged_and_bounds_reported_beside_them() {
    let csv = "compound,target,ki,qualifier,method,mechanism\n\
               A,T,20 nM,,m,c\n\
               A,T,80 nM,=,m,c\n\
               A,T,10 uM,>,m,c\n\
               B,T,20 nM,,m,c\n\
               B,T,1 uM,<,m,c\n";
    let (_, rows) = json(csv, &[]);
    let a = find(&rows, "A", "T");
    // Geometric mean of 20 and 80 nM is 40 nM; the bound > 10 µM is set aside and contradicts it.
    assert_relative_eq!(a["ki"].as_f64().unwrap(), 40.0, max_relative = 1e-12);
    assert_eq!(a["qualifier"], "=");
    assert_eq!((a["n"].as_u64(), a["n_censored"].as_u64()), (Some(2), Some(1)));
    assert_eq!(a["censored"][0]["qualifier"], ">");
    assert_relative_eq!(a["censored"][0]["value"].as_f64().unwrap(), 10000.0, max_relative = 1e-12);
    assert!(codes(a).contains(&"censored-set-aside".to_string()));
    assert!(codes(a).contains(&"censored-disagrees".to_string()));
    // B: < 1 µM agrees with 20 nM.
    let b = find(&rows, "B", "T");
    assert_relative_eq!(b["ki"].as_f64().unwrap(), 20.0, max_relative = 1e-12);
    assert!(codes(b).contains(&"censored-set-aside".to_string()));
    assert!(!codes(b).contains(&"censored-disagrees".to_string()));
}

#[test]
fn all_censored_groups_report_the_tightest_bound() {
    let csv = "compound,target,ki (nM),qualifier,method,mechanism\n\
               low,T,1000,>,m,c\n\
               low,T,10000,>=,m,c\n\
               low,T,10000,>,m,c\n\
               up,T,5,<,m,c\n\
               up,T,50,<,m,c\n\
               range,T,1000,>,m,c\n\
               range,T,10000,<,m,c\n\
               conflict,T,10000,>,m,c\n\
               conflict,T,1000,<,m,c\n";
    let (_, rows) = json(csv, &[]);
    let low = find(&rows, "low", "T");
    // The largest lower bound; at equal values the strict '>' is the tighter.
    assert_eq!(low["qualifier"], ">");
    assert_relative_eq!(low["ki"].as_f64().unwrap(), 10000.0, max_relative = 1e-12);
    assert_eq!((low["n"].as_u64(), low["n_censored"].as_u64()), (Some(0), Some(3)));
    assert!(codes(low).contains(&"all-censored".to_string()));
    let up = find(&rows, "up", "T");
    assert_eq!(up["qualifier"], "<");
    assert_relative_eq!(up["ki"].as_f64().unwrap(), 5.0, max_relative = 1e-12);
    let range = find(&rows, "range", "T");
    assert_eq!(range["qualifier"], ">");
    assert_relative_eq!(range["low"].as_f64().unwrap(), 1000.0, max_relative = 1e-12);
    assert_relative_eq!(range["high"].as_f64().unwrap(), 10000.0, max_relative = 1e-12);
    assert!(codes(range).contains(&"censored-range".to_string()));
    let conflict = find(&rows, "conflict", "T");
    assert!(conflict["ki"].is_null() && conflict["pki"].is_null());
    assert!(codes(conflict).contains(&"censored-conflict".to_string()));
    // Bounds rank by their value, after an exact value of the same potency; a conflict has
    // no value, so no rank, and its error says why.
    assert_eq!(up["rank"], 1);
    assert!(conflict["rank"].is_null());
    assert!(conflict["error"].as_str().unwrap().contains("contradict"), "{conflict}");
}

#[test]
fn the_qualifier_column_and_the_cell_must_agree() {
    let r = run("compound,ki,qualifier\nA,> 10 uM,<\nB,5 nM,\n", &["--format", "json"]);
    assert_eq!(r.code, 3);
    assert!(r.stderr.contains("line 2") && r.stderr.contains("disagrees"), "{}", r.stderr);
    let doc: Value = serde_json::from_slice(&r.stdout).unwrap();
    let results = doc["results"].as_array().unwrap();
    assert_eq!(results[0]["compound"], "B", "B is still ranked");
    assert_eq!(results[0]["rank"], 1);
    // A keeps its row, without a value, saying why.
    assert_eq!(results[1]["compound"], "A");
    assert!(results[1]["ki"].is_null() && results[1]["error"].as_str().unwrap().contains("disagrees"));
}

#[test]
fn selectivity_and_ligand_efficiency() {
    let csv = "compound,target,ki (nM),qualifier,heavy_atoms,method,mechanism\n\
               A,main,10,,25,m,c\n\
               A,off,1000,,25,m,c\n\
               B,main,100,,20,m,c\n\
               B,off,10000,>,20,m,c\n\
               C,main,50,,30,m,c\n";
    let (_, rows) = json(csv, &["--versus", "off"]);
    let a = find(&rows, "A", "main");
    // ΔpKi = 8 − 6 = 2; LE = 1.37·8/25 = 0.4384 kcal/mol per heavy atom (Hopkins et al. 2004).
    assert_relative_eq!(a["delta_pki"]["value"].as_f64().unwrap(), 2.0, max_relative = 1e-12);
    assert_eq!(a["delta_pki"]["qualifier"], "=");
    assert_eq!(a["versus"], "off");
    assert_relative_eq!(a["ligand_efficiency"]["value"].as_f64().unwrap(), 1.37 * 8.0 / 25.0, max_relative = 1e-12);
    // B: pKi 7 against Ki > 10 µM (pKi < 5): ΔpKi > 2.
    let b = find(&rows, "B", "main");
    assert_eq!(b["delta_pki"]["qualifier"], ">");
    assert_relative_eq!(b["delta_pki"]["value"].as_f64().unwrap(), 2.0, max_relative = 1e-12);
    // The LE of a bound is a bound, reversed: Ki > 10 µM → LE < 1.37·5/20.
    let b_off = find(&rows, "B", "off");
    assert_eq!(b_off["ligand_efficiency"]["qualifier"], "<");
    assert_relative_eq!(b_off["ligand_efficiency"]["value"].as_f64().unwrap(), 1.37 * 5.0 / 20.0, max_relative = 1e-12);
    // C was not measured on the counter-target.
    assert!(find(&rows, "C", "main")["delta_pki"].is_null());
    // A counter-target that is not in the input is an option error naming the targets there.
    let r = run(csv, &["--versus", "VRD3"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--versus") && r.stderr.contains("main, off"), "{}", r.stderr);
    // Heavy atoms that disagree give no LE.
    let (_, rows) = json("compound,ki (nM),heavy_atoms\nA,10,25\nA,20,26\n", &[]);
    assert!(rows[0]["ligand_efficiency"].is_null());
    assert!(codes(&rows[0]).contains(&"heavy-atoms-differ".to_string()));
}

#[test]
fn the_registry_export_has_the_documented_columns() {
    let (header, rows) = registry(
        "compound,target,ki (uM),qualifier,method,mechanism,mechanism_source,flags,conditions\n\
         KX-101,VRD7,0.05,,competitive: Ki = IC50/(1 + S/Km),competitive,measured,tight-binding,S = 50 uM\n\
         KX-102,VRD7,10,>,competitive: Ki = IC50/(1 + S/Km),competitive,assumed,mechanism-assumed;qualified-input,S = 50 uM\n",
        &[],
    );
    let documented = [
        "compound",
        "target",
        "endpoint",
        "qualifier",
        "value",
        "unit",
        "pki",
        "pki_qualifier",
        "low",
        "high",
        "interval_method",
        "n",
        "n_censored",
        "values",
        "assays",
        "pki_sd",
        "rank",
        "mechanism",
        "method",
        "flags",
        "conditions",
        "ligand_efficiency",
        "ligand_efficiency_qualifier",
        "versus",
        "delta_pki",
        "delta_pki_qualifier",
        "error",
        "source",
        "tool",
        "registry_version",
    ];
    assert_eq!(header, documented);
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    assert_eq!(&rows[0][col("value")], "50");
    assert_eq!(&rows[0][col("unit")], "nM");
    assert_eq!(&rows[0][col("qualifier")], "");
    assert_eq!(&rows[0][col("endpoint")], "Ki");
    assert_eq!(&rows[0][col("mechanism")], "competitive (measured)");
    assert_eq!(&rows[0][col("flags")], "tight-binding");
    assert_eq!(&rows[0][col("tool")], format!("kimech {}", env!("CARGO_PKG_VERSION")));
    assert_eq!(&rows[0][col("registry_version")], "2");
    assert_relative_eq!(rows[0][col("pki")].parse::<f64>().unwrap(), 7.30103, max_relative = 1e-6);
    assert_eq!(&rows[0][col("pki_qualifier")], "");
    assert_eq!(&rows[1][col("qualifier")], ">");
    assert_eq!(&rows[1][col("pki_qualifier")], "<");
    assert_eq!(&rows[1][col("mechanism")], "competitive (assumed)");
    assert!(rows[1][col("flags")].starts_with("mechanism-assumed;qualified-input;all-censored"));
}

#[test]
fn formula_injection_is_neutralised_in_every_text_cell() {
    let (header, rows) = registry(
        "compound,target,ki (nM),method,mechanism,flags,conditions\n\
         \"=HYPERLINK(\"\"http://example.invalid\"\",\"\"click\"\")\",+VRD7,10,@SUM(A1),-1+2,=cmd,\"\tS = 5 uM\"\n",
        &[],
    );
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    assert_eq!(&rows[0][col("compound")], "'=HYPERLINK(\"http://example.invalid\",\"click\")");
    assert_eq!(&rows[0][col("target")], "'+VRD7");
    assert!(rows[0][col("method")].starts_with("'@SUM"));
    for cell in rows[0].iter() {
        assert!(!cell.starts_with(['=', '+', '-', '@', '\t', '\r']), "unguarded cell {cell:?}");
    }
    // Our own guarded export reads back to the original names.
    let r = run("compound,ki (nM),qualifier,method,mechanism\n'=HYPERLINK(1),10,,m,c\n", &["--format", "json"]);
    let doc: Value = serde_json::from_slice(&r.stdout).unwrap();
    assert_eq!(doc["results"][0]["compound"], "=HYPERLINK(1)");
}

#[test]
fn failed_ki_rows_are_reported_not_dropped() {
    let r = run(
        "row,compound,ki (nM),qualifier,method,mechanism,error\n2,A,,,not converted,competitive,the IC50 is 0 nM\n3,B,12,,m,competitive,\n",
        &["--format", "json"],
    );
    assert_eq!(r.code, 3);
    assert!(
        r.stderr.contains("line 2") && r.stderr.contains("'A'") && r.stderr.contains("the IC50 is 0 nM"),
        "{}",
        r.stderr
    );
    let doc: Value = serde_json::from_slice(&r.stdout).unwrap();
    assert_eq!(doc["results"][0]["compound"], "B");
    // A value that is not a concentration is an error naming the cell.
    let r = run("compound,ki\nA,12 mg/mL\n", &[]);
    assert_eq!(r.code, 3);
    assert!(r.stderr.contains("'ki'") && r.stderr.contains("mg/mL"), "{}", r.stderr);
    // Without a method or mechanism the row says so.
    let (_, rows) = json("compound,ki (nM)\nA,12\n", &[]);
    assert_eq!(rows[0]["mechanism"], "not stated");
    assert!(codes(&rows[0]).contains(&"method-not-stated".to_string()));
}

/// The whole hand-off: `kimech ki --format csv` then `kimech rank` on two files.
#[test]
fn ranks_what_ki_writes() {
    let dir = tempfile::tempdir().unwrap();
    let ic50 = dir.path().join("ic50.csv");
    std::fs::write(
        &ic50,
        "compound,target,ic50,substrate,km,heavy_atoms\nKX-101,VRD7,250 nM,150 uM,50 uM,25\nKX-101,VRD7,0.25 uM,150 uM,50 uM,25\nKX-102,VRD7,> 10 uM,150 uM,50 uM,20\n",
    )
    .unwrap();
    let ki = dir.path().join("ki.csv");
    let out = kimech()
        .arg("ki")
        .arg(&ic50)
        .args(["--mechanism", "competitive", "--enzyme", "1 nM", "--format", "csv", "-o"])
        .arg(&ki)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let second = dir.path().join("ki2.csv");
    std::fs::write(&second, "compound,target,ki (nM),method,mechanism\nKX-101,VRD7,62.25,elsewhere,competitive\n")
        .unwrap();
    let out = kimech().arg("rank").arg(&ki).arg(&second).args(["--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = doc["results"].as_array().unwrap();
    let a = find(rows, "KX-101", "VRD7");
    // (250 − 0.5)/4 = 62.375 nM twice, and 62.25 nM: geometric mean (62.375²·62.25)^(1/3).
    assert_relative_eq!(a["ki"].as_f64().unwrap(), (62.375f64 * 62.375 * 62.25).cbrt(), max_relative = 1e-12);
    assert_eq!(a["n"], 3);
    assert!(codes(a).contains(&"methods-differ".to_string()));
    assert_relative_eq!(
        a["ligand_efficiency"]["value"].as_f64().unwrap(),
        1.37 * a["pki"].as_f64().unwrap() / 25.0,
        max_relative = 1e-12
    );
    let b = find(rows, "KX-102", "VRD7");
    assert_eq!(b["qualifier"], ">");
    assert_relative_eq!(b["ki"].as_f64().unwrap(), (10000.0 - 0.5) / 4.0, max_relative = 1e-12);
    assert!(codes(b).contains(&"qualified-input".to_string()));
    // The human table names method and mechanism and ends with the caution.
    let out = kimech().arg("rank").arg(&ki).output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("competitive (measured)") && text.contains("Cheng & Prusoff 1973"), "{text}");
    assert!(text.trim_end().ends_with(kimech::cli::CAUTION), "{text}");
}

/// The HTML report is a document: a summary with counts, the rows that need
/// attention first, and the ranking as a real table (not preformatted text).
#[test]
fn the_report_summarises_and_lists_flagged_rows_first_in_html_tables() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.csv");
    std::fs::write(&input, "compound,target,ki (nM),qualifier\nA,T,10,\nA,T,20,\nB,T,>1000,\nC,T,,\n").unwrap();
    let report = dir.path().join("r.html");
    let out = kimech().arg("rank").arg(&input).arg("--report").arg(&report).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "{}", String::from_utf8_lossy(&out.stderr));
    let html = std::fs::read_to_string(&report).unwrap();
    assert!(html.contains("3 rows: 2 ranked, 1 bounds, 1 without a value."), "summary missing");
    let attention = html.find("Rows with an error or a flag").expect("attention table");
    let ranking = html.find("Ranking by pKi").expect("ranking table");
    assert!(attention < ranking);
    assert!(html[ranking..].contains("<table"));
    assert!(!html.contains("<pre class=\"table\">Ranking"));
}
