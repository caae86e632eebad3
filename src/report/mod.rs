//! The vocabulary shared by every command's results: a reported parameter
//! and a warning. Results are plain serde structs; writers live in `io`.

use serde::Serialize;

pub mod code;
pub use code::Code;

use crate::fit::intervals::{Bound, Interval};

/// The confidence level every interval is computed at unless the user asks
/// for another (`--confidence`); defined once, and every result records the
/// level it used.
pub const DEFAULT_CONFIDENCE: f64 = 0.95;

/// Where a result's data came from: the input as named on the command line
/// and the lines of its rows. Readers fill it (a reader of another shape — a
/// plate layout — would name its wells' lines its own way); messages show it
/// as `file, lines 2-8` and every CSV row as `file:2-8` (issue 12).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Origin {
    /// The input, as named on the command line (`<stdin>` for `-`), or what
    /// made the data (`simulation 3 of competitive`); shared with every
    /// other origin of the same input rather than copied per result.
    pub file: std::sync::Arc<str>,
    /// 1-based line numbers of the rows, ascending (empty for simulated data).
    pub lines: Vec<u64>,
}

impl Origin {
    /// The origin of rows on these lines of `file` (sorted, duplicates dropped).
    pub fn new(file: &str, lines: impl IntoIterator<Item = u64>) -> Origin {
        Origin::shared(std::sync::Arc::from(file), lines)
    }

    /// [`Origin::new`] for a file name held elsewhere already (every curve
    /// of an `ic50` input shares its reader's): no copy of the name. Lines
    /// already strictly ascending, as a reader meets them, are not sorted.
    pub fn shared(file: std::sync::Arc<str>, lines: impl IntoIterator<Item = u64>) -> Origin {
        let mut lines: Vec<u64> = lines.into_iter().collect();
        if !lines.windows(2).all(|w| w[0] < w[1]) {
            lines.sort_unstable();
            lines.dedup();
        }
        Origin { file, lines }
    }

    /// Runs of consecutive lines (`4-9,15` with `sep` ","), written onto
    /// `out` digit by digit: one row of a million-curve `ic50` run writes
    /// this cell, and the former `Vec` of runs, `String` per run and `join`
    /// cost more than the rest of the row's text.
    fn write_runs(&self, out: &mut Vec<u8>, sep: &str) {
        let mut digits = itoa::Buffer::new();
        let mut i = 0;
        let mut first_run = true;
        while i < self.lines.len() {
            let first = self.lines[i];
            let mut last = first;
            while i + 1 < self.lines.len() && self.lines[i + 1] == last + 1 {
                i += 1;
                last = self.lines[i];
            }
            i += 1;
            if !first_run {
                out.extend_from_slice(sep.as_bytes());
            }
            first_run = false;
            out.extend_from_slice(digits.format(first).as_bytes());
            if first != last {
                out.push(b'-');
                out.extend_from_slice(digits.format(last).as_bytes());
            }
        }
    }

    fn runs_text(&self, sep: &str) -> String {
        let mut out = Vec::new();
        self.write_runs(&mut out, sep);
        // Digits and `sep` only: always UTF-8.
        String::from_utf8(out).unwrap_or_default()
    }

    /// `line 4`, `lines 4-9` or `lines 4-9, 15`.
    pub fn span(&self) -> String {
        match self.lines.len() {
            0 => "no lines".into(),
            1 => format!("line {}", self.lines[0]),
            _ => format!("lines {}", self.runs_text(", ")),
        }
    }

    /// The CSV cell: `file:4-9,15` (just the name when there are no lines).
    pub fn cell(&self) -> String {
        let mut out = Vec::with_capacity(self.file.len() + 1 + 8 * self.lines.len().min(4));
        self.write_cell(&mut out);
        // The file name is a `str`, the rest digits and punctuation: always UTF-8.
        String::from_utf8(out).unwrap_or_default()
    }

    /// [`Origin::cell`] appended to `out`: a CSV row writes it straight into
    /// its own buffer, with no `String` per row.
    pub fn write_cell(&self, out: &mut Vec<u8>) {
        out.extend_from_slice(self.file.as_bytes());
        if !self.lines.is_empty() {
            out.push(b':');
            self.write_runs(out, ",");
        }
    }
}

impl std::fmt::Display for Origin {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.lines.is_empty() { f.write_str(&self.file) } else { write!(f, "{}, {}", self.file, self.span()) }
    }
}

/// An origin without lines: simulated data, a fixture named in a test.
impl From<&str> for Origin {
    fn from(what: &str) -> Origin {
        Origin::new(what, [])
    }
}

impl Serialize for Origin {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_str(&self.cell())
    }
}

