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
        let mut out = Vec::new();
        write_shortest(rounded, &mut out);
        String::from_utf8(out).unwrap_or_default()
    })
}

/// Appends the shortest decimal text that reads back as `x` (finite), laid
/// out as the standard library's `{}` lays it out — plain digits, never an
/// exponent (`0.0000001`, `100000000000000000000`, `-0`) — so that every
/// export prints the same text as before. The digits come from `zmij`
/// (Schubfach: Giulietti, 2020), a small fraction of the work of the
/// standard formatter; both give the shortest round-trip digits, the
/// closest to the value when several are as short (a test compares them on
/// three million values).
#[inline]
pub fn write_shortest(x: f64, out: &mut Vec<u8>) {
    let mut buffer = zmij::Buffer::new();
    let text = buffer.format_finite(x).as_bytes();
    if may_tie(x) && tie_in(x, text) {
        return write_tie(x, out);
    }
    // Between 1e-5 and 1e15 the formatter writes no exponent (its shortest
    // digits lie in its plain range, -5 ≤ exponent ≤ 15): no need to look.
    if !(1e-5..1e15).contains(&x.abs())
        && let Some(e) = exponent_at(text)
    {
        return write_plain(text, e, out);
    }
    // `123.45`, `0.00012` as they are; `100.0` without its `.0`.
    append_short(out, text.strip_suffix(b".0").unwrap_or(text));
}

/// Appends `bytes` to `out` as `extend_from_slice` does, without a call
/// to `memcpy` for up to 32 bytes: room for 32 is written (one fixed-size
/// store the compiler inlines), then the bytes, as two overlapping
/// fixed-size copies, and the length set. A CSV row is some sixty short
/// pieces (digits, names, flags), and the library call's entry and size
/// dispatch cost more than the copy (about 3 % of an `ic50` run in
/// `__memmove_avx512_unaligned_erms`, perf).
#[inline]
pub fn append_short(out: &mut Vec<u8>, bytes: &[u8]) {
    let n = bytes.len();
    if n > 32 {
        return out.extend_from_slice(bytes);
    }
    let start = out.len();
    out.extend_from_slice(&[0u8; 32]);
    let room = &mut out[start..start + 32];
    match n {
        16.. => copy_ends::<16>(room, bytes),
        8.. => copy_ends::<8>(room, bytes),
        4.. => copy_ends::<4>(room, bytes),
        _ => room.iter_mut().zip(bytes).for_each(|(r, b)| *r = *b),
    }
    out.truncate(start + n);
}

/// `bytes` (W to 2W long) into the front of `room` as two copies of W
/// bytes, the first and the last W, which overlap where `bytes` is
/// shorter than 2W (the shared bytes are the same).
#[inline(always)]
fn copy_ends<const W: usize>(room: &mut [u8], bytes: &[u8]) {
    let n = bytes.len();
    room[..W].copy_from_slice(&bytes[..W]);
    room[n - W..n].copy_from_slice(&bytes[n - W..]);
}

/// At an exact tie between two shortest candidates the formatter may round to even
/// where the standard library rounds up: those values are printed its way.
#[cold]
#[inline(never)]
fn write_tie(x: f64, out: &mut Vec<u8>) {
    out.extend_from_slice(format!("{x}").as_bytes());
}

/// Where the formatter's exponent begins, if it wrote one: it writes `e-7`,
/// `e+22` or `e-300` after the digits, so its `e` is three to five bytes
/// from the end (its plain form, `-0.00001` to `999999999999999.9`, has none).
fn exponent_at(text: &[u8]) -> Option<usize> {
    let n = text.len();
    (n.saturating_sub(5)..n.saturating_sub(2)).rev().find(|&i| text[i] == b'e')
}

