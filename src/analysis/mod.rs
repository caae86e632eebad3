//! The numerical core of each command: plain inputs in, result structs out.
//! Nothing here reads files or prints; the `cli` layer does that.

pub mod ic50;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;
pub mod rates;
