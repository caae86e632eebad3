//! The registry contract end to end: an IC50 table with a row that cannot
//! convert, an approximate IC50, a two-value group, a three-value group, a
//! bound and assay ids goes through `kimech ki` and `kimech rank`; every
//! compound is in the registry file, and its cells are checked against a hand
//! calculation. The file is then read back by Python's csv module and pandas
//! (tests/reference/registry_readback.py).

mod common;

use approx::assert_relative_eq;
use std::path::Path;

/// S = Km = 100 µM and a measured competitive mechanism, so every Ki is
/// IC50/(1 + S/Km) = IC50/2 (Cheng & Prusoff 1973).
const IC50_TABLE: &str = "compound,target,ic50,substrate,km,mechanism,assay_id,heavy_atoms\n\
KX-1,VRD7,40 nM,100 uM,100 uM,competitive,A-01,25\n\
KX-1,VRD7,80 nM,100 uM,100 uM,competitive,A-02,25\n\
KX-2,VRD7,~50 nM,100 uM,100 uM,competitive,A-01,20\n\
KX-3,VRD7,> 10 uM,100 uM,100 uM,competitive,A-01,30\n\
KX-4,VRD7,12 mg/mL,100 uM,100 uM,competitive,A-01,22\n\
KX-5,VRD7,20 nM,100 uM,100 uM,competitive,A-01,\n\
KX-5,VRD7,200 nM,100 uM,100 uM,competitive,A-02,\n\
KX-5,VRD7,2000 nM,100 uM,100 uM,competitive,A-03,\n";