/// The formatter's scientific text (`d.ddde-k`, `de+k`, with or without a
/// sign; `e` at `e`) written out in plain digits, as `{}` writes it.
#[cold]
#[inline(never)]
fn write_plain(text: &[u8], e: usize, out: &mut Vec<u8>) {
    let exponent = parse_exponent(&text[e + 1..]);
    let (negative, mantissa) = match &text[..e] {
        [b'-', rest @ ..] => (true, rest),
        mantissa => (false, mantissa),
    };
    let (first, rest) = mantissa.split_at(mantissa.len().min(1));
    let mut rest = rest.strip_prefix(b".").unwrap_or(rest);
    while let [head @ .., b'0'] = rest {
        rest = head;
    }
    out.reserve(first.len() + rest.len() + exponent.unsigned_abs() as usize + 3);
    if negative {
        out.push(b'-');
    }
    // The value is d.rest × 10^exponent, d ≠ 0.
    if exponent < 0 {
        out.extend_from_slice(b"0.");
        out.resize(out.len() + (-exponent - 1) as usize, b'0');
        out.extend_from_slice(first);
        out.extend_from_slice(rest);
    } else if (exponent as usize) < rest.len() {
        out.extend_from_slice(first);
        out.extend_from_slice(&rest[..exponent as usize]);
        out.push(b'.');
        out.extend_from_slice(&rest[exponent as usize..]);
    } else {
        out.extend_from_slice(first);
        out.extend_from_slice(rest);
        out.resize(out.len() + exponent as usize - rest.len(), b'0');
    }
}

/// The significant digits of the formatter's text (`d.ddd`, `0.000ddd`, `ddd00.0`,
/// `d.ddde-k`, `d.ddde+k`, with or without a sign), how many, and the place of the
/// decimal point: the value is 0.d₁…dₙ × 10^point (no digits for zero).
fn significant(text: &[u8]) -> ([u8; 32], usize, i32) {
    let text = text.strip_prefix(b"-").unwrap_or(text);
    let mut digits = [0u8; 32];
    // The scientific form, `d.ddde-k` or `de+k` (d ≠ 0): the digits are there in a row.
    if let Some(e) = text.iter().rposition(|&b| b == b'e')
        && (b'1'..=b'9').contains(&text[0])
        && (e == 1 || (text[1] == b'.' && e - 2 < digits.len() && text[2..e].iter().all(u8::is_ascii_digit)))
    {
        let rest = &text[e.min(2)..e];
        digits[0] = text[0];
        digits[1..=rest.len()].copy_from_slice(rest);
        let mut n = 1 + rest.len();
        while n > 0 && digits[n - 1] == b'0' {
            n -= 1;
        }
        return (digits, n, 1 + parse_exponent(&text[e + 1..]));
    }
    let (mantissa, exponent) = match text.iter().position(|&b| b == b'e') {
        Some(e) => (&text[..e], parse_exponent(&text[e + 1..])),
        None => (text, 0),
    };
    let (mut n, mut point, mut seen_point) = (0usize, 0i32, false);
    for &b in mantissa {
        if b == b'.' {
            seen_point = true;
        } else if n == 0 && b == b'0' {
            // A leading zero moves the point, it is not a digit.
            if seen_point {
                point -= 1;
            }
        } else if n < digits.len() {
            digits[n] = b;
            n += 1;
            if !seen_point {
                point += 1;
            }
        }
    }
    while n > 0 && digits[n - 1] == b'0' {
        n -= 1;
    }
    (digits, n, point + exponent)
}

/// A cheap test that rules out most values as exact ties: a tie is a
/// decimal of at most 18 significant digits, so x = m·2^(−k) with m odd
/// needs 5^k < 10^18, k ≤ 25.
fn may_tie(x: f64) -> bool {
    let bits = x.to_bits();
    let (exponent, fraction) = (((bits >> 52) & 0x7ff) as i32, bits & ((1 << 52) - 1));
    let (m, e) = match exponent {
        0 => (fraction, -1074),
        _ => (fraction | (1 << 52), exponent - 1075),
    };
    m != 0 && -(e + m.trailing_zeros() as i32) <= 25
}

/// Whether the formatter's `text` for `x` rounded an exact tie to even: its last
/// digit is even and x is exactly half-way to the next number of as many
/// digits. Ties need 16 or more significant digits.
#[inline(never)]
fn tie_in(x: f64, text: &[u8]) -> bool {
    let (digits, n, point) = significant(text);
    n >= 15 && digits[n - 1] % 2 == 0 && is_tie(x.abs(), &digits[..n], point)
}

