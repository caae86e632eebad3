//! `kimech ic50`'s CSV goes through the one export writer: every text cell
//! and header that begins with `= + - @`, tab or CR gets the formula guard
//! (OWASP, "CSV Injection", recommended mitigation: a leading apostrophe),
//! numbers never do (negative ones included), and an exact qualifier is
//! written as every other export writes it (an empty cell, never a lone `=`).
//! The terminal table's labels come from the same column list as the CSV.

mod common;

use common::kimech;
use kimech::io::output::qualifier_cell;
use kimech::units::Qualifier;

/// Ten points of a clean curve (3-fold dilutions from 10 µM, invented for the test).
fn curve_rows(name: &str, ic50: f64, extra: &str) -> String {
    (0..10)
        .map(|k| 10_000.0 / 3f64.powi(k))
        .map(|c| format!("{name},{c},{:.3}{extra}\n", 100.0 / (1.0 + c / ic50) + (c * 7.0).sin()))
        .collect()
}

/// Runs `ic50 --format csv` (plus `extra` flags) on `text`; returns the parsed records.
fn csv_of(text: &str, extra: &[&str]) -> (Vec<String>, Vec<Vec<String>>) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let out = kimech(dir.path()).args(["ic50", "in.csv", "--format", "csv"]).args(extra).output().unwrap();
    let mut reader = csv::ReaderBuilder::new().has_headers(true).from_reader(out.stdout.as_slice());
    let header = reader.headers().unwrap().iter().map(String::from).collect();
    let rows = reader.records().map(|r| r.unwrap().iter().map(String::from).collect()).collect();
    (header, rows)
}

fn formula_file() -> String {
    let mut text = String::from("compound,concentration (nM),response,=SUM(A1),note,-x,@y,+z\n");
    text.push_str(&curve_rows("=HYPERLINK(\"x\")", 80.0, ",=1+2,-1.5,+1,a,b"));
    text.push_str(&curve_rows("-cmd", 50.0, ",@SUM(A1),-2,3,c,d"));
    text.push_str(&curve_rows("@at", 1e8, ",+A1,x,4,e,f"));
    text
}

#[test]
fn a_carried_header_that_looks_like_a_formula_is_guarded() {
    for extra in [&[][..], &["--enzyme", "1 nM"][..]] {
        let (header, _) = csv_of(&formula_file(), extra);
        let tail: Vec<&str> = header.iter().rev().take(5).rev().map(String::as_str).collect();
        assert_eq!(tail, ["'=SUM(A1)", "note", "'-x", "'@y", "'+z"], "{header:?}");
    }
}

#[test]
fn the_header_of_an_empty_run_is_guarded_too() {
    // The only compound has one concentration: no result, but the header is written.
    let text = "compound,concentration (nM),response,=SUM(A1)\nKX-1,10,50,a\nKX-1,10,52,a\n";
    let (header, rows) = csv_of(text, &[]);
    assert!(rows.is_empty());
    assert_eq!(header.last().map(String::as_str), Some("'=SUM(A1)"));
}

#[test]
fn text_cells_are_guarded_and_numbers_are_not() {
    let (header, rows) = csv_of(&formula_file(), &[]);
    let col = |name: &str| header.iter().position(|h| h == name).unwrap_or_else(|| panic!("{name}"));
    let compounds: Vec<&str> = rows.iter().map(|r| r[col("compound")].as_str()).collect();
    assert_eq!(compounds, ["'=HYPERLINK(\"x\")", "'-cmd", "'@at"]);
    assert_eq!(rows[0][col("'=SUM(A1)")], "'=1+2");
    assert_eq!(rows[1][col("'=SUM(A1)")], "'@SUM(A1)");
    assert_eq!(rows[2][col("'=SUM(A1)")], "'+A1");
    // Carried numbers stay numbers, negative and signed ones included.
    assert_eq!((rows[0][col("note")].as_str(), rows[0][col("'-x")].as_str()), ("-1.5", "+1"));
    // The fitted lower asymptotes of these curves are slightly negative: numbers, not text.
    let lower: Vec<f64> = rows.iter().map(|r| r[col("lower")].parse().unwrap()).collect();
    assert!(lower[..2].iter().all(|v| *v < 0.0), "{lower:?}");
    for name in
        ["ic50_se (nM)", "ic50_low (nM)", "pic50", "hill", "upper", "lower", "lower_low", "residual_sd", "r2", "flat_p"]
    {
        for r in &rows {
            let cell = &r[col(name)];
            assert!(!cell.starts_with('\''), "{name}: {cell}");
            assert!(cell.is_empty() || cell.parse::<f64>().is_ok(), "{name}: {cell}");
        }
    }
}

