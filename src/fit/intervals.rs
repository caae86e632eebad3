//! Confidence intervals for one parameter of a fit.
//!
//! * Wald: estimate ± t(1−(1−c)/2, df)·SE on the fitted scale (for a
//!   log-scale parameter, exp(ln θ ± t·SE/θ)), symmetric there by construction.
//! * Profile likelihood: the set of values θj for which the SSE, minimised
//!   over the other parameters, stays below SSE_min·(1 + F(c; 1, df)/df)
//!   (Bates & Watts, *Nonlinear Regression Analysis and Its Applications*,
//!   1988, §6.1; Seber & Wild, *Nonlinear Regression*, 1989, §5.9). Such an
//!   interval may be asymmetric, one-sided or unbounded; it is reported as
//!   such ([`Bound::Unbounded`]) rather than as a made-up number.

use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, FisherSnedecor, StudentsT};
use std::cell::RefCell;

use super::{Data, Fit, FitSettings, Model, Scale, fit_from};

/// One end of an interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Bound {
    /// A finite end, on the natural scale.
    At(f64),
    /// The data do not bound the parameter on this side (for a positive
    /// parameter's lower end: consistent with values down to zero).
    Unbounded,
    /// Not computed: no degrees of freedom, or the fit itself failed.
    NotDetermined,
}

impl Bound {
    /// The finite value, if any.
    pub fn value(self) -> Option<f64> {
        match self {
            Bound::At(v) => Some(v),
            _ => None,
        }
    }
}

/// A confidence interval with its method.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// Lower end.
    pub low: Bound,
    /// Upper end.
    pub high: Bound,
}

impl Interval {
    const NOT_DETERMINED: Interval = Interval { low: Bound::NotDetermined, high: Bound::NotDetermined };

    /// Whether both ends are finite numbers.
    pub fn is_bounded(&self) -> bool {
        matches!((self.low, self.high), (Bound::At(_), Bound::At(_)))
    }
}

/// The two-sided t quantile for `confidence` with `df` degrees of freedom.
pub fn t_quantile(confidence: f64, df: usize) -> Option<f64> {
    let t = StudentsT::new(0.0, 1.0, df as f64).ok()?;
    Some(t.inverse_cdf(0.5 + confidence / 2.0))
}

/// F(confidence; d1, d2) quantile.
pub fn f_quantile(confidence: f64, d1: usize, d2: usize) -> Option<f64> {
    let f = FisherSnedecor::new(d1 as f64, d2 as f64).ok()?;
    Some(f.inverse_cdf(confidence))
}

/// The Wald interval of parameter `j`, symmetric on the fitted scale.
pub fn wald<M: Model>(model: &M, fit: &Fit, j: usize, confidence: f64) -> Interval {
    let (Some(se), Some(t)) = (fit.se[j], t_quantile(confidence, fit.df)) else {
        return Interval::NOT_DETERMINED;
    };
    let value = fit.theta[j];
    match model.scales()[j] {
        Scale::Linear => Interval { low: Bound::At(value - t * se), high: Bound::At(value + t * se) },
        Scale::Log => {
            let half = t * se / value;
            Interval { low: Bound::At(value * (-half).exp()), high: Bound::At(value * half.exp()) }
        }
    }
}

/// How far (in internal units, i.e. natural-log units for positive
/// parameters) the profile walks before calling a side unbounded: e^25 ≈ 7e10.
const PROFILE_REACH: f64 = 25.0;

/// The profile-likelihood interval of parameter `j` around `fit`.
pub fn profile<M: Model>(
    model: &M,
    data: &Data<M::Point>,
    fit: &Fit,
    j: usize,
    confidence: f64,
    settings: &FitSettings,
) -> Interval {
    let Some(f) = f_quantile(confidence, 1, fit.df) else {
        return Interval::NOT_DETERMINED;
    };
    if fit.df == 0 || !fit.sse.is_finite() || fit.fixed[j] {
        return Interval::NOT_DETERMINED;
    }
    let threshold = fit.sse * (1.0 + f / fit.df as f64);
    // Each refit only has to place the SSE against a threshold several percent
    // above the minimum: the Gauss–Newton finish buys nothing here.
    let settings = FitSettings { polish: false, ..*settings };
    let profiler = Profiler::new(model, data, fit, j, threshold, &settings);
    Interval { low: profiler.side(-1.0), high: profiler.side(1.0) }
}

/// The profile SSE of one parameter, refitting the others from a warm start.
struct Profiler<'a, M: Model> {
    model: &'a M,
    data: &'a Data<M::Point>,
    fit: &'a Fit,
    j: usize,
    scale: Scale,
    threshold: f64,
    settings: &'a FitSettings,
    warm: RefCell<Vec<f64>>,
}

