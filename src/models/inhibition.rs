//! The five steady-state rate laws for a reversible inhibitor, as functions of
//! substrate S and inhibitor I (Cornish-Bowden, *Fundamentals of Enzyme
//! Kinetics*, 4th ed., 2012, ch. 6; Segel, *Enzyme Kinetics*, 1975, ch. 3),
//! in the IUBMB notation (Eur. J. Biochem. 128, 281–291, 1982) with
//! Ki = Kic and α = Kiu/Kic:
//!
//! | mechanism | v = |
//! |---|---|
//! | none | Vmax·S / (Km + S) |
//! | competitive | Vmax·S / (Km·(1 + I/Ki) + S) |
//! | uncompetitive | Vmax·S / (Km + S·(1 + I/Kiu)) |
//! | noncompetitive | Vmax·S / ((Km + S)·(1 + I/Ki)) |
//! | mixed | Vmax·S / (Km·(1 + I/Ki) + S·(1 + I/(α·Ki))) |
//!
//! Every parameter is positive and fitted on the log scale. That matters for
//! mixed inhibition, whose optimum can lie at infinity (α → ∞ on competitive
//! data; Ki → ∞ with α → 0 on uncompetitive data): in log coordinates those
//! limits are just flat directions, which the minimiser and the profile walk
//! along cheaply instead of overflowing.
//!
//! Parameter vectors: `[vmax, km]`, `[vmax, km, ki]`, `[vmax, km, kiu]`,
//! `[vmax, km, ki]`, `[vmax, km, ki, alpha]`; [`MixedKiu`] is mixed written
//! in `[vmax, km, ki, kiu]`, used to profile Kiu directly.

use serde::Serialize;

use crate::fit::{Data, Model, Scale};

/// One observation's independent variables: (substrate, inhibitor).
pub type Point = (f64, f64);

/// The candidate mechanisms, from simplest to fullest.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Mechanism {
    /// No inhibition: Michaelis–Menten at every inhibitor level.
    None,
    /// Inhibitor binds free enzyme only (Kic).
    Competitive,
    /// Inhibitor binds the ES complex only (Kiu).
    Uncompetitive,
    /// Binds E and ES equally (Kic = Kiu).
    Noncompetitive,
    /// Binds E and ES with different constants (Kic and Kiu = α·Kic).
    Mixed,
}

impl Mechanism {
    /// All five, in the order they are reported.
    pub const ALL: [Mechanism; 5] = [
        Mechanism::None,
        Mechanism::Competitive,
        Mechanism::Uncompetitive,
        Mechanism::Noncompetitive,
        Mechanism::Mixed,
    ];

    /// The position of the mechanism in [`Mechanism::ALL`], which is also its
    /// place in every per-model list of a result (fits, model results).
    pub const fn index(self) -> usize {
        self as usize
    }

    /// The mechanism at `index` in [`Mechanism::ALL`].
    pub fn at(index: usize) -> Option<Mechanism> {
        Mechanism::ALL.get(index).copied()
    }

    /// The model's name as printed and serialised.
    pub fn name(self) -> &'static str {
        match self {
            Mechanism::None => "none",
            Mechanism::Competitive => "competitive",
            Mechanism::Uncompetitive => "uncompetitive",
            Mechanism::Noncompetitive => "noncompetitive",
            Mechanism::Mixed => "mixed",
        }
    }

    /// Parses a name as written in a table or on the command line
    /// (case-insensitive; `non-competitive`, `no inhibition` accepted).
    pub fn parse(text: &str) -> Option<Mechanism> {
        match text.trim().to_ascii_lowercase().replace(['-', ' ', '_'], "").as_str() {
            "none" | "noinhibition" => Some(Mechanism::None),
            "competitive" => Some(Mechanism::Competitive),
            "uncompetitive" => Some(Mechanism::Uncompetitive),
            "noncompetitive" => Some(Mechanism::Noncompetitive),
            "mixed" => Some(Mechanism::Mixed),
            _ => None,
        }
    }

    /// Parameter names in vector order.
    pub fn names(self) -> &'static [&'static str] {
        match self {
            Mechanism::None => &["vmax", "km"],
            Mechanism::Competitive | Mechanism::Noncompetitive => &["vmax", "km", "ki"],
            Mechanism::Uncompetitive => &["vmax", "km", "kiu"],
            Mechanism::Mixed => &["vmax", "km", "ki", "alpha"],
        }
    }

    /// Number of parameters.
    pub fn n_params(self) -> usize {
        self.names().len()
    }
}

