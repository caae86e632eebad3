//! Progress curves of time-dependent inhibition and the kobs-against-[I] replot.
//!
//! One curve follows the integrated rate equation of slow-onset inhibition
//! (Morrison & Walsh, Adv. Enzymol. 61, 201–301, 1988, eq. 5):
//!
//!   P(t) = vs·t + (vi − vs)·(1 − e^(−kobs·t))/kobs + P0
//!
//! with vs = 0 when the inhibition is irreversible (covalent). How kobs
//! depends on [I] is the scheme (Copeland, *Evaluation of Enzyme Inhibitors in
//! Drug Discovery*, 2nd ed., 2013, ch. 9; Strelow, SLAS Discovery 22, 3–20, 2017):
//!
//! * one-step (E + I → EI* directly): kobs = koff + (kinact/KI)·[I];
//! * two-step (E + I ⇌ E·I → EI*): kobs = koff + kinact·[I]/(KI + [I]);
//!
//! where koff (the return from EI*) is present only for reversible inhibitors.
//! For both schemes the steady-state rate is then vs = vi·koff/kobs (Morrison
//! & Walsh 1988, mechanisms A and B: with vi = v0/(1 + [I]/KI) and
//! vs = v0/(1 + [I]/Ki*), Ki* = KI·koff/(kinact + koff), the ratio vs/vi is
//! koff/kobs), so the reversible global model has one parameter more than the
//! irreversible one (koff; koff = 0 is vs = 0), not one per curve.
//! [`OnsetModel`] fits every curve of a compound at once with shared kinetic
//! constants and per-curve P0, and either per-curve vi (*free* initial rates)
//! or vi tied to the uninhibited rate v0 by the scheme (*tied*, Morrison &
//! Walsh 1988; Copeland 2013, ch. 9): vi = v0/(1 + [I]/KI) for the two-step
//! scheme (the rapid first complex E·I already holds enzyme at time zero) and
//! vi = v0 for the one-step scheme (no complex forms before the onset); with
//! no onset, the rapid-reversible vi = v0/(1 + [I]/KI) with KI its own
//! constant. [`CurveModel`] fits one curve with a free vs; [`ReplotModel`]
//! fits kobs against [I].

use crate::fit::{Data, Model, Scale};

/// Below this kobs·t the closed forms lose digits to cancellation; a
/// four-term Taylor series is used instead (error below 1e-15 relative).
const SERIES_LIMIT: f64 = 1e-3;

/// g(k, t) = (1 − e^(−k·t))/k, the onset term, and its derivative in k.
/// At k → 0, g → t (the straight line of an uninhibited curve).
pub fn onset_term(k: f64, t: f64) -> (f64, f64) {
    let x = k * t;
    if x.abs() < SERIES_LIMIT {
        let g = t * (1.0 - x / 2.0 + x * x / 6.0 - x * x * x / 24.0);
        let dg = t * t * (-0.5 + x / 3.0 - x * x / 8.0 + x * x * x / 30.0);
        return (g, dg);
    }
    let one_minus = -(-x).exp_m1();
    let g = one_minus / k;
    let dg = (t * (-x).exp() - g) / k;
    (g, dg)
}

/// How kobs depends on the inhibitor concentration.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scheme {
    /// No onset: each curve is a straight line (kobs = 0).
    None,
    /// kobs linear in [I]; parameter: kinact/KI.
    OneStep,
    /// kobs hyperbolic in [I]; parameters: kinact, KI.
    TwoStep,
    /// The two-step scheme written in kinact/KI and KI, so that kinact/KI can
    /// be profiled as a parameter of its own.
    TwoStepByRatio,
}

impl Scheme {
    /// Names of the shared kinetic parameters, in parameter-vector order.
    fn shared_names(self) -> &'static [&'static str] {
        match self {
            Scheme::None => &[],
            Scheme::OneStep => &["kinact_ki"],
            Scheme::TwoStep => &["kinact", "ki"],
            Scheme::TwoStepByRatio => &["kinact_ki", "ki"],
        }
    }

    /// kobs at `inhibitor` without koff, and its derivatives in the scheme's
    /// parameters (written into `grad`).
    fn rate(self, p: &[f64], inhibitor: f64, grad: &mut [f64]) -> f64 {
        match self {
            Scheme::None => 0.0,
            Scheme::OneStep => {
                grad[0] = inhibitor;
                p[0] * inhibitor
            }
            Scheme::TwoStep => {
                let d = p[1] + inhibitor;
                grad[0] = inhibitor / d;
                grad[1] = -p[0] * inhibitor / (d * d);
                p[0] * inhibitor / d
            }
            Scheme::TwoStepByRatio => {
                let d = p[1] + inhibitor;
                grad[0] = p[1] * inhibitor / d;
                grad[1] = p[0] * inhibitor * inhibitor / (d * d);
                p[0] * p[1] * inhibitor / d
            }
        }
    }
}

