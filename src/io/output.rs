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
/// leading apostrophe (OWASP, "CSV Injection", recommended mitigation).
pub fn neutralise_formula(text: &str) -> String {
    match text.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') => format!("'{text}"),
        _ => text.to_string(),
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
    Ok(bytes)
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

/// A number for people: `digits` significant digits, scientific when very
/// large or small.
pub fn sig(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return if value.is_nan() { "—".into() } else { format!("{value}") };
    }
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-4..6).contains(&magnitude) {
        return format!("{:.*e}", digits.saturating_sub(1), value);
    }
    let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
    format!("{value:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neutralises_formula_starts_only() {
        assert_eq!(neutralise_formula("=HYPERLINK(\"x\")"), "'=HYPERLINK(\"x\")");
        assert_eq!(neutralise_formula("@SUM(A1)"), "'@SUM(A1)");
        assert_eq!(neutralise_formula("\tcmd"), "'\tcmd");
        assert_eq!(neutralise_formula("KX-101"), "KX-101");
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
