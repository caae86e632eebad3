//! Shared by the fuzz targets: the library's own readers and commands, run
//! in-process on the fuzzer's bytes (no process is spawned). Errors are the
//! expected answer to most inputs; only a panic, hang or crash is a finding.

#![allow(dead_code)]

use std::io::Read;

/// Reads `bytes` with the in-memory reader and touches every cell through
/// each accessor, as commands do. True when the bytes were a table.
pub fn read_table(bytes: &[u8]) -> bool {
    let Ok(table) = kimech::io::Table::parse("fuzz.csv", bytes, b',') else { return false };
    for row in &table.rows {
        for col in 0..table.columns.len() {
            let _ = table.number(row, col);
            let _ = table.optional_number(row, col);
            let _ = table.concentration(row, col, Some(kimech::units::ConcUnit::Micromolar), "--unit");
            let _ = table.header_unit(col);
        }
    }
    for col in 0..table.columns.len() {
        let _ = table.column_unit(col, None);
    }
    true
}

/// Reads `bytes` with the streaming reader, one row at a time. True when
/// every row was read.
pub fn read_stream(bytes: &[u8]) -> bool {
    let input: Box<dyn Read + Send> = Box::new(std::io::Cursor::new(bytes.to_vec()));
    let Ok(mut stream) = kimech::io::stream::RowStream::new("fuzz.csv", input, b',') else { return false };
    let mut row = kimech::io::input::Record { line: 0, cells: Vec::new() };
    loop {
        match stream.next_into(&mut row) {
            Ok(true) => {}
            Ok(false) => return true,
            Err(_) => return false,
        }
        for col in 0..row.cells.len() {
            let _ = stream.table().number(&row, col);
            let _ = stream.table().concentration(&row, col, None, "--unit");
        }
    }
}

/// The output formats, one of which each command input is written in.
pub const FORMATS: [&str; 3] = ["csv", "json", "table"];

/// The format an input is written in under the fuzzer: taken from its
/// length, so that every writer is reached (a mutation that adds or drops a
/// byte changes it) while the analysis, which costs far more than any
/// writer, runs once per input instead of once per format.
pub fn format_of(bytes: &[u8]) -> &'static str {
    FORMATS[bytes.len() % FORMATS.len()]
}

/// Runs `kimech <args…> FILE --format FORMAT -o /dev/null` on `bytes`
/// through the library's command line (the same path as the binary). True
/// when the command succeeded for every row or group.
pub fn run_command(args: &[&str], bytes: &[u8], format: &str) -> bool {
    static RUNS: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let run = RUNS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    // Unique per process and call, so parallel test threads do not share a file.
    let path = std::env::temp_dir().join(format!("kimech-fuzz-{}-{run}.csv", std::process::id()));
    if std::fs::write(&path, bytes).is_err() {
        return false;
    }
    let file = path.to_string_lossy().into_owned();
    let mut argv = vec!["kimech"];
    argv.extend_from_slice(args);
    argv.extend_from_slice(&[file.as_str(), "--format", format, "-o", "/dev/null"]);
    let ok = kimech::cli::run(argv).is_ok();
    let _ = std::fs::remove_file(&path);
    ok
}

/// A target: true when the input ran to a result.
pub type Target = fn(&[u8]) -> bool;

/// The command targets by name, with the command line each runs.
pub const COMMANDS: [(&str, &[&str]); 6] = [
    ("rates", &["rates"]),
    ("km", &["km"]),
    ("ic50", &["ic50"]),
    ("mode", &["mode"]),
    ("ki", &KI_ARGS),
    ("rank", &["rank"]),
];

/// A command target's run: its command line on the bytes, in the format the
/// bytes choose.
fn command(name: &str, bytes: &[u8]) -> bool {
    let args = COMMANDS.iter().find(|c| c.0 == name).map_or(&[][..], |c| c.1);
    run_command(args, bytes, format_of(bytes))
}

/// Every fuzz target by name: the corpus directory it reads and what it runs.
pub const TARGETS: [(&str, Target); 8] = [
    ("read_table", read_table),
    ("read_stream", read_stream),
    ("rates", |b| command("rates", b)),
    ("km", |b| command("km", b)),
    ("ic50", |b| command("ic50", b)),
    ("mode", |b| command("mode", b)),
    ("ki", |b| command("ki", b)),
    ("rank", |b| command("rank", b)),
];

/// `ki` with conditions on the command line, so rows without them convert.
pub const KI_ARGS: [&str; 7] = ["ki", "--mechanism", "competitive", "--substrate", "10 uM", "--km", "5 uM"];
