//! Writing results: the output format, an atomic file writer that never
//! overwrites an input, and the spreadsheet formula guard for exported text.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// How results are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum Format {
    /// A table for people.
    #[default]
    Table,
    /// Comma-separated values, one header row.
    Csv,
    /// JSON, as documented per command.
    Json,
}

/// Writes `bytes` to `path` (stdout when `None` or `-`). A file is written to
/// a temporary sibling first and renamed into place, so a crash never leaves
/// half a file; `inputs` are refused as targets.
pub fn write_output(path: Option<&Path>, bytes: &[u8], inputs: &[&str]) -> Result<()> {
    let Some(path) = path.filter(|p| p.as_os_str() != "-") else {
        let mut out = std::io::stdout().lock();
        return out
            .write_all(bytes)
            .and_then(|_| out.flush())
            .map_err(|source| Error::Write { path: PathBuf::from("<stdout>"), source });
    };
    refuse_inputs(path, inputs)?;
    let write_error = |source| Error::Write { path: path.to_path_buf(), source };
    if is_special_file(path) {
        return std::fs::write(path, bytes).map_err(write_error);
    }
    let temp = super::identity::temp_sibling(path);
    let _registered = super::cleanup::register(&temp);
    std::fs::write(&temp, bytes).map_err(|source| {
        let _ = std::fs::remove_file(&temp); // a full disk leaves no half-written temporary
        write_error(source)
    })?;
    std::fs::rename(&temp, path).map_err(|source| {
        let _ = std::fs::remove_file(&temp);
        write_error(source)
    })
}

/// A device or pipe (`-o /dev/null`, a FIFO) must be written in place:
/// renaming a temporary file over it would replace it with a plain file.
pub(crate) fn is_special_file(path: &Path) -> bool {
    std::fs::metadata(path).is_ok_and(|m| !m.is_file() && !m.is_dir())
}

pub(crate) fn refuse_inputs(path: &Path, inputs: &[&str]) -> Result<()> {
    let Ok(target) = path.canonicalize() else {
        return Ok(()); // does not exist yet, so it is no input
    };
    for input in inputs {
        let clash = match *input {
            "-" => super::identity::is_stdin(path),
            input => {
                Path::new(input).canonicalize().is_ok_and(|i| i == target)
                    || super::identity::same_file(Path::new(input), path)
            }
        };
        if clash {
            return Err(Error::OutputIsInput { path: path.to_path_buf() });
        }
    }
    Ok(())
}

/// Makes a text cell safe to open in a spreadsheet: a cell that starts with
/// `= + - @`, tab or carriage return would be run as a formula, so it gets a
/// leading apostrophe (OWASP, "CSV Injection", recommended mitigation). A cell
/// that is a plain number (`-1.08`, `+3`, `1e-9`) is left alone: a spreadsheet
/// reads it as that number, and an apostrophe would turn it into text.
pub fn neutralise_formula(text: &str) -> String {
    match text.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') if !is_plain_number(text) => format!("'{text}"),
        _ => text.to_string(),
    }
}

/// A finite decimal number and nothing else (no spaces, no formula syntax).
fn is_plain_number(text: &str) -> bool {
    text.bytes().all(|b| b.is_ascii_digit() || matches!(b, b'-' | b'+' | b'.' | b'e' | b'E'))
        && text.parse::<f64>().is_ok_and(f64::is_finite)
}

/// A qualifier for a CSV cell, written one way by every export: exact is an
/// empty cell (a lone `=` would start a spreadsheet formula), everything else
/// its symbol (`~`, `<`, `<=`, `>`, `>=`).
pub fn qualifier_cell(q: crate::units::Qualifier) -> String {
    if q == crate::units::Qualifier::Equal { String::new() } else { q.symbol().to_string() }
}

/// A number for an export cell: ten significant digits (so that unit
/// conversions do not print as 49.999999999999986); empty when absent or not finite.
pub fn export_number(v: Option<f64>) -> String {
    v.filter(|x| x.is_finite()).map_or(String::new(), |x| {
        let rounded: f64 = format!("{x:.9e}").parse().unwrap_or(x);
        format!("{rounded}")
    })
}

/// One cell of an exported row: text goes through the formula guard, numbers never do.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Text, guarded.
    Text(String),
    /// A number (ten significant digits); empty when absent or not finite.
    Number(Option<f64>),
    /// A number with every digit it has (the shortest text that reads back
    /// as the same f64), for values another command reads again; empty when
    /// absent or not finite.
    Full(Option<f64>),
    /// A count; empty when absent.
    Count(Option<usize>),
}

impl Cell {
    /// The cell as written.
    pub fn render(&self) -> String {
        match self {
            Cell::Text(t) => neutralise_formula(t),
            Cell::Number(v) => export_number(*v),
            Cell::Full(v) => v.filter(|x| x.is_finite()).map_or(String::new(), |x| format!("{x}")),
            Cell::Count(n) => n.map_or(String::new(), |n| n.to_string()),
        }
    }
}

