//! Streaming input and output for files too large to hold in memory
//! (screening campaigns with millions of rows).
//!
//! [`RowStream`] reads the same CSV dialect as [`Table::read`] (comments,
//! trimming, header units, delimiter by extension) one row at a time into a
//! reused [`Record`], and exposes a header-only [`Table`] so that the very
//! same cell accessors (`number`, `concentration`, their error messages)
//! apply. [`OutputSink`] writes to stdout, or to a temporary sibling of the
//! target that is renamed into place on [`OutputSink::commit`], like
//! [`super::write_output`] but without holding the whole output.

use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use super::input::{Column, Record, Table, check_unique_columns, describe_csv_error};
use super::line_endings::{LineLog, UnifiedLineEndings};
use crate::error::{Error, Result};

/// Rows of a CSV, one at a time.
pub struct RowStream {
    table: Table,
    reader: csv::Reader<Box<dyn Read + Send>>,
    /// The raw record, reused: fields are checked for UTF-8 and trimmed as
    /// they are copied into the caller's [`Record`], with no allocation per row.
    record: csv::ByteRecord,
    /// The text of `record` (checked once for UTF-8).
    text: String,
    /// Where each trimmed field lies in `text`.
    fields: Vec<(usize, usize)>,
    rows: u64,
    lines: LineLog,
    /// The line the record in `record` starts on.
    line: u64,
}

impl RowStream {
    /// Opens `path` (`-` for stdin).
    pub fn open(path: &str) -> Result<RowStream> {
        let source = if path == "-" { "<stdin>".to_string() } else { path.to_string() };
        let input: Box<dyn Read + Send> = if path == "-" {
            Box::new(std::io::stdin())
        } else {
            let file = std::fs::File::open(path).map_err(|e| Error::Read { path: source.clone(), source: e })?;
            Box::new(file)
        };
        let input: Box<dyn Read + Send> = Box::new(super::provenance::HashingReader::new(path, input));
        RowStream::new(&source, input, delimiter_for(path))
    }

    /// Reads from any byte source; `source` names it in errors. Blank
    /// lines and comments (first cell starting with `#`) are skipped, as by
    /// [`Table::parse`]; the first other line is the header.
    pub fn new(source: &str, input: Box<dyn Read + Send>, delimiter: u8) -> Result<RowStream> {
        let lines = LineLog::default();
        let input: Box<dyn Read + Send> =
            Box::new(UnifiedLineEndings::new(BufReader::with_capacity(1 << 16, input), lines.clone()));
        let reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .trim(csv::Trim::None)
            .has_headers(false)
            .flexible(true)
            .from_reader(input);
        let table = Table { source: source.to_string(), columns: Vec::new(), header_line: 1, rows: Vec::new() };
        let mut stream = RowStream {
            table,
            reader,
            record: csv::ByteRecord::new(),
            text: String::new(),
            fields: Vec::new(),
            rows: 0,
            lines,
            line: 1,
        };
        if !stream.next_content()? {
            return Err(Error::Empty { path: source.to_string() });
        }
        stream.table.columns = (0..stream.fields.len()).map(|k| Column::parse(stream.field(k))).collect();
        stream.table.header_line = stream.line;
        if stream.table.columns.iter().all(|c| c.key.is_empty()) {
            return Err(Error::Empty { path: source.to_string() });
        }
        check_unique_columns(source, stream.table.header_line, &stream.table.columns)?;
        Ok(stream)
    }

    /// Reads the next record that is neither blank nor a comment; false at the end.
    fn next_content(&mut self) -> Result<bool> {
        loop {
            match self.reader.read_byte_record(&mut self.record) {
                Ok(false) => return Ok(false),
                Ok(true) => {
                    self.line = self.lines.line_at(self.record.position().map_or(0, |p| p.byte()));
                    if !self.trim_fields() {
                        return Err(Error::Csv {
                            path: self.table.source.clone(),
                            line: self.line,
                            message: "the text is not valid UTF-8; save the file as UTF-8".into(),
                        });
                    }
                    let blank = self.fields.iter().all(|(a, b)| a == b);
                    if blank || self.field(0).starts_with('#') {
                        continue;
                    }
                    return Ok(true);
                }
                Err(e) => {
                    let line = self.lines.line_at(e.position().map_or(0, |p| p.byte()));
                    return Err(Error::Csv { path: self.table.source.clone(), line, message: describe_csv_error(&e) });
                }
            }
        }
    }

