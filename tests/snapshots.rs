//! Snapshots (insta) of what people and loaders see of every command on the
//! bundled, invented demo files: the human table, the CSV header and the JSON
//! shape (every key path with the kind of value it holds). The golden copies
//! (tests/golden.rs) pin the bytes of the CSV and JSON; these pin the human
//! tables and make a change of columns or fields a reviewed diff in
//! `tests/snapshots/`. After an intended change: `INSTA_UPDATE=always cargo
//! test --release --test snapshots` and review the diff. Guards the house,
//! not the numbers (the other test files check those against outside references).

mod common;

use std::path::Path;

/// The demo's inputs, copied into a scratch directory so recorded paths are the same everywhere.
fn scratch() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for input in
        ["progress-curves.csv", "rate-matrix.csv", "dose-response.csv", "second-assay-ic50.csv", "onset-curves.csv"]
    {
        let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-compounds").join(input);
        std::fs::copy(&from, dir.path().join(input)).unwrap();
    }
    dir
}

/// Runs `kimech args…` in `dir` and returns stdout (exit 0, or 3 where the demo fails a row on purpose).
fn run(dir: &Path, args: &str) -> String {
    let out = common::kimech(dir).args(args.split_whitespace()).output().unwrap();
    assert!(matches!(out.status.code(), Some(0) | Some(3)), "kimech {args}: {}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).unwrap()
}

/// Every key path of a JSON document with the kind of its value, one per line
/// (arrays collapsed to `[]`, so the shape does not depend on the row count).
fn shape(value: &serde_json::Value) -> String {
    fn walk(v: &serde_json::Value, path: String, out: &mut std::collections::BTreeSet<String>) {
        use serde_json::Value::*;
        match v {
            Object(map) => {
                for (k, v) in map {
                    // Carried columns are the input's, not the output's shape.
                    if k == "carried" {
                        out.insert(format!("{path}.carried: object"));
                        continue;
                    }
                    walk(v, format!("{path}.{k}"), out);
                }
            }
            Array(items) => {
                out.insert(format!("{path}: array"));
                for item in items {
                    walk(item, format!("{path}[]"), out);
                }
            }
            Null => {
                out.insert(format!("{path}: null"));
            }
            Bool(_) => {
                out.insert(format!("{path}: bool"));
            }
            Number(_) => {
                out.insert(format!("{path}: number"));
            }
            String(_) => {
                out.insert(format!("{path}: string"));
            }
        }
    }
    let mut paths = std::collections::BTreeSet::new();
    walk(value, String::new(), &mut paths);
    paths.into_iter().collect::<Vec<_>>().join("\n")
}

/// The documents a JSON output holds: one, or one per line (`ic50` writes JSON lines).
fn json_shape(text: &str) -> String {
    match serde_json::from_str::<serde_json::Value>(text) {
        Ok(doc) => shape(&doc),
        Err(_) => {
            let docs: Vec<serde_json::Value> =
                text.lines().filter(|l| !l.trim().is_empty()).map(|l| serde_json::from_str(l).unwrap()).collect();
            shape(&serde_json::Value::Array(docs))
        }
    }
}

/// (name, arguments without --format) of each command on the demo files, in chain order.
const COMMANDS: [(&str, &str); 7] = [
    ("rates", "rates progress-curves.csv"),
    ("km", "km rates.csv --enzyme 5nM"),
    ("mode", "mode rate-matrix.csv"),
    ("ic50", "ic50 dose-response.csv --normalise"),
    ("ki", "ki ic50.csv"),
    ("rank", "rank ki.csv ki-second.csv --versus VRD3"),
    ("onset", "onset onset-curves.csv"),
];

#[test]
fn every_command_s_table_csv_header_and_json_shape() {
    let dir = scratch();
    // Inputs the chain's later steps read.
    let d = dir.path();
    std::fs::write(d.join("rates.csv"), run(d, "rates progress-curves.csv --format csv")).unwrap();
    std::fs::write(d.join("ic50.csv"), run(d, "ic50 dose-response.csv --normalise --format csv")).unwrap();
    std::fs::write(d.join("ki.csv"), run(d, "ki ic50.csv --format csv")).unwrap();
    std::fs::write(d.join("ki-second.csv"), run(d, "ki second-assay-ic50.csv --format csv")).unwrap();
    for (name, args) in COMMANDS {
        let table = run(d, &format!("{args} --format table"));
        insta::assert_snapshot!(format!("{name}_table"), table);
        let csv = run(d, &format!("{args} --format csv"));
        insta::assert_snapshot!(format!("{name}_csv_header"), csv.lines().next().unwrap_or("").replace(',', "\n"));
        let json = run(d, &format!("{args} --format json"));
        insta::assert_snapshot!(format!("{name}_json_shape"), json_shape(&json));
    }
}