/// All scales are logarithmic: every constant is positive.
const LOG4: [Scale; 4] = [Scale::Log; 4];

/// A rate law of the given mechanism, usable by the fitting engine.
#[derive(Debug, Clone, Copy)]
pub struct RateLaw(pub Mechanism);

impl RateLaw {
    /// The denominator factors (a, b) with v = Vmax·S / (Km·a + S·b).
    #[inline]
    fn factors(&self, theta: &[f64], i: f64) -> (f64, f64) {
        match self.0 {
            Mechanism::None => (1.0, 1.0),
            Mechanism::Competitive => (1.0 + i / theta[2], 1.0),
            Mechanism::Uncompetitive => (1.0, 1.0 + i / theta[2]),
            Mechanism::Noncompetitive => {
                let f = 1.0 + i / theta[2];
                (f, f)
            }
            Mechanism::Mixed => (1.0 + i / theta[2], 1.0 + i / (theta[3] * theta[2])),
        }
    }

    /// Apparent (Vmax, Km) at inhibitor concentration `i`:
    /// v = Vmax_app·S/(Km_app + S) with Vmax_app = Vmax/b and Km_app = Km·a/b.
    pub fn apparent(&self, theta: &[f64], i: f64) -> (f64, f64) {
        let (a, b) = self.factors(theta, i);
        (theta[0] / b, theta[1] * a / b)
    }
}

impl Model for RateLaw {
    type Point = Point;

    fn names(&self) -> &[&'static str] {
        self.0.names()
    }

    fn scales(&self) -> &[Scale] {
        &LOG4[..self.0.n_params()]
    }

    fn value(&self, theta: &[f64], x: &Point) -> f64 {
        let (s, i) = *x;
        let (a, b) = self.factors(theta, i);
        theta[0] * s / (theta[1] * a + s * b)
    }

    fn gradient(&self, theta: &[f64], x: &Point, grad: &mut [f64]) {
        let (s, i) = *x;
        let (a, b) = self.factors(theta, i);
        let (vmax, km) = (theta[0], theta[1]);
        let d = km * a + s * b;
        // v = Vmax·S/D, so ∂v/∂p = −(Vmax·S/D²)·∂D/∂p for every p but Vmax.
        let q = -vmax * s / (d * d);
        grad[0] = s / d;
        grad[1] = q * a;
        match self.0 {
            Mechanism::None => {}
            Mechanism::Competitive => grad[2] = q * (-km * i / (theta[2] * theta[2])),
            Mechanism::Uncompetitive => grad[2] = q * (-s * i / (theta[2] * theta[2])),
            Mechanism::Noncompetitive => grad[2] = q * (-(km + s) * i / (theta[2] * theta[2])),
            Mechanism::Mixed => {
                let (ki, alpha) = (theta[2], theta[3]);
                grad[2] = q * (-km * i / (ki * ki) - s * i / (alpha * ki * ki));
                grad[3] = q * (-s * i / (alpha * alpha * ki));
            }
        }
    }

    /// Data-driven Vmax and Km (from the uninhibited rows, or all rows) times
    /// a grid of inhibition constants spread log-evenly from 1/30 to 30 × the
    /// highest inhibitor concentration (five values); for mixed, the first
    /// Vmax/Km guess with three Ki values × α ∈ {0.1, 1, 10}. The analysis
    /// adds the one-constant optima as further mixed starts.
    fn starts(&self, data: &Data<Point>) -> Vec<Vec<f64>> {
        let base = vmax_km_starts(data);
        let mut starts = Vec::new();
        match self.0 {
            Mechanism::None => starts.extend(base.iter().map(|&(v, k)| vec![v, k])),
            Mechanism::Competitive | Mechanism::Uncompetitive | Mechanism::Noncompetitive => {
                let grid = ki_grid(data, 5);
                for &(vmax, km) in &base {
                    starts.extend(grid.iter().map(|&k| vec![vmax, km, k]));
                }
            }
            Mechanism::Mixed => {
                for &(vmax, km) in base.iter().take(1) {
                    for k in ki_grid(data, 3) {
                        starts.extend([0.1, 1.0, 10.0].iter().map(|&a| vec![vmax, km, k, a]));
                    }
                }
            }
        }
        starts
    }
}

