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

use std::io::{BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use super::input::{Column, Record, Row, Table, check_unique_columns};
use super::line_endings::UnifiedLineEndings;
use crate::error::{Error, Result};

/// Bytes read from the input at a time.
const CHUNK: usize = 1 << 16;

/// Rows of a CSV, one at a time.
///
/// The records are split here rather than by the `csv` crate, as its
/// reader (csv-core's state machine, with the defaults every reader of
/// kimech uses: `"` quotes, doubled to escape, no comment byte, flexible
/// record lengths, a UTF-8 BOM dropped) splits them, so that a line
/// without a quote, nearly every line of a screening file, is split at
/// its delimiters in one pass over bytes already in the buffer; a line
/// with a quote goes through that state machine byte by byte. The tests
/// compare both with the `csv` crate on random text.
pub struct RowStream {
    table: Table,
    delimiter: u8,
    input: Box<dyn Read + Send>,
    /// Input bytes; `buf[pos..filled]` are not yet consumed.
    buf: Vec<u8>,
    pos: usize,
    filled: usize,
    eof: bool,
    /// Bytes dropped from the front of `buf` so far.
    consumed: u64,
    /// Whether a UTF-8 byte order mark at the very start was looked for.
    bom_checked: bool,
    /// The current record's text (checked for UTF-8 once), unless it is
    /// read in place (`in_buf`).
    text: String,
    /// Where each trimmed field lies in `text`, or in `buf` when `in_buf`.
    fields: Vec<(usize, usize)>,
    /// The current record is ASCII without a quote, and its fields lie in
    /// `buf` (which only `fill` changes, and only once they are cleared).
    in_buf: bool,
    /// The unescaped fields of a quoted record, and where each ends.
    unquoted: Vec<u8>,
    ends: Vec<usize>,
    rows: u64,
    /// The line the current record starts on.
    line: u64,
    /// The line of the byte at `pos`.
    next_line: u64,
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
        let table = Table { source: source.to_string(), columns: Vec::new(), header_line: 1, rows: Vec::new() };
        let mut stream = RowStream {
            table,
            delimiter,
            input: Box::new(UnifiedLineEndings::unlogged(input)),
            buf: vec![0; CHUNK],
            pos: 0,
            filled: 0,
            eof: false,
            consumed: 0,
            bom_checked: false,
            text: String::new(),
            fields: Vec::new(),
            in_buf: false,
            unquoted: Vec::new(),
            ends: Vec::new(),
            rows: 0,
            line: 1,
            next_line: 1,
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

    /// Reads more input into the buffer (moving what is left to its front,
    /// growing it when full); false at the end of the input.
    fn fill(&mut self) -> Result<bool> {
        if self.eof {
            return Ok(false);
        }
        if self.pos > 0 {
            self.buf.copy_within(self.pos..self.filled, 0);
            self.consumed += self.pos as u64;
            self.filled -= self.pos;
            self.pos = 0;
        }
        if self.filled == self.buf.len() {
            self.buf.resize(2 * self.buf.len(), 0);
        }
        loop {
            match self.input.read(&mut self.buf[self.filled..]) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(false);
                }
                Ok(n) => {
                    self.filled += n;
                    return Ok(true);
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    self.eof = true;
                    return Err(Error::Csv {
                        path: self.table.source.clone(),
                        line: self.line,
                        message: format!("read error: {e}"),
                    });
                }
            }
        }
    }

    /// Reads the next record that is neither blank nor a comment; false at the end.
    fn next_content(&mut self) -> Result<bool> {
        loop {
            if !self.next_record()? {
                return Ok(false);
            }
            let blank = self.fields.iter().all(|(a, b)| a == b);
            if blank || self.field(0).starts_with('#') {
                continue;
            }
            return Ok(true);
        }
    }

    /// Splits the next record into `text` and `fields`; false at the end.
    fn next_record(&mut self) -> Result<bool> {
        // The fields of the record before are gone (`fill` may move `buf`).
        self.fields.clear();
        self.in_buf = false;
        if !self.bom_checked {
            // As csv-core: a BOM is dropped when the first read holds all of it.
            while self.filled < 3 && self.fill()? {}
            if self.buf[..self.filled].starts_with(b"\xef\xbb\xbf") {
                self.pos = 3;
            }
            self.bom_checked = true;
        }
        // Blank lines before the record are skipped (the parser's StartRecord).
        loop {
            if self.pos == self.filled && !self.fill()? {
                return Ok(false);
            }
            if self.buf[self.pos] != b'\n' {
                break;
            }
            self.pos += 1;
            self.next_line += 1;
        }
        self.line = self.next_line;
        let mut scanned = self.pos;
        let end = loop {
            if let Some(i) = memchr::memchr(b'\n', &self.buf[scanned..self.filled]) {
                break scanned + i;
            }
            scanned = self.filled - self.pos;
            let more = self.fill()?;
            scanned += self.pos;
            if !more {
                break self.filled;
            }
        };
        let utf8 = match self.split_plain(end) {
            Some(utf8) => utf8,
            None => self.split_quoted()?,
        };
        if !utf8 {
            return Err(Error::Csv {
                path: self.table.source.clone(),
                line: self.line,
                message: "the text is not valid UTF-8; save the file as UTF-8".into(),
            });
        }
        Ok(true)
    }

    /// The line `buf[pos..end]`, if it has no quote: its fields are what
    /// lies between delimiters (one pass over its bytes, short as they are).
    /// `Some(false)` when it is not UTF-8; `None`, with nothing consumed,
    /// when it has a quote.
    fn split_plain(&mut self, end: usize) -> Option<bool> {
        let start = self.pos;
        let newline = end < self.filled;
        self.fields.clear();
        if split_ascii(&self.buf[start..end], start, self.delimiter, &mut self.fields) {
            // The usual line: its fields are read where they lie.
            self.in_buf = true;
            self.pos = end + usize::from(newline);
            self.next_line += u64::from(newline);
            return Some(true);
        }
        self.fields.clear();
        let line = &self.buf[start..end];
        let (delimiter, mut from) = (self.delimiter, 0);
        for (at, &b) in line.iter().enumerate() {
            if b == delimiter {
                self.fields.push((from, at));
                from = at + 1;
            } else if b == b'"' {
                return None;
            }
        }
        self.fields.push((from, line.len()));
        self.pos = end + usize::from(newline);
        self.next_line += u64::from(newline);
        self.text.clear();
        let Ok(text) = std::str::from_utf8(&self.buf[start..end]) else { return Some(false) };
        self.text.push_str(text);
        for field in &mut self.fields {
            // The text is valid and delimiters are ASCII: each field is valid too.
            let whole = &self.text[field.0..field.1];
            let trimmed = trim(whole);
            field.0 += trimmed.as_ptr() as usize - whole.as_ptr() as usize;
            field.1 = field.0 + trimmed.len();
        }
        Some(true)
    }

    /// A record with a quote: csv-core's state machine, byte by byte, over
    /// as many lines as a quoted field spans. False when a field is not UTF-8.
    fn split_quoted(&mut self) -> Result<bool> {
        #[derive(Clone, Copy, PartialEq)]
        enum State {
            StartField,
            InField,
            InQuoted,
            AfterQuote,
        }
        let delimiter = self.delimiter;
        self.unquoted.clear();
        self.ends.clear();
        let mut state = State::StartField;
        loop {
            if self.pos == self.filled && !self.fill()? {
                self.ends.push(self.unquoted.len());
                break;
            }
            let c = self.buf[self.pos];
            self.pos += 1;
            self.next_line += u64::from(c == b'\n');
            state = match state {
                State::InQuoted if c == b'"' => State::AfterQuote,
                State::InQuoted => {
                    self.unquoted.push(c);
                    State::InQuoted
                }
                State::StartField if c == b'"' => State::InQuoted,
                State::AfterQuote if c == b'"' => {
                    self.unquoted.push(c);
                    State::InQuoted
                }
                _ if c == delimiter => {
                    self.ends.push(self.unquoted.len());
                    State::StartField
                }
                _ if c == b'\n' => {
                    self.ends.push(self.unquoted.len());
                    break;
                }
                _ => {
                    self.unquoted.push(c);
                    State::InField
                }
            };
        }
        self.text.clear();
        self.fields.clear();
        let mut start = 0;
        for &end in &self.ends {
            let Ok(field) = std::str::from_utf8(&self.unquoted[start..end]) else { return Ok(false) };
            let trimmed = trim(field);
            let from = self.text.len() + (trimmed.as_ptr() as usize - field.as_ptr() as usize);
            self.text.push_str(field);
            self.fields.push((from, from + trimmed.len()));
            start = end;
        }
        Ok(true)
    }

    /// Field `k` of the current record, trimmed ("" past the end).
    fn field(&self, k: usize) -> &str {
        let Some(&(a, b)) = self.fields.get(k) else { return "" };
        if self.in_buf {
            // SAFETY: `split_ascii` found every byte of the record, which
            // holds `buf[a..b]`, to be ASCII, hence UTF-8; `buf` has not
            // changed since (`next_record` clears `fields` and `in_buf`
            // before anything can move or overwrite it).
            return self.buf.get(a..b).map_or("", |bytes| unsafe { std::str::from_utf8_unchecked(bytes) });
        }
        self.text.get(a..b).unwrap_or("")
    }

    /// The header (and file name) as a table without rows, for the cell accessors.
    pub fn table(&self) -> &Table {
        &self.table
    }

    /// Moves to the next data row, read in place: the stream itself is then
    /// the [`Row`] the cell accessors read (no copy of its cells); false at
    /// the end. A file with a header and no rows is [`Error::Empty`].
    pub fn advance(&mut self) -> Result<bool> {
        if !self.next_content()? {
            return if self.rows == 0 { Err(Error::Empty { path: self.table.source.clone() }) } else { Ok(false) };
        }
        self.rows += 1;
        let width = self.table.columns.len();
        if self.fields.len() != width {
            return Err(Error::Csv {
                path: self.table.source.clone(),
                line: self.line,
                message: format!(
                    "this row has {} fields but the header has {width}; every row needs one cell per header column (quote cells that contain the delimiter)",
                    self.fields.len()
                ),
            });
        }
        Ok(true)
    }

    /// Reads the next data row into `row`, reusing its buffers; false at the end.
    /// A file with a header and no rows is [`Error::Empty`].
    pub fn next_into(&mut self, row: &mut Record) -> Result<bool> {
        if !self.advance()? {
            return Ok(false);
        }
        row.line = self.line;
        row.cells.resize_with(self.fields.len(), String::new);
        for (k, cell) in row.cells.iter_mut().enumerate() {
            cell.clear();
            cell.push_str(self.field(k));
        }
        Ok(true)
    }

    /// Bytes consumed so far (for progress).
    pub fn bytes_read(&self) -> u64 {
        self.consumed + self.pos as u64
    }

    /// The next line, read where it lies and not consumed, when it is a
    /// plain line of three fields: whole in the buffer (its `\n` read
    /// already), not blank, ASCII without a quote, two delimiters, and no
    /// field that begins or ends with a byte at or below a space. The
    /// general path ([`Self::advance`]) reads such a line as a record of
    /// these three fields, untrimmed, on line [`PlainLine::line`]; every
    /// other line gives `None` and is left to it. [`Self::take_plain`]
    /// consumes the line.
    ///
    /// Why: a screening file is nearly all such lines, and a curve reader
    /// that only needs the three cells of a line that continues its curve
    /// is spared the general record's bookkeeping (tested against it).
    #[inline]
    pub fn peek_plain(&self) -> Option<PlainLine<'_>> {
        use super::words::{HIGH, equal_bytes};
        let rest = self.buf.get(self.pos..self.filled)?;
        if !self.bom_checked || rest.first().is_none_or(|&b| b == b'\n') {
            return None;
        }
        let len = memchr::memchr(b'\n', rest)?;
        let line = &rest[..len];
        let (mut cuts, mut count) = ([0usize; 2], 0);
        let mut at = 0;
        while at < len {
            let chunk = &line[at..];
            let (word, valid) = match chunk.first_chunk::<8>() {
                Some(bytes) => (u64::from_le_bytes(*bytes), HIGH),
                // The line's last bytes: eight read from the buffer, which
                // nearly always holds more than the line (initialised bytes,
                // masked off below), else copied out one by one.
                None => {
                    let from = self.pos + at;
                    let word = match self.buf.get(from..).and_then(|b| b.first_chunk::<8>()) {
                        Some(bytes) => u64::from_le_bytes(*bytes),
                        None => chunk.iter().rev().fold(0u64, |w, &b| (w << 8) | u64::from(b)),
                    };
                    (word, HIGH & ((1u64 << (8 * chunk.len())) - 1))
                }
            };
            if (word & valid) | (equal_bytes(word, b'"') & valid) != 0 {
                return None;
            }
            let mut delimiters = equal_bytes(word, self.delimiter) & valid;
            while delimiters != 0 {
                *cuts.get_mut(count)? = at + (delimiters.trailing_zeros() / 8) as usize;
                count += 1;
                delimiters &= delimiters - 1;
            }
            at += 8;
        }
        if count != 2 {
            return None;
        }
        let fields = [&line[..cuts[0]], &line[cuts[0] + 1..cuts[1]], &line[cuts[1] + 1..]];
        // Written out, not as iterator adaptors: the compiler left those
        // as calls, a third of this function's instructions.
        let untrimmed = |f: &[u8]| f.first().is_none_or(|&c| c > b' ') && f.last().is_none_or(|&c| c > b' ');
        if !(untrimmed(fields[0]) && untrimmed(fields[1]) && untrimmed(fields[2])) {
            return None;
        }
        // SAFETY: every byte of the line was found ASCII above, so each
        // field, cut at ASCII delimiters, is UTF-8.
        let cells = unsafe { fields.map(|f| std::str::from_utf8_unchecked(f)) };
        Some(PlainLine { cells, line: self.next_line, end: self.pos + len })
    }

    /// Consumes the line [`Self::peek_plain`] found (ending at `end`): the
    /// stream is then where [`Self::advance`] would have left it, but for
    /// the record, which is cleared (its cells read "").
    pub fn take_plain(&mut self, end: usize) {
        self.fields.clear();
        self.in_buf = false;
        self.line = self.next_line;
        self.next_line += 1;
        self.pos = end + 1;
        self.rows += 1;
    }
}

