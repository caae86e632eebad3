//! Golden copies of the demo chain's outputs: every command's CSV and JSON
//! on the bundled (invented) demo files, and the demo's printed summary.
//!
//! These guard refactoring, not correctness (the other test files check the
//! numbers against outside references): an output that changes must change on
//! purpose. After an intended change, regenerate the copies with
//! `KIMECH_BLESS_GOLDEN=1 cargo test --release --test golden` and review the
//! diff of `tests/golden/` in the commit.
//!
//! The only normalisation is in the provenance block: the run's start time and
//! the program's path, which differ between runs and machines by design.

mod common;

use std::path::{Path, PathBuf};

/// The demo chain as a user would type it: (output name, arguments).
/// Inputs are copied into the working directory first, so paths (which the
/// outputs record as provenance) are the same on every machine.
fn chain() -> Vec<(String, Vec<String>)> {
    let mut steps = Vec::new();
    let mut add = |name: &str, args: &str| {
        steps.push((name.to_string(), args.split_whitespace().map(str::to_string).collect::<Vec<_>>()));
    };
    for format in ["csv", "json"] {
        add(&format!("rates.{format}"), &format!("rates progress-curves.csv --format {format}"));
        add(&format!("km.{format}"), &format!("km rates.csv --enzyme 5nM --format {format}"));
        add(&format!("mode.{format}"), &format!("mode rate-matrix.csv --format {format}"));
        add(&format!("mode-difficult.{format}"), &format!("mode rate-matrix-difficult.csv --format {format}"));
        add(&format!("ic50.{format}"), &format!("ic50 dose-response.csv --normalise --format {format}"));
        add(&format!("ic50-raw.{format}"), &format!("ic50 dose-response.csv --format {format}"));
        add(&format!("ki.{format}"), &format!("ki ic50.csv --format {format}"));
        add(&format!("ki-second.{format}"), &format!("ki second-assay-ic50.csv --format {format}"));
        add(&format!("rank.{format}"), &format!("rank ki.csv ki-second.csv --versus VRD3 --format {format}"));
        add(&format!("onset.{format}"), &format!("onset onset-curves.csv --format {format}"));
    }
    // The human table of `onset` too (its CSV header and JSON shape are pinned above).
    add("onset.txt", "onset onset-curves.csv --format table");
    steps
}

/// The demo's input files.
const INPUTS: [&str; 6] = [
    "progress-curves.csv",
    "rate-matrix.csv",
    "rate-matrix-difficult.csv",
    "dose-response.csv",
    "second-assay-ic50.csv",
    "onset-curves.csv",
];

fn golden_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests").join("golden")
}

/// Replaces the values that differ between runs and machines by design: the
/// provenance start time and the program path the command line began with.
fn normalised(text: &str) -> String {
    let text = replace_string_values(text, "\"started\": \"", "<start time>");
    let text = replace_string_values(&text, "\"started\":\"", "<start time>");
    let text = replace_string_values(&text, "\"command\": [\n      \"", "<kimech>");
    replace_string_values(&text, "\"command\":[\"", "<kimech>")
}

/// Replaces the JSON string value that follows every occurrence of `key`
/// (which ends with the value's opening quote).
fn replace_string_values(text: &str, key: &str, by: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(at) = rest.find(key) {
        let value_start = at + key.len();
        out.push_str(&rest[..value_start]);
        out.push_str(by);
        let after = &rest[value_start..];
        rest = after.find('"').map_or("", |end| &after[end..]);
    }
    out.push_str(rest);
    out
}

/// Compares `actual` with the golden copy `name`, or writes it when blessing.
fn check(name: &str, actual: &str, mismatches: &mut Vec<String>) {
    let path = golden_dir().join(name);
    if std::env::var_os("KIMECH_BLESS_GOLDEN").is_some() {
        std::fs::create_dir_all(golden_dir()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("golden copy {}: {e} (bless with KIMECH_BLESS_GOLDEN=1)", path.display()));
    if expected != actual {
        let line = expected.lines().zip(actual.lines()).position(|(a, b)| a != b).map_or(0, |i| i + 1);
        mismatches.push(format!("{name}: first difference at line {line}"));
    }
}

#[test]
fn demo_chain_outputs_match_their_golden_copies() {
    let dir = tempfile::tempdir().unwrap();
    for input in INPUTS {
        let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-compounds").join(input);
        std::fs::copy(&from, dir.path().join(input)).unwrap();
    }
    let mut mismatches = Vec::new();
    for (name, args) in chain() {
        let output = common::kimech(dir.path()).args(&args).output().unwrap();
        // Exit 3 (some groups failed) is part of the demo on purpose; a crash is not.
        let code = output.status.code();
        assert!(matches!(code, Some(0) | Some(3)), "kimech {}: exit {code:?}\n{}", args.join(" "), {
            String::from_utf8_lossy(&output.stderr)
        });
        let stdout = String::from_utf8(output.stdout).unwrap();
        std::fs::write(dir.path().join(&name), &stdout).unwrap();
        check(&name, &normalised(&stdout), &mut mismatches);
    }
    let demo = common::kimech(dir.path()).arg("demo").output().unwrap();
    assert!(demo.status.success(), "demo failed:\n{}", String::from_utf8_lossy(&demo.stderr));
    check("demo-summary.txt", &String::from_utf8(demo.stdout).unwrap(), &mut mismatches);
    assert!(mismatches.is_empty(), "outputs changed:\n{}", mismatches.join("\n"));
}
