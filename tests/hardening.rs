//! Bad and awkward input, end to end through the real binary: line endings,
//! duplicate columns, outputs over inputs, extreme numbers. Each test pins
//! one behaviour found by fuzzing or by hand-made bad files (issue 14).

mod common;

use common::kimech;
use serde_json::Value;

/// Writes `text` to `name` in a fresh directory and returns the directory.
fn file(name: &str, text: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(name), text).unwrap();
    dir
}

fn stderr(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn crlf_line_numbers_are_right_in_error_messages() {
    // Windows (CRLF), old Mac (CR) and mixed endings: the bad cell is on line 3.
    for text in [
        "substrate (uM),rate\r\n1,2\r\n2,x\r\n",
        "substrate (uM),rate\r1,2\r2,x\r",
        "substrate (uM),rate\n1,2\r\n2,x\r",
    ] {
        let out = kimech(std::env::temp_dir().as_path()).args(["km", "-"]).write_stdin(text).output().unwrap();
        let e = stderr(&out);
        assert!(e.contains("<stdin>, line 3, column 'rate'") && e.contains("'x'"), "{text:?}: {e}");
    }
}

#[test]
fn crlf_line_numbers_are_right_in_exported_row_fields() {
    let dir = file("k.csv", "compound,ic50 (nM)\r\n\r\na,100\r\nb,200\r\n");
    let out =
        kimech(dir.path()).args(["ki", "k.csv", "--mechanism", "noncompetitive", "--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", stderr(&out));
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows: Vec<u64> = doc["results"].as_array().unwrap().iter().map(|r| r["row"].as_u64().unwrap()).collect();
    assert_eq!(rows, [3, 4]);
}

#[test]
fn crlf_line_numbers_are_right_in_the_streaming_reader() {
    let text = "plate,compound,concentration (nM),response\r\n\r\nP1,a,1,100\r\nP1,a,x,90\r\n";
    let out = kimech(std::env::temp_dir().as_path()).args(["ic50", "-"]).write_stdin(text).output().unwrap();
    let e = stderr(&out);
    assert!(e.contains("line 4") && e.contains("'x'"), "{e}");
}

#[test]
fn duplicate_column_names_are_an_error_naming_both_in_every_command() {
    let text = "compound,x,Compound (nM)\n1,2,3\n";
    for command in ["rates", "km", "ic50", "mode", "ki", "rank"] {
        let dir = file("d.csv", text);
        let out = kimech(dir.path()).args([command, "d.csv"]).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{command}");
        let e = stderr(&out);
        assert!(
            e.contains("d.csv, line 1")
                && e.contains("column 1 ('compound')")
                && e.contains("column 3 ('Compound (nM)')"),
            "{command}: {e}"
        );
    }
}

#[test]
fn plots_of_values_near_the_largest_double_do_not_panic() {
    let cases = [
        ("km", "substrate (uM),rate\n1,2\n2,3\n1.7e308,4\n"),
        ("km", "substrate (uM),rate\n1,1e300\n2,1.7e308\n3,-1.7e308\n4,4\n5,6\n"),
        ("km", "substrate (uM),rate\n1e-300,2\n2e-300,3\n3e-300,4\n"),
        (
            "ic50",
            "compound,concentration (nM),response\na,0,100\na,1,90\na,10,50\na,100,10\na,1.7e308,5\nb,1,1.7e308\nb,2,-1.7e308\nb,3,4\n",
        ),
        (
            "mode",
            "substrate (uM),inhibitor (uM),rate\n1,0,1.7e308\n2,0,2\n4,0,3\n1,1e300,1\n2,1e300,1.5\n4,1e300,2\n1,1,1\n2,1,2\n4,1,2.5\n",
        ),
    ];
    for (command, text) in cases {
        let dir = file("p.csv", text);
        let out =
            kimech(dir.path()).args([command, "p.csv", "--plot", "plots", "--report", "r.html"]).output().unwrap();
        let code = out.status.code();
        assert!(matches!(code, Some(0 | 2 | 3)), "{command} {text:?}: exit {code:?}: {}", stderr(&out));
        assert!(!stderr(&out).contains("panicked"), "{}", stderr(&out));
    }
}

/// Runs `command - -o in.csv < in.csv` and checks that it refuses and leaves the input as it was.
fn refuses_output_over_stdin(command: &[&str], text: &str) {
    let dir = file("in.csv", text);
    let input = dir.path().join("in.csv");
    // A real file on stdin, as the shell's `<` gives (not a pipe).
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_kimech"))
        .current_dir(dir.path())
        .args(command)
        .args(["-", "-o", "in.csv"])
        .stdin(std::fs::File::open(&input).unwrap())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{command:?}: {}", stderr(&out));
    assert!(stderr(&out).contains("refusing to write the output over an input file"), "{command:?}: {}", stderr(&out));
    assert_eq!(std::fs::read_to_string(&input).unwrap(), text, "{command:?} replaced its input");
    // The same through another name for the same file (a hard link).
    std::fs::hard_link(&input, dir.path().join("link.csv")).unwrap();
    let out = kimech(dir.path()).args(command).args(["in.csv", "-o", "link.csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2), "{command:?} via a hard link: {}", stderr(&out));
    assert_eq!(std::fs::read_to_string(&input).unwrap(), text);
}

#[test]
fn output_over_stdin_is_refused_by_file_identity_in_every_command() {
    let km = "substrate (uM),rate\n1,1\n2,1.6\n5,2.5\n10,3\n20,3.4\n40,3.6\n";
    refuses_output_over_stdin(&["km"], km);
    refuses_output_over_stdin(&["rates"], &common::fixture_text("rates/progress.csv"));
    refuses_output_over_stdin(&["mode"], &common::fixture_text("mode/competitive.csv"));
    let ic50 = "compound,concentration (nM),response\na,0,100\na,1,95\na,10,70\na,100,30\na,1000,5\na,10000,2\n";
    refuses_output_over_stdin(&["ic50"], ic50);
    let ki = "compound,ic50 (nM)\na,100\nb,250\n";
    refuses_output_over_stdin(&["ki", "--mechanism", "noncompetitive"], ki);
    let dir = file("ki.csv", ki);
    let out =
        kimech(dir.path()).args(["ki", "ki.csv", "--mechanism", "noncompetitive", "--format", "csv"]).output().unwrap();
    refuses_output_over_stdin(&["rank"], &String::from_utf8(out.stdout).unwrap());
}

#[test]
fn flat_rates_say_km_is_not_determined_instead_of_converging() {
    let dir = file("f.csv", "substrate (uM),rate\n1,5\n2,5\n5,5\n10,5\n20,5\n");
    let out = kimech(dir.path()).args(["km", "f.csv", "--format", "csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "the one series failed");
    let e = stderr(&out);
    assert!(e.contains("Km is not determined") && e.contains("every rate is 5"), "{e}");
    assert!(!String::from_utf8_lossy(&out.stdout).contains("NaN"));
}

#[test]
fn underflowing_and_overflowing_cells_are_errors_at_their_cell() {
    for (cell, problem) in [("1e-400", "too small"), ("1e400", "too large")] {
        let dir = file("u.csv", &format!("substrate (uM),rate\n1,2\n2,{cell}\n5,4\n"));
        let out = kimech(dir.path()).args(["km", "u.csv"]).output().unwrap();
        let e = stderr(&out);
        assert!(e.contains("u.csv, line 3, column 'rate'") && e.contains(problem) && e.contains(cell), "{e}");
    }
    // A value that a unit conversion carries below the smallest double.
    let dir = file("c.csv", "compound,ic50\na,1e-300 pM\n");
    let out = kimech(dir.path()).args(["ki", "c.csv", "--mechanism", "noncompetitive"]).output().unwrap();
    let e = stderr(&out);
    assert!(e.contains("line 2, column 'ic50'") && e.contains("beyond what a double can hold"), "{e}");
}

/// No number cell of a CSV holds `NaN` or `inf`.
fn assert_no_non_finite_cells(csv: &[u8]) {
    let text = String::from_utf8_lossy(csv);
    for (i, line) in text.lines().enumerate() {
        for cell in line.split(',') {
            let lower = cell.to_ascii_lowercase();
            assert!(!["nan", "inf", "-inf", "+inf", "infinity"].contains(&lower.as_str()), "line {}: {line}", i + 1);
        }
    }
}

#[test]
fn ki_beyond_double_range_is_an_error_row_not_zero_or_infinite_pki() {
    let dir = file("k.csv", "compound,ic50 (nM),substrate (uM),km (uM)\nbig,100,1e300,1e-300\nok,100,10,10\n");
    let out =
        kimech(dir.path()).args(["ki", "k.csv", "--mechanism", "competitive", "--format", "csv"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "{}", stderr(&out));
    assert!(stderr(&out).contains("beyond what a double can hold"), "{}", stderr(&out));
    assert_no_non_finite_cells(&out.stdout);
    let out =
        kimech(dir.path()).args(["ki", "k.csv", "--mechanism", "competitive", "--format", "json"]).output().unwrap();
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let big = &doc["results"][0];
    assert!(big["ki"]["value"].is_null() && big["pki"].is_null() && big["error"].is_string(), "{big}");
}

#[test]
fn extreme_km_inputs_never_write_nan_or_inf_in_a_number_cell() {
    for text in [
        "substrate (uM),rate\n1,1e300\n2,1.7e308\n3,-1.7e308\n4,1e-300\n5,4\n",
        "substrate (uM),rate\n1e-300,2\n2e-300,3\n3e-300,4\n",
        "substrate (uM),rate\n1,2\n2,3\n1.7e308,4\n",
        "substrate (uM),rate\n1,5\n2,5\n5,5.000001\n10,5\n",
    ] {
        let dir = file("x.csv", text);
        let out = kimech(dir.path()).args(["km", "x.csv", "--format", "csv"]).output().unwrap();
        assert!(matches!(out.status.code(), Some(0 | 2 | 3)), "{text:?}");
        assert_no_non_finite_cells(&out.stdout);
    }
}

/// The adequacy figures (runs-test and lack-of-fit p) of `kimech mode` on `text`.
fn mode_adequacy(text: &str) -> (f64, f64) {
    let dir = file("m.csv", text);
    let out = kimech(dir.path()).args(["mode", "m.csv", "--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", stderr(&out));
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let a = &doc["results"][0]["adequacy"];
    (a["runs_p"].as_f64().unwrap(), a["lack_of_fit_p"].as_f64().unwrap())
}

#[test]
fn mode_replicates_group_by_level_whatever_unit_each_cell_is_written_in() {
    let text = common::fixture_text("mode/competitive.csv");
    let mut mixed = String::new();
    for (k, line) in text.lines().enumerate() {
        let cells: Vec<&str> = line.split(',').collect();
        if k == 0 || k % 2 == 1 {
            mixed.push_str(line);
        } else {
            let nm = cells[1].parse::<f64>().unwrap() * 1000.0;
            mixed.push_str(&format!("{},{nm} nM,{}", cells[0], cells[2]));
        }
        mixed.push('\n');
    }
    let (runs_uniform, lof_uniform) = mode_adequacy(&text);
    let (runs_mixed, lof_mixed) = mode_adequacy(&mixed);
    approx::assert_relative_eq!(runs_uniform, runs_mixed, max_relative = 1e-9);
    approx::assert_relative_eq!(lof_uniform, lof_mixed, max_relative = 1e-6);
}

#[test]
fn rates_reject_negative_or_decreasing_times_at_their_cell() {
    let text = "curve,time (min),product (uM)\nA,0,0\nA,1,1\nA,0.5,2\nA,2,3\n";
    let dir = file("t.csv", text);
    let out = kimech(dir.path()).args(["rates", "t.csv"]).output().unwrap();
    let e = stderr(&out);
    assert!(e.contains("t.csv, line 4, column 'time (min)'") && e.contains("goes back from 1 on line 3"), "{e}");
    let dir = file("n.csv", "curve,time (min),product (uM)\r\nA,-1,0\r\nA,1,1\r\nA,2,2\r\n");
    let out = kimech(dir.path()).args(["rates", "n.csv"]).output().unwrap();
    let e = stderr(&out);
    assert!(e.contains("n.csv, line 2, column 'time (min)'") && e.contains("negative"), "{e}");
}

#[test]
fn group_failures_name_the_file_and_shorten_long_ids() {
    let long = "x".repeat(500);
    let text = format!(
        "series,substrate (uM),rate\n{long},1,1\n{long},1,2\n{long},1,3\nok,1,1\nok,2,1.6\nok,5,2.5\nok,10,3\n"
    );
    let dir = file("g.csv", &text);
    let out = kimech(dir.path()).args(["km", "g.csv"]).output().unwrap();
    let e = stderr(&out);
    let message = e.lines().find(|l| l.contains("distinct substrate")).unwrap_or_else(|| panic!("{e}"));
    assert!(message.contains("g.csv, lines 2-4") && message.contains('…'), "{message}");
    assert!(message.len() < 400, "the 500-character id is shortened: {message}");
}

/// Names in `dir` that a run left behind: the output's temporary sibling or the stdin spool.
#[cfg(unix)]
fn kimech_temporaries(dir: &std::path::Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("kimech"))
        .collect()
}

/// Starts `kimech ic50 - ARGS -o out.csv` reading a pipe that stays open, waits until
/// `ready` names a file in the run directory or the temp directory, then sends `signal`.
#[cfg(unix)]
fn kill_ic50_mid_run(args: &[&str], signal: &str, ready: impl Fn(&[String]) -> bool) {
    use std::io::Write;
    use std::process::{Command, Stdio};
    let run = tempfile::tempdir().unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let mut child = Command::new(assert_cmd::cargo::cargo_bin!("kimech"))
        .current_dir(run.path())
        .env("TMPDIR", tmp.path())
        .args(["ic50", "-"])
        .args(args)
        .args(["-o", "out.csv"])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    stdin.write_all(b"plate,compound,concentration (nM),response,control\nP1,,0,100,uninhibited\n").unwrap();
    stdin.flush().unwrap();
    let started = std::time::Instant::now();
    loop {
        let mut seen = kimech_temporaries(run.path());
        seen.extend(kimech_temporaries(tmp.path()));
        if ready(&seen) {
            break;
        }
        assert!(started.elapsed().as_secs() < 20, "no temporary file appeared: {seen:?}");
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let status = Command::new("kill").args([signal, &child.id().to_string()]).status().unwrap();
    assert!(status.success());
    let exit = child.wait().unwrap();
    drop(stdin);
    assert_eq!(exit.code(), Some(130), "the handler exits with 130 after cleaning up");
    assert!(kimech_temporaries(run.path()).is_empty(), "{:?}", kimech_temporaries(run.path()));
    assert!(kimech_temporaries(tmp.path()).is_empty(), "{:?}", kimech_temporaries(tmp.path()));
    assert!(!run.path().join("out.csv").exists(), "no partial output appears");
}

#[cfg(unix)]
#[test]
fn a_killed_run_leaves_no_temporary_output_behind() {
    for signal in ["-INT", "-TERM", "-HUP"] {
        kill_ic50_mid_run(&[], signal, |seen| seen.iter().any(|n| n.starts_with(".out.csv.kimech-")));
    }
}

#[cfg(unix)]
#[test]
fn a_killed_run_leaves_no_stdin_spool_behind() {
    for signal in ["-INT", "-TERM"] {
        kill_ic50_mid_run(&["--normalise"], signal, |seen| seen.iter().any(|n| n.starts_with("kimech-ic50-stdin-")));
    }
}

#[test]
fn a_failed_write_leaves_no_temporary_output_behind() {
    // The output's directory does not exist: the temporary sibling cannot be made, and
    // nothing is left anywhere.
    let dir = file("k.csv", "compound,ic50 (nM)\na,100\n");
    let out = kimech(dir.path())
        .args(["ki", "k.csv", "--mechanism", "noncompetitive", "-o", "missing/out.csv"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(stderr(&out).contains("missing/out.csv"), "{}", stderr(&out));
    let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert_eq!(left.len(), 1, "{left:?}");
}

/// The stderr line of a failed group, which must name the file and shorten a long id.
fn assert_group_failure(e: &str, needle: &str, file_and_lines: &str) {
    let message = e.lines().find(|l| l.contains(needle)).unwrap_or_else(|| panic!("{e}"));
    assert!(message.contains(file_and_lines) && message.contains('…'), "{message}");
    assert!(message.len() < 400, "the 500-character id is shortened: {message}");
}

#[test]
fn ic50_and_mode_group_failures_name_the_file_and_shorten_long_ids() {
    let long = "y".repeat(500);
    let mut text = String::from("compound,concentration (nM),response\n");
    for c in [1, 3, 10, 30, 100, 300, 1000, 3000] {
        text.push_str(&format!("{long},{c},50\n"));
    }
    let dir = file("d.csv", &text);
    let out = kimech(dir.path()).args(["ic50", "d.csv"]).output().unwrap();
    assert_group_failure(&stderr(&out), "responses are equal", "d.csv, lines 2-9");

    // The same compound again after another: the split-compound message.
    let mut split = text.clone();
    for c in [1, 3, 10, 30, 100, 300, 1000, 3000] {
        split.push_str(&format!("other,{c},{}\n", 100.0 / (1.0 + f64::from(c) / 30.0)));
    }
    split.push_str(&format!("{long},1,50\n"));
    let dir = file("s.csv", &split);
    let out = kimech(dir.path()).args(["ic50", "s.csv"]).output().unwrap();
    assert_group_failure(&stderr(&out), "appear again", "s.csv, line 18");

    let mut matrix = String::from("compound,substrate (uM),inhibitor (uM),rate\n");
    for s in [10, 20, 50, 100, 200, 400, 800] {
        matrix.push_str(&format!("{long},{s},0,{}\n", s / 10));
    }
    let dir = file("m.csv", &matrix);
    let out = kimech(dir.path()).args(["mode", "m.csv"]).output().unwrap();
    assert_group_failure(&stderr(&out), "only one inhibitor concentration", "m.csv, lines 2-8");

    // Row failures in ki and rank, too.
    let dir = file("k.csv", &format!("compound,ic50 (nM),substrate (uM),km (uM)\n{long},100,0,10\n"));
    let out = kimech(dir.path()).args(["ki", "k.csv", "--mechanism", "competitive"]).output().unwrap();
    assert_group_failure(&stderr(&out), "not positive", "k.csv, line 2");
    let dir =
        file("r.csv", &format!("compound,ki (nM),method,mechanism,error\n{long},,not converted,competitive,bad S\n"));
    let out = kimech(dir.path()).args(["rank", "r.csv"]).output().unwrap();
    assert_group_failure(&stderr(&out), "the row has no Ki", "r.csv, line 2");
}

/// A matrix over S = 1…50 uM and I = 0…10 uM with rate `v(s, i)`.
fn matrix(v: impl Fn(f64, f64) -> f64) -> String {
    let mut text = String::from("substrate (uM),inhibitor (uM),rate\n");
    for s in [1.0, 2.0, 5.0, 10.0, 20.0, 50.0] {
        for i in [0.0, 1.0, 3.0, 10.0] {
            text.push_str(&format!("{s},{i},{}\n", v(s, i)));
        }
    }
    text
}

#[test]
fn mode_flat_rates_say_km_and_ki_are_not_determined() {
    let dir = file("m.csv", &matrix(|_, _| 5.0));
    let out = kimech(dir.path()).args(["mode", "m.csv", "--format", "json"]).output().unwrap();
    assert_eq!(out.status.code(), Some(3), "the one compound failed");
    let e = stderr(&out);
    assert!(e.contains("every rate is 5") && e.contains("Km is not determined") && e.contains("Ki"), "{e}");
}

#[test]
fn mode_with_an_inhibitor_that_changes_nothing_gives_no_ki_not_a_huge_one() {
    // Michaelis–Menten rates, the same at every inhibitor level (Vmax 100, Km 5 uM).
    let dir = file("m.csv", &matrix(|s, _| 100.0 * s / (5.0 + s)));
    let out = kimech(dir.path()).args(["mode", "m.csv", "--format", "json"]).output().unwrap();
    assert!(out.status.success(), "{}", stderr(&out));
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &doc["results"][0];
    assert_eq!(r["chosen"], "none");
    assert!(r["headline"]["ki"]["value"].is_null(), "{}", r["headline"]);
    for model in r["models"].as_array().unwrap() {
        for key in ["ki", "kiu"] {
            if let Some(p) = model["params"].get(key) {
                assert!(p["value"].is_null(), "{} {key}: {p}", model["model"]);
                assert!(p["note"].as_str().unwrap().contains("not determined"), "{p}");
            }
        }
    }
    assert!(r["warnings"].to_string().contains("no-inhibition-detected"), "{}", r["warnings"]);
}

/// A dose-response table for compound X at 1…3000 nM with response `y(c)`.
fn curve(y: impl Fn(f64) -> f64) -> String {
    let mut text = String::from("compound,concentration (nM),response\n");
    for c in [1.0, 3.0, 10.0, 30.0, 100.0, 300.0, 1000.0, 3000.0] {
        text.push_str(&format!("X,{c},{}\n", y(c)));
    }
    text
}

#[test]
fn ic50_degenerate_curves_name_the_parameter_the_data_cannot_determine() {
    let dir = file("c.csv", &curve(|_| 50.0));
    let e = stderr(&kimech(dir.path()).args(["ic50", "c.csv"]).output().unwrap());
    assert!(e.contains("all 8 responses are equal") && e.contains("neither the IC50 nor the Hill slope"), "{e}");

    // Beyond what squares of doubles hold: an error, not a wrong 'inactive' call.
    for (scale, what) in [(1e300, "as large as"), (1e-300, "span only")] {
        let dir = file("c.csv", &curve(|c| scale * 100.0 / (1.0 + c / 30.0)));
        let out = kimech(dir.path()).args(["ic50", "c.csv", "--format", "csv"]).output().unwrap();
        assert_eq!(out.status.code(), Some(3));
        let e = stderr(&out);
        assert!(e.contains(what) && e.contains("IC50, Hill slope and asymptotes cannot be determined"), "{e}");
    }
    // Rates too: the same limit in mode.
    let dir = file("m.csv", &matrix(|s, i| 1e300 * s / (5.0 + s * (1.0 + i))));
    let e = stderr(&kimech(dir.path()).args(["mode", "m.csv"]).output().unwrap());
    assert!(e.contains("rates as large as"), "{e}");

    // A perfect step between 10 and 30 nM: the slope is not determined, and the JSON says so.
    let dir = file("c.csv", &curve(|c| if c < 20.0 { 100.0 } else { 0.0 }));
    let out = kimech(dir.path()).args(["ic50", "c.csv", "--format", "json"]).output().unwrap();
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    let hill = &doc["results"][0]["hill"];
    assert!(hill["se"].is_null(), "{hill}");
    assert!(hill["note"].as_str().unwrap().contains("Hill slope standard error not determined"), "{hill}");
}

/// Whether `cell` is how Rust, JSON writers or spreadsheets spell a non-finite number.
fn is_non_finite(cell: &str) -> bool {
    let c = cell.trim().trim_matches('"').to_ascii_lowercase();
    ["nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"].contains(&c.as_str())
}

/// Every string in a JSON document that spells a non-finite number.
fn non_finite_json_strings(v: &Value, out: &mut Vec<String>) {
    match v {
        Value::String(s) if is_non_finite(s) => out.push(s.clone()),
        Value::Array(a) => a.iter().for_each(|x| non_finite_json_strings(x, out)),
        Value::Object(o) => o.values().for_each(|x| non_finite_json_strings(x, out)),
        _ => {}
    }
}

/// Runs `kimech ARGS FILE --format F` for every format on `text`: no panic, and no
/// non-finite number in any output: no CSV cell, no JSON value (the document must parse
/// strictly, which refuses `NaN` and `Infinity`, and no string spells one) and no word of
/// the human table is `NaN` or `inf` (how Rust prints them; prose such as "lies at
/// infinity" and the table's `→ ∞` are words, not numbers).
fn assert_finite_everywhere(args: &[&str], text: &str) {
    let dir = file("x.csv", text);
    for format in ["csv", "json", "table"] {
        let out = kimech(dir.path()).args(args).args(["x.csv", "--format", format]).output().unwrap();
        assert!(matches!(out.status.code(), Some(0 | 2 | 3)), "{args:?} {format} on {text:?}: {}", stderr(&out));
        let stdout = String::from_utf8_lossy(&out.stdout);
        let bad: Vec<String> = match format {
            "csv" => stdout.lines().flat_map(|l| l.split(',')).filter(|c| is_non_finite(c)).map(String::from).collect(),
            "json" if stdout.is_empty() => Vec::new(),
            "json" => {
                let doc: Value = serde_json::from_str(&stdout)
                    .unwrap_or_else(|e| panic!("{args:?}: JSON does not parse ({e}) for {text:?}:\n{stdout}"));
                let mut bad = Vec::new();
                non_finite_json_strings(&doc, &mut bad);
                bad
            }
            _ => stdout
                .split(|c: char| !c.is_ascii_alphanumeric())
                .filter(|w| *w == "NaN" || *w == "inf")
                .map(String::from)
                .collect(),
        };
        assert!(bad.is_empty(), "{args:?} --format {format} wrote {bad:?} for {text:?}:\n{stdout}");
    }
}

#[test]
fn no_command_writes_nan_or_inf_for_extreme_but_valid_input() {
    let progress = |f: &dyn Fn(f64) -> f64| {
        let mut t = String::from("curve,time (min),product (uM)\n");
        for k in 0..8 {
            t.push_str(&format!("A,{k},{}\n", f(f64::from(k))));
        }
        t
    };
    for text in [
        progress(&|t| 1e300 * t),
        progress(&|t| 1e-300 * t),
        progress(&|t| 1.7e308 * t / 8.0),
        progress(&|_| 0.0),
        progress(&|_| 5.0),
        "curve,time (min),product (uM)\nA,0,0\nA,1e-300,1\nA,2e-300,2\n".into(),
    ] {
        assert_finite_everywhere(&["rates"], &text);
    }

    for text in [
        "substrate (uM),rate\n1,1e300\n2,1.7e308\n3,-1.7e308\n4,1e-300\n5,4\n",
        "substrate (uM),rate\n1e-300,2\n2e-300,3\n3e-300,4\n",
        "substrate (uM),rate\n1e300,2\n2e300,3\n3e300,4\n",
        "substrate (uM),rate\n1,0\n2,0\n3,0\n",
        "substrate (uM),rate\n1,5\n2,5\n5,5\n",
        "substrate (uM),rate\n0,0\n1,1\n2,2\n4,4\n",
    ] {
        assert_finite_everywhere(&["km"], text);
    }

    for text in [
        matrix(|s, i| 1e140 * s / (5.0 + s * (1.0 + i))),
        matrix(|s, i| 1e-140 * s / (5.0 + s * (1.0 + i))),
        matrix(|s, i| 1e300 * s / (5.0 + s * (1.0 + i))),
        matrix(|_, _| 0.0),
        matrix(|_, i| 100.0 / (1.0 + i / 2.0)),
        matrix(|s, i| 3.0 * s / (1.0 + i / 2.0)),
        matrix(|s, _| 100.0 * s / (5.0 + s)),
        matrix(|s, i| if i == 0.0 { s } else { 0.0 }),
    ] {
        assert_finite_everywhere(&["mode"], &text);
    }

    for text in [
        curve(|c| 1e140 * 100.0 / (1.0 + c / 30.0)),
        curve(|c| 1e-140 * 100.0 / (1.0 + c / 30.0)),
        curve(|c| 1e300 * 100.0 / (1.0 + c / 30.0)),
        curve(|_| 0.0),
        curve(|c| if c < 20.0 { 100.0 } else { 0.0 }),
        curve(|c| 100.0 - c / 100.0),
        curve(|c| if c == 100.0 { 1e6 } else { 100.0 / (1.0 + c / 30.0) }),
        "compound,concentration (nM),response\nX,0,100\nX,1e-300,90\nX,1e300,0\nX,1,50\nX,2,40\nX,3,30\n".into(),
    ] {
        assert_finite_everywhere(&["ic50"], &text);
    }

    let ki = "compound,ic50 (nM),substrate (uM),km (uM)\n\
              a,1e300,10,10\nb,1e-300,10,10\nc,100,0,10\nd,100,1e300,1e-300\ne,100,1e-300,1e300\n\
              f,> 1e300,10,10\ng,< 1e-300,10,10\nh,100,10,10\n";
    for mechanism in ["competitive", "uncompetitive", "noncompetitive"] {
        assert_finite_everywhere(&["ki", "--mechanism", mechanism], ki);
    }
    // rank on what ki wrote for those rows, and on a hand-made table of extreme constants.
    let dir = file("k.csv", ki);
    let out =
        kimech(dir.path()).args(["ki", "k.csv", "--mechanism", "competitive", "--format", "csv"]).output().unwrap();
    assert_finite_everywhere(&["rank"], &String::from_utf8(out.stdout).unwrap());
    let hand = "compound,ki (nM),method,mechanism\na,1e-300,cheng-prusoff,competitive\n\
                a,1e300,cheng-prusoff,competitive\nb,> 1e300,cheng-prusoff,competitive\nc,0.0001,measured,mixed\n";
    assert_finite_everywhere(&["rank"], hand);

    let onset = |f: &dyn Fn(f64, f64) -> f64| {
        let mut t = String::from("compound,inhibitor (uM),time (min),signal\n");
        for i in [0.0, 1.0, 3.0, 10.0] {
            for k in 0..10 {
                let time = f64::from(k) * 3.0;
                t.push_str(&format!("X,{i},{time},{}\n", f(i, time)));
            }
        }
        t
    };
    for text in
        [onset(&|_, t| 1e300 * t), onset(&|_, t| 1e-300 * t), onset(&|_, _| 5.0), onset(&|i, t| 100.0 * t / (1.0 + i))]
    {
        assert_finite_everywhere(&["onset", "--substrate", "40 uM", "--km", "20 uM"], &text);
    }
}