/// Whether `x` (finite, ≥ 0) is exactly 0.d₁…dₙ5 × 10^point: half-way
/// between the digits `d` and the next number of as many digits. Integer
/// arithmetic on x = m·2^e; values too large or too small to be such a tie
/// (the decimal would need more than 18 digits, or 5^k to divide m) say no.
fn is_tie(x: f64, d: &[u8], point: i32) -> bool {
    if d.len() > 17 {
        return false;
    }
    // t = d₁…dₙ5, and the tie is t × 10^q.
    let t = d.iter().fold(0u128, |t, &b| 10 * t + u128::from(b - b'0')) * 10 + 5;
    let q = point - d.len() as i32 - 1;
    let bits = x.to_bits();
    let (exponent, fraction) = ((bits >> 52) as i32, bits & ((1 << 52) - 1));
    let (m, e) = match exponent {
        0 => (u128::from(fraction), -1074),
        _ => (u128::from(fraction | (1 << 52)), exponent - 1075),
    };
    // m·2^e = t·10^q  ⇔  m·5^(−q)·2^(e−q) = t (q < 0)  or  m·2^(e−q) = t·5^q (q ≥ 0).
    let pow5 = |k: i32| (k <= 27).then(|| 5u128.pow(k as u32));
    let shifted = |v: u128, by: i32| -> Option<u128> {
        if by >= 0 {
            (by < 64 && v.leading_zeros() as i32 > by).then(|| v << by)
        } else {
            (-by < 128 && v.trailing_zeros() as i32 >= -by).then(|| v >> -by)
        }
    };
    let (left, right) = if q < 0 {
        let Some(f) = pow5(-q) else { return false };
        (shifted(m * f, e - q), Some(t))
    } else {
        (shifted(m, e - q), pow5(q).and_then(|f| t.checked_mul(f)))
    };
    matches!((left, right), (Some(a), Some(b)) if a == b)
}

fn parse_exponent(text: &[u8]) -> i32 {
    let (sign, digits) = match text.split_first() {
        Some((b'-', rest)) => (-1, rest),
        Some((b'+', rest)) => (1, rest),
        _ => (1, text),
    };
    sign * digits.iter().fold(0i32, |e, &d| 10 * e + i32::from(d - b'0'))
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
        let mut out = Vec::new();
        self.write_to(&mut out);
        String::from_utf8(out).unwrap_or_default()
    }

    /// Appends the cell as written (before CSV quoting) to `out`.
    pub fn write_to(&self, out: &mut Vec<u8>) {
        match self {
            Cell::Text(t) => {
                if needs_guard(t) {
                    out.push(b'\'');
                }
                out.extend_from_slice(t.as_bytes());
            }
            Cell::Number(v) => out.extend_from_slice(export_number(*v).as_bytes()),
            Cell::Full(v) => {
                if let Some(x) = v.filter(|x| x.is_finite()) {
                    write_shortest(x, out);
                }
            }
            Cell::Count(n) => {
                if let Some(n) = n {
                    out.extend_from_slice(itoa::Buffer::new().format(*n).as_bytes());
                }
            }
        }
    }
}

/// Whether [`neutralise_formula`] puts an apostrophe before `text`.
fn needs_guard(text: &str) -> bool {
    formula_lead(text.as_bytes()) && !is_plain_number(text)
}

/// The text begins as a spreadsheet formula would (unless it is a plain number).
fn formula_lead(text: &[u8]) -> bool {
    matches!(text.first(), Some(b'=' | b'+' | b'-' | b'@' | b'\t' | b'\r'))
}

/// Makes room in `buffer` for `more` items of `size` bytes each, and an
/// eighth more, so that a buffer filled item by item is not copied as it grows.
pub fn reserve_like(buffer: &mut Vec<u8>, more: usize, size: usize) {
    buffer.reserve(more * size * 9 / 8);
}

/// Appends one CSV record to `out` as the `csv` crate's writer with its
/// defaults writes it (RFC 4180): fields joined by commas, a field quoted
/// (inner quotes doubled) when it holds a comma, a quote, CR or LF, a
/// record of one empty field written as `""`, and a `\n` at the end.
fn encode_record<'f>(fields: impl IntoIterator<Item = &'f [u8]>, out: &mut Vec<u8>) {
    let start = out.len();
    let mut count = 0;
    for field in fields {
        if count > 0 {
            out.push(b',');
        }
        count += 1;
        encode_field(field, out);
    }
    if count == 1 && out.len() == start {
        out.extend_from_slice(b"\"\"");
    }
    out.push(b'\n');
}