/// A row whose cells are already rendered (guard applied), so that a parallel
/// pipeline can format its numbers on the worker threads and leave only the
/// writing to [`CsvExport::rendered`]. Only [`Cell`]s make one.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RenderedRow(Vec<String>);

impl RenderedRow {
    /// Renders `cells`.
    pub fn new(cells: &[Cell]) -> RenderedRow {
        RenderedRow(cells.iter().map(Cell::render).collect())
    }
}

/// The one CSV writer of the exports: a guarded header row, then rows of [`Cell`]s.
pub struct CsvExport<W: Write> {
    writer: csv::Writer<W>,
}

impl<W: Write> CsvExport<W> {
    /// Starts the file with its header (each name through the formula guard).
    pub fn new(out: W, header: &[String]) -> Result<CsvExport<W>> {
        let mut writer = csv::Writer::from_writer(out);
        let guarded: Vec<String> = header.iter().map(|h| neutralise_formula(h)).collect();
        writer.write_record(&guarded).map_err(|e| Error::Serialise(e.to_string()))?;
        Ok(CsvExport { writer })
    }

    /// Writes one row.
    pub fn row(&mut self, cells: &[Cell]) -> Result<()> {
        self.writer.write_record(cells.iter().map(Cell::render)).map_err(|e| Error::Serialise(e.to_string()))
    }

    /// Writes one row rendered elsewhere.
    pub fn rendered(&mut self, row: &RenderedRow) -> Result<()> {
        self.writer.write_record(&row.0).map_err(|e| Error::Serialise(e.to_string()))
    }

    /// Flushes and returns the destination.
    pub fn finish(self) -> Result<W> {
        self.writer.into_inner().map_err(|e| Error::Serialise(e.to_string()))
    }
}

/// Serialises rows to CSV bytes with one header row.
pub fn csv_bytes<T: serde::Serialize>(rows: &[T]) -> Result<Vec<u8>> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    for row in rows {
        writer.serialize(row).map_err(|e| Error::Serialise(e.to_string()))?;
    }
    writer.into_inner().map_err(|e| Error::Serialise(e.to_string()))
}

/// Pretty JSON with a trailing newline.
pub fn json_bytes<T: serde::Serialize>(value: &T) -> Result<Vec<u8>> {
    let mut bytes = serde_json::to_vec_pretty(value).map_err(|e| Error::Serialise(e.to_string()))?;
    bytes.push(b'\n');
    Ok(super::provenance::append_to_json(bytes))
}

/// A JSON document written a row at a time, laid out exactly as serde_json's
/// pretty printer lays out the whole document, so that a million results need
/// not be held in memory. `head` must serialise to an object whose last field
/// is an empty `results` list; the rows go into that list.
pub struct JsonRows<W: Write> {
    out: W,
    rows: usize,
}

impl<W: Write> JsonRows<W> {
    /// Writes everything before the first row.
    pub fn start(mut out: W, head: &impl serde::Serialize) -> Result<JsonRows<W>> {
        let text = serde_json::to_string_pretty(head).map_err(|e| Error::Serialise(e.to_string()))?;
        let Some(prefix) = text.trim_end().strip_suffix('}').map(str::trim_end).and_then(|t| t.strip_suffix("[]"))
        else {
            return Err(Error::Serialise("the JSON head does not end with an empty results list".into()));
        };
        out.write_all(prefix.as_bytes()).map_err(serialise_io)?;
        Ok(JsonRows { out, rows: 0 })
    }

    /// Writes one row.
    pub fn row(&mut self, row: &impl serde::Serialize) -> Result<()> {
        let text = serde_json::to_string_pretty(row).map_err(|e| Error::Serialise(e.to_string()))?;
        let separator = if self.rows == 0 { "[\n    " } else { ",\n    " };
        self.rows += 1;
        self.out.write_all(separator.as_bytes()).map_err(serialise_io)?;
        self.out.write_all(text.replace('\n', "\n    ").as_bytes()).map_err(serialise_io)
    }

    /// Closes the list and the document, with the run's provenance as its last field.
    pub fn finish(mut self) -> Result<W> {
        let list: &str = if self.rows == 0 { "[]\n}\n" } else { "\n  ]\n}\n" };
        let tail =
            String::from_utf8(super::provenance::append_to_json(format!("{{\n  \"results\": {list}").into_bytes()))
                .unwrap_or_default();
        let tail = tail.strip_prefix("{\n  \"results\": ").unwrap_or(list);
        self.out.write_all(tail.as_bytes()).map_err(serialise_io)?;
        Ok(self.out)
    }
}

fn serialise_io(e: std::io::Error) -> Error {
    Error::Serialise(e.to_string())
}

