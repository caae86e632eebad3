//! `rates` on one table: read the curves, find each one's initial rate,
//! collect the curves that fail. The command and the demo both call [`process`].

use crate::analysis::rates::{Options, analyse};
use crate::error::{Error, Result};
use crate::io::Table;
use crate::io::rates::read;
use crate::view::rates::{CarriedResult, RateTable};

/// What a run needs besides its table (the command-line defaults in [`Settings::default`]).
#[derive(Debug, Clone, Copy)]
pub struct Settings {
    /// The smallest initial window tried, in points.
    pub min_points: usize,
    /// Significance level of the t² term at which the window stops growing.
    pub curvature_alpha: f64,
    /// Largest fraction of the substrate converted inside the window.
    pub max_conversion: f64,
    /// Confidence level of the rate intervals.
    pub confidence: f64,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            min_points: 4,
            curvature_alpha: 0.05,
            max_conversion: 0.1,
            confidence: crate::report::DEFAULT_CONFIDENCE,
        }
    }
}

/// What one run produced.
pub struct Outcome {
    /// The rates, as the views show them.
    pub table: RateTable,
    /// Errors of curves that could not be used.
    pub failures: Vec<Error>,
    /// Number of curves.
    pub total: usize,
}

/// Reads the curves of `table` and finds each one's initial rate.
pub fn process(table: &Table, settings: &Settings) -> Result<Outcome> {
    let input = read(table)?;
    let options = Options {
        min_points: settings.min_points,
        curvature_alpha: settings.curvature_alpha,
        max_conversion: settings.max_conversion,
        confidence: settings.confidence,
        rate_unit: input.rate_unit.clone(),
    };
    let mut results = Vec::new();
    let mut failures = Vec::new();
    let total = input.curves.len();
    for (curve, carried) in input.curves {
        match analyse(&curve, &options) {
            Ok(result) => results.push(CarriedResult { result, carried }),
            Err(e) => failures.push(e),
        }
    }
    let table = RateTable { results, carried_headers: input.carried_headers, has_curve_column: input.has_curve_column };
    Ok(Outcome { table, failures, total })
}
