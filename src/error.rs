//! The one error type of kimech.
//!
//! Every message is written for the person who typed the command: it names
//! the file, line and column where the problem is, the value that was found,
//! and what would have been accepted instead.

use std::path::PathBuf;

/// Everything that can go wrong, from reading a file to fitting a model.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be opened or read.
    #[error("{path}: cannot read: {source}")]
    Read {
        /// The path as the user gave it.
        path: String,
        /// What the operating system said.
        source: std::io::Error,
    },
    /// An output file could not be written.
    #[error("{path}: cannot write: {source}")]
    Write {
        /// Where we tried to write.
        path: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },
    /// The output file named is one of the inputs; writing would destroy it.
    #[error("{path}: refusing to write the output over an input file; choose another -o path")]
    OutputIsInput {
        /// The clashing path.
        path: PathBuf,
    },
    /// The CSV itself is malformed (unbalanced quotes, wrong field count, bad UTF-8).
    #[error("{path}, line {line}: {message}")]
    Csv {
        /// File name (or `<stdin>`).
        path: String,
        /// 1-based line number.
        line: u64,
        /// What is wrong and what would be right.
        message: String,
    },
    /// The file has a header but no data rows, or nothing at all.
    #[error("{path}: no data rows; expected a header line followed by at least one row")]
    Empty {
        /// File name (or `<stdin>`).
        path: String,
    },
    /// A required column is absent.
    #[error("{path}: no column '{column}' (also accepted: {aliases}); the header has: {found}")]
    MissingColumn {
        /// File name.
        path: String,
        /// The column we need.
        column: String,
        /// Other spellings we would have accepted.
        aliases: String,
        /// The columns that are there.
        found: String,
    },
    /// One cell holds a value we cannot use.
    #[error("{0}")]
    Cell(Box<CellError>),
    /// A concentration column has no unit from the cell, the header or a flag.
    #[error(
        "{path}, column '{column}': no concentration unit; write it in the header (e.g. '{column} (uM)'), in the cell ('10 uM'), or pass {flag}"
    )]
    NoUnit {
        /// File name.
        path: String,
        /// Column name.
        column: String,
        /// The command-line flag that would supply a default unit.
        flag: String,
    },
    /// A command-line option has a value we cannot use.
    #[error("option {option}: {problem} (found '{value}'); {expected}")]
    Option {
        /// The flag, e.g. `--enzyme`.
        option: String,
        /// What the user gave.
        value: String,
        /// What is wrong with it.
        problem: String,
        /// What would be right.
        expected: String,
    },
    /// The command line itself is wrong (clap's message, with usage).
    #[error("{0}")]
    Usage(String),
    /// A group of rows (a series, a compound) cannot be fitted as it stands.
    #[error("{group}: {problem}; {expected}")]
    Data {
        /// Which group: e.g. `series 'treated' (lines 2-13)`.
        group: String,
        /// What is wrong with the data.
        problem: String,
        /// What would make it usable.
        expected: String,
    },
    /// Results could not be serialised (a bug: every result type is serialisable).
    #[error("could not serialise the results: {0}")]
    Serialise(String),
    /// A chart could not be drawn (a bug, or a value the chart cannot place).
    #[error("could not draw {what}: {problem}")]
    Plot {
        /// The chart.
        what: String,
        /// What went wrong, from the drawing library.
        problem: String,
    },
    /// The numerical engine was asked something impossible (a caller bug or degenerate data).
    #[error("fit: {0}")]
    Fit(String),
    /// Some rows or groups failed while others succeeded; the output has the good ones.
    #[error("{failed} of {total} {what} could not be processed (messages above); the results shown are for the rest")]
    Partial {
        /// How many failed.
        failed: usize,
        /// How many there were.
        total: usize,
        /// What was counted (`series`, `compounds`, `rows`).
        what: &'static str,
    },
}

/// Result with kimech's error type.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Where a bad cell is and what is wrong with it (boxed inside [`Error::Cell`]
/// to keep `Result` small on the happy path).
#[derive(Debug, thiserror::Error)]
#[error("{path}, line {line}, column '{column}': {problem} (found '{value}'); {expected}")]
pub struct CellError {
    /// File name.
    pub path: String,
    /// 1-based line number in the file.
    pub line: u64,
    /// Column name as written in the header.
    pub column: String,
    /// The offending text.
    pub value: String,
    /// What is wrong with it.
    pub problem: String,
    /// What would be right.
    pub expected: String,
}
