//! Levenberg–Marquardt from several starts, and the covariance at the optimum.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt, TerminationReason};
use nalgebra::{DMatrix, DVector, Dyn, Matrix4, Owned};

use super::{Data, Model};

/// Residuals larger than this stand in for non-finite ones, so that a trial
/// step into overflow is rejected by the minimiser instead of aborting it.
const HUGE_RESIDUAL: f64 = 1e100;

/// Log-scale coordinates are clamped here: `exp(±700)` is still finite.
/// Linear coordinates are never clamped: an asymptote or a slope may be any
/// size (raw instrument counts run to 10⁷ and beyond), and clamping one would
/// make the fit depend on the scale of the response (DESIGN §2).
const INTERNAL_LIMIT: f64 = 700.0;

/// A coordinate as the minimiser may hold it: log-scale ones clamped to
/// ±[`INTERNAL_LIMIT`] so that `exp` stays finite, linear ones unchanged.
pub(super) fn admissible(scale: super::Scale, internal: f64) -> f64 {
    match scale {
        super::Scale::Log => internal.clamp(-INTERNAL_LIMIT, INTERNAL_LIMIT),
        super::Scale::Linear => internal,
    }
}

/// Why the minimiser stopped, in our own words.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Termination {
    /// The relative change in SSE or in the parameters fell below tolerance.
    Converged,
    /// The residuals are orthogonal to the Jacobian's columns: a stationary point.
    Stationary,
    /// The model passes through every observation.
    ExactFit,
    /// The tolerance is below what floating point can resolve; the point is as good as it gets.
    AtPrecisionLimit,
    /// The evaluation budget ran out first.
    EvaluationLimit,
    /// Residuals or Jacobian became non-finite.
    NumericalFailure,
    /// Nothing to fit (no free parameters or no data).
    NothingToFit,
}

impl std::fmt::Display for Termination {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Termination::Converged => "converged",
            Termination::Stationary => "stopped at a stationary point",
            Termination::ExactFit => "the model passes through every point",
            Termination::AtPrecisionLimit => "stopped at the limit of floating-point precision",
            Termination::EvaluationLimit => "the evaluation budget ran out",
            Termination::NumericalFailure => "the residuals or their derivatives became non-finite",
            Termination::NothingToFit => "nothing to fit",
        })
    }
}

impl Termination {
    pub(super) fn from_lm(reason: &TerminationReason) -> Self {
        match reason {
            TerminationReason::Converged { .. } => Termination::Converged,
            TerminationReason::Orthogonal => Termination::Stationary,
            TerminationReason::ResidualsZero => Termination::ExactFit,
            TerminationReason::NoImprovementPossible(_) => Termination::AtPrecisionLimit,
            TerminationReason::LostPatience => Termination::EvaluationLimit,
            TerminationReason::NoParameters | TerminationReason::NoResiduals => Termination::NothingToFit,
            TerminationReason::User(_) | TerminationReason::Numerical(_) | TerminationReason::WrongDimensions(_) => {
                Termination::NumericalFailure
            }
        }
    }

    /// Whether the stopping point is a trustworthy minimum.
    pub fn is_converged(&self) -> bool {
        matches!(
            self,
            Termination::Converged | Termination::Stationary | Termination::ExactFit | Termination::AtPrecisionLimit
        )
    }
}

/// Minimiser settings. Tolerances are relative, as in MINPACK.
#[derive(Debug, Clone, Copy)]
pub struct FitSettings {
    /// Relative reduction in SSE below which the fit stops.
    pub ftol: f64,
    /// Relative change in the parameters below which the fit stops.
    pub xtol: f64,
    /// Cosine between residuals and Jacobian columns below which the fit stops.
    pub gtol: f64,
    /// Evaluation budget, in multiples of (free parameters + 1).
    pub patience: usize,
    /// Finish with Gauss–Newton steps for the last digits of the optimum
    /// (off for profile refits, which only need the SSE).
    pub polish: bool,
}

impl Default for FitSettings {
    /// Tight enough to reproduce NIST certified values to their last digits.
    fn default() -> Self {
        FitSettings { ftol: 1e-15, xtol: 1e-15, gtol: 1e-15, patience: 400, polish: true }
    }
}

