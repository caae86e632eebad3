//! Dose-response curve models.
//!
//! * Four-parameter logistic in concentration (DESIGN §4),
//!   `y = lower + (upper − lower) / (1 + (x/IC50)^h)`, parameters
//!   `[ic50, hill, lower, upper]`, IC50 fitted as ln IC50. Rows at x = 0 are
//!   valid: for h > 0, (0/IC50)^h = 0 exactly and y = upper; no log(0) is
//!   ever formed, and the derivatives there are taken as their limits (zero
//!   for IC50 and h, because u/(1+u)² → 0 faster than ln x → −∞).
//! * Morrison's tight-binding equation (Morrison, Biochim. Biophys. Acta 185,
//!   269–286, 1969) with the total enzyme Et known,
//!   `y = upper · (1 − ((Et + I + K) − √((Et + I + K)² − 4·Et·I)) / (2·Et))`,
//!   parameters `[ki_app, upper]`, K (the apparent Ki) fitted as ln K. The
//!   bound fraction is computed as 2I/(b + √(b² − 4·Et·I)), b = Et + I + K,
//!   which is the same quantity without the cancellation of the textbook
//!   form when I ≪ Et. Its IC50 is K + Et/2 (Copeland, *Evaluation of Enzyme
//!   Inhibitors in Drug Discovery*, 2nd ed., 2013).

use crate::fit::{Data, Model, Scale};

/// One tested concentration with its logarithm, computed once per curve
/// rather than in every evaluation of the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dose {
    /// The concentration (0 allowed).
    pub x: f64,
    /// ln x; unused (and −∞) at x = 0.
    pub ln_x: f64,
}

impl Dose {
    /// A dose and its logarithm.
    pub fn new(x: f64) -> Dose {
        Dose { x, ln_x: if x > 0.0 { x.ln() } else { f64::NEG_INFINITY } }
    }
}

/// The four-parameter logistic; concentrations in any one unit (IC50 comes
/// out in that unit).
#[derive(Debug, Clone, Copy, Default)]
pub struct Logistic;

impl Logistic {
    /// Index of IC50.
    pub const IC50: usize = 0;
    /// Index of the Hill coefficient.
    pub const HILL: usize = 1;
    /// Index of the asymptote at infinite concentration.
    pub const LOWER: usize = 2;
    /// Index of the asymptote at zero concentration.
    pub const UPPER: usize = 3;

    /// 1/(1 + (x/IC50)^h), with its limits at x = 0, and ln(x/IC50) (0 at x = 0).
    fn fraction(theta: &[f64], dose: &Dose) -> (f64, f64) {
        Self::fraction_with(theta, dose, |ic50| ic50.ln())
    }

    /// [`Logistic::fraction`] with ln IC50 from `ln_ic50` (taken only for a positive dose).
    fn fraction_with(theta: &[f64], dose: &Dose, ln_ic50: impl Fn(f64) -> f64) -> (f64, f64) {
        let h = theta[Self::HILL];
        if dose.x > 0.0 {
            let log_ratio = dose.ln_x - ln_ic50(theta[Self::IC50]);
            // exp overflowing to +inf gives s = 0, the right limit.
            (1.0 / (1.0 + (h * log_ratio).exp()), log_ratio)
        } else if h > 0.0 {
            (1.0, 0.0)
        } else if h < 0.0 {
            (0.0, 0.0)
        } else {
            (0.5, 0.0)
        }
    }
}

impl Model for Logistic {
    type Point = Dose;

    fn names(&self) -> &[&'static str] {
        &["ic50", "hill", "lower", "upper"]
    }

    fn scales(&self) -> &[Scale] {
        &[Scale::Log, Scale::Linear, Scale::Linear, Scale::Linear]
    }

    fn value(&self, theta: &[f64], x: &Dose) -> f64 {
        let (s, _) = Self::fraction(theta, x);
        theta[Self::LOWER] + (theta[Self::UPPER] - theta[Self::LOWER]) * s
    }