    /// Checks the record for UTF-8, keeps its text, and records where each
    /// field lies in it once trimmed (Unicode whitespace, as `str::trim`);
    /// false when a field is not UTF-8.
    fn trim_fields(&mut self) -> bool {
        self.fields.clear();
        self.text.clear();
        let Ok(text) = std::str::from_utf8(self.record.as_slice()) else { return false };
        self.text.push_str(text);
        let mut start = 0;
        for k in 0..self.record.len() {
            let end = start + self.record[k].len();
            // The record's text is valid; each field is if it starts and ends on a character.
            let Some(field) = self.text.get(start..end) else { return false };
            let trimmed = trim(field);
            let from = start + (trimmed.as_ptr() as usize - field.as_ptr() as usize);
            self.fields.push((from, from + trimmed.len()));
            start = end;
        }
        true
    }

    /// Field `k` of the current record, trimmed ("" past the end).
    fn field(&self, k: usize) -> &str {
        self.fields.get(k).and_then(|&(a, b)| self.text.get(a..b)).unwrap_or("")
    }

    /// The header (and file name) as a table without rows, for the cell accessors.
    pub fn table(&self) -> &Table {
        &self.table
    }

    /// Reads the next data row into `row`, reusing its buffers; false at the end.
    /// A file with a header and no rows is [`Error::Empty`].
    pub fn next_into(&mut self, row: &mut Record) -> Result<bool> {
        if !self.next_content()? {
            return if self.rows == 0 { Err(Error::Empty { path: self.table.source.clone() }) } else { Ok(false) };
        }
        self.rows += 1;
        row.line = self.line;
        let width = self.table.columns.len();
        if self.fields.len() != width {
            return Err(Error::Csv {
                path: self.table.source.clone(),
                line: row.line,
                message: format!(
                    "this row has {} fields but the header has {width}; every row needs one cell per header column (quote cells that contain the delimiter)",
                    self.fields.len()
                ),
            });
        }
        row.cells.resize_with(width, String::new);
        for (k, cell) in row.cells.iter_mut().enumerate() {
            cell.clear();
            cell.push_str(self.field(k));
        }
        Ok(true)
    }

    /// Bytes consumed so far (for progress).
    pub fn bytes_read(&self) -> u64 {
        self.reader.position().byte()
    }
}

/// `text` without leading and trailing whitespace, as `str::trim` (ASCII
/// whitespace is stripped byte by byte; the Unicode rules run only where a
/// non-ASCII character is met at either end).
fn trim(text: &str) -> &str {
    let space = |b: &u8| matches!(b, b'\t' | b'\n' | 0x0b | 0x0c | b'\r' | b' ');
    let bytes = text.as_bytes();
    let start = bytes.iter().position(|b| !space(b)).unwrap_or(bytes.len());
    let end = bytes.iter().rposition(|b| !space(b)).map_or(start, |e| e + 1);
    let inner = &text[start..end.max(start)];
    match (inner.as_bytes().first(), inner.as_bytes().last()) {
        (Some(a), Some(b)) if !a.is_ascii() || !b.is_ascii() => inner.trim(),
        _ => inner,
    }
}

/// Tab for `.tsv`/`.tab`, comma otherwise (as [`Table::read`]).
pub fn delimiter_for(path: &str) -> u8 {
    if path.ends_with(".tsv") || path.ends_with(".tab") { b'\t' } else { b',' }
}

/// Output written as it is produced: stdout, or a file that appears only
/// when complete.
pub struct OutputSink {
    writer: BufWriter<Box<dyn Write + Send>>,
    temp: Option<(PathBuf, PathBuf)>,
    /// The temporary file, registered for removal on SIGINT/SIGTERM.
    _registered: Option<super::cleanup::Registered>,
}

impl OutputSink {
    /// Stdout when `path` is `None` or `-`; else a temporary sibling of
    /// `path`, refused if `path` is one of `inputs`.
    pub fn create(path: Option<&Path>, inputs: &[&str]) -> Result<OutputSink> {
        let Some(path) = path.filter(|p| p.as_os_str() != "-") else {
            return Ok(OutputSink {
                writer: BufWriter::new(Box::new(std::io::stdout())),
                temp: None,
                _registered: None,
            });
        };
        super::output::refuse_inputs(path, inputs)?;
        if super::output::is_special_file(path) {
            let device = std::fs::OpenOptions::new()
                .write(true)
                .open(path)
                .map_err(|source| Error::Write { path: path.to_path_buf(), source })?;
            return Ok(OutputSink { writer: BufWriter::new(Box::new(device)), temp: None, _registered: None });
        }
        let temp = super::identity::temp_sibling(path);
        let registered = super::cleanup::register(&temp);
        let file = std::fs::File::create(&temp).map_err(|source| Error::Write { path: path.to_path_buf(), source })?;
        Ok(OutputSink {
            writer: BufWriter::new(Box::new(file)),
            temp: Some((temp, path.to_path_buf())),
            _registered: Some(registered),
        })
    }