/// A plain line of three fields ([`RowStream::peek_plain`]).
pub struct PlainLine<'a> {
    /// Its three fields, in column order.
    pub cells: [&'a str; 3],
    /// Its line number.
    pub line: u64,
    /// Where its `\n` lies in the stream's buffer (for [`RowStream::take_plain`]).
    pub end: usize,
}

impl Row for PlainLine<'_> {
    fn line(&self) -> u64 {
        self.line
    }

    fn cell(&self, col: usize) -> &str {
        self.cells.get(col).copied().unwrap_or("")
    }
}

impl Row for RowStream {
    fn line(&self) -> u64 {
        self.line
    }

    fn cell(&self, col: usize) -> &str {
        self.field(col)
    }
}

/// Splits `line`, which lies at `base` in the buffer, into its fields
/// (trimmed, as offsets in the buffer) when it is ASCII without a quote,
/// looking at eight bytes at a time; false, with `fields` to be cleared,
/// for any other line (a quote or a byte that is not ASCII).
#[inline]
fn split_ascii(line: &[u8], base: usize, delimiter: u8, fields: &mut Vec<(usize, usize)>) -> bool {
    use super::words::{HIGH, equal_bytes};
    let mut from = 0;
    let mut push = |from: usize, to: usize| {
        // ASCII text: `str::trim` strips exactly these bytes, all below '!'.
        let (mut a, mut b) = (from, to);
        if line[a..b].first().is_some_and(|&c| c <= b' ') || line[a..b].last().is_some_and(|&c| c <= b' ') {
            while a < b && is_trim_space(line[a]) {
                a += 1;
            }
            while b > a && is_trim_space(line[b - 1]) {
                b -= 1;
            }
        }
        fields.push((base + a, base + b));
    };
    let mut at = 0;
    while at < line.len() {
        let rest = &line[at..];
        let (word, valid) = match rest.first_chunk::<8>() {
            Some(chunk) => (u64::from_le_bytes(*chunk), HIGH),
            None => {
                let mut padded = [0u8; 8];
                padded[..rest.len()].copy_from_slice(rest);
                (u64::from_le_bytes(padded), HIGH & ((1u64 << (8 * rest.len())) - 1))
            }
        };
        if (word & HIGH) | (equal_bytes(word, b'"') & valid) != 0 {
            return false;
        }
        let mut delimiters = equal_bytes(word, delimiter) & valid;
        while delimiters != 0 {
            let i = at + (delimiters.trailing_zeros() / 8) as usize;
            push(from, i);
            from = i + 1;
            delimiters &= delimiters - 1;
        }
        at += 8;
    }
    push(from, line.len());
    true
}

