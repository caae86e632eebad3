//! `kimech demo`, the README's first command, runs the whole chain.

mod common;

use predicates::prelude::*;

#[test]
fn demo_runs_every_stage_states_the_caution_and_writes_its_report() {
    let dir = tempfile::tempdir().unwrap();
    common::kimech(dir.path())
        .arg("demo")
        .assert()
        .success()
        .stdout(predicate::str::contains("Stage 1 — progress curves → initial rates"))
        .stdout(predicate::str::contains("Michaelis–Menten fit — series batch-A"))
        .stdout(predicate::str::contains("Inhibition mode — KX-206 — headline"))
        .stdout(predicate::str::contains("MECHANISM UNCERTAIN"))
        .stdout(predicate::str::contains("warning [partial-inhibition]"))
        .stdout(predicate::str::contains("IC50 → Ki"))
        // The raw plates fitted with and without --normalise give the same calls (issue 9).
        .stdout(predicate::str::contains("the same call and qualifier for 30 of 30 compounds"))
        .stdout(predicate::str::contains("Ranking by pKi"))
        .stdout(predicate::str::contains("KX-302: onset two-step, reversible (slow-binding)"))
        .stdout(predicate::str::contains("research estimates"))
        .stdout(predicate::str::contains("Report written to kimech-demo-report.html"));
    let report = std::fs::read_to_string(dir.path().join("kimech-demo-report.html")).unwrap();
    assert!(report.contains("<svg") && report.contains("research estimates"));
    // Issue 12: the report is a document — every table is an HTML table (no
    // preformatted terminal text that a narrow window cuts off), each command
    // with a summary, rows with an error or a flag listed first.
    assert!(!report.contains("<pre class=\"table\">"), "a terminal table was pasted into the report");
    assert!(report.contains("<h3>Summary (compounds with a warning first)</h3>"));
    assert!(report.contains("compounds. Calls: competitive × 1"), "the mode summary counts the calls");
    assert!(report.contains("<h3>Rows with an error or a flag</h3>"));
    assert!(report.matches("<div class=\"scroll\"><table>").count() >= 10, "tables scroll instead of being cut off");
    // People read µM; the files keep the ASCII uM.
    assert!(report.contains("Km (µM)") && !report.contains("Km (uM)"));
    // Potencies to three significant figures in what people read.
    assert!(report.contains("Ki = 42.3 nM"), "three significant figures for a potency");
}
