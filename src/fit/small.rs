//! A fixed-size path through the same minimiser, for fits with at most four
//! free parameters done by the million (dose-response screening).
//!
//! [`fit_small`] has the contract of [`super::fit_from`] — same starts, same
//! choice of the best start, same [`Fit`] record (covariance, SEs, R²) — and
//! differs in how the problem is laid out for the `levenberg-marquardt`
//! crate: parameters, residuals and Jacobian are stack-allocated `nalgebra`
//! types of fixed size (up to 24 observations, padded with zero rows, which
//! change no step; larger problems keep dynamic rows), and the per-point
//! gradient uses a stack buffer. The steps taken are the same MINPACK steps.
//! Unlike the engine it skips the final Gauss–Newton polish: at the
//! screening tolerances it is used with (1e-10) the polish changes nothing
//! reported, and at 1e-15 the two agree to about 1e-10 (tested).

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::allocator::{Allocator, Reallocator};
use nalgebra::{DefaultAllocator, Dim, DimMax, DimMaximum, DimMin, DimName, Dyn, OMatrix, OVector, Owned};
use nalgebra::{U1, U2, U3, U4, U10, U12, U24};

use super::engine::{Termination, admissible, summarise, weighted_sse};
use super::{Data, Fit, FitSettings, Model, fit_from};

/// Residuals larger than this stand in for non-finite ones (as in the engine).
const HUGE_RESIDUAL: f64 = 1e100;
/// Largest parameter vector (free and fixed) handled here.
const MAX_PARAMS: usize = 8;

struct SmallProblem<'a, M: Model, R: Dim, N: DimName>
where
    DefaultAllocator: Allocator<N>,
{
    _rows: std::marker::PhantomData<R>,
    /// Residual rows: the observations, then zero padding up to a fixed size.
    rows: usize,
    model: &'a M,
    data: &'a Data<M::Point>,
    sqrt_w: &'a [f64],
    free: &'a [usize],
    p: usize,
    theta: [f64; MAX_PARAMS],
    internal: OVector<f64, N>,
}

impl<M: Model, R: Dim, N: DimName> LeastSquaresProblem<f64, R, N> for SmallProblem<'_, M, R, N>
where
    DefaultAllocator: Allocator<N> + Allocator<R> + Allocator<R, N>,
{
    type ResidualStorage = Owned<f64, R>;
    type JacobianStorage = Owned<f64, R, N>;
    type ParameterStorage = Owned<f64, N>;

    fn set_params(&mut self, x: &OVector<f64, N>) {
        let scales = self.model.scales();
        for (k, &j) in self.free.iter().enumerate() {
            let clamped = admissible(scales[j], x[k]);
            self.internal[k] = clamped;
            self.theta[j] = scales[j].to_natural(clamped);
        }
    }

    fn params(&self) -> OVector<f64, N> {
        self.internal.clone()
    }

    fn residuals(&self) -> Option<OVector<f64, R>> {
        let theta = &self.theta[..self.p];
        let mut out = OVector::<f64, R>::zeros_generic(R::from_usize(self.rows), U1);
        for (i, ((x, y), sw)) in self.data.x.iter().zip(&self.data.y).zip(self.sqrt_w).enumerate() {
            let r = sw * (y - self.model.value(theta, x));
            out[i] = if r.is_finite() { r } else { HUGE_RESIDUAL };
        }
        Some(out)
    }

    fn jacobian(&self) -> Option<OMatrix<f64, R, N>> {
        let scales = self.model.scales();
        let theta = &self.theta[..self.p];
        let mut grad = [0.0; MAX_PARAMS];
        let mut jac = OMatrix::<f64, R, N>::zeros_generic(R::from_usize(self.rows), N::name());
        // The chain-rule factor of each free parameter, once per Jacobian rather than per row.
        let mut chain = [0.0; MAX_PARAMS];
        for (k, &j) in self.free.iter().enumerate() {
            chain[k] = scales[j].derivative(theta[j]);
        }
        for (i, (x, sw)) in self.data.x.iter().zip(self.sqrt_w).enumerate() {
            self.model.gradient(theta, x, &mut grad[..self.p]);
            for (k, &j) in self.free.iter().enumerate() {
                let d = -sw * grad[j] * chain[k];
                jac[(i, k)] = if d.is_finite() { d } else { 0.0 };
            }
        }
        Some(jac)
    }
}

/// Like [`fit_from`], with fixed-size internals when 1–4 parameters are free
/// (and at most eight in all); otherwise it is [`fit_from`] itself.
pub fn fit_small<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    starts: &[Vec<f64>],
    fixed: &[Option<f64>],
    settings: &FitSettings,
) -> Fit {
    let p = model.names().len();
    let free: Vec<usize> = (0..p).filter(|&j| fixed.get(j).is_none_or(|f| f.is_none())).collect();
    if p > MAX_PARAMS || data.is_empty() {
        return fit_from(model, data, starts, fixed, settings);
    }
    let sqrt_w: Vec<f64> = data.weights.iter().map(|w| w.sqrt()).collect();
    let run = Runner { model, data, sqrt_w: &sqrt_w, free: &free, fixed, settings };
    // Rows padded with zero residuals and zero Jacobian rows leave SSE, JᵀJ
    // and every LM step unchanged, so small curves run on stack-sized matrices.
    macro_rules! by_free {
        ($rows_dim:ty, $rows:expr) => {
            match free.len() {
                1 => run.best::<$rows_dim, U1>(starts, $rows),
                2 => run.best::<$rows_dim, U2>(starts, $rows),
                3 => run.best::<$rows_dim, U3>(starts, $rows),
                4 => run.best::<$rows_dim, U4>(starts, $rows),
                _ => return fit_from(model, data, starts, fixed, settings),
            }
        };
    }
    let n = data.len();
    let outcome = if n == 10 {
        // Ten wells, the usual dose-response curve: no padding rows to carry.
        by_free!(U10, 10)
    } else if n <= 12 {
        by_free!(U12, 12)
    } else if n <= 24 {
        by_free!(U24, 24)
    } else {
        by_free!(Dyn, n)
    };
    let (theta, sse, termination, evaluations) = match outcome {
        Some((theta, sse, termination, evaluations)) => (theta, sse, termination, evaluations),
        None => {
            let theta = fixed.iter().map(|f| f.unwrap_or(f64::NAN)).collect();
            (theta, f64::NAN, Termination::NothingToFit, 0)
        }
    };
    summarise(model, data, theta, sse, termination, fixed, evaluations)
}