    /// With s = 1/(1+u), u = (x/IC50)^h: ∂y/∂upper = s, ∂y/∂lower = 1 − s,
    /// ∂y/∂IC50 = (upper − lower)·s(1−s)·h/IC50,
    /// ∂y/∂h = −(upper − lower)·s(1−s)·ln(x/IC50). At x = 0, s(1−s) = 0.
    fn gradient(&self, theta: &[f64], x: &Dose, grad: &mut [f64]) {
        logistic_gradient(theta, Self::fraction(theta, x), grad);
    }

    /// First a start from the data themselves: asymptotes from the mean
    /// response at the lowest and highest concentration, then the straight
    /// line ln((upper − y)/(y − lower)) = h·ln x − h·ln IC50 through the
    /// positive concentrations (the logit transform of the curve). Then a
    /// few fallbacks with h = 1 and IC50 spread over the tested range.
    fn starts(&self, data: &Data<Dose>) -> Vec<Vec<f64>> {
        let Some(guess) = Guess::from(&data.x.iter().map(|d| d.x).collect::<Vec<_>>(), &data.y) else {
            return vec![vec![1.0, 1.0, 0.0, 1.0]];
        };
        let mut starts = Vec::with_capacity(4);
        if let Some((ic50, hill)) = logit_line(data, guess.lower, guess.upper) {
            starts.push(vec![ic50, hill, guess.lower, guess.upper]);
        }
        for ic50 in [guess.middle(), guess.min_positive, guess.max] {
            starts.push(vec![ic50, 1.0, guess.lower, guess.upper]);
        }
        starts
    }
}

fn logistic_gradient(theta: &[f64], (s, log_ratio): (f64, f64), grad: &mut [f64]) {
    let span = theta[Logistic::UPPER] - theta[Logistic::LOWER];
    let bend = span * s * (1.0 - s);
    grad[Logistic::IC50] = bend * theta[Logistic::HILL] / theta[Logistic::IC50];
    grad[Logistic::HILL] = -bend * log_ratio;
    grad[Logistic::LOWER] = 1.0 - s;
    grad[Logistic::UPPER] = s;
}

/// The [`Logistic`] model evaluated at one θ well after well — a fit's
/// summary (residuals, Jacobian) and the outlier rule's leverages — with
/// ln IC50 taken once instead of at every well and call: the same numbers
/// to the bit (the same `ln`, the same operations), a logarithm fewer per
/// well. At any other IC50 it takes the logarithm as `Logistic` does.
#[derive(Debug, Clone, Copy)]
pub struct LogisticAt {
    ic50: f64,
    ln_ic50: f64,
}

impl LogisticAt {
    /// The model at θ (ln of its IC50 taken here, once).
    pub fn new(theta: &[f64]) -> LogisticAt {
        let ic50 = theta[Logistic::IC50];
        LogisticAt { ic50, ln_ic50: ic50.ln() }
    }

    fn ln(&self, ic50: f64) -> f64 {
        if ic50.to_bits() == self.ic50.to_bits() { self.ln_ic50 } else { ic50.ln() }
    }
}

impl Model for LogisticAt {
    type Point = Dose;

    fn names(&self) -> &[&'static str] {
        Logistic.names()
    }

    fn scales(&self) -> &[Scale] {
        Logistic.scales()
    }

    fn value(&self, theta: &[f64], x: &Dose) -> f64 {
        let (s, _) = Logistic::fraction_with(theta, x, |v| self.ln(v));
        theta[Logistic::LOWER] + (theta[Logistic::UPPER] - theta[Logistic::LOWER]) * s
    }

    fn gradient(&self, theta: &[f64], x: &Dose, grad: &mut [f64]) {
        logistic_gradient(theta, Logistic::fraction_with(theta, x, |v| self.ln(v)), grad);
    }

    fn starts(&self, data: &Data<Dose>) -> Vec<Vec<f64>> {
        Logistic.starts(data)
    }
}

/// Rough features of a curve used for starting values.
#[derive(Debug, Clone, Copy)]
pub struct Guess {
    /// Mean response at the lowest concentration.
    pub upper: f64,
    /// Mean response at the highest concentration.
    pub lower: f64,
    /// Smallest positive concentration.
    pub min_positive: f64,
    /// Largest concentration.
    pub max: f64,
}