/// The outcome of a least-squares fit: estimates, their uncertainty and the
/// quality of the fit. Inputs are not modified; this is a separate record.
#[derive(Debug, Clone)]
pub struct Fit {
    /// Parameter names, in model order.
    pub names: Vec<&'static str>,
    /// Estimates on the natural scale.
    pub theta: Vec<f64>,
    /// Which parameters were held fixed (not estimated).
    pub fixed: Vec<bool>,
    /// Standard errors on the natural scale, from s²(JᵀWJ)⁻¹ (covariance
    /// scaled by the residual variance); `None` where not determined.
    pub se: Vec<Option<f64>>,
    /// Covariance of the free parameters on the natural scale, scaled by s².
    pub covariance: Option<DMatrix<f64>>,
    /// Number of observations.
    pub n: usize,
    /// Number of estimated parameters.
    pub n_free: usize,
    /// Residual degrees of freedom, n − free parameters.
    pub df: usize,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// Residual standard deviation √(SSE/df); `NaN` when df = 0.
    pub residual_sd: f64,
    /// Weighted coefficient of determination, 1 − SSE/SST about the weighted mean.
    pub r2: f64,
    /// Unweighted residuals, observed − predicted, in data order.
    pub residuals: Vec<f64>,
    /// Why the best run stopped.
    pub termination: Termination,
    /// Residual evaluations spent over all starts.
    pub evaluations: usize,
    /// The leverage of every point, gᵢᵀ(JᵀWJ)⁻¹gᵢ with gᵢ the model's
    /// gradient there (the hat-matrix diagonal of an unweighted fit), when
    /// the fitter had the gradients at hand as it built the covariance (the
    /// dose-response kernel); `None` otherwise, and the outlier rule
    /// evaluates the gradients itself. Valid only for the data and θ it was
    /// computed with (and any reparametrisation of the same curve, such as
    /// the logistic's mirror image): whatever refits or edits a fit must
    /// set it to `None` or recompute it.
    pub leverage: Option<Vec<f64>>,
}

impl Fit {
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub fn converged(&self) -> bool {
        self.termination.is_converged()
    }

    /// Index of a parameter by name.
    pub fn index(&self, name: &str) -> Option<usize> {
        self.names.iter().position(|n| *n == name)
    }
}

/// The problem as the minimiser sees it: only the free parameters, in
/// internal (possibly logarithmic) coordinates.
struct Problem<'a, M: Model> {
    model: &'a M,
    data: &'a Data<M::Point>,
    sqrt_w: Vec<f64>,
    free: Vec<usize>,
    theta: Vec<f64>,
    internal: DVector<f64>,
}

impl<'a, M: Model> Problem<'a, M> {
    fn new(model: &'a M, data: &'a Data<M::Point>, start: &[f64], fixed: &[Option<f64>]) -> Self {
        let scales = model.scales();
        let mut theta = start.to_vec();
        for (t, f) in theta.iter_mut().zip(fixed) {
            if let Some(v) = f {
                *t = *v;
            }
        }
        let free: Vec<usize> = (0..theta.len()).filter(|&j| fixed.get(j).is_none_or(|f| f.is_none())).collect();
        let internal = DVector::from_iterator(free.len(), free.iter().map(|&j| scales[j].to_internal(theta[j])));
        let sqrt_w = data.weights.iter().map(|w| w.sqrt()).collect();
        Problem { model, data, sqrt_w, free, theta, internal }
    }
}