/// Whether a CSV field must be quoted: it holds a comma, a quote, CR or LF.
/// All four are below `-` (0x2D), so a field is looked at eight bytes at a
/// time and only a word with a byte below that, byte by byte.
fn needs_quotes(field: &[u8]) -> bool {
    let exact = |bytes: &[u8]| bytes.iter().any(|&b| matches!(b, b',' | b'"' | b'\r' | b'\n'));
    let (words, rest) = field.as_chunks::<8>();
    for word in words {
        let v = u64::from_le_bytes(*word);
        if super::words::maybe_below(v, 0x2D) != 0 && exact(word) {
            return true;
        }
    }
    exact(rest)
}

fn encode_field(field: &[u8], out: &mut Vec<u8>) {
    if !needs_quotes(field) {
        out.extend_from_slice(field);
        return;
    }
    out.push(b'"');
    for &b in field {
        if b == b'"' {
            out.push(b'"');
        }
        out.push(b);
    }
    out.push(b'"');
}

/// A row whose cells are already rendered and CSV-encoded (guard applied,
/// line ending included), so that a parallel pipeline can format its
/// numbers on the worker threads and leave only the copying to
/// [`CsvExport::rendered`]. Only [`Cell`]s make one. It may hold several
/// rows one after the other ([`RowBuilder::after`]), so that a worker
/// renders a run of results into one buffer.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RenderedRow(Vec<u8>);

impl RenderedRow {
    /// Makes room for `rows` more rows of the size of those written so far.
    pub fn reserve_for(&mut self, rows: usize) {
        let size = self.0.len();
        reserve_like(&mut self.0, rows, size);
    }

    /// Renders `cells`.
    pub fn new(cells: &[Cell]) -> RenderedRow {
        let mut row = RowBuilder::with_capacity(64 + 24 * cells.len());
        for c in cells {
            row.cell(c);
        }
        row.finish()
    }
}

/// Builds a [`RenderedRow`] a cell at a time, each cell written straight
/// into the row's one buffer (no cell is built and rendered apart): the same
/// bytes as [`RenderedRow::new`] on the same cells.
#[derive(Debug, Default)]
pub struct RowBuilder {
    row: Vec<u8>,
    /// Where this row begins in `row` (after the rows it continues).
    start: usize,
    count: usize,
}

impl RowBuilder {
    /// An empty row with room for `bytes`.
    pub fn with_capacity(bytes: usize) -> RowBuilder {
        RowBuilder { row: Vec::with_capacity(bytes), start: 0, count: 0 }
    }

    /// A row that follows `rows` in their buffer: [`RowBuilder::finish`]
    /// returns them with it.
    pub fn after(rows: RenderedRow) -> RowBuilder {
        RowBuilder { start: rows.0.len(), row: rows.0, count: 0 }
    }

    #[inline]
    fn next(&mut self) {
        if self.count > 0 {
            self.row.push(b',');
        }
        self.count += 1;
    }

    /// A [`Cell`].
    pub fn cell(&mut self, cell: &Cell) {
        match cell {
            Cell::Text(t) => self.text(t),
            Cell::Number(v) => {
                self.next();
                self.row.extend_from_slice(export_number(*v).as_bytes());
            }
            Cell::Full(v) => self.full(*v),
            Cell::Count(n) => self.count(*n),
        }
    }

    /// A text cell: guarded against formulas, quoted when it must be.
    pub fn text(&mut self, text: &str) {
        let bytes = text.as_bytes();
        if formula_lead(bytes) || needs_quotes(bytes) {
            return self.text_with(|out| out.extend_from_slice(bytes));
        }
        self.next();
        append_short(&mut self.row, bytes);
    }

    /// A text cell whose bytes `write` appends (UTF-8), guarded and quoted
    /// as [`RowBuilder::text`] would guard and quote them.
    pub fn text_with(&mut self, write: impl FnOnce(&mut Vec<u8>)) {
        self.next();
        let start = self.row.len();
        write(&mut self.row);
        let written = &self.row[start..];
        let guard = formula_lead(written) && !std::str::from_utf8(written).is_ok_and(is_plain_number);
        if guard || needs_quotes(written) {
            self.encode_from(start, guard);
        }
    }

    /// Rewrites the text cell from `start` on guarded (when `guard`) and quoted as it must be.
    #[cold]
    #[inline(never)]
    fn encode_from(&mut self, start: usize, guard: bool) {
        let mut cell = Vec::with_capacity(self.row.len() - start + 1);
        if guard {
            cell.push(b'\'');
        }
        cell.extend_from_slice(&self.row[start..]);
        self.row.truncate(start);
        encode_field(&cell, &mut self.row);
    }