/// Runs the chain in `dir`; returns the registry file's path.
fn chain(dir: &Path) -> std::path::PathBuf {
    std::fs::write(dir.join("ic50.csv"), IC50_TABLE).unwrap();
    let out = common::kimech(dir).args(["ki", "ic50.csv", "--format", "csv", "-o", "ki.csv"]).output().unwrap();
    // KX-4 cannot convert: exit 3, the others written.
    assert_eq!(out.status.code(), Some(3), "{}", String::from_utf8_lossy(&out.stderr));
    let out = common::kimech(dir).args(["rank", "ki.csv", "--format", "csv", "-o", "registry.csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "{}", String::from_utf8_lossy(&out.stderr));
    dir.join("registry.csv")
}

fn number(cell: &str) -> f64 {
    cell.parse().unwrap_or_else(|_| panic!("not a number: {cell:?}"))
}

#[test]
fn every_compound_reaches_the_registry_with_hand_computed_cells() {
    let dir = tempfile::tempdir().unwrap();
    let path = chain(dir.path());
    let mut reader = csv::Reader::from_path(&path).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap_or_else(|| panic!("no column {name}"));
    let row = |compound: &str| rows.iter().find(|r| &r[col("compound")] == compound).unwrap();
    // Every compound of the input has its row, KX-4 (which failed) included.
    let mut compounds: Vec<&str> = rows.iter().map(|r| &r[col("compound")]).collect();
    compounds.sort_unstable();
    assert_eq!(compounds, ["KX-1", "KX-2", "KX-3", "KX-4", "KX-5"]);
    for r in &rows {
        assert_eq!(&r[col("unit")], "nM");
        assert_eq!(&r[col("registry_version")], "2");
        assert!(r[col("source")].starts_with("ki.csv:"), "{r:?}");
    }

    // KX-1, two values: Ki = 40/2 = 20 nM and 80/2 = 40 nM. pKi 7.698970 and 7.397940,
    // mean 7.548455, geometric mean √(20·40) = 28.28427 nM. With n = 2 no t interval:
    // the interval is the range of the two values, 20 to 40 nM. SD = 0.301030/√2 = 0.212860.
    let kx1 = row("KX-1");
    assert_eq!(&kx1[col("qualifier")], "");
    assert_relative_eq!(number(&kx1[col("value")]), 800f64.sqrt(), max_relative = 1e-9);
    assert_relative_eq!(number(&kx1[col("pki")]), 7.548455007, max_relative = 1e-9);
    assert_eq!(&kx1[col("pki_qualifier")], "");
    assert_eq!((number(&kx1[col("low")]), number(&kx1[col("high")])), (20.0, 40.0));
    assert!(kx1[col("interval_method")].starts_with("range of the 2 values"), "{kx1:?}");
    assert_relative_eq!(number(&kx1[col("pki_sd")]), 2f64.log10() / 2f64.sqrt(), max_relative = 1e-9);
    assert_eq!(&kx1[col("values")], "20;40");
    assert_eq!(&kx1[col("assays")], "A-01;A-02");
    assert_eq!(&kx1[col("error")], "");
    assert_eq!(&kx1[col("source")], "ki.csv:2,3");

    // KX-2, written `~50 nM`: Ki ~25 nM, pKi ~7.602060 — approximate, never exact. No
    // IC50 interval and no Km SE were given, so there is no interval.
    let kx2 = row("KX-2");
    assert_eq!(&kx2[col("qualifier")], "~");
    assert_relative_eq!(number(&kx2[col("value")]), 25.0, max_relative = 1e-12);
    assert_relative_eq!(number(&kx2[col("pki")]), 7.602059991, max_relative = 1e-9);
    assert_eq!(&kx2[col("pki_qualifier")], "~");
    assert_eq!((&kx2[col("low")], &kx2[col("high")]), ("", ""));
    assert_eq!(&kx2[col("values")], "~25");
    assert_eq!(&kx2[col("assays")], "A-01");
    // LE = 1.37·7.602060/20 = 0.520741, approximate like the pKi.
    assert_relative_eq!(number(&kx2[col("ligand_efficiency")]), 1.37 * 7.602059991 / 20.0, max_relative = 1e-9);
    assert_eq!(&kx2[col("ligand_efficiency_qualifier")], "~");

    // KX-3, `> 10 uM`: Ki > 5000 nM, so pKi < 5.301030; a bound has no interval.
    // LE < 1.37·5.301030/30 = 0.242080.
    let kx3 = row("KX-3");
    assert_eq!(&kx3[col("qualifier")], ">");
    assert_relative_eq!(number(&kx3[col("value")]), 5000.0, max_relative = 1e-12);
    assert_relative_eq!(number(&kx3[col("pki")]), 5.301029996, max_relative = 1e-9);
    assert_eq!(&kx3[col("pki_qualifier")], "<");
    assert_eq!((&kx3[col("low")], &kx3[col("high")]), ("", ""));
    assert_eq!((&kx3[col("n")], &kx3[col("n_censored")]), ("0", "1"));
    assert_eq!(&kx3[col("values")], ">5000");
    assert_relative_eq!(number(&kx3[col("ligand_efficiency")]), 1.37 * 5.301029996 / 30.0, max_relative = 1e-9);
    assert_eq!(&kx3[col("ligand_efficiency_qualifier")], "<");

    // KX-4, `12 mg/mL` is not a concentration: no value, no pKi, no rank, and the error says why.
    let kx4 = row("KX-4");
    for empty in ["qualifier", "value", "pki", "pki_qualifier", "low", "high", "values", "rank"] {
        assert_eq!(&kx4[col(empty)], "", "{empty}");
    }
    assert!(kx4[col("error")].contains("mg/mL") && kx4[col("error")].contains("line 6"), "{kx4:?}");

    // KX-5, three values: Ki 10, 100, 1000 nM → pKi 8, 7, 6; mean 7, SD 1, geometric mean
    // 100 nM. From n = 3 the t interval: t(0.975; 2) = 4.302653 (any t table), half-width
    // 4.302653/√3 = 2.484138 in pKi, so 10^(2 − 2.484138) = 0.32803 to 10^(2 + 2.484138) = 30484 nM.
    let kx5 = row("KX-5");
    assert_relative_eq!(number(&kx5[col("value")]), 100.0, max_relative = 1e-9);
    assert_relative_eq!(number(&kx5[col("pki")]), 7.0, max_relative = 1e-9);
    assert_relative_eq!(number(&kx5[col("low")]), 10f64.powf(2.0 - 2.484138), max_relative = 1e-5);
    assert_relative_eq!(number(&kx5[col("high")]), 10f64.powf(2.0 + 2.484138), max_relative = 1e-5);
    assert!(kx5[col("interval_method")].contains("t interval"), "{kx5:?}");
    assert_eq!(&kx5[col("values")], "10;100;1000");
    assert_eq!(&kx5[col("assays")], "A-01;A-02;A-03");

    // Ranks by pKi: KX-2 (7.60), KX-1 (7.55), KX-5 (7.00), KX-3 (< 5.30); KX-4 none.
    let ranks: Vec<(&str, &str)> = rows.iter().map(|r| (&r[col("compound")], &r[col("rank")])).collect();
    assert_eq!(ranks, [("KX-2", "1"), ("KX-1", "2"), ("KX-5", "3"), ("KX-3", "4"), ("KX-4", "")]);
}

/// ki's table: a failed row before the others takes no footnote number, so the
/// first relation is `[1]` in the table and in the legend.
#[test]
fn ki_footnotes_are_numbered_without_gaps() {
    let dir = tempfile::tempdir().unwrap();
    let table =
        "compound,ic50,substrate,km,mechanism\nBAD,12 mg/mL,1 uM,1 uM,competitive\nOK,10 nM,1 uM,1 uM,competitive\n";
    std::fs::write(dir.path().join("t.csv"), table).unwrap();
    let out = common::kimech(dir.path()).args(["ki", "t.csv"]).output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("[1] competitive"), "{text}");
    assert!(!text.contains("[2]"), "{text}");
}

#[test]
fn python_reads_numbers_where_numbers_are_expected_and_no_formulas() {
    let dir = tempfile::tempdir().unwrap();
    // A compound and a target named like formulas, to see the guard on text.
    let table = IC50_TABLE.replace("KX-5,VRD7", "=KX-5,+VRD7");
    std::fs::write(dir.path().join("ic50.csv"), table).unwrap();
    common::kimech(dir.path()).args(["ki", "ic50.csv", "--format", "csv", "-o", "ki.csv"]).output().unwrap();
    let out =
        common::kimech(dir.path()).args(["rank", "ki.csv", "--format", "csv", "-o", "registry.csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3));
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/registry_readback.py");
    let run = std::process::Command::new("python3").arg(&script).arg(dir.path().join("registry.csv")).output();
    let Ok(run) = run else {
        println!("SKIPPED: python3 is not installed, so the registry was not read back by Python");
        return;
    };
    let said = String::from_utf8_lossy(&run.stdout);
    assert!(run.status.success(), "{said}{}", String::from_utf8_lossy(&run.stderr));
    assert!(said.starts_with("ok: 5 rows"), "{said}");
    let text = std::fs::read_to_string(dir.path().join("registry.csv")).unwrap();
    assert!(text.contains("'=KX-5,'+VRD7"), "{text}");
}

/// README.md documents the registry columns, in order, with the contract version.
#[test]
fn the_readme_lists_the_registry_contract() {
    let readme = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let section = readme.split("### Registry export").nth(1).expect("README has a registry section");
    let listed: Vec<&str> = section
        .lines()
        .filter_map(|l| l.strip_prefix("| `"))
        .filter_map(|l| l.split('`').next())
        .take(kimech::view::registry::COLUMNS.len())
        .collect();
    let declared: Vec<&str> = kimech::view::registry::COLUMNS.iter().map(|c| c.name).collect();
    assert_eq!(listed, declared);
    assert!(section.contains(&format!("version {}", kimech::view::registry::REGISTRY_VERSION)));
}

/// SHA-256 by an independent implementation: GNU coreutils' `sha256sum`, else Python's hashlib.
fn reference_sha256(path: &Path) -> Option<String> {
    let out = std::process::Command::new("sha256sum").arg(path).output().ok().filter(|o| o.status.success());
    let out = out.or_else(|| {
        let code = "import hashlib,sys;print(hashlib.sha256(open(sys.argv[1],'rb').read()).hexdigest())";
        std::process::Command::new("python3").args(["-c", code]).arg(path).output().ok()
    })?;
    String::from_utf8_lossy(&out.stdout).split_whitespace().next().map(String::from)
}

/// Every JSON output and the report carry the provenance record: tool, the
/// command as typed, the start time and each input's size and SHA-256, which
/// must equal an independent implementation's.
#[test]
fn outputs_record_their_provenance_with_the_inputs_sha256() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("ic50.csv"), IC50_TABLE).unwrap();
    common::kimech(dir.path()).args(["ki", "ic50.csv", "--format", "csv", "-o", "ki.csv"]).output().unwrap();
    let Some(expected) = reference_sha256(&dir.path().join("ic50.csv")) else {
        println!("SKIPPED: neither sha256sum nor python3 is available for an independent SHA-256");
        return;
    };
    let out = common::kimech(dir.path()).args(["ki", "ic50.csv", "--format", "json", "--km", "1 uM"]).output().unwrap();
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let p = &doc["provenance"];
    assert_eq!(p["tool"], format!("kimech {}", env!("CARGO_PKG_VERSION")));
    let command: Vec<&str> = p["command"].as_array().unwrap().iter().map(|v| v.as_str().unwrap()).collect();
    assert_eq!(&command[1..], ["ki", "ic50.csv", "--format", "json", "--km", "1 uM"]);
    let started = p["started"].as_str().unwrap();
    assert!(started.len() == 20 && started.ends_with('Z') && &started[10..11] == "T", "{started}");
    assert_eq!(p["inputs"][0]["path"], "ic50.csv");
    assert_eq!(p["inputs"][0]["sha256"], expected.as_str());
    assert_eq!(p["inputs"][0]["bytes"], IC50_TABLE.len());
    // Stdin is hashed as it is read.
    let out =
        common::kimech(dir.path()).args(["ki", "-", "--format", "json"]).write_stdin(IC50_TABLE).output().unwrap();
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["provenance"]["inputs"][0]["path"], "-");
    assert_eq!(doc["provenance"]["inputs"][0]["sha256"], expected.as_str());
    // rank: JSON and the report name ki.csv with its hash.
    let ki_sha = reference_sha256(&dir.path().join("ki.csv")).unwrap();
    let out = common::kimech(dir.path())
        .args(["rank", "ki.csv", "--format", "json", "--report", "rank.html", "--confidence", "0.9"])
        .output()
        .unwrap();
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["provenance"]["inputs"][0]["sha256"], ki_sha.as_str());
    let html = std::fs::read_to_string(dir.path().join("rank.html")).unwrap();
    assert!(html.contains(&ki_sha), "the report shows the input's SHA-256");
    assert!(html.contains("rank ki.csv --format json --report rank.html --confidence 0.9"), "the command as typed");
}

