//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// The real `kimech` binary, run in a fresh temporary directory.
pub fn kimech(dir: &Path) -> assert_cmd::Command {
    let mut cmd = assert_cmd::cargo::cargo_bin_cmd!("kimech");
    cmd.current_dir(dir);
    cmd
}

/// Path of a file under `fixtures/`.
pub fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures").join(name)
}

/// A fixture's text.
pub fn fixture_text(name: &str) -> String {
    std::fs::read_to_string(fixture(name)).unwrap_or_else(|e| panic!("fixture {name}: {e}"))
}

/// A JSON fixture, parsed.
pub fn fixture_json(name: &str) -> serde_json::Value {
    serde_json::from_str(&fixture_text(name)).unwrap_or_else(|e| panic!("fixture {name}: {e}"))
}

/// Number of leading significant digits on which `a` and `b` agree.
pub fn agreeing_digits(a: f64, b: f64) -> f64 {
    if a == b { 16.0 } else { -((a - b).abs() / b.abs()).log10() }
}