impl<M: Model> LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_, M> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, x: &DVector<f64>) {
        let scales = self.model.scales();
        for (k, &j) in self.free.iter().enumerate() {
            let clamped = admissible(scales[j], x[k]);
            self.internal[k] = clamped;
            self.theta[j] = scales[j].to_natural(clamped);
        }
    }

    fn params(&self) -> DVector<f64> {
        self.internal.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        let r = self.data.x.iter().zip(&self.data.y).zip(&self.sqrt_w).map(|((x, y), sw)| {
            let r = sw * (y - self.model.value(&self.theta, x));
            if r.is_finite() { r } else { HUGE_RESIDUAL }
        });
        Some(DVector::from_iterator(self.data.len(), r))
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        let scales = self.model.scales();
        let mut grad = vec![0.0; self.theta.len()];
        let mut jac = DMatrix::zeros(self.data.len(), self.free.len());
        // The chain-rule factor of each free parameter, once per Jacobian rather than per row.
        let chain: Vec<f64> = self.free.iter().map(|&j| scales[j].derivative(self.theta[j])).collect();
        for (i, (x, sw)) in self.data.x.iter().zip(&self.sqrt_w).enumerate() {
            self.model.gradient(&self.theta, x, &mut grad);
            for (k, &j) in self.free.iter().enumerate() {
                let d = -sw * grad[j] * chain[k];
                jac[(i, k)] = if d.is_finite() { d } else { 0.0 };
            }
        }
        Some(jac)
    }
}

/// Fits `model` to `data` from every start the model proposes, keeping the
/// lowest SSE. `fixed[j] = Some(v)` holds parameter j at v.
pub fn fit<M: Model>(model: &M, data: &Data<M::Point>, fixed: &[Option<f64>], settings: &FitSettings) -> Fit {
    let starts = model.starts(data);
    fit_from(model, data, &starts, fixed, settings)
}

/// Like [`fit`] but from the given starts (natural scale).
pub fn fit_from<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    starts: &[Vec<f64>],
    fixed: &[Option<f64>],
    settings: &FitSettings,
) -> Fit {
    let lm = LevenbergMarquardt::new()
        .with_ftol(settings.ftol)
        .with_xtol(settings.xtol)
        .with_gtol(settings.gtol)
        .with_patience(settings.patience);
    let mut best: Option<Run> = None;
    let mut evaluations = 0;
    for start in starts {
        let run = minimise(&lm, model, data, start, fixed);
        evaluations += run.evaluations;
        if best.as_ref().is_none_or(|b| run.improves_on(b)) {
            best = Some(run);
        }
    }
    if settings.polish
        && let Some(run) = best.take()
    {
        best = Some(polish(model, data, fixed, run));
    }
    let (theta, sse, termination) = match best {
        Some(b) => (b.theta, b.sse, b.termination),
        None => {
            let theta = fixed.iter().map(|f| f.unwrap_or(f64::NAN)).collect();
            (theta, f64::NAN, Termination::NothingToFit)
        }
    };
    summarise(model, data, theta, sse, termination, fixed, evaluations)
}

/// Gauss–Newton steps tried after Levenberg–Marquardt has stopped.
const POLISH_STEPS: usize = 4;

/// One minimiser run from one start.
struct Run {
    theta: Vec<f64>,
    sse: f64,
    termination: Termination,
    evaluations: usize,
}

impl Run {
    /// Lower SSE wins; at equal SSE a converged run beats one that is not.
    fn improves_on(&self, other: &Run) -> bool {
        self.sse < other.sse
            || (self.sse <= other.sse && self.termination.is_converged() && !other.termination.is_converged())
            || (other.sse.is_nan() && !self.sse.is_nan())
    }
}

fn minimise<M: Model>(
    lm: &LevenbergMarquardt<f64>,
    model: &M,
    data: &Data<M::Point>,
    start: &[f64],
    fixed: &[Option<f64>],
) -> Run {
    let (problem, report) = lm.minimize(Problem::new(model, data, start, fixed));
    let sse = weighted_sse(model, data, &problem.theta);
    Run {
        theta: problem.theta,
        sse,
        termination: Termination::from_lm(&report.termination),
        evaluations: report.number_of_evaluations,
    }
}