#[test]
fn an_exact_qualifier_is_an_empty_cell_as_in_every_export() {
    let mut text = String::from("compound,concentration (nM),response\n");
    text.push_str(&curve_rows("exact", 80.0, ""));
    text.push_str(&curve_rows("bound", 1e8, ""));
    let (header, rows) = csv_of(&text, &[]);
    let q = header.iter().position(|h| h == "qualifier").unwrap();
    let ic50 = header.iter().position(|h| h == "ic50 (nM)").unwrap();
    // The registry and `ki` write an exact qualifier with the same function.
    assert_eq!(rows[0][q], qualifier_cell(Qualifier::Equal));
    assert_eq!(rows[0][q], "");
    assert!(rows[0][ic50].parse::<f64>().is_ok(), "{}", rows[0][ic50]);
    assert_eq!((rows[1][q].as_str(), rows[1][ic50].as_str()), (">", ">10000"));
    assert!(rows.iter().all(|r| r[q] != "="));
}

#[test]
fn the_table_labels_and_the_csv_columns_come_from_one_list() {
    use kimech::view::ic50::{COLUMNS, Context, Label};
    let context = Context { unit: kimech::units::ConcUnit::Nanomolar, morrison: false, confidence: 0.9 };
    let labels: Vec<String> = COLUMNS
        .iter()
        .filter_map(|c| c.shown)
        .map(|s| match s.label {
            Label::Fixed(l) => l.to_string(),
            Label::Made(f) => f(&context),
        })
        .collect();
    assert_eq!(
        labels,
        ["compound", "n", "call", "IC50 (nM)", "90% interval", "pIC50", "Hill", "upper", "lower", "R²", "flags"]
    );
    let mut names: Vec<&str> = COLUMNS.iter().map(|c| c.name).collect();
    names.sort_unstable();
    let before = names.len();
    names.dedup();
    assert_eq!(names.len(), before, "column names are unique");
}

/// The report page's table is the terminal's (one builder, `view::ic50::table_row`).
#[test]
fn the_report_table_is_the_terminal_table() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("compound,concentration (nM),response\n");
    text.push_str(&curve_rows("KX-1", 80.0, ""));
    text.push_str(&curve_rows("KX-2", 1e8, ""));
    std::fs::write(dir.path().join("in.csv"), text).unwrap();
    let out = kimech(dir.path()).args(["ic50", "in.csv", "--report", "r.html"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    let terminal = String::from_utf8(out.stdout).unwrap();
    let context =
        kimech::view::ic50::Context { unit: kimech::units::ConcUnit::Nanomolar, morrison: false, confidence: 0.95 };
    let header: String = kimech::view::ic50::table_header(&context).iter().map(|h| format!("<th>{h}</th>")).collect();
    assert!(html.contains(&format!("<thead><tr>{header}</tr></thead>")), "{html}");
    for label in kimech::view::ic50::table_header(&context) {
        assert!(terminal.contains(&label), "{label} missing from the terminal table");
    }
    // The bound's row says so the same way in both.
    assert!(terminal.contains("> 10000") && html.contains("&gt; 10000"), "{terminal}");
}