/// The ASCII bytes `str::trim` strips (Unicode White_Space below 0x80,
/// vertical tab included, which `u8::is_ascii_whitespace` leaves).
fn is_trim_space(b: u8) -> bool {
    matches!(b, b'\t' | b'\n' | 0x0b | 0x0c | b'\r' | b' ')
}

/// `text` without leading and trailing whitespace, as `str::trim` (ASCII
/// whitespace is stripped byte by byte; the Unicode rules run only where a
/// non-ASCII character is met at either end).
#[inline]
fn trim(text: &str) -> &str {
    // The usual cell: an ASCII character other than a space at either end.
    let ends = |b: &u8| b.is_ascii() && !is_trim_space(*b);
    if text.as_bytes().first().is_some_and(ends) && text.as_bytes().last().is_some_and(ends) {
        return text;
    }
    let bytes = text.as_bytes();
    let start = bytes.iter().position(|&b| !is_trim_space(b)).unwrap_or(bytes.len());
    let end = bytes.iter().rposition(|&b| !is_trim_space(b)).map_or(start, |e| e + 1);
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
    /// The temporary file's write-out, started as it grows.
    early: Option<EarlyWriteOut>,
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
                early: None,
                _registered: None,
            });
        };
        super::output::refuse_inputs(path, inputs)?;
        if super::output::is_special_file(path) {
            let device = std::fs::OpenOptions::new()
                .write(true)
                .open(path)
                .map_err(|source| Error::Write { path: path.to_path_buf(), source })?;
            return Ok(OutputSink {
                writer: BufWriter::new(Box::new(device)),
                temp: None,
                early: None,
                _registered: None,
            });
        }
        let temp = super::identity::temp_sibling(path);
        let registered = super::cleanup::register(&temp);
        let file = std::fs::File::create(&temp).map_err(|source| Error::Write { path: path.to_path_buf(), source })?;
        Ok(OutputSink {
            early: Some(EarlyWriteOut::of(&file)),
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
        let n = self.writer.write(buf)?;
        if let Some(early) = &mut self.early {
            early.wrote(n);
        }
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.writer.flush()
    }
}