impl Guess {
    /// `None` when there is no positive concentration.
    pub fn from(xs: &[f64], ys: &[f64]) -> Option<Guess> {
        let (mut lo_x, mut hi_x, mut min_pos) = (f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY);
        for &x in xs {
            lo_x = lo_x.min(x);
            hi_x = hi_x.max(x);
            if x > 0.0 {
                min_pos = min_pos.min(x);
            }
        }
        if !(min_pos.is_finite() && hi_x > 0.0) {
            return None;
        }
        let mean_at = |target: f64| {
            let (sum, n) = xs
                .iter()
                .zip(ys)
                .filter(|(x, _)| (**x - target).abs() <= 1e-12 * target.abs())
                .fold((0.0, 0usize), |(s, n), (_, y)| (s + y, n + 1));
            sum / n.max(1) as f64
        };
        Some(Guess { upper: mean_at(lo_x), lower: mean_at(hi_x), min_positive: min_pos, max: hi_x })
    }

    /// The geometric middle of the positive tested range.
    pub fn middle(&self) -> f64 {
        (self.min_positive * self.max).sqrt()
    }
}

/// IC50 and h from the least-squares line through the logit-transformed
/// responses; `None` when the line is degenerate.
fn logit_line(data: &Data<Dose>, lower: f64, upper: f64) -> Option<(f64, f64)> {
    let span = upper - lower;
    if span.abs() <= f64::EPSILON * upper.abs().max(lower.abs()) {
        return None;
    }
    let (mut n, mut sx, mut sz, mut sxx, mut sxz) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (dose, &y) in data.x.iter().zip(&data.y) {
        if dose.x <= 0.0 {
            continue;
        }
        let p = ((y - lower) / span).clamp(0.02, 0.98);
        let (lx, z) = (dose.ln_x, ((1.0 - p) / p).ln());
        n += 1.0;
        sx += lx;
        sz += z;
        sxx += lx * lx;
        sxz += lx * z;
    }
    let var = sxx - sx * sx / n;
    if n < 2.0 || var <= 0.0 {
        return None;
    }
    let hill = (sxz - sx * sz / n) / var;
    let intercept = (sz - hill * sx) / n;
    let ic50 = (-intercept / hill).exp();
    (hill.is_finite() && hill.abs() > 1e-3 && ic50.is_finite() && ic50 > 0.0).then(|| (ic50, hill.clamp(-10.0, 10.0)))
}

/// Morrison's tight-binding equation with known total enzyme `et`, in the
/// same unit as the inhibitor concentrations.
#[derive(Debug, Clone, Copy)]
pub struct Morrison {
    /// Total active enzyme concentration.
    pub et: f64,
}

impl Morrison {
    /// Index of the apparent Ki.
    pub const KI_APP: usize = 0;
    /// Index of the uninhibited response v0.
    pub const UPPER: usize = 1;

    /// Fraction of activity left, v/v0, and b + √D (for the derivative).
    fn activity(&self, k: f64, i: f64) -> (f64, f64, f64) {
        let b = self.et + i + k;
        let root = (b * b - 4.0 * self.et * i).max(0.0).sqrt();
        let q = b + root;
        (1.0 - 2.0 * i / q, q, root)
    }
}

impl Model for Morrison {
    type Point = f64;

    fn names(&self) -> &[&'static str] {
        &["ki_app", "upper"]
    }

    fn scales(&self) -> &[Scale] {
        &[Scale::Log, Scale::Linear]
    }

    fn value(&self, theta: &[f64], i: &f64) -> f64 {
        theta[Self::UPPER] * self.activity(theta[Self::KI_APP], *i).0
    }

    /// ∂y/∂upper = v/v0; ∂y/∂K = upper·2I/q²·(1 + b/√D), q = b + √D.
    fn gradient(&self, theta: &[f64], i: &f64, grad: &mut [f64]) {
        let k = theta[Self::KI_APP];
        let (f, q, root) = self.activity(k, *i);
        let b = self.et + i + k;
        let dq = if root > 0.0 { 1.0 + b / root } else { 2.0 };
        grad[Self::KI_APP] = theta[Self::UPPER] * 2.0 * i / (q * q) * dq;
        grad[Self::UPPER] = f;
    }

