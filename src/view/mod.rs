//! Views: result structs → terminal table, CSV and JSON. Nothing here
//! computes; nothing outside `cli` imports from `cli`, so the sentence every
//! human-readable report ends with is held here for the views.

pub mod ic50;
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;
pub mod rates;
pub mod registry;

/// The sentence every human-readable report ends with.
pub const CAUTION: &str = "These are research estimates whose validity rests on the stated assumptions \
(model, weighting, mechanism); follow your laboratory's validated procedures before acting on them.";