/// Starts the write-out of a temporary output file every [`Self::EVERY`]
/// bytes while the run goes on (Linux: `sync_file_range` with
/// `SYNC_FILE_RANGE_WRITE`, which queues the dirty pages and returns; it
/// neither waits for the disk nor promises anything a crash could test).
///
/// Why: the output replaces the file it is named after by a rename, and
/// ext4 (the `auto_da_alloc` default) then writes the new file out before
/// the rename returns, so that a crash cannot leave an empty file in the
/// old one's place. Left until then, that write-out was the run's serial
/// tail: 0.44-0.46 s for the 460 MB of a million curves (`strace -T`),
/// with both cores otherwise idle. Started along the way, most of it is
/// done by the time of the rename, and the rename keeps its guarantee.
struct EarlyWriteOut {
    #[cfg(target_os = "linux")]
    fd: std::os::fd::RawFd,
    /// Bytes handed to the file so far, and where the last write-out began.
    written: u64,
    started: u64,
}

impl EarlyWriteOut {
    const EVERY: u64 = 32 << 20;

    fn of(file: &std::fs::File) -> EarlyWriteOut {
        #[cfg(target_os = "linux")]
        let fd = std::os::fd::AsRawFd::as_raw_fd(file);
        #[cfg(not(target_os = "linux"))]
        let _ = file;
        EarlyWriteOut {
            #[cfg(target_os = "linux")]
            fd,
            written: 0,
            started: 0,
        }
    }