/// Mixed inhibition written as `[vmax, km, ki, kiu]`, so that Kiu = α·Ki has
/// its own profile-likelihood interval.
#[derive(Debug, Clone, Copy, Default)]
pub struct MixedKiu;

impl Model for MixedKiu {
    type Point = Point;

    fn names(&self) -> &[&'static str] {
        &["vmax", "km", "ki", "kiu"]
    }

    fn scales(&self) -> &[Scale] {
        &LOG4
    }

    fn value(&self, theta: &[f64], x: &Point) -> f64 {
        let (s, i) = *x;
        theta[0] * s / (theta[1] * (1.0 + i / theta[2]) + s * (1.0 + i / theta[3]))
    }

    fn gradient(&self, theta: &[f64], x: &Point, grad: &mut [f64]) {
        let (s, i) = *x;
        let (vmax, km, ki, kiu) = (theta[0], theta[1], theta[2], theta[3]);
        let a = 1.0 + i / ki;
        let d = km * a + s * (1.0 + i / kiu);
        let q = -vmax * s / (d * d);
        grad[0] = s / d;
        grad[1] = q * a;
        grad[2] = q * (-km * i / (ki * ki));
        grad[3] = q * (-s * i / (kiu * kiu));
    }

    fn starts(&self, data: &Data<Point>) -> Vec<Vec<f64>> {
        RateLaw(Mechanism::Mixed).starts(data).into_iter().map(|t| vec![t[0], t[1], t[2], t[2] * t[3]]).collect()
    }
}

/// Mixed inhibition written as `[vmax, km, kiu, alpha]` (Ki = Kiu/α). Its
/// profile of α holds Kiu where it is, which is the right warm start when α
/// is walked towards 0 (the uncompetitive edge, where Ki → ∞ but Kiu stays).
#[derive(Debug, Clone, Copy, Default)]
pub struct MixedAlphaKiu;

impl Model for MixedAlphaKiu {
    type Point = Point;

    fn names(&self) -> &[&'static str] {
        &["vmax", "km", "kiu", "alpha"]
    }

    fn scales(&self) -> &[Scale] {
        &LOG4
    }

    fn value(&self, theta: &[f64], x: &Point) -> f64 {
        let (s, i) = *x;
        theta[0] * s / (theta[1] * (1.0 + i * theta[3] / theta[2]) + s * (1.0 + i / theta[2]))
    }

    fn gradient(&self, theta: &[f64], x: &Point, grad: &mut [f64]) {
        let (s, i) = *x;
        let (vmax, km, kiu, alpha) = (theta[0], theta[1], theta[2], theta[3]);
        let a = 1.0 + i * alpha / kiu;
        let d = km * a + s * (1.0 + i / kiu);
        let q = -vmax * s / (d * d);
        grad[0] = s / d;
        grad[1] = q * a;
        grad[2] = q * (-(km * alpha + s) * i / (kiu * kiu));
        grad[3] = q * (km * i / kiu);
    }

    fn starts(&self, data: &Data<Point>) -> Vec<Vec<f64>> {
        RateLaw(Mechanism::Mixed).starts(data).into_iter().map(|t| vec![t[0], t[1], t[2] * t[3], t[3]]).collect()
    }
}

/// The IC50 at substrate `s` implied by the constants of a fitted model —
/// the Cheng–Prusoff relations solved for IC50 (Cheng & Prusoff, Biochem.
/// Pharmacol. 22, 3099–3108, 1973; mixed form as in Copeland 2013):
/// competitive Ki(1 + S/Km), uncompetitive Kiu(1 + Km/S), noncompetitive Ki,
/// mixed (Km + S)/(Km/Ki + S/(αKi)). `None` for no inhibition.
pub fn implied_ic50(mechanism: Mechanism, theta: &[f64], s: f64) -> Option<f64> {
    let km = theta[1];
    match mechanism {
        Mechanism::None => None,
        Mechanism::Competitive => Some(theta[2] * (1.0 + s / km)),
        Mechanism::Uncompetitive => Some(theta[2] * (1.0 + km / s)),
        Mechanism::Noncompetitive => Some(theta[2]),
        Mechanism::Mixed => Some((km + s) / (km / theta[2] + s / (theta[3] * theta[2]))),
    }
}