/// The time of one observation and the curve it belongs to.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reading {
    /// Index of the curve (into the model's inhibitor list).
    pub curve: usize,
    /// Time since mixing.
    pub time: f64,
}

/// All curves of one compound with shared kinetic constants.
///
/// Parameter vector: the scheme's constants (with no onset and tied rates,
/// the rapid KI), then koff when reversible, then v0 when tied, then per curve
/// vi (free rates only) and P0. An uninhibited curve is a straight line
/// vi·t + P0.
#[derive(Debug, Clone)]
pub struct OnsetModel {
    scheme: Scheme,
    reversible: bool,
    tied: bool,
    /// Index of the KI that divides vi (tied two-step, tied none).
    ki_slot: Option<usize>,
    inhibitor: Vec<f64>,
    names: Vec<&'static str>,
    scales: Vec<Scale>,
    layout: Vec<CurveSlots>,
    starts: Vec<Vec<f64>>,
}

/// Where one curve's own parameters sit in the vector.
#[derive(Debug, Clone, Copy)]
pub struct CurveSlots {
    /// Index of vi (free rates), or of the shared v0 (tied rates).
    pub vi: usize,
    /// Index of P0.
    pub p0: usize,
}

impl OnsetModel {
    /// A model for curves at the given inhibitor concentrations, each curve
    /// with its own vi (free initial rates).
    pub fn new(scheme: Scheme, reversible: bool, inhibitor: Vec<f64>) -> OnsetModel {
        OnsetModel::with_rates(scheme, reversible, false, inhibitor)
    }

    /// A model whose initial rates are free per curve (`tied` false) or tied
    /// to v0 by the scheme (`tied` true).
    pub fn with_rates(scheme: Scheme, reversible: bool, tied: bool, inhibitor: Vec<f64>) -> OnsetModel {
        let reversible = reversible && scheme != Scheme::None;
        let mut names: Vec<&'static str> = scheme.shared_names().to_vec();
        let mut scales = vec![Scale::Log; names.len()];
        let ki_slot = match scheme {
            Scheme::TwoStep | Scheme::TwoStepByRatio if tied => Some(1),
            Scheme::None if tied => {
                names.push("ki");
                scales.push(Scale::Log);
                Some(0)
            }
            _ => None,
        };
        if reversible {
            names.push("koff");
            scales.push(Scale::Linear);
        }
        let v0 = names.len();
        if tied {
            names.push("v0");
            scales.push(Scale::Linear);
        }
        let mut layout = Vec::with_capacity(inhibitor.len());
        for _ in &inhibitor {
            let vi = if tied {
                v0
            } else {
                names.push("vi");
                scales.push(Scale::Linear);
                names.len() - 1
            };
            names.push("p0");
            scales.push(Scale::Linear);
            layout.push(CurveSlots { vi, p0: names.len() - 1 });
        }
        OnsetModel { scheme, reversible, tied, ki_slot, inhibitor, names, scales, layout, starts: Vec::new() }
    }

    /// The same model in another scheme (same reversibility, rates and curves).
    pub fn in_scheme(&self, scheme: Scheme) -> OnsetModel {
        OnsetModel::with_rates(scheme, self.reversible, self.tied, self.inhibitor.clone())
    }

    /// Whether vi is tied to v0 by the scheme.
    pub fn tied(&self) -> bool {
        self.tied
    }

    /// Index of v0, when tied.
    pub fn v0_index(&self) -> Option<usize> {
        self.tied.then(|| self.layout.first().map_or(self.shared(), |s| s.vi))
    }