    /// The error for a failed write to this sink.
    pub fn error(&self, source: std::io::Error) -> Error {
        let path = self.temp.as_ref().map_or_else(|| PathBuf::from("<stdout>"), |(_, p)| p.clone());
        Error::Write { path, source }
    }

    /// Flushes and, for a file, renames it into place.
    pub fn commit(mut self) -> Result<()> {
        self.writer.flush().map_err(|e| self.error(e))?;
        if let Some((temp, path)) = self.temp.take() {
            std::fs::rename(&temp, &path).map_err(|source| {
                let _ = std::fs::remove_file(&temp);
                Error::Write { path, source }
            })?;
        }
        Ok(())
    }
}

impl Write for OutputSink {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.writer.write(buf)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.writer.flush()
    }
}

impl Drop for OutputSink {
    /// An output never committed (an error happened) leaves no file behind.
    fn drop(&mut self) {
        if let Some((temp, _)) = self.temp.take() {
            let _ = std::fs::remove_file(temp);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn trims_as_str_trim_does() {
        for text in ["", " ", "a", " a ", "\t12.5\x0b", "\u{a0}x\u{2003}", " é ", "\u{85}", "a b", " \u{a0} "] {
            assert_eq!(trim(text), text.trim(), "{text:?}");
        }
    }

    #[test]
    fn a_field_that_is_not_utf8_is_a_located_error() {
        for bytes in [&b"x,y\n1,\xff\n"[..], b"x,y\n\xc3,\xa9\n", b"x,y\n# \xff\n1,2\n"] {
            let mut s = RowStream::new("t.csv", Box::new(std::io::Cursor::new(bytes.to_vec())), b',').unwrap();
            let mut row = Record { line: 0, cells: Vec::new() };
            let e = s.next_into(&mut row).unwrap_err().to_string();
            assert!(e.contains("line 2") && e.contains("UTF-8"), "{e}");
        }
    }

    #[test]
    fn streams_rows_with_line_numbers_and_reuses_the_record() {
        let text = "# note\nx (nM),y\n1,2\n\n# another note\n3,zz\n";
        let mut s = RowStream::new("t.csv", Box::new(std::io::Cursor::new(text.as_bytes().to_vec())), b',').unwrap();
        let mut row = Record { line: 0, cells: Vec::new() };
        assert!(s.next_into(&mut row).unwrap());
        assert_eq!((row.line, row.cells.clone()), (3, vec!["1".to_string(), "2".to_string()]));
        assert!(s.next_into(&mut row).unwrap());
        assert_eq!(row.line, 6);
        let e = s.table().number(&row, 1).unwrap_err().to_string();
        assert!(e.contains("line 6") && e.contains("zz"), "{e}");
        assert!(!s.next_into(&mut row).unwrap());
    }

    #[test]
    fn streamed_line_numbers_are_right_for_crlf_and_cr_line_endings() {
        for text in ["x,y\r\n1,2\r\n\r\n3,zz\r\n", "x,y\r1,2\r\r3,zz\r"] {
            let mut s =
                RowStream::new("t.csv", Box::new(std::io::Cursor::new(text.as_bytes().to_vec())), b',').unwrap();
            let mut row = Record { line: 0, cells: Vec::new() };
            assert!(s.next_into(&mut row).unwrap());
            assert_eq!(row.line, 2);
            assert!(s.next_into(&mut row).unwrap());
            assert_eq!(row.line, 4, "{text:?}");
        }
    }

    #[test]
    fn streamed_duplicate_column_names_are_an_error_naming_both() {
        let text = "plate,compound,Compound\r\n1,a,b\r\n";
        let e = RowStream::new("t.csv", Box::new(std::io::Cursor::new(text.as_bytes().to_vec())), b',').err().unwrap();
        let e = e.to_string();
        assert!(e.contains("column 2 ('compound')") && e.contains("column 3 ('Compound')"), "{e}");
    }

    #[test]
    fn uncommitted_output_leaves_no_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        {
            let mut sink = OutputSink::create(Some(&path), &[]).unwrap();
            sink.write_all(b"half").unwrap();
        }
        assert!(!path.exists());
        let mut sink = OutputSink::create(Some(&path), &[]).unwrap();
        sink.write_all(b"whole").unwrap();
        sink.commit().unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "whole");
    }
}