    fn wrote(&mut self, n: usize) {
        self.written += n as u64;
        if self.written - self.started < Self::EVERY {
            return;
        }
        // From where the last one began to the end of the file: the bytes a
        // buffer still held then are covered now. Advisory: a failure only
        // leaves the write-out to the rename, as before.
        #[cfg(target_os = "linux")]
        // SAFETY: `fd` is the temporary file's, open as long as the sink
        // that owns both; the call reads no memory of ours.
        unsafe {
            libc::sync_file_range(self.fd, self.started as libc::off64_t, 0, libc::SYNC_FILE_RANGE_WRITE);
        }
        self.started = self.written;
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

    /// The eight-bytes-at-a-time split of an ASCII line gives the fields
    /// (trimmed) that splitting at every delimiter gives, on random lines of
    /// every length around a word, and declines a line with a quote or a
    /// byte that is not ASCII.
    #[test]
    fn ascii_lines_split_as_str_split_does() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(21);
        let alphabet: &[u8] = b"ab1.,,\t\t \x0b\x0c\r\n#;";
        for case in 0..100_000 {
            let delimiter = if case % 2 == 0 { b',' } else { b'\t' };
            let len = rng.random_range(0..40);
            let mut line: Vec<u8> = (0..len).map(|_| alphabet[rng.random_range(0..alphabet.len())]).collect();
            let declined = case % 5 == 0 && len > 0;
            if declined {
                let odd = [b'"', 0x80, 0xc3, 0xff][rng.random_range(0..4)];
                line[rng.random_range(0..len)] = odd;
            }
            let base = rng.random_range(0..100);
            let mut fields = Vec::new();
            let split = split_ascii(&line, base, delimiter, &mut fields);
            let text = String::from_utf8_lossy(&line);
            assert_eq!(split, !declined, "{text:?}");
            if split {
                let expected: Vec<&str> = text.split(char::from(delimiter)).map(str::trim).collect();
                let got: Vec<&str> = fields.iter().map(|&(a, b)| &text[a - base..b - base]).collect();
                assert_eq!(got, expected, "{text:?}");
            }
        }
    }