impl<'a, M: Model> Profiler<'a, M> {
    fn new(
        model: &'a M,
        data: &'a Data<M::Point>,
        fit: &'a Fit,
        j: usize,
        threshold: f64,
        settings: &'a FitSettings,
    ) -> Self {
        let scale = model.scales()[j];
        Profiler { model, data, fit, j, scale, threshold, settings, warm: RefCell::new(fit.theta.clone()) }
    }

    /// Profile SSE minus the threshold at internal coordinate `u` of parameter j.
    fn excess(&self, u: f64) -> f64 {
        let mut fixed: Vec<Option<f64>> =
            self.fit.fixed.iter().zip(&self.fit.theta).map(|(f, t)| f.then_some(*t)).collect();
        fixed[self.j] = Some(self.scale.to_natural(u));
        // The previous refit is the natural start; the optimum itself is the
        // fallback when that start has wandered off.
        let warm = [self.warm.borrow().clone()];
        let mut refit = fit_from(self.model, self.data, &warm, &fixed, self.settings);
        if !refit.converged() {
            let fallback =
                fit_from(self.model, self.data, std::slice::from_ref(&self.fit.theta), &fixed, self.settings);
            if fallback.sse < refit.sse || refit.sse.is_nan() {
                refit = fallback;
            }
        }
        if refit.sse.is_finite() {
            *self.warm.borrow_mut() = refit.theta;
        }
        refit.sse - self.threshold
    }

    /// Step size in internal units: a fraction of the standard error, or a
    /// fixed fraction when the standard error is not known.
    fn first_step(&self) -> f64 {
        let value = self.fit.theta[self.j];
        let se_internal = self.fit.se[self.j].map(|se| se / self.scale.derivative(value));
        match se_internal {
            // A log coordinate moves at most a factor e per step; a linear one
            // by half its SE, whatever the units (no absolute cap).
            Some(s) if s.is_finite() && s > 0.0 => match self.scale {
                Scale::Log => (0.5 * s).min(1.0),
                Scale::Linear => 0.5 * s,
            },
            _ => match self.scale {
                Scale::Log => 0.1,
                Scale::Linear => 0.1 * value.abs().max(1e-8),
            },
        }
    }

    /// Walks outward in `direction` until the profile SSE crosses the
    /// threshold, then refines the crossing with Brent's method.
    fn side(&self, direction: f64) -> Bound {
        let centre = self.scale.to_internal(self.fit.theta[self.j]);
        let reach = match self.scale {
            Scale::Log => PROFILE_REACH,
            Scale::Linear => PROFILE_REACH * self.first_step().max(self.fit.theta[self.j].abs()),
        };
        *self.warm.borrow_mut() = self.fit.theta.clone();
        let mut step = self.first_step();
        let mut inner = centre;
        loop {
            let outer = centre + direction * step.min(reach);
            let excess = self.excess(outer);
            if excess.is_nan() {
                return Bound::NotDetermined;
            }
            if excess > 0.0 {
                return self.refine(inner, outer);
            }
            if step >= reach {
                return Bound::Unbounded;
            }
            inner = outer;
            step *= 2.0;
        }
    }

    fn refine(&self, inner: f64, outer: f64) -> Bound {
        let (lo, hi) = if inner < outer { (inner, outer) } else { (outer, inner) };
        // Relative to the coordinate's own size for a linear parameter, so the
        // end found does not depend on the units of the response.
        let tol = match self.scale {
            Scale::Log => 1e-10 * (1.0 + lo.abs().max(hi.abs())),
            Scale::Linear => 1e-10 * lo.abs().max(hi.abs()).max(hi - lo),
        };
        let solver = BrentRoot::new(lo, hi, tol);
        let run = Executor::new(ExcessCost(self), solver).configure(|s| s.param(0.5 * (lo + hi)).max_iters(200)).run();
        match run {
            Ok(result) => match result.state.best_param {
                Some(u) => Bound::At(self.scale.to_natural(u)),
                None => Bound::NotDetermined,
            },
            Err(_) => Bound::NotDetermined,
        }
    }
}

struct ExcessCost<'p, 'a, M: Model>(&'p Profiler<'a, M>);

impl<M: Model> CostFunction for ExcessCost<'_, '_, M> {
    type Param = f64;
    type Output = f64;

    fn cost(&self, u: &f64) -> Result<f64, argmin::core::Error> {
        Ok(self.0.excess(*u))
    }
}