/// Starting (Vmax, Km) pairs: a Hanes–Woolf line (S/v against S) through the
/// uninhibited rows when they give positive constants, and Vmax from the
/// largest rate with Km at the median substrate concentration.
pub fn vmax_km_starts(data: &Data<Point>) -> Vec<(f64, f64)> {
    let uninhibited: Vec<(f64, f64)> =
        data.x.iter().zip(&data.y).filter(|(x, v)| x.1 == 0.0 && **v > 0.0).map(|(x, v)| (x.0, *v)).collect();
    let rows: Vec<(f64, f64)> = if uninhibited.len() >= 2 {
        uninhibited
    } else {
        data.x.iter().zip(&data.y).filter(|(_, v)| **v > 0.0).map(|(x, v)| (x.0, *v)).collect()
    };
    let mut starts = Vec::new();
    if let Some(hw) = hanes_woolf(&rows) {
        starts.push(hw);
    }
    let vmax = rows.iter().map(|r| r.1).fold(0.0, f64::max);
    let mut s: Vec<f64> = rows.iter().map(|r| r.0).filter(|s| *s > 0.0).collect();
    s.sort_by(f64::total_cmp);
    if vmax > 0.0 && !s.is_empty() {
        starts.push((vmax * 1.2, s[s.len() / 2]));
    }
    if starts.is_empty() {
        starts.push((1.0, 1.0));
    }
    starts
}

/// Least-squares line through (S, S/v): slope 1/Vmax, intercept Km/Vmax.
fn hanes_woolf(rows: &[(f64, f64)]) -> Option<(f64, f64)> {
    if rows.len() < 2 {
        return None;
    }
    let n = rows.len() as f64;
    let pts: Vec<(f64, f64)> = rows.iter().map(|(s, v)| (*s, s / v)).collect();
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let slope = sxy / sxx;
    let (vmax, km) = (1.0 / slope, (my - slope * mx) / slope);
    (vmax > 0.0 && km > 0.0 && vmax.is_finite() && km.is_finite()).then_some((vmax, km))
}

/// `count` inhibition-constant starts log-evenly over 1/30–30 × the highest
/// inhibitor concentration (1 when there is no inhibitor at all).
pub fn ki_grid(data: &Data<Point>, count: usize) -> Vec<f64> {
    let i_max = data.x.iter().map(|x| x.1).fold(0.0, f64::max);
    let centre = if i_max > 0.0 { i_max } else { 1.0 };
    let (lo, hi) = ((centre / 30.0).ln(), (centre * 30.0).ln());
    (0..count).map(|k| (lo + (hi - lo) * k as f64 / (count.max(2) - 1) as f64).exp()).collect()
}

/// Rate laws beyond the five, fitted as diagnoses of what the five cannot
/// describe. Each reduces to mixed inhibition at an edge of its extra
/// parameter, so the extra-sum-of-squares F test against mixed applies.
///
/// | extension | v = |
/// |---|---|
/// | partial | Vmax·S·(1 + β·I/(α·Ki)) / (Km·(1 + I/Ki) + S·(1 + I/(α·Ki))) |
/// | substrate inhibition | Vmax·S / (Km·(1 + I/Ki) + S·(1 + I/(α·Ki)) + S²/Ksi) |
///
/// Partial (hyperbolic) inhibition: the ESI complex still turns over, at β
/// times the rate of ES (Segel, *Enzyme Kinetics*, 1975, ch. 4, the general
/// hyperbolic mixed-type system with the EI and ESI dissociation constants
/// Ki and αKi; Cornish-Bowden, *Fundamentals of Enzyme Kinetics*, 4th ed.,
/// 2012, ch. 6). Rates level off at a fraction ≈ β of the uninhibited rate
/// (at high S) instead of falling to zero; β → 0 is mixed inhibition.
///
/// Substrate inhibition: a second substrate molecule binds ES to give a dead
/// SES complex (Haldane, *Enzymes*, 1930; Cornish-Bowden 2012, §5.9), so the
/// uninhibited series falls at high S; Ksi → ∞ is mixed inhibition.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Extension {
    /// ESI keeps a fraction β of the activity of ES.
    Partial,
    /// A second substrate molecule inhibits (Haldane).
    SubstrateInhibition,
}

impl Extension {
    /// Both, in the order they are reported.
    pub const ALL: [Extension; 2] = [Extension::Partial, Extension::SubstrateInhibition];

