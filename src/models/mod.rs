//! Rate laws and curve models: each knows its parameters, its value, its
//! analytic Jacobian and how to guess a start from data.

pub mod inhibition;
pub mod michaelis_menten;
pub mod polynomial;

pub use michaelis_menten::MichaelisMenten;
pub use polynomial::Polynomial;
pub mod logistic;

pub use logistic::{Dose, Logistic, LogisticAt, Morrison};
pub mod onset;