    /// The fraction vi/v0 of curve `c` under tied rates, and its derivative in KI.
    fn tie(&self, theta: &[f64], c: usize) -> (f64, f64) {
        let i = self.inhibitor[c];
        match self.ki_slot {
            Some(j) if self.tied && i > 0.0 => {
                let ki = theta[j];
                (ki / (ki + i), i / ((ki + i) * (ki + i)))
            }
            _ => (1.0, 0.0),
        }
    }

    /// The initial rate of curve `c` at parameters `theta`.
    pub fn vi(&self, theta: &[f64], c: usize) -> f64 {
        theta[self.layout[c].vi] * self.tie(theta, c).0
    }

    /// The same model with the starting points the engine should try.
    pub fn with_starts(mut self, starts: Vec<Vec<f64>>) -> OnsetModel {
        self.starts = starts;
        self
    }

    /// The scheme.
    pub fn scheme(&self) -> Scheme {
        self.scheme
    }

    /// Inhibitor concentration of each curve.
    pub fn inhibitor(&self) -> &[f64] {
        &self.inhibitor
    }

    /// Whether the model has vs and koff.
    pub fn reversible(&self) -> bool {
        self.reversible
    }

    /// Number of shared kinetic parameters (scheme constants, the rapid KI
    /// of tied rates without onset, and koff; not v0).
    pub fn shared(&self) -> usize {
        self.scheme.shared_names().len()
            + usize::from(self.scheme == Scheme::None && self.tied)
            + usize::from(self.reversible)
    }

    /// Index of koff, when reversible.
    pub fn koff_index(&self) -> Option<usize> {
        self.reversible.then(|| self.scheme.shared_names().len())
    }

    /// Where each curve's parameters are.
    pub fn layout(&self) -> &[CurveSlots] {
        &self.layout
    }

    /// kobs of curve `c` at parameters `theta` (0 for a straight line).
    pub fn kobs(&self, theta: &[f64], c: usize) -> f64 {
        if self.is_line(c) {
            return 0.0;
        }
        let mut scratch = [0.0; 2];
        let koff = self.koff_index().map_or(0.0, |k| theta[k]);
        koff + self.scheme.rate(theta, self.inhibitor[c], &mut scratch)
    }

    /// Whether curve `c` is a straight line: no onset scheme, or no inhibitor
    /// (an uninhibited curve shows no onset whatever the scheme).
    pub fn is_line(&self, c: usize) -> bool {
        self.scheme == Scheme::None || self.inhibitor[c] <= 0.0
    }

    /// Number of parameters.
    pub fn len(&self) -> usize {
        self.names.len()
    }

    /// Whether the model has no parameters (never: every curve has vi and P0).
    pub fn is_empty(&self) -> bool {
        self.names.is_empty()
    }
}

impl Model for OnsetModel {
    type Point = Reading;

    fn names(&self) -> &[&'static str] {
        &self.names
    }

    fn scales(&self) -> &[Scale] {
        &self.scales
    }

    fn value(&self, theta: &[f64], x: &Reading) -> f64 {
        let slots = self.layout[x.curve];
        let (vi, p0) = (self.vi(theta, x.curve), theta[slots.p0]);
        let k = self.kobs(theta, x.curve);
        if self.is_line(x.curve) || k == 0.0 {
            return vi * x.time + p0;
        }
        let r = self.koff_index().map_or(0.0, |j| theta[j] / k);
        let (g, _) = onset_term(k, x.time);
        vi * (r * x.time + (1.0 - r) * g) + p0
    }

    fn gradient(&self, theta: &[f64], x: &Reading, grad: &mut [f64]) {
        grad.iter_mut().for_each(|g| *g = 0.0);
        let slots = self.layout[x.curve];
        grad[slots.p0] = 1.0;
        let mut dk = [0.0; 2];
        let koff = self.koff_index().map_or(0.0, |j| theta[j]);
        let k =
            if self.is_line(x.curve) { 0.0 } else { koff + self.scheme.rate(theta, self.inhibitor[x.curve], &mut dk) };
        // P = vi·h + P0 with vi = v0·d (d = 1 for free rates), h the shape.
        let (d, dd) = self.tie(theta, x.curve);
        let vi = theta[slots.vi] * d;
        let t = x.time;
        let h = if k == 0.0 {
            t
        } else {
            let r = koff / k;
            let (g, dg) = onset_term(k, t);
            // h = r·t + (1 − r)·g(k) with r = koff/k.
            let d_k = vi * (-koff / (k * k) * (t - g) + (1.0 - r) * dg);
            let n = self.scheme.shared_names().len();
            for (j, dj) in dk.iter().take(n).enumerate() {
                grad[j] = d_k * dj;
            }
            if let Some(j) = self.koff_index() {
                grad[j] = vi * (t - g) / k + d_k;
            }
            r * t + (1.0 - r) * g
        };
        grad[slots.vi] = d * h;
        if let Some(j) = self.ki_slot.filter(|_| self.tied) {
            grad[j] += theta[slots.vi] * dd * h;
        }
    }

