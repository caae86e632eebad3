//! `mode` on one table: read each compound's [S]×[I] matrix, analyse it,
//! keep the matrix beside its result (for pictures) and collect the
//! compounds that fail. The command and the demo both call [`process`].

use crate::analysis::mode::{Matrix, ModeResult, Options, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::Weighting;
use crate::io::Table;
use crate::io::mode::{ReadOptions, read};
use crate::units::ConcUnit;

/// What a run needs besides its table.
#[derive(Debug, Clone, Default)]
pub struct Settings {
    /// Unit of substrate values that carry none in the cell or header.
    pub substrate_unit: Option<ConcUnit>,
    /// Unit of inhibitor values that carry none in the cell or header.
    pub inhibitor_unit: Option<ConcUnit>,
    /// The analysis options (weighting, model choice, confidence).
    pub options: Options,
}

/// A run's results, each with the matrix it was fitted to (for pictures).
pub struct Outcome {
    /// (result, matrix) per analysed compound, in input order.
    pub pairs: Vec<(ModeResult, Matrix)>,
    /// Units of the matrices.
    pub units: Units,
    /// Compounds that could not be read or analysed.
    pub failures: Vec<Error>,
    /// Compounds in the input.
    pub total: usize,
}

impl Outcome {
    /// The results alone.
    pub fn results(&self) -> Vec<ModeResult> {
        self.pairs.iter().map(|(r, _)| r.clone()).collect()
    }

    /// The report section of the run ([`crate::page::mode::section`]): per compound its text block and figure.
    pub fn section(&self, command: &str) -> Result<crate::page::Section> {
        let pairs: Vec<(&ModeResult, &Matrix)> = self.pairs.iter().map(|(r, m)| (r, m)).collect();
        crate::page::mode::section(&pairs, &self.units, &self.failures, command)
    }
}

/// Reads and analyses every compound of a table; a compound that fails is a failure, not fatal.
pub fn process(table: &Table, settings: &Settings) -> Result<Outcome> {
    let read_options = ReadOptions {
        substrate_unit: settings.substrate_unit,
        inhibitor_unit: settings.inhibitor_unit,
        sd_required: settings.options.weighting == Weighting::Sd,
    };
    let (matrices, units, mut failures) = read(table, &read_options)?;
    let total = matrices.len() + failures.len();
    let mut pairs = Vec::new();
    for m in matrices {
        match analyse(&m, &units, &settings.options) {
            Ok(r) => pairs.push((r, m)),
            Err(e) => failures.push(e),
        }
    }
    Ok(Outcome { pairs, units, failures, total })
}