/// Near the optimum the SSE changes by less than its own rounding error, so
/// LM's ratio test (built on SSE differences) stops a few digits short. Plain
/// Gauss–Newton steps, accepted when the gradient JᵀWr shrinks and the SSE
/// does not grow beyond rounding, recover those digits (the same finishing
/// step NIST recommends checking for; McCullough, Am. Stat. 53, 149–159, 1999).
fn polish<M: Model>(model: &M, data: &Data<M::Point>, fixed: &[Option<f64>], mut run: Run) -> Run {
    if !run.termination.is_converged() {
        return run;
    }
    let mut problem = Problem::new(model, data, &run.theta, fixed);
    let gradient_norm = |p: &Problem<M>| -> Option<f64> {
        let (j, r) = (p.jacobian()?, p.residuals()?);
        Some((j.transpose() * r).norm())
    };
    let Some(mut gnorm) = gradient_norm(&problem) else { return run };
    for _ in 0..POLISH_STEPS {
        let (Some(j), Some(r)) = (problem.jacobian(), problem.residuals()) else { break };
        // Singular values are cut relative to the largest, so the step does
        // not depend on the units of the response or the parameters.
        let svd = j.svd(true, true);
        let cut = 1e-14 * svd.singular_values.max();
        let Ok(step) = svd.solve(&(-r), cut) else { break };
        let before = problem.params();
        problem.set_params(&(&before + step));
        let sse = weighted_sse(model, data, &problem.theta);
        match gradient_norm(&problem) {
            Some(g) if g < gnorm && sse <= run.sse * (1.0 + 1e-13) => {
                gnorm = g;
                run.sse = sse;
                run.theta.clone_from(&problem.theta);
            }
            _ => {
                problem.set_params(&before);
                break;
            }
        }
    }
    run
}

pub(super) fn weighted_sse<M: Model>(model: &M, data: &Data<M::Point>, theta: &[f64]) -> f64 {
    data.x
        .iter()
        .zip(&data.y)
        .zip(&data.weights)
        .map(|((x, y), w)| {
            let r = y - model.value(theta, x);
            w * r * r
        })
        .sum()
}

/// Builds a [`Fit`] (SSE, covariance, residual SD) from a converged parameter
/// vector: shared by the engine and the specialised kernels that reach the
/// optimum their own way, so every fit is reported alike.
pub fn summarise<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    theta: Vec<f64>,
    sse: f64,
    termination: Termination,
    fixed: &[Option<f64>],
    evaluations: usize,
) -> Fit {
    let p = theta.len();
    let fixed_mask: Vec<bool> = (0..p).map(|j| fixed.get(j).is_some_and(|f| f.is_some())).collect();
    let free: Vec<usize> = (0..p).filter(|&j| !fixed_mask[j]).collect();
    let n = data.len();
    let df = n.saturating_sub(free.len());
    let residual_sd = if df > 0 { (sse / df as f64).sqrt() } else { f64::NAN };
    let residuals = data.x.iter().zip(&data.y).map(|(x, y)| y - model.value(&theta, x)).collect();
    let covariance = covariance(model, data, &theta, &free, sse, df);
    let mut se = vec![None; p];
    if let Some(cov) = &covariance {
        for (k, &j) in free.iter().enumerate() {
            let v = cov[(k, k)];
            se[j] = (v.is_finite() && v >= 0.0).then(|| v.sqrt());
        }
    }
    Fit {
        names: model.names().to_vec(),
        theta,
        fixed: fixed_mask,
        se,
        covariance,
        n,
        n_free: free.len(),
        df,
        sse,
        residual_sd,
        r2: r_squared(data, sse),
        residuals,
        termination,
        evaluations,
        leverage: None,
    }
}

/// s²(JᵀWJ)⁻¹ with J taken on the natural scale, so the standard errors are
/// those of the parameters as reported (the NIST convention).
fn covariance<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    theta: &[f64],
    free: &[usize],
    sse: f64,
    df: usize,
) -> Option<DMatrix<f64>> {
    if df == 0 || free.is_empty() || !sse.is_finite() {
        return None;
    }
    if free.len() == 4 {
        return covariance4(model, data, theta, free, sse, df);
    }
    let mut grad = vec![0.0; theta.len()];
    let mut jac = DMatrix::zeros(data.len(), free.len());
    for (i, (x, w)) in data.x.iter().zip(&data.weights).enumerate() {
        model.gradient(theta, x, &mut grad);
        for (k, &j) in free.iter().enumerate() {
            jac[(i, k)] = w.sqrt() * grad[j];
        }
    }
    let information = jac.transpose() * &jac;
    let inverse = invert_information(information)?;
    let s2 = sse / df as f64;
    let cov = inverse * s2;
    cov.iter().all(|v| v.is_finite()).then_some(cov)
}