    fn starts(&self, _data: &Data<Reading>) -> Vec<Vec<f64>> {
        self.starts.clone()
    }
}

/// One progress curve on its own: parameters `[vi, vs, kobs, p0]`, kobs
/// positive (log scale). Hold vs at 0 (the engine's `fixed`) for the
/// irreversible form.
#[derive(Debug, Clone, Copy, Default)]
pub struct CurveModel;

impl CurveModel {
    /// Index of vi.
    pub const VI: usize = 0;
    /// Index of vs.
    pub const VS: usize = 1;
    /// Index of kobs.
    pub const KOBS: usize = 2;
    /// Index of P0.
    pub const P0: usize = 3;
}

impl Model for CurveModel {
    type Point = f64;

    fn names(&self) -> &[&'static str] {
        &["vi", "vs", "kobs", "p0"]
    }

    fn scales(&self) -> &[Scale] {
        &[Scale::Linear, Scale::Linear, Scale::Log, Scale::Linear]
    }

    fn value(&self, theta: &[f64], t: &f64) -> f64 {
        let (g, _) = onset_term(theta[2], *t);
        theta[1] * t + (theta[0] - theta[1]) * g + theta[3]
    }

    fn gradient(&self, theta: &[f64], t: &f64, grad: &mut [f64]) {
        let (g, dg) = onset_term(theta[2], *t);
        grad[0] = g;
        grad[1] = t - g;
        grad[2] = (theta[0] - theta[1]) * dg;
        grad[3] = 1.0;
    }

    /// Slopes of the first and last thirds for vi and vs, the first reading
    /// for P0, and kobs spread over 0.2/T … 20/T (T the run length): from
    /// barely bent to finished in the first tenth of the run.
    fn starts(&self, data: &Data<f64>) -> Vec<Vec<f64>> {
        let n = data.len();
        if n < 2 {
            return Vec::new();
        }
        let third = (n / 3).max(2);
        let vi = slope(&data.x[..third], &data.y[..third]);
        let vs = slope(&data.x[n - third..], &data.y[n - third..]);
        let span = data.x[n - 1] - data.x[0];
        let p0 = data.y[0] - vi * data.x[0];
        let mut starts = Vec::new();
        for k in [0.2, 1.0, 3.0, 8.0, 20.0] {
            starts.push(vec![vi, vs, k / span.max(f64::MIN_POSITIVE), p0]);
        }
        starts
    }
}

/// Least-squares slope of y on x.
pub(crate) fn slope(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let sxx: f64 = x.iter().map(|v| (v - mx) * (v - mx)).sum();
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    if sxx > 0.0 { sxy / sxx } else { 0.0 }
}

/// kobs against [I] (the replot): the one-step line through the origin
/// (`[kinact_ki]`) or the two-step hyperbola (`[kinact, ki]`), with an
/// intercept koff (linear) appended when `reversible`.
#[derive(Debug, Clone, Copy)]
pub struct ReplotModel {
    /// OneStep or TwoStep.
    pub scheme: Scheme,
    /// With an intercept koff.
    pub reversible: bool,
}

impl ReplotModel {
    fn shared(&self) -> usize {
        self.scheme.shared_names().len()
    }
}

impl Model for ReplotModel {
    type Point = f64;

    fn names(&self) -> &[&'static str] {
        match (self.scheme, self.reversible) {
            (Scheme::OneStep, false) => &["kinact_ki"],
            (Scheme::OneStep, true) => &["kinact_ki", "koff"],
            (_, false) => &["kinact", "ki"],
            (_, true) => &["kinact", "ki", "koff"],
        }
    }

