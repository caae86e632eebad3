//! The vocabulary shared by every command's results: a reported parameter
//! and a warning. Results are plain serde structs; writers live in `io`.

use serde::Serialize;

use crate::fit::intervals::{Bound, Interval};

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
    pub code: &'static str,
    /// What was seen and what it means, in one or two sentences.
    pub message: String,
}

impl Warning {
    /// A warning with its code and message.
    pub fn new(code: &'static str, message: impl Into<String>) -> Warning {
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