/// kimech's table look: a thin rule above and below, a dotted rule under the
/// header, nothing between rows.
const GRID_STYLE: comfy_table::TableStyle = comfy_table::TableStyle::new()
    .top_border(comfy_table::LineStyle::none().fill('─').junction('─'))
    .header_separator(comfy_table::LineStyle::none().fill('┄').junction('┄'))
    .bottom_border(comfy_table::LineStyle::none().fill('─').junction('─'));

/// A table for people in kimech's plain style.
pub fn new_grid(header: Vec<String>) -> comfy_table::Table {
    let mut grid = comfy_table::Table::new();
    grid.load_style(GRID_STYLE);
    grid.set_header(header);
    grid
}

/// Numbers for people (defined beside the units, so that the core can word
/// its messages without the output layer).
pub use crate::units::sig;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neutralises_formula_starts_only() {
        assert_eq!(neutralise_formula("=HYPERLINK(\"x\")"), "'=HYPERLINK(\"x\")");
        assert_eq!(neutralise_formula("@SUM(A1)"), "'@SUM(A1)");
        assert_eq!(neutralise_formula("\tcmd"), "'\tcmd");
        assert_eq!(neutralise_formula("KX-101"), "KX-101");
        assert_eq!(neutralise_formula("-1+2"), "'-1+2");
        assert_eq!(neutralise_formula("-cmd"), "'-cmd");
        assert_eq!(neutralise_formula("-inf"), "'-inf");
    }

    #[test]
    fn numbers_stay_numbers_negative_ones_included() {
        for n in ["-1.08", "-3", "+2.5", "-1e-9", "0.5"] {
            assert_eq!(neutralise_formula(n), n);
        }
        assert_eq!(Cell::Number(Some(-1.08)).render(), "-1.08");
        assert_eq!(Cell::Number(Some(f64::NAN)).render(), "");
        assert_eq!(qualifier_cell(crate::units::Qualifier::Equal), "");
        assert_eq!(qualifier_cell(crate::units::Qualifier::About), "~");
    }

    #[test]
    fn full_numbers_round_trip_and_rendered_rows_keep_the_guard() {
        assert_eq!(Cell::Full(Some(80.65622605300506)).render(), "80.65622605300506");
        assert_eq!(Cell::Full(Some(-0.5230419964063273)).render(), "-0.5230419964063273");
        assert_eq!(Cell::Full(Some(f64::INFINITY)).render(), "");
        let row = RenderedRow::new(&[Cell::Text("=1+2".into()), Cell::Full(Some(-1.5)), Cell::Text("a,b".into())]);
        let mut export = CsvExport::new(Vec::new(), &["=SUM(A1)".into(), "x".into(), "y".into()]).unwrap();
        export.rendered(&row).unwrap();
        let bytes = export.finish().unwrap();
        assert_eq!(String::from_utf8(bytes).unwrap(), "'=SUM(A1),x,y\n'=1+2,-1.5,\"a,b\"\n");
    }

    #[test]
    fn json_rows_match_the_pretty_printer() {
        #[derive(serde::Serialize)]
        struct Doc {
            unit: &'static str,
            results: Vec<serde_json::Value>,
        }
        for rows in [vec![], vec![serde_json::json!({"a": 1, "b": [1, 2]}), serde_json::json!({"a": null})]] {
            let mut out = JsonRows::start(Vec::new(), &Doc { unit: "nM", results: Vec::new() }).unwrap();
            for r in &rows {
                out.row(r).unwrap();
            }
            let streamed = out.finish().unwrap();
            assert_eq!(
                String::from_utf8(streamed).unwrap(),
                String::from_utf8(json_bytes(&Doc { unit: "nM", results: rows }).unwrap()).unwrap()
            );
        }
    }

    #[test]
    fn formats_significant_digits() {
        assert_eq!(sig(3308.26504, 6), "3308.27");
        assert_eq!(sig(0.0641213, 4), "0.06412");
        assert_eq!(sig(1.5e-9, 3), "1.50e-9");
    }

    #[test]
    fn writes_to_a_pipe_in_place_without_replacing_it() {
        // A FIFO stands in for /dev/null: renaming over either would replace it with a file.
        use std::os::unix::fs::FileTypeExt;
        let dir = tempfile::tempdir().unwrap();
        let fifo = dir.path().join("pipe");
        let made = std::process::Command::new("mkfifo").arg(&fifo).status().unwrap();
        assert!(made.success());
        let reader = {
            let fifo = fifo.clone();
            std::thread::spawn(move || std::fs::read(fifo).unwrap())
        };
        write_output(Some(&fifo), b"through the pipe", &[]).unwrap();
        assert_eq!(reader.join().unwrap(), b"through the pipe");
        assert!(std::fs::metadata(&fifo).unwrap().file_type().is_fifo());
    }

    #[test]
    fn refuses_to_overwrite_an_input() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("in.csv");
        std::fs::write(&input, "x\n1\n").unwrap();
        let err = write_output(Some(&input), b"y", &[input.to_str().unwrap()]).unwrap_err();
        assert!(matches!(err, Error::OutputIsInput { .. }));
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "x\n1\n");
    }
}