    fn scales(&self) -> &[Scale] {
        match (self.scheme, self.reversible) {
            (Scheme::OneStep, false) => &[Scale::Log],
            (Scheme::OneStep, true) => &[Scale::Log, Scale::Linear],
            (_, false) => &[Scale::Log, Scale::Log],
            (_, true) => &[Scale::Log, Scale::Log, Scale::Linear],
        }
    }

    fn value(&self, theta: &[f64], i: &f64) -> f64 {
        let mut scratch = [0.0; 2];
        let koff = if self.reversible { theta[self.shared()] } else { 0.0 };
        koff + self.scheme.rate(theta, *i, &mut scratch)
    }

    fn gradient(&self, theta: &[f64], i: &f64, grad: &mut [f64]) {
        let mut d = [0.0; 2];
        self.scheme.rate(theta, *i, &mut d);
        let n = self.shared();
        grad[..n].copy_from_slice(&d[..n]);
        if self.reversible {
            grad[n] = 1.0;
        }
    }

    /// The slope through the origin at the lowest [I] for kinact/KI; for the
    /// hyperbola, the largest kobs (×1.5) as kinact and KI spread over the
    /// tested range.
    fn starts(&self, data: &Data<f64>) -> Vec<Vec<f64>> {
        let positive: Vec<(f64, f64)> =
            data.x.iter().zip(&data.y).filter(|(i, k)| **i > 0.0 && **k > 0.0).map(|(i, k)| (*i, *k)).collect();
        if positive.is_empty() {
            return Vec::new();
        }
        let ratio = positive.iter().map(|(i, k)| k / i).sum::<f64>() / positive.len() as f64;
        let k_max = positive.iter().map(|p| p.1).fold(0.0, f64::max);
        let (i_min, i_max) = positive.iter().fold((f64::INFINITY, 0.0f64), |(a, b), p| (a.min(p.0), b.max(p.0)));
        let with_koff = |mut v: Vec<f64>| {
            if self.reversible {
                v.push(0.0);
            }
            v
        };
        match self.scheme {
            Scheme::OneStep => vec![with_koff(vec![ratio])],
            _ => [0.3, 1.0, 3.0, 10.0]
                .iter()
                .map(|f| {
                    let ki = (i_min * i_max).sqrt() * f;
                    with_koff(vec![(k_max * 1.5).max(ratio * ki), ki])
                })
                .collect(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Analytic gradients against central differences, parameter by parameter.
    fn check_gradient<M: Model>(m: &M, theta: &[f64], points: &[M::Point]) {
        let mut g = vec![0.0; theta.len()];
        for x in points {
            m.gradient(theta, x, &mut g);
            for j in 0..theta.len() {
                // Steps of 1e-4 relative (1e-6 for zero) keep the change in the
                // prediction far above its rounding error.
                let h = if theta[j] == 0.0 { 1e-6 } else { 1e-4 * theta[j].abs() };
                let (mut up, mut dn) = (theta.to_vec(), theta.to_vec());
                up[j] += h;
                dn[j] -= h;
                let numeric = (m.value(&up, x) - m.value(&dn, x)) / (2.0 * h);
                assert_relative_eq!(g[j], numeric, max_relative = 1e-6, epsilon = 1e-7);
            }
        }
    }

    #[test]
    fn onset_term_is_continuous_at_the_series_switch() {
        for t in [0.5, 10.0, 300.0] {
            let k = SERIES_LIMIT / t;
            let (below, d_below) = onset_term(k * (1.0 - 1e-9), t);
            let (above, d_above) = onset_term(k * (1.0 + 1e-9), t);
            assert_relative_eq!(below, above, max_relative = 1e-12);
            assert_relative_eq!(d_below, d_above, max_relative = 1e-8);
        }
        assert_relative_eq!(onset_term(0.0, 7.0).0, 7.0);
    }

    #[test]
    fn curve_model_gradient_matches_central_differences() {
        let times: Vec<f64> = (0..12).map(|k| k as f64 * 5.0).collect();
        check_gradient(&CurveModel, &[2.0, 0.3, 0.05, 10.0], &times);
        check_gradient(&CurveModel, &[2.0, 0.0, 1e-6, 10.0], &times);
    }

    #[test]
    fn onset_model_gradient_matches_central_differences() {
        let inhibitor = vec![0.0, 0.5, 2.0, 8.0];
        let points: Vec<Reading> =
            (0..4).flat_map(|c| (0..8).map(move |k| Reading { curve: c, time: k as f64 * 4.0 })).collect();
        for scheme in [Scheme::None, Scheme::OneStep, Scheme::TwoStep, Scheme::TwoStepByRatio] {
            for (reversible, tied) in [(false, false), (true, false), (false, true), (true, true)] {
                let m = OnsetModel::with_rates(scheme, reversible, tied, inhibitor.clone());
                let mut theta: Vec<f64> = vec![0.0; m.len()];
                for (j, name) in m.names().iter().enumerate() {
                    theta[j] = match *name {
                        "kinact_ki" => 0.02,
                        "kinact" => 0.1,
                        "ki" => 3.0,
                        "koff" => 0.004,
                        "vi" => 1.5 + j as f64 * 0.1,
                        "v0" => 2.5,
                        _ => 5.0,
                    };
                }
                check_gradient(&m, &theta, &points);
            }
        }
    }

    #[test]
    fn replot_gradient_matches_central_differences() {
        let i = [0.5, 2.0, 8.0];
        check_gradient(&ReplotModel { scheme: Scheme::OneStep, reversible: true }, &[0.02, 0.001], &i);
        check_gradient(&ReplotModel { scheme: Scheme::TwoStep, reversible: false }, &[0.1, 3.0], &i);
        check_gradient(&ReplotModel { scheme: Scheme::TwoStep, reversible: true }, &[0.1, 3.0, 0.002], &i);
    }

    /// Tied rates: vi = v0·KI/(KI + [I]) for two-step (and no onset), v0 for
    /// one-step (Morrison & Walsh 1988); the tied curve equals the free one
    /// with those vi.
    #[test]
    fn tied_rates_follow_the_scheme() {
        let inhibitor = vec![0.0, 1.0, 4.0];
        let tied = OnsetModel::with_rates(Scheme::TwoStep, true, true, inhibitor.clone());
        assert_eq!(tied.names(), &["kinact", "ki", "koff", "v0", "p0", "p0", "p0"]);
        let theta = [0.2, 2.0, 0.01, 3.0, 1.0, 1.1, 1.2];
        assert_relative_eq!(tied.vi(&theta, 0), 3.0);
        assert_relative_eq!(tied.vi(&theta, 1), 2.0, max_relative = 1e-15);
        assert_relative_eq!(tied.vi(&theta, 2), 1.0, max_relative = 1e-15);
        let free = OnsetModel::new(Scheme::TwoStep, true, inhibitor.clone());
        let free_theta = [0.2, 2.0, 0.01, 3.0, 1.0, 2.0, 1.1, 1.0, 1.2];
        for c in 0..3 {
            let x = Reading { curve: c, time: 7.0 };
            assert_relative_eq!(tied.value(&theta, &x), free.value(&free_theta, &x), max_relative = 1e-14);
        }
        let one = OnsetModel::with_rates(Scheme::OneStep, false, true, inhibitor.clone());
        assert_relative_eq!(one.vi(&[0.02, 3.0, 1.0, 1.0, 1.0], 2), 3.0);
        let none = OnsetModel::with_rates(Scheme::None, false, true, inhibitor);
        assert_eq!(none.names(), &["ki", "v0", "p0", "p0", "p0"]);
        assert_relative_eq!(none.vi(&[4.0, 3.0, 1.0, 1.0, 1.0], 2), 1.5);
    }

    #[test]
    fn two_step_forms_agree() {
        // kinact = (kinact/KI)·KI: both parametrisations give the same curve.
        let inhibitor = vec![1.0, 4.0];
        let a = OnsetModel::new(Scheme::TwoStep, false, inhibitor.clone());
        let b = OnsetModel::new(Scheme::TwoStepByRatio, false, inhibitor);
        let ta = [0.2, 2.0, 1.0, 0.0, 1.2, 0.5];
        let tb = [0.1, 2.0, 1.0, 0.0, 1.2, 0.5];
        for c in 0..2 {
            let x = Reading { curve: c, time: 9.0 };
            assert_relative_eq!(a.value(&ta, &x), b.value(&tb, &x), max_relative = 1e-14);
        }
    }
}