    /// The diagnosis's name, also its warning code.
    pub fn name(self) -> &'static str {
        match self {
            Extension::Partial => "partial-inhibition",
            Extension::SubstrateInhibition => "substrate-inhibition",
        }
    }

    /// Parameter names in vector order.
    pub fn names(self) -> &'static [&'static str] {
        match self {
            Extension::Partial => &["vmax", "km", "ki", "alpha", "beta"],
            Extension::SubstrateInhibition => &["vmax", "km", "ki", "alpha", "ksi"],
        }
    }
}

/// All five parameters are positive: logarithmic scales.
const LOG5: [Scale; 5] = [Scale::Log; 5];

/// An extension rate law, usable by the fitting engine.
#[derive(Debug, Clone, Copy)]
pub struct ExtensionLaw(pub Extension);

impl Model for ExtensionLaw {
    type Point = Point;

    fn names(&self) -> &[&'static str] {
        self.0.names()
    }

    fn scales(&self) -> &[Scale] {
        &LOG5
    }

    fn value(&self, theta: &[f64], x: &Point) -> f64 {
        let (s, i) = *x;
        let (vmax, km, ki, alpha, extra) = (theta[0], theta[1], theta[2], theta[3], theta[4]);
        let a = 1.0 + i / ki;
        let b = 1.0 + i / (alpha * ki);
        match self.0 {
            Extension::Partial => vmax * s * (1.0 + extra * i / (alpha * ki)) / (km * a + s * b),
            Extension::SubstrateInhibition => vmax * s / (km * a + s * b + s * s / extra),
        }
    }

    fn gradient(&self, theta: &[f64], x: &Point, grad: &mut [f64]) {
        let (s, i) = *x;
        let (vmax, km, ki, alpha, extra) = (theta[0], theta[1], theta[2], theta[3], theta[4]);
        let a = 1.0 + i / ki;
        let b = 1.0 + i / (alpha * ki);
        // ∂a/∂Ki, ∂b/∂Ki, ∂b/∂α
        let (da_ki, db_ki, db_alpha) = (-i / (ki * ki), -i / (alpha * ki * ki), -i / (alpha * alpha * ki));
        match self.0 {
            Extension::Partial => {
                // v = Vmax·S·N/D with N = 1 + β·I/(αKi), D = Km·a + S·b.
                let n = 1.0 + extra * i / (alpha * ki);
                let d = km * a + s * b;
                let (dn_ki, dn_alpha, dn_beta) =
                    (-extra * i / (alpha * ki * ki), -extra * i / (alpha * alpha * ki), i / (alpha * ki));
                let u = vmax * s / d;
                let q = -vmax * s * n / (d * d);
                grad[0] = s * n / d;
                grad[1] = q * a;
                grad[2] = u * dn_ki + q * (km * da_ki + s * db_ki);
                grad[3] = u * dn_alpha + q * s * db_alpha;
                grad[4] = u * dn_beta;
            }
            Extension::SubstrateInhibition => {
                let d = km * a + s * b + s * s / extra;
                let q = -vmax * s / (d * d);
                grad[0] = s / d;
                grad[1] = q * a;
                grad[2] = q * (km * da_ki + s * db_ki);
                grad[3] = q * s * db_alpha;
                grad[4] = q * (-s * s / (extra * extra));
            }
        }
    }

    /// Mixed-model starts crossed with a few values of the extra parameter
    /// (β ∈ {0.05, 0.3, 0.6}; Ksi ∈ {1, 5} × the highest substrate
    /// concentration, with Vmax doubled for the fall at high S): a generic
    /// grid for a fit without a mixed optimum at hand. `mode` starts from the
    /// fitted mixed optimum instead, which is seven times cheaper
    /// (`analysis::mode::extensions::fit_extensions`).
    fn starts(&self, data: &Data<Point>) -> Vec<Vec<f64>> {
        let s_max = data.x.iter().map(|x| x.0).fold(0.0, f64::max).max(1e-300);
        let mut starts = Vec::new();
        for t in RateLaw(Mechanism::Mixed).starts(data) {
            match self.0 {
                Extension::Partial => {
                    starts.extend([0.05, 0.3, 0.6].iter().map(|&b| vec![t[0], t[1], t[2], t[3], b]));
                }
                Extension::SubstrateInhibition => {
                    starts.extend([1.0, 5.0].iter().map(|&k| vec![2.0 * t[0], t[1], t[2], t[3], k * s_max]));
                }
            }
        }
        starts
    }
}

