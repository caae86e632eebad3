//! Reading assay tables and writing results. Nothing here computes.

pub mod cleanup;
pub mod ic50;
pub mod identity;
pub mod input;
pub mod line_endings;
pub mod output;
pub mod provenance;
pub mod stream;
mod words;

pub use input::{ColumnSpec, Table};
pub use output::{Format, neutralise_formula, write_output};
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod rank;
pub mod rates;
