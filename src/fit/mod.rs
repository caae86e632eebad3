//! The nonlinear least-squares engine. It knows models only through the
//! [`Model`] trait: parameter names, values, analytic Jacobians, starting
//! guesses and which parameters are positive. Nothing in here knows about
//! enzymes.
//!
//! Minimisation is Levenberg–Marquardt (the `levenberg-marquardt` crate, a
//! port of MINPACK's `lmder`; Moré, *The Levenberg–Marquardt algorithm:
//! implementation and theory*, Lecture Notes in Mathematics 630, 1978).
//! Positive parameters are fitted as `ln θ`, which keeps them positive without
//! bounds and makes the likelihood surface closer to quadratic.

mod engine;
pub mod intervals;
mod small;
pub mod stats;

/// The engine's covariance, the reference the kernel's own 4×4 inverse is tested against.
#[cfg(test)]
pub(crate) use engine::covariance_of_information4;
pub(crate) use engine::r_squared;
pub use engine::{Fit, FitSettings, Termination, fit, fit_from, summarise};
pub use small::fit_small;

/// Largest response magnitude whose squares, summed over a million rows,
/// stay finite (1e150² · 1e6 = 1e306 < 1.8e308).
const LARGEST_RESPONSE: f64 = 1e150;
/// Smallest response span whose squared residuals stay normal doubles
/// (1e-150² = 1e-300 > 2.2e-308); below it the SSE underflows to zero.
const SMALLEST_SPAN: f64 = 1e-150;

/// Why responses cannot be fitted by least squares in doubles, if they
/// cannot: so large that their squares overflow, or spanning so little that
/// the squared residuals underflow. `what` names them in the message
/// ("rates", "responses"). The fits are scale-free inside these limits.
pub fn out_of_range(y: &[f64], what: &str) -> Option<String> {
    out_of_range_in(span_of(y), what)
}

/// The smallest and largest of `y` (NaN ignored; (∞, −∞) when empty).
pub fn span_of(y: &[f64]) -> (f64, f64) {
    y.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)))
}

/// [`out_of_range`] of responses whose smallest and largest ([`span_of`])
/// are already known: a caller that needs them anyway finds them once.
pub fn out_of_range_in((lo, hi): (f64, f64), what: &str) -> Option<String> {
    let largest = lo.abs().max(hi.abs());
    if largest > LARGEST_RESPONSE {
        return Some(format!(
            "{what} as large as {}: their squares overflow a double (beyond 1e150 the sum of squares is infinite)",
            crate::units::sig(largest, 3)
        ));
    }
    let span = hi - lo;
    if span > 0.0 && span < SMALLEST_SPAN {
        return Some(format!(
            "{what} that span only {}: their squared differences underflow a double (below a span of 1e-150 the sum of squares is zero)",
            crate::units::sig(span, 3)
        ));
    }
    None
}

/// How a parameter is represented inside the minimiser.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scale {
    /// Fitted as it is; may take any sign.
    Linear,
    /// Must be positive; fitted as its natural logarithm.
    Log,
}

impl Scale {
    /// From the parameter's own value to the minimiser's coordinate.
    pub fn to_internal(self, value: f64) -> f64 {
        match self {
            Scale::Linear => value,
            Scale::Log => value.ln(),
        }
    }

    /// From the minimiser's coordinate back to the parameter's own value.
    pub fn to_natural(self, internal: f64) -> f64 {
        match self {
            Scale::Linear => internal,
            Scale::Log => internal.exp(),
        }
    }

    /// d(natural)/d(internal) at a natural value: the chain-rule factor.
    pub fn derivative(self, value: f64) -> f64 {
        match self {
            Scale::Linear => 1.0,
            Scale::Log => value,
        }
    }
}

/// A curve or rate law that the engine can fit.
///
/// `Point` is whatever one observation's independent variables are: a
/// substrate concentration, an (S, I) pair, a dose.
pub trait Model: Sync {
    /// The independent variables of one observation.
    type Point: Sync;

    /// Parameter names, in the order of every parameter vector.
    fn names(&self) -> &[&'static str];

    /// How each parameter is fitted (positive ones on the log scale).
    fn scales(&self) -> &[Scale];

    /// The model's prediction at `x` for natural-scale parameters `theta`.
    fn value(&self, theta: &[f64], x: &Self::Point) -> f64;

    /// The prediction's partial derivatives with respect to each natural-scale
    /// parameter, written into `grad` (same length as `theta`).
    fn gradient(&self, theta: &[f64], x: &Self::Point, grad: &mut [f64]);

    /// Starting points (natural scale) derived from the data. The engine
    /// tries every one and keeps the best; more starts buy robustness.
    fn starts(&self, data: &Data<Self::Point>) -> Vec<Vec<f64>>;
}

/// Observations with their least-squares weights (1/variance, up to a constant).
#[derive(Debug, Clone)]
pub struct Data<P> {
    /// Independent variables.
    pub x: Vec<P>,
    /// Observed responses.
    pub y: Vec<f64>,
    /// Weight of each residual; all 1 for ordinary least squares.
    pub weights: Vec<f64>,
}

impl<P> Data<P> {
    /// Unweighted data.
    pub fn unweighted(x: Vec<P>, y: Vec<f64>) -> Self {
        let weights = vec![1.0; y.len()];
        Data { x, y, weights }
    }

    /// Number of observations.
    pub fn len(&self) -> usize {
        self.y.len()
    }

    /// True when there are no observations.
    pub fn is_empty(&self) -> bool {
        self.y.is_empty()
    }
}

/// How residuals are weighted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Weighting {
    /// Ordinary least squares: constant absolute error.
    None,
    /// Weights 1/y²: constant relative (proportional) error.
    Relative,
    /// Weights 1/sd² from a supplied standard-deviation column.
    Sd,
}

/// Why weights could not be formed for one observation.
#[derive(Debug, Clone, PartialEq)]
pub enum WeightProblem {
    /// Relative weighting needs every response to be non-zero.
    ZeroResponse(usize),
    /// A supplied SD was zero, negative or missing.
    BadSd(usize),
}

/// Weights for `y` under `weighting`; `sd` is needed for [`Weighting::Sd`].
/// Returns the index of the first observation that cannot be weighted.
pub fn weights(weighting: Weighting, y: &[f64], sd: Option<&[f64]>) -> Result<Vec<f64>, WeightProblem> {
    match weighting {
        Weighting::None => Ok(vec![1.0; y.len()]),
        Weighting::Relative => y
            .iter()
            .enumerate()
            .map(
                |(i, &v)| {
                    if v != 0.0 && v.is_finite() { Ok(1.0 / (v * v)) } else { Err(WeightProblem::ZeroResponse(i)) }
                },
            )
            .collect(),
        Weighting::Sd => {
            let sd = sd.ok_or(WeightProblem::BadSd(0))?;
            sd.iter()
                .enumerate()
                .map(|(i, &s)| if s > 0.0 && s.is_finite() { Ok(1.0 / (s * s)) } else { Err(WeightProblem::BadSd(i)) })
                .collect()
        }
    }
}