    /// What a stream makes of `bytes`: the header and every row with its
    /// line, or the error that stopped it.
    fn outcome(stream: Result<RowStream>) -> Vec<String> {
        let mut seen = Vec::new();
        let mut s = match stream {
            Ok(s) => s,
            Err(e) => return vec![e.to_string()],
        };
        let header: Vec<&str> = s.table().columns.iter().map(|c| c.header.as_str()).collect();
        seen.push(format!("{} {header:?}", s.table().header_line));
        let mut row = Record { line: 0, cells: Vec::new() };
        loop {
            match s.next_into(&mut row) {
                Ok(true) => seen.push(format!("{} {:?}", row.line, row.cells)),
                Ok(false) => return seen,
                Err(e) => {
                    seen.push(e.to_string());
                    return seen;
                }
            }
        }
    }

    /// The same through the `csv` crate's reader, as the stream read before
    /// it split records itself (line ends logged, fields checked and trimmed).
    fn reference(source: &str, bytes: &[u8]) -> Vec<String> {
        use crate::io::line_endings::LineLog;
        let lines = LineLog::default();
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(b',')
            .trim(csv::Trim::None)
            .has_headers(false)
            .flexible(true)
            .from_reader(UnifiedLineEndings::new(bytes, lines.clone()));
        let mut record = csv::ByteRecord::new();
        let mut seen = Vec::new();
        let mut header: Option<Vec<Column>> = None;
        let csv_error =
            |line: u64, message: &str| Error::Csv { path: source.into(), line, message: message.into() }.to_string();
        loop {
            if !reader.read_byte_record(&mut record).unwrap() {
                let empty = Error::Empty { path: source.into() }.to_string();
                if header.is_none() {
                    return vec![empty];
                }
                if seen.len() == 1 {
                    seen.push(empty);
                }
                return seen;
            }
            let line = lines.line_at(record.position().map_or(0, |p| p.byte()));
            let mut fields = Vec::new();
            for field in record.iter() {
                match std::str::from_utf8(field) {
                    Ok(f) => fields.push(f.trim().to_string()),
                    Err(_) => {
                        let e = csv_error(line, "the text is not valid UTF-8; save the file as UTF-8");
                        if header.is_none() {
                            return vec![e];
                        }
                        seen.push(e);
                        return seen;
                    }
                }
            }
            if fields.iter().all(String::is_empty) || fields[0].starts_with('#') {
                continue;
            }
            match &header {
                None => {
                    let columns: Vec<Column> = fields.iter().map(|f| Column::parse(f)).collect();
                    if columns.iter().all(|c| c.key.is_empty()) {
                        return vec![Error::Empty { path: source.into() }.to_string()];
                    }
                    if let Err(e) = check_unique_columns(source, line, &columns) {
                        return vec![e.to_string()];
                    }
                    let names: Vec<&str> = columns.iter().map(|c| c.header.as_str()).collect();
                    seen.push(format!("{line} {names:?}"));
                    header = Some(columns);
                }
                Some(columns) if fields.len() != columns.len() => {
                    seen.push(csv_error(
                        line,
                        &format!(
                            "this row has {} fields but the header has {}; every row needs one cell per header column (quote cells that contain the delimiter)",
                            fields.len(),
                            columns.len()
                        ),
                    ));
                    return seen;
                }
                Some(_) => seen.push(format!("{line} {fields:?}")),
            }
        }
    }

