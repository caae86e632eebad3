//! kimech: enzyme-inhibitor potency and mechanism analysis.
//!
//! The library holds everything; the binary only parses the command line.
//! Layers: [`io`] reads tables and writes results, [`fit`] is a general
//! least-squares engine, [`models`] are the rate laws, [`convert`] turns IC50
//! into Ki, and [`cli`] wires one subcommand per file.

#![warn(missing_docs)]
#![deny(clippy::float_cmp)]

pub mod allocator;
pub mod analysis;
pub mod batch;
pub mod cli;
pub mod convert;
pub mod error;
pub mod fit;
pub mod io;
pub mod models;
pub mod page;
pub mod plot;
pub mod report;
pub mod units;
pub mod view;

pub use error::{Error, Result};