    /// The apparent Ki from the concentration where the response crosses
    /// half its start (IC50 = K + Et/2), and a grid in decades of Et.
    fn starts(&self, data: &Data<f64>) -> Vec<Vec<f64>> {
        let Some(guess) = Guess::from(&data.x, &data.y) else {
            return vec![vec![self.et, 1.0]];
        };
        let mut starts = Vec::new();
        if let Some(i50) = half_crossing(data, guess.upper) {
            let k = i50 - self.et / 2.0;
            if k > 0.0 {
                starts.push(vec![k, guess.upper]);
            }
        }
        for factor in [0.01, 0.1, 1.0, 10.0, 100.0] {
            starts.push(vec![self.et * factor, guess.upper]);
        }
        starts
    }
}

/// The concentration where the response first falls below half of `upper`,
/// interpolated on log concentration.
fn half_crossing(data: &Data<f64>, upper: f64) -> Option<f64> {
    let mut pts: Vec<(f64, f64)> = data.x.iter().cloned().zip(data.y.iter().cloned()).filter(|p| p.0 > 0.0).collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let half = upper / 2.0;
    pts.windows(2).find(|w| w[0].1 >= half && w[1].1 < half).map(|w| {
        let t = (w[0].1 - half) / (w[0].1 - w[1].1);
        (w[0].0.ln() + t * (w[1].0.ln() - w[0].0.ln())).exp()
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// `LogisticAt` gives `Logistic`'s values and gradients to the bit, at
    /// its own θ and at another (where it takes the logarithm itself), at
    /// zero dose and with a negative slope.
    #[test]
    fn logistic_at_matches_logistic_bit_for_bit() {
        let theta = [37.3, 1.27, 4.1, 98.6];
        let other = [0.093, -0.8, 101.0, -3.0];
        let at = LogisticAt::new(&theta);
        for t in [&theta, &other] {
            for x in [0.0, 1e-3, 0.5, 37.3, 333.3, 1e4, 1e9].map(Dose::new) {
                assert_eq!(at.value(t, &x).to_bits(), Logistic.value(t, &x).to_bits());
                let (mut a, mut b) = ([0.0; 4], [0.0; 4]);
                at.gradient(t, &x, &mut a);
                Logistic.gradient(t, &x, &mut b);
                assert_eq!(a.map(f64::to_bits), b.map(f64::to_bits));
            }
        }
    }

    fn check_gradient<M: Model>(m: &M, theta: &[f64], xs: &[M::Point]) {
        let mut g = vec![0.0; theta.len()];
        for x in xs {
            m.gradient(theta, x, &mut g);
            for j in 0..theta.len() {
                let h = 1e-6 * theta[j].abs().max(1e-3);
                let (mut up, mut dn) = (theta.to_vec(), theta.to_vec());
                up[j] += h;
                dn[j] -= h;
                let numeric = (m.value(&up, x) - m.value(&dn, x)) / (2.0 * h);
                assert!((g[j] - numeric).abs() <= 1e-6 * (1.0 + numeric.abs()), "j={j}: {} vs {numeric}", g[j]);
            }
        }
    }

    #[test]
    fn logistic_gradient_matches_central_differences_and_is_finite_at_zero() {
        let theta = [3.0, 2.5, 0.4, 7.8];
        check_gradient(&Logistic, &theta, &[0.0, 0.5, 3.0, 30.0].map(Dose::new));
        let mut g = [0.0; 4];
        Logistic.gradient(&theta, &Dose::new(0.0), &mut g);
        for (got, want) in g.iter().zip([0.0, 0.0, 0.0, 1.0]) {
            assert_relative_eq!(*got, want);
        }
        assert_relative_eq!(Logistic.value(&theta, &Dose::new(0.0)), 7.8);
        assert_relative_eq!(Logistic.value(&theta, &Dose::new(3.0)), 0.5 * (0.4 + 7.8));
    }

    #[test]
    fn morrison_gradient_matches_and_ic50_is_k_plus_half_et() {
        let m = Morrison { et: 10.0 };
        check_gradient(&m, &[0.5, 100.0], &[0.0, 1.0, 5.0, 20.0, 200.0]);
        // Copeland 2013: IC50 = Ki_app + Et/2 for the Morrison curve.
        let k = 0.5;
        assert_relative_eq!(m.value(&[k, 100.0], &(k + 5.0)), 50.0, max_relative = 1e-12);
    }
}
