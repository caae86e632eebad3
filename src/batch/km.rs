//! `km` on one table: read the substrate series, fit each one, collect the
//! series that fail. The command and the demo both call [`process`].

use crate::analysis::km::{Enzyme, KmResult, Options, analyse};
use crate::error::{Error, Result};
use crate::fit::{FitSettings, Weighting};
use crate::io::Table;
use crate::io::km::{ReadOptions, read};
use crate::units::{ConcUnit, ConcentrationArg};

/// What a run needs besides its table.
#[derive(Debug, Clone, Copy)]
pub struct Settings {
    /// Unit of substrate values that carry none in the cell or header.
    pub substrate_unit: Option<ConcUnit>,
    /// Total active enzyme concentration: adds kcat and kcat/Km.
    pub enzyme: Option<ConcentrationArg>,
    /// Residual weighting.
    pub weighting: Weighting,
    /// Confidence level of the intervals.
    pub confidence: f64,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            substrate_unit: None,
            enzyme: None,
            weighting: Weighting::None,
            confidence: crate::report::DEFAULT_CONFIDENCE,
        }
    }
}

/// What one run produced: results for the series that could be fitted and
/// the errors of those that could not.
pub struct Outcome {
    /// Results, in input order.
    pub results: Vec<KmResult>,
    /// One error per series that failed.
    pub failures: Vec<Error>,
    /// Number of series in the input.
    pub total: usize,
}

/// Reads the series from `table` and fits each one; failures are collected, not fatal.
pub fn process(table: &Table, settings: &Settings) -> Result<Outcome> {
    let read_options =
        ReadOptions { substrate_unit: settings.substrate_unit, sd_required: settings.weighting == Weighting::Sd };
    let (series, units) = read(table, &read_options)?;
    let options = Options {
        weighting: settings.weighting,
        confidence: settings.confidence,
        enzyme: settings.enzyme.map(|e| Enzyme { molar: e.molar, unit: e.unit }),
        settings: FitSettings::default(),
    };
    let mut results = Vec::new();
    let mut failures = Vec::new();
    for s in &series {
        match analyse(s, &units, &options) {
            Ok(r) => results.push(r),
            Err(e) => failures.push(e),
        }
    }
    Ok(Outcome { results, failures, total: series.len() })
}

/// The command line that reproduces a run on `file` with `settings`, for the report.
pub fn command_line(file: &str, settings: &Settings) -> String {
    let mut line = format!("kimech km {file}");
    if let Some(u) = settings.substrate_unit {
        line.push_str(&format!(" --substrate-unit {}", u.symbol()));
    }
    if let Some(e) = &settings.enzyme {
        let value = format!("{:.6}", e.unit.from_molar(e.molar));
        let value = value.trim_end_matches('0').trim_end_matches('.');
        line.push_str(&format!(" --enzyme \"{value} {}\"", e.unit.symbol()));
    }
    match settings.weighting {
        Weighting::None => {}
        Weighting::Relative => line.push_str(" --weighting relative"),
        Weighting::Sd => line.push_str(" --weighting sd"),
    }
    if (settings.confidence - crate::report::DEFAULT_CONFIDENCE).abs() > 1e-12 {
        line.push_str(&format!(" --confidence {}", settings.confidence));
    }
    line
}
