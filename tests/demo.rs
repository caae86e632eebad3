//! `kimech demo`, the README's first command, runs the whole chain.

mod common;

use predicates::prelude::*;

#[test]
fn demo_runs_every_stage_and_ends_with_the_caution() {
    let dir = tempfile::tempdir().unwrap();
    common::kimech(dir.path())
        .arg("demo")
        .assert()
        .success()
        .stdout(predicate::str::contains("Stage 1 — progress curves → initial rates"))
        .stdout(predicate::str::contains("Michaelis–Menten fit — series batch-A"))
        .stdout(predicate::str::contains("IC50 → Ki"))
        .stdout(predicate::str::contains("Ranking by pKi"))
        .stdout(predicate::str::contains("research estimates"));
}