    /// A reader that hands out a few bytes per call, so that records and
    /// `\r\n` pairs are split across reads.
    struct Trickle(Vec<u8>, usize, usize);

    impl Read for Trickle {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let n = self.2.min(buf.len()).min(self.0.len() - self.1);
            buf[..n].copy_from_slice(&self.0[self.1..self.1 + n]);
            self.1 += n;
            Ok(n)
        }
    }

    /// Records, fields, lines and errors as the `csv` crate's reader gives
    /// them, on random text full of quotes, delimiters, line endings of
    /// every kind, spaces, comments and bytes that are not UTF-8, read
    /// whole and a few bytes at a time.
    #[test]
    fn splits_records_as_the_csv_crate_does() {
        use rand::{Rng, SeedableRng};
        let alphabet: &[&[u8]] = &[
            b"a",
            b"b",
            b"1",
            b" ",
            b",",
            b",",
            b"\"",
            b"\"",
            b"\n",
            b"\n",
            b"\r",
            b"\r\n",
            b"#",
            b"\t",
            "é".as_bytes(),
            b"\xc3",
            b"\xff",
        ];
        let mut rng = rand::rngs::StdRng::seed_from_u64(13);
        for case in 0..40_000 {
            let mut bytes: Vec<u8> = Vec::new();
            // A BOM is followed by the header here: the `csv` reader dated a
            // record after a BOM and blank lines from byte 0, one line early.
            if case % 7 == 0 {
                bytes.extend_from_slice(b"\xef\xbb\xbf");
            }
            // A header most cases can get past, then random text.
            if case % 3 != 0 || case % 7 == 0 {
                bytes.extend_from_slice(b"x,y,z\n");
            }
            for _ in 0..rng.random_range(0..60) {
                bytes.extend_from_slice(alphabet[rng.random_range(0..alphabet.len())]);
            }
            let expected = reference("t.csv", &bytes);
            let whole = RowStream::new("t.csv", Box::new(std::io::Cursor::new(bytes.clone())), b',');
            assert_eq!(outcome(whole), expected, "{:?}", String::from_utf8_lossy(&bytes));
            if case % 7 != 0 {
                // (csv-core drops a BOM only when its first read holds all of it.)
                let step = rng.random_range(1..5);
                let trickled = RowStream::new("t.csv", Box::new(Trickle(bytes.clone(), 0, step)), b',');
                assert_eq!(outcome(trickled), expected, "{step}: {:?}", String::from_utf8_lossy(&bytes));
            }
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

    /// An output that passes the early write-out's interval several times,
    /// in writes of every size (some larger than the buffer, some not),
    /// replaces the file before it byte for byte, and the sink counted
    /// every byte it took.
    #[test]
    fn a_large_output_written_out_early_arrives_whole() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        std::fs::write(&path, b"the previous output").unwrap();
        let total = 2 * EarlyWriteOut::EVERY as usize + 12_345;
        let expected: Vec<u8> = (0..total).map(|i| (i % 251) as u8).collect();
        let mut sink = OutputSink::create(Some(&path), &[]).unwrap();
        let (mut at, mut size) = (0, 1);
        while at < total {
            let end = (at + size).min(total);
            sink.write_all(&expected[at..end]).unwrap();
            at = end;
            size = size * 7 % 1_000_003 + 1;
        }
        assert_eq!(sink.early.as_ref().map(|e| e.written), Some(total as u64));
        assert!(sink.early.as_ref().is_some_and(|e| e.started >= 2 * EarlyWriteOut::EVERY));
        sink.commit().unwrap();
        assert!(std::fs::read(&path).unwrap() == expected);
    }
}