/// A reported parameter: estimate, standard error, interval and unit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Param {
    /// The estimate.
    pub value: f64,
    /// Standard error (from the scaled covariance); `null` when not determined.
    pub se: Option<f64>,
    /// Lower end of the confidence interval; `null` when unbounded or not determined.
    pub low: Option<f64>,
    /// Upper end of the confidence interval; `null` when unbounded or not determined.
    pub high: Option<f64>,
    /// Unit of value, se, low and high; `null` when the input had none.
    pub unit: Option<String>,
    /// How the interval was computed (`profile`, `wald`, `wald-log`, `fixed`…).
    pub interval: &'static str,
    /// Why an end is missing, in words (e.g. "no upper bound: …"); absent when both ends exist.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

impl Param {
    /// A parameter from its estimate, SE and interval, scaled by `factor`
    /// (e.g. 1/Et for kcat) into `unit`.
    pub fn new(value: f64, se: Option<f64>, interval: Interval, method: &'static str, unit: Option<String>) -> Param {
        let note = describe_missing(interval);
        Param { value, se, low: interval.low.value(), high: interval.high.value(), unit, interval: method, note }
    }

    /// The same parameter multiplied by a positive constant.
    pub fn scaled(&self, factor: f64, unit: Option<String>) -> Param {
        Param {
            value: self.value * factor,
            se: self.se.map(|s| s * factor),
            low: self.low.map(|v| v * factor),
            high: self.high.map(|v| v * factor),
            unit,
            interval: self.interval,
            note: self.note.clone(),
        }
    }
}

/// Words for interval ends that are not numbers.
fn describe_missing(interval: Interval) -> Option<String> {
    // Both ends, as nearly every fit has them: nothing to say, nothing to build.
    if let (Bound::At(_), Bound::At(_)) = (interval.low, interval.high) {
        return None;
    }
    let side = |b: Bound, which: &str, meaning: &str| match b {
        Bound::At(_) => None,
        Bound::Unbounded => Some(format!("no {which} bound: {meaning}")),
        Bound::NotDetermined => Some(format!("{which} bound not determined")),
    };
    let parts: Vec<String> = [
        side(interval.low, "lower", "the data are consistent with values down to zero"),
        side(interval.high, "upper", "the data are consistent with arbitrarily large values"),
    ]
    .into_iter()
    .flatten()
    .collect();
    (!parts.is_empty()).then(|| parts.join("; "))
}

/// A warning: a stable kebab-case code for machines and a sentence for people.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Warning {
    /// Stable identifier, e.g. `km-not-bracketed`.
    pub code: Code,
    /// What was seen and what it means, in one or two sentences.
    pub message: String,
}

impl Warning {
    /// A warning with its code and message.
    pub fn new(code: Code, message: impl Into<String>) -> Warning {
        Warning { code, message: message.into() }
    }
}

/// "line 4" or "lines 4-9", from a group's first and last line (for readers
/// that stream and keep no rows, and the curves they make).
pub fn line_span(first: u64, last: u64) -> String {
    if first == last { format!("line {first}") } else { format!("lines {first}-{last}") }
}

/// A group's id as quoted in a message: at most 40 characters, the rest
/// replaced by `…`, so that an id pasted by mistake (a whole row, a long
/// string) cannot bury the message.
pub fn short_id(id: &str) -> String {
    const MAX: usize = 40;
    if id.chars().count() <= MAX {
        id.to_string()
    } else {
        format!("{}…", id.chars().take(MAX - 1).collect::<String>())
    }
}

#[cfg(test)]
mod id_tests {
    use super::short_id;

    #[test]
    fn long_ids_are_shortened_in_messages() {
        assert_eq!(short_id("KX-101"), "KX-101");
        let long = "é".repeat(100);
        assert_eq!(short_id(&long).chars().count(), 40);
        assert!(short_id(&long).ends_with('…'));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_origin_names_its_file_and_runs_of_lines() {
        let o = Origin::new("m.csv", [9, 2, 3, 4, 15, 3]);
        assert_eq!(o.lines, [2, 3, 4, 9, 15]);
        assert_eq!(o.span(), "lines 2-4, 9, 15");
        assert_eq!(o.cell(), "m.csv:2-4,9,15");
        assert_eq!(o.to_string(), "m.csv, lines 2-4, 9, 15");
        assert_eq!(Origin::new("m.csv", [7]).to_string(), "m.csv, line 7");
        // Digits written by hand, as `to_string` writes them.
        let wide = Origin::new("f", [0, 10, 99, 100, 101, 12345678901234567890]);
        assert_eq!(wide.cell(), "f:0,10,99-101,12345678901234567890");
        let simulated = Origin::new("simulation 3 of mixed", []);
        assert_eq!(
            (simulated.to_string(), simulated.cell()),
            ("simulation 3 of mixed".into(), "simulation 3 of mixed".into())
        );
    }
}
