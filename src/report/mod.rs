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
    /// made the data (`simulation 3 of competitive`).
    pub file: String,
    /// 1-based line numbers of the rows, ascending (empty for simulated data).
    pub lines: Vec<u64>,
}

impl Origin {
    /// The origin of rows on these lines of `file` (sorted, duplicates dropped).
    pub fn new(file: &str, lines: impl IntoIterator<Item = u64>) -> Origin {
        let mut lines: Vec<u64> = lines.into_iter().collect();
        lines.sort_unstable();
        lines.dedup();
        Origin { file: file.to_string(), lines }
    }

    /// Runs of consecutive lines: `[(2, 8), (15, 15)]`.
    fn runs(&self) -> Vec<(u64, u64)> {
        let mut runs: Vec<(u64, u64)> = Vec::new();
        for &l in &self.lines {
            match runs.last_mut() {
                Some((_, last)) if *last + 1 == l => *last = l,
                _ => runs.push((l, l)),
            }
        }
        runs
    }

    fn runs_text(&self, sep: &str) -> String {
        let text = |(a, b): (u64, u64)| if a == b { a.to_string() } else { format!("{a}-{b}") };
        self.runs().into_iter().map(text).collect::<Vec<_>>().join(sep)
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
        if self.lines.is_empty() { self.file.clone() } else { format!("{}:{}", self.file, self.runs_text(",")) }
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
        let simulated = Origin::new("simulation 3 of mixed", []);
        assert_eq!(
            (simulated.to_string(), simulated.cell()),
            ("simulation 3 of mixed".into(), "simulation 3 of mixed".into())
        );
    }
}