/// [`covariance`] for four free parameters (the dose-response logistic, a
/// million times per screening run) on stack matrices: the same operations
/// in the same order — JᵀWJ summed over the wells in order as nalgebra's
/// product does, the same scaling, Cholesky factor and inverse (nalgebra's
/// generic code, here at a fixed size) — so the same digits, without the
/// half-dozen heap matrices.
fn covariance4<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    theta: &[f64],
    free: &[usize],
    sse: f64,
    df: usize,
) -> Option<DMatrix<f64>> {
    let mut grad = [0.0; 8];
    let grad = grad.get_mut(..theta.len())?;
    let mut information = Matrix4::<f64>::zeros();
    for (i, (x, w)) in data.x.iter().zip(&data.weights).enumerate() {
        model.gradient(theta, x, grad);
        let row: [f64; 4] = std::array::from_fn(|k| w.sqrt() * grad[free[k]]);
        for a in 0..4 {
            for b in 0..4 {
                let term = row[a] * row[b];
                information[(a, b)] = if i == 0 { term } else { term + information[(a, b)] };
            }
        }
    }
    covariance_of_information4(&information, sse, df)
}

/// s²(JᵀWJ)⁻¹ of a four-parameter fit from its information matrix JᵀWJ,
/// inverted after scaling to unit diagonal (as [`invert_information`]);
/// `None` when it is singular or conditioned beyond 1e14. The
/// dose-response kernel writes the same steps out for its 4×4 case
/// (`analysis::ic50::projected::covariance4`) and is tested against this.
pub(crate) fn covariance_of_information4(information: &Matrix4<f64>, sse: f64, df: usize) -> Option<DMatrix<f64>> {
    let d: [f64; 4] = std::array::from_fn(|k| information[(k, k)].sqrt());
    if d.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return None;
    }
    let scaled = Matrix4::from_fn(|i, j| information[(i, j)] / (d[i] * d[j]));
    let inverse = scaled.cholesky()?.inverse();
    let condition = inverse.diagonal().iter().cloned().fold(0.0, f64::max);
    if !(condition.is_finite() && condition < 1e14) {
        return None;
    }
    let s2 = sse / df as f64;
    let cov = DMatrix::from_fn(4, 4, |i, j| inverse[(i, j)] / (d[i] * d[j]) * s2);
    cov.iter().all(|v| v.is_finite()).then_some(cov)
}

/// Inverts JᵀWJ after scaling it to unit diagonal, so that parameters of very
/// different magnitude (Vmax ~ 1e2, Km ~ 1e-6 M) do not fool the Cholesky test.
fn invert_information(information: DMatrix<f64>) -> Option<DMatrix<f64>> {
    let d: Vec<f64> = information.diagonal().iter().map(|v| v.sqrt()).collect();
    if d.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return None;
    }
    let p = d.len();
    let scaled = DMatrix::from_fn(p, p, |i, j| information[(i, j)] / (d[i] * d[j]));
    let inverse = scaled.cholesky()?.inverse();
    // Reject near-singular information: conditioning beyond ~1e14 leaves no digits.
    let condition = inverse.diagonal().iter().cloned().fold(0.0, f64::max);
    if !(condition.is_finite() && condition < 1e14) {
        return None;
    }
    Some(DMatrix::from_fn(p, p, |i, j| inverse[(i, j)] / (d[i] * d[j])))
}

/// 1 − SSE/SST, weighted; NaN when the responses do not vary.
pub(crate) fn r_squared<P>(data: &Data<P>, sse: f64) -> f64 {
    let wsum: f64 = data.weights.iter().sum();
    let mean = data.y.iter().zip(&data.weights).map(|(y, w)| w * y).sum::<f64>() / wsum;
    let sst: f64 = data.y.iter().zip(&data.weights).map(|(y, w)| w * (y - mean) * (y - mean)).sum();
    if sst > 0.0 { 1.0 - sse / sst } else { f64::NAN }
}