    /// A number with every digit it has (empty when absent or not finite): never quoted.
    #[inline]
    pub fn full(&mut self, v: Option<f64>) {
        self.next();
        if let Some(x) = v.filter(|x| x.is_finite()) {
            write_shortest(x, &mut self.row);
        }
    }

    /// A count (empty when absent).
    #[inline]
    pub fn count(&mut self, n: Option<usize>) {
        self.next();
        if let Some(n) = n {
            append_short(&mut self.row, itoa::Buffer::new().format(n).as_bytes());
        }
    }

    /// The row, with its line end.
    pub fn finish(mut self) -> RenderedRow {
        if self.count == 1 && self.row.len() == self.start {
            self.row.extend_from_slice(b"\"\"");
        }
        self.row.push(b'\n');
        RenderedRow(self.row)
    }
}

/// The one CSV writer of the exports: a guarded header row, then rows of [`Cell`]s.
pub struct CsvExport<W: Write> {
    out: W,
}

impl<W: Write> CsvExport<W> {
    /// Starts the file with its header (each name through the formula guard).
    pub fn new(mut out: W, header: &[String]) -> Result<CsvExport<W>> {
        let guarded: Vec<String> = header.iter().map(|h| neutralise_formula(h)).collect();
        let mut buffer = Vec::new();
        encode_record(guarded.iter().map(|h| h.as_bytes()), &mut buffer);
        out.write_all(&buffer).map_err(serialise_io)?;
        Ok(CsvExport { out })
    }

    /// Writes one row.
    pub fn row(&mut self, cells: &[Cell]) -> Result<()> {
        let row = RenderedRow::new(cells);
        self.rendered(&row)
    }

    /// Writes one row rendered elsewhere.
    pub fn rendered(&mut self, row: &RenderedRow) -> Result<()> {
        self.out.write_all(&row.0).map_err(serialise_io)
    }

