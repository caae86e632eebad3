//! Every CSV writer guards text cells and headers that a spreadsheet would run
//! as a formula, and leaves numbers (negative ones included) as numbers.
//!
//! The rule is OWASP's CSV-injection mitigation ("CSV Injection", owasp.org):
//! a cell beginning with `=`, `+`, `-`, `@`, tab or carriage return gets a
//! leading apostrophe, unless it is a plain number.

mod common;

use std::path::Path;

/// Runs `kimech <args> --format csv` in `dir` and returns (header, rows).
fn csv_output(dir: &Path, args: &[&str]) -> (Vec<String>, Vec<Vec<String>>) {
    let out = common::kimech(dir).args(args).args(["--format", "csv"]).output().unwrap();
    assert!(
        matches!(out.status.code(), Some(0) | Some(3)),
        "kimech {}: {}",
        args.join(" "),
        String::from_utf8_lossy(&out.stderr)
    );
    let mut reader = csv::Reader::from_reader(out.stdout.as_slice());
    let header = reader.headers().unwrap().iter().map(str::to_string).collect();
    let rows = reader.records().map(|r| r.unwrap().iter().map(str::to_string).collect()).collect();
    (header, rows)
}

/// No header or cell may start a formula; a cell that starts with `-` or `+`
/// is allowed only when it is a number.
fn assert_guarded(command: &str, header: &[String], rows: &[Vec<String>]) {
    let risky = |cell: &str| cell.starts_with(['=', '+', '-', '@', '\t', '\r']);
    for h in header {
        assert!(!risky(h), "{command}: unguarded header {h:?}");
    }
    for row in rows {
        for cell in row {
            let number = cell.parse::<f64>().is_ok_and(f64::is_finite);
            assert!(!risky(cell) || number, "{command}: unguarded cell {cell:?}");
            assert!(!cell.starts_with('\'') || cell.parse::<f64>().is_err(), "{command}: number as text {cell:?}");
        }
    }
}

fn column<'a>(header: &[String], rows: &'a [Vec<String>], name: &str) -> Vec<&'a str> {
    let i = header.iter().position(|h| h == name).unwrap_or_else(|| panic!("no column {name} in {header:?}"));
    rows.iter().map(|r| r[i].as_str()).collect()
}

#[test]
fn rates_guards_carried_headers_and_cells_and_keeps_negative_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("curve,=SUM(A1),offset,time,signal\n");
    for t in 0..8 {
        text.push_str(&format!("@w1,=cmd|' /C calc'!A0,-1.5,{t},{}\n", -100.0 + 7.0 * t as f64));
    }
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["rates", "in.csv"]);
    assert_guarded("rates", &header, &rows);
    assert_eq!(header[1], "'=SUM(A1)");
    assert_eq!(column(&header, &rows, "curve"), ["'@w1"]);
    assert_eq!(column(&header, &rows, "offset"), ["-1.5"]);
    assert_eq!(column(&header, &rows, "rate"), ["7"]);
}

#[test]
fn km_guards_the_series_name() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("series,substrate (uM),rate\n");
    for s in [1.0, 2.0, 5.0, 10.0, 20.0, 50.0] {
        let v = 10.0 * s / (5.0 + s) * (1.0 + 0.01 * (s * 7.0_f64).sin());
        text.push_str(&format!("=HYPERLINK(1),{s},{v}\n"));
    }
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["km", "in.csv"]);
    assert_guarded("km", &header, &rows);
    assert_eq!(column(&header, &rows, "series"), ["'=HYPERLINK(1)"]);
}

#[test]
fn mode_guards_the_compound_name() {
    let dir = tempfile::tempdir().unwrap();
    let fixture = common::fixture_text("mode/all.csv");
    let text = fixture.replace("\ncompetitive,", "\n+competitive,");
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["mode", "in.csv"]);
    assert_guarded("mode", &header, &rows);
    let compounds = column(&header, &rows, "compound");
    assert!(compounds.contains(&"'+competitive") && compounds.contains(&"mixed"), "{compounds:?}");
}

#[test]
fn ki_guards_names_and_carried_columns_and_keeps_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let text = "compound,ic50 (nM),substrate (uM),km (uM),=note,shift\n-KX1,100,10,10,@look,-2.5\n";
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["ki", "in.csv"]);
    assert_guarded("ki", &header, &rows);
    assert_eq!(column(&header, &rows, "compound"), ["'-KX1"]);
    assert_eq!(column(&header, &rows, "'=note"), ["'@look"]);
    assert_eq!(column(&header, &rows, "shift"), ["-2.5"]);
    assert_eq!(column(&header, &rows, "qualifier"), [""], "an exact value's qualifier is an empty cell");
}

#[test]
fn rank_guards_the_registry_export() {
    let dir = tempfile::tempdir().unwrap();
    let text = "compound,target,ki (nM)\n=A1,@T,10\n=A1,@T,20\n";
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["rank", "in.csv"]);
    assert_guarded("rank", &header, &rows);
    assert_eq!(column(&header, &rows, "compound"), ["'=A1"]);
}

#[test]
fn onset_guards_the_compound_name() {
    let dir = tempfile::tempdir().unwrap();
    let text = common::fixture_text("onset/two_step.csv").replace("KX-sim", "=KX-sim");
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let (header, rows) = csv_output(dir.path(), &["onset", "in.csv", "--substrate", "10 uM", "--km", "10 uM"]);
    assert_guarded("onset", &header, &rows);
    assert!(column(&header, &rows, "compound").iter().all(|c| *c == "'=KX-sim"));
}