/// Reads a CSV output into (header, rows).
fn csv_cells(bytes: &[u8]) -> (Vec<String>, Vec<Vec<String>>) {
    let mut reader = csv::Reader::from_reader(bytes);
    let header = reader.headers().unwrap().iter().map(String::from).collect();
    let rows = reader.records().map(|r| r.unwrap().iter().map(String::from).collect()).collect();
    (header, rows)
}

#[test]
fn every_csv_row_names_its_source_file_and_lines_whatever_the_line_endings() {
    // Two km series, one written with its rows apart, in a CRLF file with a comment line.
    let text = "# assay 7\r\nseries,substrate (uM),rate\r\nA,1,1.0\r\nA,2,1.6\r\nB,1,0.8\r\nA,4,2.3\r\nA,8,2.9\r\nB,2,1.3\r\nB,4,1.9\r\nB,8,2.4\r\n";
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("km.csv"), text).unwrap();
    let out = common::kimech(dir.path()).args(["km", "km.csv", "--format", "csv"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let (header, rows) = csv_cells(&out.stdout);
    let source = header.iter().position(|h| h == "source").expect("a source column");
    // Lines counted in the file as written: the comment is line 1, the header line 2.
    assert_eq!(rows[0][source], "km.csv:3-4,6-7");
    assert_eq!(rows[1][source], "km.csv:5,8-10");
    let out = common::kimech(dir.path()).args(["km", "km.csv", "--format", "json"]).output().unwrap();
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["results"][1]["source"], "km.csv:5,8-10");

    // rates and mode: every row names its lines too.
    let progress = "curve,time (min),product (uM)\nc1,0,0\nc1,1,1.0\nc1,2,2.1\nc1,3,2.9\nc1,4,4.1\n";
    std::fs::write(dir.path().join("p.csv"), progress).unwrap();
    let out = common::kimech(dir.path()).args(["rates", "p.csv", "--format", "csv"]).output().unwrap();
    let (header, rows) = csv_cells(&out.stdout);
    let source = header.iter().position(|h| h == "source").expect("a source column");
    assert_eq!(rows[0][source], "p.csv:2-6");
    let out = common::kimech(dir.path())
        .args(["mode", &format!("{}/fixtures/mode/all.csv", env!("CARGO_MANIFEST_DIR")), "--format", "csv"])
        .output()
        .unwrap();
    let (header, rows) = csv_cells(&out.stdout);
    let source = header.iter().position(|h| h == "source").expect("a source column");
    assert!(rows.iter().all(|r| r[source].contains("fixtures/mode/all.csv:")), "{:?}", rows[0][source]);

    // ic50: each compound's wells.
    let plate = "compound,conc (nM),response\nA,1,98\nA,10,90\nA,100,52\nA,1000,11\nA,10000,3\nB,1,99\nB,10,97\nB,100,80\nB,1000,30\nB,10000,8\n";
    std::fs::write(dir.path().join("plate.csv"), plate).unwrap();
    let out = common::kimech(dir.path()).args(["ic50", "plate.csv", "--format", "csv"]).output().unwrap();
    let (header, rows) = csv_cells(&out.stdout);
    let source = header.iter().position(|h| h == "source").expect("a source column");
    let sources: Vec<&str> = rows.iter().map(|r| r[source].as_str()).collect();
    assert_eq!(sources, ["plate.csv:2-6", "plate.csv:7-11"]);
}