    /// Flushes and returns the destination.
    pub fn finish(mut self) -> Result<W> {
        self.out.flush().map_err(serialise_io)?;
        Ok(self.out)
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

    /// The short append writes what `extend_from_slice` writes, at every
    /// length from 0 to 70, after rows of every length (and so at every
    /// alignment), into vectors with and without spare room.
    #[test]
    fn short_appends_are_extend_from_slice() {
        let source: Vec<u8> = (0..70u8).map(|i| b'a' + i % 26).collect();
        for before in 0..40 {
            for n in 0..=70 {
                for room in [0, 1, 40, 200] {
                    let mut expected = Vec::with_capacity(room);
                    expected.extend(std::iter::repeat_n(b'-', before));
                    let mut got = expected.clone();
                    expected.extend_from_slice(&source[..n]);
                    append_short(&mut got, &source[..n]);
                    assert_eq!(got, expected, "before {before}, n {n}, room {room}");
                }
            }
        }
    }

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

    /// The fast formatter prints exactly what `{}` prints: edge cases, then a
    /// million random bit patterns (every magnitude) and a million values of
    /// the sizes a fit reports.
    #[test]
    fn shortest_text_is_the_standard_librarys() {
        use rand::{Rng, SeedableRng};
        let check = |x: f64| {
            if !x.is_finite() {
                return;
            }
            let mut out = Vec::new();
            write_shortest(x, &mut out);
            assert_eq!(String::from_utf8(out).unwrap(), format!("{x}"), "{x:e}");
        };
        for x in [
            0.0,
            -0.0,
            1.0,
            -1.0,
            0.1,
            0.5,
            10.0,
            100.0,
            1e15,
            1e16,
            1e17,
            1e21,
            1e22,
            1e23,
            1e-5,
            1e-6,
            1e-7,
            123456.789,
            5e-324,
            f64::MIN_POSITIVE,
            f64::MAX,
            f64::MIN,
            f64::EPSILON,
            9007199254740993.0,
            0.30000000000000004,
            80.65622605300506,
            -0.5230419964063273,
        ] {
            check(x);
        }
        // Either side of where the formatter's plain range ends (1e-5, 1e15,
        // 1e16) and where the shortcut that skips its exponent ends.
        for edge in [1e-5, 1e-6, 1e15, 1e16, 9.999999999999999e14] {
            let (mut down, mut up) = (edge, edge);
            for _ in 0..1000 {
                check(down);
                check(-up);
                (down, up) = (down.next_down(), up.next_up());
            }
        }
        let mut rng = rand::rngs::StdRng::seed_from_u64(20261202);
        for _ in 0..1_000_000 {
            check(f64::from_bits(rng.random()));
            let magnitude = 10f64.powi(rng.random_range(-12..12));
            check(rng.random_range(-1.0..1.0) * magnitude);
            // Where exact ties between two shortest candidates live: a full
            // mantissa and a small binary exponent (about 1e15 to 1e20).
            let m = rng.random_range((1u64 << 52)..(1u64 << 53)) as f64;
            check(m * 2f64.powi(rng.random_range(-3..12)));
        }
    }

    /// The word-at-a-time test for characters that need quoting says what
    /// a byte-by-byte look says, on random fields of every length and bytes
    /// from around the four characters (and above 0x80) as well as anywhere.
    #[test]
    fn quoting_test_is_the_plain_one() {
        use rand::{Rng, SeedableRng};
        let plain = |f: &[u8]| f.iter().any(|&b| matches!(b, b',' | b'"' | b'\r' | b'\n'));
        let mut rng = rand::rngs::StdRng::seed_from_u64(44);
        let near = [
            b',', b'"', b'\r', b'\n', b'+', b'-', b'.', b'\t', 0, 0x2B, 0x2C, 0x2D, 0x7F, 0x80, 0xAC, 0xFF, b'a', b'0',
        ];
        for _ in 0..200_000 {
            let len = rng.random_range(0..40);
            let field: Vec<u8> = match rng.random_range(0..3) {
                0 => (0..len).map(|_| rng.random()).collect(),
                1 => (0..len).map(|_| near[rng.random_range(0..near.len())]).collect(),
                _ => (0..len)
                    .map(|_| if rng.random_ratio(1, 30) { b',' } else { rng.random_range(0x2D..0x7F) })
                    .collect(),
            };
            assert_eq!(needs_quotes(&field), plain(&field), "{field:?}");
        }
    }

    #[test]
    fn records_are_encoded_as_the_csv_crate_encodes_them() {
        let fields: Vec<&[u8]> = vec![b"a", b"", b"b,c", b"say \"hi\"", b"two\nlines", b"cr\r", b" pad "];
        let mut ours = Vec::new();
        encode_record(fields.iter().copied(), &mut ours);
        let mut theirs = csv::Writer::from_writer(Vec::new());
        theirs.write_record(&fields).unwrap();
        assert_eq!(ours, theirs.into_inner().unwrap());
        for one in [&b""[..], b"x"] {
            let mut ours = Vec::new();
            encode_record([one], &mut ours);
            let mut theirs = csv::Writer::from_writer(Vec::new());
            theirs.write_record([one]).unwrap();
            assert_eq!(ours, theirs.into_inner().unwrap());
            assert_eq!(RenderedRow::new(&[Cell::Text(String::from_utf8(one.to_vec()).unwrap())]).0, ours);
        }
    }

    /// Cells written straight into the row are the cells the csv crate
    /// writes once guarded: quoting, the guard, and both together.
    #[test]
    fn cells_written_in_place_are_guarded_and_quoted_as_the_csv_crate_quotes_them() {
        let texts = [
            "plain",
            "",
            "=1+2",
            "-1.5",
            "-x,y",
            "a\"b",
            "@a\nb",
            "\tcmd",
            "+3",
            "é,ü",
            "-inf",
            "a long plain name of a compound",
            "a long name, with a comma",
            "/data/run 7/plate-3.csv:2-11",
            "/data/run 7/plate-3.csv:2-11,13",
        ];
        let mut theirs = csv::Writer::from_writer(Vec::new());
        let mut fields: Vec<String> = texts.iter().map(|t| neutralise_formula(t)).collect();
        fields.extend(["-0.25".to_string(), String::new()]);
        theirs.write_record(&fields).unwrap();
        let theirs = String::from_utf8(theirs.into_inner().unwrap()).unwrap();
        // Written in place, and (the fast path for a text already made) copied in.
        for in_place in [true, false] {
            let mut row = RowBuilder::with_capacity(0);
            for t in texts {
                match in_place {
                    true => row.text_with(|out| out.extend_from_slice(t.as_bytes())),
                    false => row.text(t),
                }
            }
            row.full(Some(-0.25));
            row.count(None);
            assert_eq!(String::from_utf8(row.finish().0).unwrap(), theirs);
        }
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