#[cfg(test)]
mod tests {

    #[test]
    fn each_mechanism_knows_its_place_in_the_list() {
        for (i, m) in Mechanism::ALL.iter().enumerate() {
            assert_eq!((m.index(), Mechanism::at(i)), (i, Some(*m)));
        }
        assert_eq!(Mechanism::at(Mechanism::ALL.len()), None);
    }
    use super::*;
    use approx::assert_relative_eq;

    fn check_gradient<M: Model<Point = Point>>(m: &M, theta: &[f64]) {
        let mut g = vec![0.0; theta.len()];
        for x in [(10.0, 0.0), (50.0, 2.0), (400.0, 8.0), (3.0, 0.5)] {
            m.gradient(theta, &x, &mut g);
            for j in 0..theta.len() {
                let h = 1e-6 * theta[j];
                let (mut up, mut dn) = (theta.to_vec(), theta.to_vec());
                up[j] += h;
                dn[j] -= h;
                let numeric = (m.value(&up, &x) - m.value(&dn, &x)) / (2.0 * h);
                assert_relative_eq!(g[j], numeric, max_relative = 1e-6, epsilon = 1e-12);
            }
        }
    }

    #[test]
    fn gradients_match_central_differences() {
        for m in Mechanism::ALL {
            let theta = [10.0, 50.0, 2.0, 4.0];
            check_gradient(&RateLaw(m), &theta[..m.n_params()]);
        }
        check_gradient(&MixedKiu, &[10.0, 50.0, 2.0, 8.0]);
        check_gradient(&MixedAlphaKiu, &[10.0, 50.0, 8.0, 4.0]);
        for e in Extension::ALL {
            check_gradient(&ExtensionLaw(e), &[10.0, 50.0, 2.0, 3.0, 0.3]);
            check_gradient(&ExtensionLaw(e), &[10.0, 50.0, 2.0, 0.5, 120.0]);
        }
    }

    #[test]
    fn the_three_mixed_forms_agree() {
        for x in [(10.0, 0.0), (50.0, 2.0), (400.0, 8.0)] {
            let v = RateLaw(Mechanism::Mixed).value(&[9.0, 40.0, 2.0, 4.0], &x);
            assert_relative_eq!(MixedKiu.value(&[9.0, 40.0, 2.0, 8.0], &x), v, max_relative = 1e-15);
            assert_relative_eq!(MixedAlphaKiu.value(&[9.0, 40.0, 8.0, 4.0], &x), v, max_relative = 1e-15);
        }
    }

    #[test]
    fn extensions_reduce_to_mixed_at_their_edges() {
        let mixed = RateLaw(Mechanism::Mixed);
        for x in [(10.0, 0.0), (50.0, 2.0), (400.0, 8.0)] {
            let v = mixed.value(&[9.0, 40.0, 2.0, 4.0], &x);
            let partial = ExtensionLaw(Extension::Partial).value(&[9.0, 40.0, 2.0, 4.0, 1e-12], &x);
            let haldane = ExtensionLaw(Extension::SubstrateInhibition).value(&[9.0, 40.0, 2.0, 4.0, 1e15], &x);
            assert_relative_eq!(partial, v, max_relative = 1e-10);
            assert_relative_eq!(haldane, v, max_relative = 1e-10);
        }
        // Partial: at saturating inhibitor and substrate the rate levels off at β·Vmax.
        let v = ExtensionLaw(Extension::Partial).value(&[9.0, 40.0, 2.0, 1.0, 0.3], &(1e9, 1e9));
        assert_relative_eq!(v, 0.3 * 9.0, max_relative = 1e-6);
    }

    #[test]
    fn apparent_constants_reproduce_the_rate_law() {
        for m in Mechanism::ALL {
            let law = RateLaw(m);
            let theta = &[7.0, 30.0, 1.5, 0.3][..m.n_params()];
            for (s, i) in [(5.0, 0.0), (20.0, 1.0), (300.0, 6.0)] {
                let (v, k) = law.apparent(theta, i);
                assert_relative_eq!(law.value(theta, &(s, i)), v * s / (k + s), max_relative = 1e-14);
            }
        }
    }
}