struct Runner<'a, M: Model> {
    model: &'a M,
    data: &'a Data<M::Point>,
    sqrt_w: &'a [f64],
    free: &'a [usize],
    fixed: &'a [Option<f64>],
    settings: &'a FitSettings,
}

impl<M: Model> Runner<'_, M> {
    /// Minimises from every start and keeps the best, by the engine's rule:
    /// lower SSE wins; at equal SSE a converged run beats one that is not.
    fn best<R, N>(&self, starts: &[Vec<f64>], rows: usize) -> Option<(Vec<f64>, f64, Termination, usize)>
    where
        R: Dim + DimMin<N> + DimMax<N>,
        N: DimName,
        DefaultAllocator: Allocator<N> + Allocator<R> + Allocator<R, N> + Reallocator<f64, R, N, DimMaximum<R, N>, N>,
    {
        let lm = LevenbergMarquardt::new()
            .with_ftol(self.settings.ftol)
            .with_xtol(self.settings.xtol)
            .with_gtol(self.settings.gtol)
            .with_patience(self.settings.patience);
        let p = self.model.names().len();
        let scales = self.model.scales();
        let mut best: Option<(Vec<f64>, f64, Termination)> = None;
        let mut evaluations = 0;
        for start in starts {
            let mut theta = [0.0; MAX_PARAMS];
            for (j, t) in theta.iter_mut().enumerate().take(p) {
                *t = self.fixed.get(j).copied().flatten().unwrap_or(start.get(j).copied().unwrap_or(f64::NAN));
            }
            let internal = OVector::<f64, N>::from_iterator_generic(
                N::name(),
                U1,
                self.free.iter().map(|&j| scales[j].to_internal(theta[j])),
            );
            let problem = SmallProblem::<M, R, N> {
                _rows: std::marker::PhantomData,
                rows,
                model: self.model,
                data: self.data,
                sqrt_w: self.sqrt_w,
                free: self.free,
                p,
                theta,
                internal,
            };
            let (problem, report) = lm.minimize(problem);
            evaluations += report.number_of_evaluations;
            let termination = Termination::from_lm(&report.termination);
            let theta = problem.theta[..p].to_vec();
            let sse = weighted_sse(self.model, self.data, &theta);
            let better = match &best {
                None => true,
                Some((_, best_sse, best_term)) => {
                    sse < *best_sse || (sse <= *best_sse && termination.is_converged() && !best_term.is_converged())
                }
            };
            if better {
                best = Some((theta, sse, termination));
            }
        }
        best.map(|(theta, sse, termination)| (theta, sse, termination, evaluations))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::MichaelisMenten;

    /// Misra1d (NIST StRD): the fixed-size path gives the engine's answer.
    #[test]
    fn agrees_with_the_general_engine_on_misra1d() {
        let x = vec![77.6, 114.9, 141.1, 190.8, 239.9, 289.0, 332.8, 378.4, 434.8, 477.3, 536.8, 593.1, 689.1, 760.0];
        let y = vec![10.07, 14.73, 17.94, 23.93, 29.61, 35.18, 40.02, 44.82, 50.76, 55.05, 61.01, 66.4, 75.47, 81.78];
        let data = Data::unweighted(x, y);
        let starts = vec![vec![500.0, 1e4]];
        let s = FitSettings::default();
        let a = fit_from(&MichaelisMenten, &data, &starts, &[None, None], &s);
        let b = fit_small(&MichaelisMenten, &data, &starts, &[None, None], &s);
        for j in 0..2 {
            assert!((a.theta[j] - b.theta[j]).abs() <= 1e-10 * a.theta[j].abs(), "{:?} {:?}", a.theta, b.theta);
        }
        // NIST certified b1 = 437.36970754.
        assert!((b.theta[0] - 437.36970754).abs() < 1e-6);
        // Ten rows exactly, padded (11 rows in 12) and dynamic (14 rows repeated to 28) layouts agree too.
        for take in [10, 11, 14] {
            let mut x: Vec<f64> = data.x[..take].to_vec();
            let mut y: Vec<f64> = data.y[..take].to_vec();
            if take == 14 {
                x.extend_from_slice(&data.x);
                y.extend_from_slice(&data.y);
            }
            let d = Data::unweighted(x, y);
            let a = fit_from(&MichaelisMenten, &d, &starts, &[None, None], &s);
            let b = fit_small(&MichaelisMenten, &d, &starts, &[None, None], &s);
            for j in 0..2 {
                assert!(
                    (a.theta[j] - b.theta[j]).abs() <= 1e-10 * a.theta[j].abs(),
                    "{take}: {:?} {:?}",
                    a.theta,
                    b.theta
                );
                let (sa, sb) = (a.se[j].unwrap(), b.se[j].unwrap());
                assert!((sa - sb).abs() <= 1e-8 * sa, "{take}: se {sa} vs {sb}");
            }
        }
    }
}
