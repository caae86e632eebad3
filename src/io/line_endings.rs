//! One line ending for every reader.
//!
//! The CSV parser counts lines by `\n` only and ends a record at the first
//! byte of a `\r\n` pair, so the `\n` is counted when the *next* record is
//! read: with Windows (CRLF) line endings every line number comes out one
//! too small, and with old Mac (CR-only) endings every row is "line 1".
//! [`UnifiedLineEndings`] turns `\r\n` and a lone `\r` into `\n` before the
//! parser sees the bytes, so the line numbers in errors and in exported
//! `row`/`lines` fields are those an editor shows, whatever the ending
//! (including files that mix them). A `\r\n` inside a quoted cell becomes
//! `\n` too, which is what a cell's text means anyway.
//!
//! The parser also skips blank lines silently while still dating the next
//! record from where the blank lines began, so the line a record starts on
//! is counted here instead: the reader logs where each `\n` it hands out
//! lies, and [`LineLog::line_at`] turns a record's byte offset into its
//! line. The log holds only the line ends read ahead of the parser (at most
//! one parser buffer), so memory does not grow with the file.

use std::collections::VecDeque;
use std::io::Read;
use std::sync::{Arc, Mutex, PoisonError};

/// A reader that yields its input with `\r\n` and lone `\r` as `\n`.
pub struct UnifiedLineEndings<R> {
    inner: R,
    /// The last byte handed out was a `\r` turned into `\n`; a `\n` that
    /// follows it belongs to the same line ending and is dropped.
    after_cr: bool,
    /// Bytes handed out so far.
    offset: u64,
    /// Where the line ends go, for a parser that does not count lines itself.
    log: Option<LineLog>,
}

impl<R: Read> UnifiedLineEndings<R> {
    /// Wraps `inner`; `log` learns where the lines end.
    pub fn new(inner: R, log: LineLog) -> Self {
        UnifiedLineEndings { inner, after_cr: false, offset: 0, log: Some(log) }
    }

    /// Wraps `inner` for a reader that counts its lines itself (no log kept).
    pub fn unlogged(inner: R) -> Self {
        UnifiedLineEndings { inner, after_cr: false, offset: 0, log: None }
    }

    /// Rewrites `buf` in place, returning how many bytes remain.
    fn unify(&mut self, buf: &mut [u8]) -> usize {
        if !self.after_cr && memchr::memchr(b'\r', buf).is_none() {
            // Nothing to rewrite (the usual case, LF files): only log the line ends.
            if let Some(log) = &self.log {
                log.push(memchr::memchr_iter(b'\n', buf).map(|i| self.offset + i as u64).collect());
            }
            self.offset += buf.len() as u64;
            return buf.len();
        }
        let mut kept = 0;
        let mut ends = Vec::new();
        for i in 0..buf.len() {
            let byte = buf[i];
            let dropped = self.after_cr && byte == b'\n';
            self.after_cr = byte == b'\r';
            if !dropped {
                let unified = if byte == b'\r' { b'\n' } else { byte };
                if unified == b'\n' && self.log.is_some() {
                    ends.push(self.offset + kept as u64);
                }
                buf[kept] = unified;
                kept += 1;
            }
        }
        self.offset += kept as u64;
        if let Some(log) = &self.log {
            log.push(ends);
        }
        kept
    }
}

/// Where the lines handed to the parser end, shared between the reader
/// (which writes) and whoever numbers the records (which reads).
#[derive(Debug, Clone, Default)]
pub struct LineLog(Arc<Mutex<LineEnds>>);

#[derive(Debug, Default)]
struct LineEnds {
    /// Offsets of `\n` bytes not yet passed by a record.
    pending: VecDeque<u64>,
    /// Line ends already passed.
    passed: u64,
}

impl LineLog {
    fn push(&self, ends: Vec<u64>) {
        self.0.lock().unwrap_or_else(PoisonError::into_inner).pending.extend(ends);
    }

    /// The 1-based line of a record that the parser dates at byte `start`
    /// (its position, which precedes any blank lines it skipped). Call it
    /// for records in file order.
    pub fn line_at(&self, start: u64) -> u64 {
        let mut ends = self.0.lock().unwrap_or_else(PoisonError::into_inner);
        while ends.pending.front().is_some_and(|&end| end < start) {
            ends.pending.pop_front();
            ends.passed += 1;
        }
        // Blank lines the parser skipped: line ends at start, start + 1, …
        let mut next = start;
        while ends.pending.front() == Some(&next) {
            ends.pending.pop_front();
            ends.passed += 1;
            next += 1;
        }
        ends.passed + 1
    }
}

impl<R: Read> Read for UnifiedLineEndings<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if buf.is_empty() {
            return Ok(0);
        }
        // A read that held only the `\n` of a split `\r\n` leaves nothing;
        // returning 0 then would look like the end of the input.
        loop {
            let n = self.inner.read(buf)?;
            if n == 0 {
                return Ok(0);
            }
            let kept = self.unify(&mut buf[..n]);
            if kept > 0 {
                return Ok(kept);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A reader that hands out one byte per call, to split every `\r\n`.
    struct OneByte<'a>(&'a [u8]);

    impl Read for OneByte<'_> {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            match self.0.split_first() {
                Some((b, rest)) if !buf.is_empty() => {
                    buf[0] = *b;
                    self.0 = rest;
                    Ok(1)
                }
                _ => Ok(0),
            }
        }
    }

    fn unified(bytes: &[u8]) -> String {
        let mut out = String::new();
        UnifiedLineEndings::new(OneByte(bytes), LineLog::default()).read_to_string(&mut out).unwrap();
        out
    }

    #[test]
    fn crlf_cr_and_mixed_endings_become_lf_even_split_across_reads() {
        assert_eq!(unified(b"a\r\nb\r\n"), "a\nb\n");
        assert_eq!(unified(b"a\rb\r"), "a\nb\n");
        assert_eq!(unified(b"a\r\n\r\nb\rc\nd\r\r\n"), "a\n\nb\nc\nd\n\n");
        assert_eq!(unified(b"plain\n"), "plain\n");
    }

    #[test]
    fn line_log_counts_blank_lines_the_parser_skips() {
        let log = LineLog::default();
        let mut out = String::new();
        UnifiedLineEndings::new(OneByte(b"a\r\n\r\n\rb\n"), log.clone()).read_to_string(&mut out).unwrap();
        assert_eq!(out, "a\n\n\nb\n");
        assert_eq!(log.line_at(0), 1);
        // The parser dates 'b' at byte 2, where the two blank lines begin.
        assert_eq!(log.line_at(2), 4);
    }
}
