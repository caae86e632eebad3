//! `onset` on one table: read each compound's progress curves, analyse it,
//! collect the compounds that fail. The command and the demo both call [`process`].

use crate::analysis::onset::{Compound, OnsetResult, Options, analyse};
use crate::error::{Error, Result};
use crate::io::Table;
use crate::io::onset::{ReadOptions, read};

/// What a run needs besides its table (the command-line defaults in `Settings::default()`).
#[derive(Debug, Clone, Default)]
pub struct Settings {
    /// Units and assay conditions for the reader.
    pub read: ReadOptions,
    /// The analysis options.
    pub options: Options,
}

/// What one run produced: each compound's input with its result, and the
/// errors of the compounds that could not be analysed.
pub struct Outcome {
    /// Input and result, in input order.
    pub pairs: Vec<(Compound, OnsetResult)>,
    /// One error per compound that failed.
    pub failures: Vec<Error>,
}

impl Outcome {
    /// The results alone.
    pub fn results(&self) -> Vec<OnsetResult> {
        self.pairs.iter().map(|(_, r)| r.clone()).collect()
    }

    /// The report section of the run ([`crate::page::onset::section`]).
    pub fn section(&self, command: &str) -> Result<crate::page::Section> {
        let pairs: Vec<(&Compound, &OnsetResult)> = self.pairs.iter().map(|(c, r)| (c, r)).collect();
        crate::page::onset::section(&pairs, &self.failures, command)
    }
}

/// Reads the compounds of `table` and analyses each one.
pub fn process(table: &Table, settings: &Settings) -> Result<Outcome> {
    let input = read(table, &settings.read)?;
    let mut outcome = Outcome { pairs: Vec::new(), failures: Vec::new() };
    for compound in input.compounds {
        match analyse(&compound, &input.units, &settings.options) {
            Ok(r) => outcome.pairs.push((compound, r)),
            Err(e) => outcome.failures.push(e),
        }
    }
    Ok(outcome)
}
