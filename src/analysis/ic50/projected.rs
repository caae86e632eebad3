//! A specialised kernel for the free four-parameter logistic, the fit a
//! screening run does by the million.
//!
//! The asymptotes enter the model linearly: y = lower·(1 − s) + upper·s with
//! s = 1/(1 + (x/IC50)^h). For a given (ln IC50, h) they are a weighted linear
//! regression of y on s, solved in closed form; what is left is a
//! two-parameter nonlinear problem in (ln IC50, h) — variable projection
//! (Golub & Pereyra, SIAM J. Numer. Anal. 10, 413–432, 1973). Its Jacobian
//! is approximated by the projected derivative P⊥·∂f/∂α with the linear
//! parameters held (Kaufman, BIT 15, 49–57, 1975), and minimised by
//! Levenberg–Marquardt on that 2×2 system (fixed-size `nalgebra` types,
//! stack buffers, no allocation in the loop).
//!
//! Starts cost only projected-SSE evaluations: a small grid of
//! (ln IC50, h) over the tested range of the curve's own doses, the lowest
//! projected SSE iterated. (The logit-line start the engine begins with is
//! not tried as well: on 200 000 screening curves leaving it out moved no
//! estimate by more than 3e-8 of its size — convergence noise — and it cost
//! a tenth of the kernel.) The projected problem is symmetric
//! in h ↔ −h (s(−h) = 1 − s(h) spans the same space with 1), so only
//! positive slopes need to be tried.
//!
//! The kernel returns `None` whenever it is not sure — no interior optimum,
//! slope or IC50 running away, too many points, singular information — and
//! the caller then runs the general engine, which stays the reference:
//! the tests compare the two on every test curve.

// Indexed loops run over several parallel stack arrays at once; negated
// comparisons are deliberate: a NaN must fail them and decline the fit.
#![allow(clippy::needless_range_loop, clippy::neg_cmp_op_on_partial_ord)]

use nalgebra::{DMatrix, Matrix2, Vector2};

use crate::fit::intervals::{Bound, Interval, f_quantile};
use crate::fit::{Data, Fit, Model, Termination, r_squared};
use crate::models::{Dose, Logistic};

/// Curves with more wells than this go to the general engine (stack buffers).
const MAX_POINTS: usize = 64;
/// Iteration budget of the 2-parameter minimiser.
const MAX_ITERATIONS: usize = 200;
/// Converged when the Gauss–Newton step would move ln IC50 and h by less
/// than this (relative to max(1, |h|) for h): far below the 1e-8 the
/// reported digits need.
const STEP_TOLERANCE: f64 = 1e-11;
/// Slopes outside this range are left to the engine (and its degenerate-curve rules).
const SLOPE_RANGE: (f64, f64) = (1e-3, 100.0);
/// IC50 further than this factor outside the tested range is left to the engine.
const RANGE_FACTOR: f64 = 1e3;
/// The damped iteration hands over to [`polish`] once the Gauss–Newton step
/// is this small (Newton converges quadratically from here on nearly every
/// curve, which saves the damped steps' slow approach)...
const POLISH_FROM: f64 = 1e-3;
/// ...and, where Newton could not finish from there, once more at this size.
const POLISH_RETRY: f64 = 1e-6;
/// Newton steps allowed in [`polish`].
const POLISH_STEPS: usize = 8;

/// The linear part for one (ln IC50, h): asymptotes and the projected SSE.
#[derive(Clone, Copy)]
struct Linear {
    lower: f64,
    upper: f64,
    sse: f64,
}

/// The wells, laid out for the kernel, whose stack buffers hold `M` wells
/// ([`fit_logistic_projected`] picks the smallest capacity that fits).
struct Wells<'a, const M: usize> {
    ln_x: &'a [f64],
    positive: &'a [bool],
    y: &'a [f64],
    w: &'a [f64],
    weight_sum: f64,
    /// Every weight is 1 (an unweighted fit).
    unit_weights: bool,
}

/// ln x and whether x > 0 at every well, on the stack (at most `M`
/// wells; the callers check).
struct Doses<const M: usize> {
    ln_x: [f64; M],
    positive: [bool; M],
}

impl<const M: usize> Doses<M> {
    fn of(data: &Data<Dose>) -> Doses<M> {
        let mut doses = Doses { ln_x: [0.0; M], positive: [false; M] };
        for (i, d) in data.x.iter().enumerate() {
            doses.positive[i] = d.x > 0.0;
            doses.ln_x[i] = if doses.positive[i] { d.ln_x } else { 0.0 };
        }
        doses
    }
}

impl<'a, const M: usize> Wells<'a, M> {
    /// The wells of `data` for the kernel; `None` when the weights sum to
    /// nothing or a response is not finite.
    fn new(doses: &'a Doses<M>, data: &'a Data<Dose>) -> Option<Wells<'a, M>> {
        let n = data.len();
        let weight_sum: f64 = data.weights.iter().sum();
        if !(weight_sum > 0.0) || data.y.iter().any(|y| !y.is_finite()) {
            return None;
        }
        // Exactly 1, not nearly: only then is leaving the weight out bit-for-bit the same.
        #[allow(clippy::float_cmp)]
        let unit_weights = data.weights.iter().all(|&w| w == 1.0);
        Some(Wells {
            ln_x: &doses.ln_x[..n],
            positive: &doses.positive[..n],
            y: &data.y,
            w: &data.weights,
            weight_sum,
            unit_weights,
        })
    }
    /// The smallest and largest ln x over the positive doses; `None` when
    /// no dose is positive. The start grid spans it, and an optimum too far
    /// outside it is declined.
    fn ln_range(&self) -> Option<(f64, f64)> {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for (&lx, &pos) in self.ln_x.iter().zip(self.positive) {
            if pos {
                lo = lo.min(lx);
                hi = hi.max(lx);
            }
        }
        (lo.is_finite() && hi.is_finite()).then_some((lo, hi))
    }

    /// s at every well for (a = ln IC50, h), with the model's limits at x = 0.
    fn fractions(&self, a: f64, h: f64, s: &mut [f64]) {
        for ((si, &lx), &pos) in s.iter_mut().zip(self.ln_x).zip(self.positive) {
            *si = if pos {
                1.0 / (1.0 + (h * (lx - a)).exp())
            } else if h > 0.0 {
                1.0
            } else if h < 0.0 {
                0.0
            } else {
                0.5
            };
        }
    }

    /// Weighted regression of y on (1, s), centred for accuracy. `None` when
    /// s is (numerically) constant over the wells: the asymptotes are then
    /// not separable.
    ///
    /// The projection runs some thirty times per fit, and a screening curve
    /// is unweighted: that case gets its own copy of the loops without the
    /// weights (multiplying by 1 is exact, so the two agree to the bit).
    fn project(&self, s: &[f64]) -> Option<Linear> {
        match self.unit_weights {
            true => self.project_with::<true>(s),
            false => self.project_with::<false>(s),
        }
    }

    #[inline(always)]
    fn project_with<const UNIT: bool>(&self, s: &[f64]) -> Option<Linear> {
        let n = self.y.len();
        let (w, y, s) = (&self.w[..n], &self.y[..n], &s[..n]);
        let weight = |i: usize| if UNIT { 1.0 } else { w[i] };
        let (mut sw, mut yw) = (0.0, 0.0);
        for i in 0..n {
            sw += weight(i) * s[i];
            yw += weight(i) * y[i];
        }
        let (s_mean, y_mean) = (sw / self.weight_sum, yw / self.weight_sum);
        let (mut sss, mut ssy) = (0.0, 0.0);
        for i in 0..n {
            let ds = s[i] - s_mean;
            sss += weight(i) * ds * ds;
            ssy += weight(i) * ds * (y[i] - y_mean);
        }
        // s lies in [0, 1], so this bound does not depend on the response scale.
        if !(sss > 1e-20 * self.weight_sum) {
            return None;
        }
        let span = ssy / sss;
        let lower = y_mean - span * s_mean;
        let mut sse = 0.0;
        for i in 0..n {
            let r = y[i] - lower - span * s[i];
            sse += weight(i) * r * r;
        }
        sse.is_finite().then_some(Linear { lower, upper: lower + span, sse })
    }

    /// The projected SSE in one pass over the wells, for judging the start
    /// grid: SSE = Σw·ỹ² − (Σw·s·ỹ)²/Σw(s − s̄)² with ỹ the centred
    /// responses (`centred`, and `total` = Σw·ỹ², computed once per curve)
    /// and Σw(s − s̄)² = Σw·s² − (Σw·s)²/Σw. The last difference cancels
    /// when s barely varies over the wells, so below a relative spread of
    /// 1e-6 the exact three-pass [`Self::project`] answers instead; above
    /// it the two agree to ~1e-10 of the SSE, which can only matter for
    /// starts that tie.
    fn grid_sse(&self, s: &[f64], centred: &[f64], total: f64) -> f64 {
        let n = self.y.len();
        let (w, s, c) = (&self.w[..n], &s[..n], &centred[..n]);
        let (mut s1, mut s2, mut sy) = (0.0, 0.0, 0.0);
        for i in 0..n {
            let ws = w[i] * s[i];
            s1 += ws;
            s2 += ws * s[i];
            sy += ws * c[i];
        }
        let sss = s2 - s1 * s1 / self.weight_sum;
        if !(sss > 1e-6 * self.weight_sum) {
            return self.project(s).map_or(f64::INFINITY, |l| l.sse);
        }
        let sse = total - sy * sy / sss;
        if sse.is_finite() { sse.max(0.0) } else { f64::INFINITY }
    }

    /// Weights, responses, fractions, ln x and positivity over the wells, as
    /// equal-length slices (so the loops index them without bounds checks).
    #[allow(clippy::type_complexity)]
    fn views<'s>(&'s self, s: &'s [f64]) -> (&'s [f64], &'s [f64], &'s [f64], &'s [f64], &'s [bool]) {
        let n = self.y.len();
        (&self.w[..n], &self.y[..n], &s[..n], &self.ln_x[..n], &self.positive[..n])
    }

    fn projected_sse(&self, a: f64, h: f64, s: &mut [f64]) -> f64 {
        self.fractions(a, h, s);
        self.project(s).map_or(f64::INFINITY, |l| l.sse)
    }

    /// Normal matrix and gradient of the projected problem at (a, h)
    /// (Kaufman's Jacobian P⊥·∂f/∂α, weighted).
    fn normal_equations(&self, a: f64, h: f64, s: &[f64], lin: &Linear) -> (Matrix2<f64>, Vector2<f64>) {
        let (w, y, s, ln_x, positive) = self.views(s);
        let n = y.len();
        let span = lin.upper - lin.lower;
        let mut da = [0.0; M];
        let mut dh = [0.0; M];
        let (da, dh) = (&mut da[..n], &mut dh[..n]);
        let (mut s_sum, mut a_sum, mut h_sum) = (0.0, 0.0, 0.0);
        for i in 0..n {
            let bend = if positive[i] { span * s[i] * (1.0 - s[i]) } else { 0.0 };
            da[i] = bend * h;
            dh[i] = if positive[i] { -bend * (ln_x[i] - a) } else { 0.0 };
            s_sum += w[i] * s[i];
            a_sum += w[i] * da[i];
            h_sum += w[i] * dh[i];
        }
        let s_mean = s_sum / self.weight_sum;
        let (a_mean, h_mean) = (a_sum / self.weight_sum, h_sum / self.weight_sum);
        let (mut sss, mut sa, mut sh) = (0.0, 0.0, 0.0);
        for i in 0..n {
            let ds = s[i] - s_mean;
            sss += w[i] * ds * ds;
            sa += w[i] * ds * (da[i] - a_mean);
            sh += w[i] * ds * (dh[i] - h_mean);
        }
        let (ba, bh) = (sa / sss, sh / sss);
        // Accumulated in scalars, in the same order as the matrix entries were.
        let (mut m00, mut m01, mut m11, mut g0, mut g1) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for i in 0..n {
            let ds = s[i] - s_mean;
            let ja = da[i] - a_mean - ba * ds;
            let jh = dh[i] - h_mean - bh * ds;
            let r = y[i] - lin.lower - (lin.upper - lin.lower) * s[i];
            let w = w[i];
            m00 += w * ja * ja;
            m01 += w * ja * jh;
            m11 += w * jh * jh;
            g0 += w * ja * r;
            g1 += w * jh * r;
        }
        (Matrix2::new(m00, m01, m01, m11), Vector2::new(g0, g1))
    }

    /// Newton's equations of the projected problem at (a, h): the exact
    /// Hessian of ½·SSE(a, h) with the asymptotes at their optimum, and the
    /// gradient −∇ = Jᵀr.
    ///
    /// With the model written y = L + D·s (D = upper − lower), the Hessian of
    /// ½Σw·r² in (a, h, L, D) is Σw(∇f∇fᵀ − r∇²f); eliminating L and D (the
    /// Schur complement, which is the Hessian of the projected function
    /// since ∂/∂L = ∂/∂D = 0 at the projection) leaves
    /// S = A − (P − R)(P − R)ᵀ/Σw(s − s̄)², where A is the centred Gram
    /// matrix of (∂f/∂a, ∂f/∂h) less Σw·r·D·∂²s, P the centred products of
    /// those derivatives with s, and R = Σw·r·∂s/∂(a, h). Without the r terms
    /// this is Kaufman's matrix ([`Self::normal_equations`]); with them the
    /// iteration converges quadratically rather than linearly, which is what
    /// the last digits need. Derivatives of s = 1/(1 + e^u), u = h(ln x − a),
    /// q = s(1 − s): ∂s/∂a = q·h, ∂s/∂h = −q(ln x − a), ∂²s/∂a² = q(1 − 2s)h²,
    /// ∂²s/∂h² = q(1 − 2s)(ln x − a)², ∂²s/∂a∂h = q − q(1 − 2s)h(ln x − a).
    fn newton_equations(&self, a: f64, h: f64, s: &[f64], lin: &Linear) -> (Matrix2<f64>, Vector2<f64>) {
        let (w, y, s, ln_x, positive) = self.views(s);
        let n = y.len();
        let d = lin.upper - lin.lower;
        let mut sa = [0.0; M];
        let mut sh = [0.0; M];
        let (sa, sh) = (&mut sa[..n], &mut sh[..n]);
        let (mut s_sum, mut a_sum, mut h_sum) = (0.0, 0.0, 0.0);
        let (mut r_a, mut r_h, mut c_aa, mut c_ah, mut c_hh) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for i in 0..n {
            if positive[i] {
                let q = s[i] * (1.0 - s[i]);
                let t = ln_x[i] - a;
                let bend = q * (1.0 - 2.0 * s[i]);
                sa[i] = q * h;
                sh[i] = -q * t;
                let wr = w[i] * (y[i] - lin.lower - d * s[i]);
                r_a += wr * sa[i];
                r_h += wr * sh[i];
                c_aa += wr * d * bend * h * h;
                c_hh += wr * d * bend * t * t;
                c_ah += wr * d * (q - bend * h * t);
            } else {
                (sa[i], sh[i]) = (0.0, 0.0);
            }
            s_sum += w[i] * s[i];
            a_sum += w[i] * sa[i];
            h_sum += w[i] * sh[i];
        }
        let (s_mean, a_mean, h_mean) = (s_sum / self.weight_sum, a_sum / self.weight_sum, h_sum / self.weight_sum);
        let (mut sss, mut p_a, mut p_h, mut g_aa, mut g_ah, mut g_hh) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        for i in 0..n {
            let ds = s[i] - s_mean;
            let (fa, fh) = (d * (sa[i] - a_mean), d * (sh[i] - h_mean));
            sss += w[i] * ds * ds;
            p_a += w[i] * fa * ds;
            p_h += w[i] * fh * ds;
            g_aa += w[i] * fa * fa;
            g_ah += w[i] * fa * fh;
            g_hh += w[i] * fh * fh;
        }
        let (u_a, u_h) = (p_a - r_a, p_h - r_h);
        let hessian = Matrix2::new(
            g_aa - c_aa - u_a * u_a / sss,
            g_ah - c_ah - u_a * u_h / sss,
            g_ah - c_ah - u_a * u_h / sss,
            g_hh - c_hh - u_h * u_h / sss,
        );
        (hessian, Vector2::new(d * r_a, d * r_h))
    }
}

/// The best (ln IC50, h) of a small grid over the tested range, judged by
/// the projected SSE; on return `s` holds the fractions there, as the grid
/// computed them, for the minimiser to start from.
///
/// The grid's fractions cost one `exp` per well, not one per well, slope
/// and grid point: along the grid, ln IC50 moves by a fixed step δ, so
/// exp(h·(ln x − a)) is multiplied by exp(−h·δ) from one point to the next,
/// and each slope is twice the one before, so its powers are the squares of
/// the last slope's. (The few ulps these recurrences drift by can only
/// matter for starts whose SSEs tie to rounding.)
/// `(lo, hi)` is the tested range of ln x ([`Wells::ln_range`]).
fn best_start<const M: usize>(wells: &Wells<M>, (lo, hi): (f64, f64), s: &mut [f64]) -> Option<(f64, f64)> {
    let grid_point = |k: usize| lo + (hi - lo) * k as f64 / (GRID - 1) as f64;
    if !(SLOPES[SLOPES.len() - 1] * (hi - lo) < 600.0) {
        // Far too wide a range for the recurrences to stay finite: point by point.
        return best_start_directly(wells, s, grid_point);
    }
    let mut centred = [0.0; M];
    let centred = &mut centred[..s.len()];
    let mean = wells.y.iter().zip(wells.w).map(|(y, w)| w * y).sum::<f64>() / wells.weight_sum;
    let mut total = 0.0;
    for ((c, &y), &w) in centred.iter_mut().zip(wells.y).zip(wells.w) {
        *c = y - mean;
        total += w * *c * *c;
    }
    let walk = GridWalk::new(wells, lo, (hi - lo) / (GRID - 1) as f64);
    let mut sse = [[f64::INFINITY; SLOPES.len()]; GRID];
    let mut e = [0.0; M];
    let e = &mut e[..s.len()];
    for j in 0..SLOPES.len() {
        let ratio = walk.first_row(j, e);
        for row in sse.iter_mut() {
            row[j] = wells.grid_sse(walk.row(e, s), centred, total);
            walk.next_row(e, ratio);
        }
    }
    let mut best: Option<(usize, usize, f64)> = None;
    for (k, row) in sse.iter().enumerate() {
        for (j, &v) in row.iter().enumerate() {
            if v.is_finite() && best.is_none_or(|(_, _, b)| v < b) {
                best = Some((k, j, v));
            }
        }
    }
    let (k, j, _) = best?;
    // The fractions the grid judged there, by the same products in the same order.
    let ratio = walk.first_row(j, e);
    for _ in 0..k {
        walk.next_row(e, ratio);
    }
    walk.row(e, s);
    Some((grid_point(k), SLOPES[j]))
}

/// [`best_start`]'s grid point by point, each with its own `exp`s.
fn best_start_directly<const M: usize>(
    wells: &Wells<M>,
    s: &mut [f64],
    grid_point: impl Fn(usize) -> f64,
) -> Option<(f64, f64)> {
    let mut best: Option<(f64, f64, f64)> = None;
    for k in 0..GRID {
        for &h in &SLOPES {
            let v = wells.projected_sse(grid_point(k), h, s);
            if v.is_finite() && best.is_none_or(|(_, _, b)| v < b) {
                best = Some((grid_point(k), h, v));
            }
        }
    }
    let (a, h, _) = best?;
    wells.fractions(a, h, s);
    Some((a, h))
}

/// The powers e = exp(h·(ln x − a)) along [`best_start`]'s grid.
struct GridWalk<'a, const M: usize> {
    positive: &'a [bool],
    /// exp(h₀·(ln x − lo)) at every positive well (0 elsewhere), h₀ the first slope.
    base: [f64; M],
    /// exp(−h₀·δ): one grid step along ln IC50 at the first slope.
    ratio: f64,
}

impl<'a, const M: usize> GridWalk<'a, M> {
    fn new(wells: &'a Wells<M>, lo: f64, step: f64) -> GridWalk<'a, M> {
        let mut base = [0.0; M];
        for ((b, &lx), &pos) in base.iter_mut().zip(wells.ln_x).zip(wells.positive) {
            *b = if pos { (SLOPES[0] * (lx - lo)).exp() } else { 0.0 };
        }
        GridWalk { positive: wells.positive, base, ratio: (-SLOPES[0] * step).exp() }
    }

    /// e at the first grid point (a = lo) for slope `j` (each slope twice
    /// the one before: the first slope's powers squared j times); returns
    /// that slope's step ratio.
    fn first_row(&self, j: usize, e: &mut [f64]) -> f64 {
        e.copy_from_slice(&self.base[..e.len()]);
        let mut ratio = self.ratio;
        for _ in 0..j {
            for ei in e.iter_mut() {
                *ei *= *ei;
            }
            ratio *= ratio;
        }
        ratio
    }

    /// The fractions s = 1/(1 + e) of one grid point (1 at x = 0, where h > 0).
    fn row<'s>(&self, e: &[f64], s: &'s mut [f64]) -> &'s [f64] {
        for ((si, &ei), &pos) in s.iter_mut().zip(e).zip(self.positive) {
            *si = if pos { 1.0 / (1.0 + ei) } else { 1.0 };
        }
        s
    }

    /// e one grid step further along ln IC50.
    fn next_row(&self, e: &mut [f64], ratio: f64) {
        for ei in e.iter_mut() {
            *ei *= ratio;
        }
    }
}

/// Points of the start grid along ln IC50 (over the tested range).
const GRID: usize = 6;
/// Slopes of the start grid (positive: the projected problem is symmetric
/// in h), each twice the one before ([`GridWalk::first_row`] squares).
const SLOPES: [f64; 3] = [0.6, 1.2, 2.4];

/// Levenberg–Marquardt on (ln IC50, h) from `start`, whose fractions are
/// in `s`; `None` unless it converges to an interior point.
fn minimise<const M: usize>(wells: &Wells<M>, start: (f64, f64), s: &mut [f64]) -> Option<(f64, f64, Linear, usize)> {
    let (mut a, mut h) = start;
    let mut lin = wells.project(s)?;
    let mut lambda = 1e-3;
    let mut trial = [0.0; M];
    let trial = &mut trial[..s.len()];
    let mut handover = POLISH_FROM;
    for iteration in 1..=MAX_ITERATIONS {
        let (m, g) = wells.normal_equations(a, h, s, &lin);
        // Converged when the undamped Gauss–Newton step (not the damped one,
        // which is short whenever λ is large) is below tolerance; the
        // gradient gᵀ = Jᵀr is exact with Kaufman's Jacobian.
        let newton = m.try_inverse().map(|inv| inv * g)?;
        if newton[0].abs() <= handover && newton[1].abs() <= handover * h.abs().max(1.0) {
            match polish(wells, (a, h, lin), s, trial) {
                Ok((a, h, lin)) => return Some((a, h, lin, iteration)),
                Err(_) if handover == POLISH_RETRY => return None,
                // Carry on damped from where Newton stopped (its fractions are in `s`).
                Err(reached) => {
                    (a, h, lin) = reached;
                    handover = POLISH_RETRY;
                    continue;
                }
            }
        }
        loop {
            let mut damped = m;
            damped[(0, 0)] *= 1.0 + lambda;
            damped[(1, 1)] *= 1.0 + lambda;
            let step = damped.try_inverse().map(|inv| inv * g)?;
            let (na, nh) = (a + step[0], h + step[1]);
            wells.fractions(na, nh, trial);
            let candidate = wells.project(trial);
            if let Some(c) = candidate.filter(|c| c.sse < lin.sse) {
                (a, h, lin) = (na, nh, c);
                s.copy_from_slice(trial);
                lambda = (lambda * 0.1).max(1e-12);
                break;
            }
            lambda *= 10.0;
            if lambda > 1e16 {
                // No step lowers the SSE: a minimum to rounding, if the gradient agrees.
                let flat = (0..2).all(|k| g[k].abs() <= 1e-8 * (m[(k, k)] * lin.sse).sqrt() || g[k] == 0.0);
                return flat.then_some((a, h, lin, iteration));
            }
        }
    }
    None
}

/// Near the optimum the SSE changes by less than its rounding error, so the
/// damped iteration cannot finish the last digits; Newton steps on the
/// projected function ([`Wells::newton_equations`]) can, and converge
/// quadratically: from the hand-over (a Gauss–Newton step below
/// [`POLISH_FROM`]) two or three steps reach [`STEP_TOLERANCE`]. Steps are
/// taken while the Hessian is positive definite, they shrink and the SSE
/// stays within rounding; otherwise `Err` with the last point reached
/// (whose fractions are in `s`), for the damped iteration to go on from.
fn polish<const M: usize>(
    wells: &Wells<M>,
    (mut a, mut h, mut lin): (f64, f64, Linear),
    s: &mut [f64],
    trial: &mut [f64],
) -> std::result::Result<(f64, f64, Linear), (f64, f64, Linear)> {
    let tiny =
        |v: &Vector2<f64>, h: f64| v[0].abs() <= STEP_TOLERANCE && v[1].abs() <= STEP_TOLERANCE * h.abs().max(1.0);
    let mut previous = f64::INFINITY;
    for _ in 0..POLISH_STEPS {
        let (hessian, g) = wells.newton_equations(a, h, s, &lin);
        let positive_definite = hessian[(0, 0)] > 0.0 && hessian.determinant() > 0.0;
        let Some(step) = hessian.try_inverse().filter(|_| positive_definite).map(|inv| inv * g) else {
            return Err((a, h, lin));
        };
        if tiny(&step, h) {
            return Ok((a, h, lin));
        }
        let size = step[0].abs().max(step[1].abs() / h.abs().max(1.0));
        if !(size < previous) {
            // Stagnated: the steps are at the level of rounding.
            return if size <= 1e2 * STEP_TOLERANCE { Ok((a, h, lin)) } else { Err((a, h, lin)) };
        }
        // Quadratic convergence, e(k+1) ≈ C·e(k)², with C estimated from the
        // last two steps: when the step after this one is predicted a
        // hundred times below the tolerance, this step lands on the answer
        // and the Newton equations need not be built again to confirm it.
        let lands = previous.is_finite() && size * size * size / (previous * previous) <= 1e-2 * STEP_TOLERANCE;
        previous = size;
        let (na, nh) = (a + step[0], h + step[1]);
        wells.fractions(na, nh, trial);
        match wells.project(trial) {
            Some(c) if c.sse <= lin.sse * (1.0 + 1e-12) => {
                (a, h, lin) = (na, nh, c);
                s.copy_from_slice(trial);
            }
            _ => return Err((a, h, lin)),
        }
        if lands {
            return Ok((a, h, lin));
        }
    }
    Err((a, h, lin))
}

/// The free four-parameter logistic fit of `data` by variable projection,
/// as the same [`Fit`] record the engine returns (covariance and SEs from
/// the full four-parameter Jacobian at the optimum). `None` when the kernel
/// cannot vouch for its answer; the caller then uses the general engine.
pub fn fit_logistic_projected(data: &Data<Dose>) -> Option<Fit> {
    match data.len() {
        5..=16 => fit_within::<16>(data),
        17..=32 => fit_within::<32>(data),
        33..=MAX_POINTS => fit_within::<MAX_POINTS>(data),
        _ => None,
    }
}

/// [`fit_logistic_projected`] with stack buffers of `M` wells (`data`
/// has at most `M`): a ten-point curve's buffers are then zeroed by a few
/// stores rather than a `memset` of 512 bytes each, some twenty times a fit.
fn fit_within<const M: usize>(data: &Data<Dose>) -> Option<Fit> {
    let n = data.len();
    let doses = Doses::<M>::of(data);
    let wells = Wells::new(&doses, data)?;
    let mut s = [0.0; M];
    let s = &mut s[..n];
    let (lo, hi) = wells.ln_range()?;
    let start = best_start(&wells, (lo, hi), s)?;
    let (a, h, lin, iterations) = minimise(&wells, start, s)?;
    let slope_ok = h.abs() >= SLOPE_RANGE.0 && h.abs() <= SLOPE_RANGE.1;
    let inside = a > lo - RANGE_FACTOR.ln() && a < hi + RANGE_FACTOR.ln();
    if !(slope_ok && inside) {
        return None;
    }
    summary(&wells, data, (a, h, lin), s, iterations)
}

/// The [`Fit`] record of the optimum, as the engine's `summarise` makes it
/// for the logistic (residuals, covariance s²(JᵀJ)⁻¹ of the four natural
/// parameters IC50, h, lower, upper, SEs, R²), but from the fractions s
/// the kernel already holds there instead of evaluating the model again:
/// with D = upper − lower and q = s(1 − s), the Jacobian row of a well is
/// (D·q·h/IC50, −D·q·(ln x − ln IC50), 1 − s, s) — the model's own
/// gradient (`models::logistic`), zero in the first two at x = 0. The
/// numbers agree with the engine's to rounding (tested); `None` when the
/// information matrix is singular.
fn summary<const M: usize>(
    wells: &Wells<M>,
    data: &Data<Dose>,
    (a, h, lin): (f64, f64, Linear),
    s: &[f64],
    iterations: usize,
) -> Option<Fit> {
    let n = s.len();
    let ic50 = a.exp();
    let span = lin.upper - lin.lower;
    let mut residuals = Vec::with_capacity(n);
    // JᵀWJ is symmetric: its upper triangle is summed (on the stack) and mirrored.
    let mut upper = [[0.0; 4]; 4];
    let mut gradients = [[0.0; 4]; M];
    for i in 0..n {
        let si = s[i];
        residuals.push(wells.y[i] - (lin.lower + span * si));
        let bend = span * si * (1.0 - si);
        let (d_ic50, d_h) = match wells.positive[i] {
            true => (bend * h / ic50, -bend * (wells.ln_x[i] - a)),
            false => (0.0, 0.0),
        };
        gradients[i] = [d_ic50, d_h, 1.0 - si, si];
        let root = if wells.unit_weights { 1.0 } else { wells.w[i].sqrt() };
        let row = gradients[i].map(|g| root * g);
        for j in 0..4 {
            for k in j..4 {
                upper[j][k] += row[j] * row[k];
            }
        }
    }
    let df = n - 4;
    let c = covariance4(&upper, lin.sse, df)?;
    // The outlier rule's leverages gᵀ(JᵀWJ)⁻¹g, from the gradients just made
    // (it would otherwise evaluate the model at every well again).
    let s2 = lin.sse / df as f64;
    let leverage = gradients[..n]
        .iter()
        .map(|g| {
            let mut q = 0.0;
            for j in 0..4 {
                for k in 0..4 {
                    q += g[j] * c[j][k] * g[k];
                }
            }
            q / s2
        })
        .collect();
    let se = (0..4)
        .map(|j| {
            let v = c[j][j];
            (v.is_finite() && v >= 0.0).then(|| v.sqrt())
        })
        .collect();
    Some(Fit {
        names: Logistic.names().to_vec(),
        theta: vec![ic50, h, lin.lower, lin.upper],
        fixed: vec![false; 4],
        se,
        covariance: Some(DMatrix::from_fn(4, 4, |j, k| c[j][k])),
        n,
        n_free: 4,
        df,
        sse: lin.sse,
        residual_sd: s2.sqrt(),
        r2: r_squared(data, lin.sse),
        residuals,
        termination: Termination::Converged,
        evaluations: iterations,
        leverage: Some(leverage),
    })
}

/// s²(JᵀWJ)⁻¹ from the upper triangle of JᵀWJ (`information[j][k]`,
/// j ≤ k), as the engine's `covariance_of_information4` defines it —
/// scaled to unit diagonal so that parameters of very different size do
/// not fool the factorisation, `None` when it is not positive definite or
/// the scaled inverse's diagonal passes 1e14 — but written out for the
/// 4×4 case on the stack: the Cholesky factor L of the scaled matrix
/// (Golub & Van Loan, *Matrix Computations*, 4th ed., Alg. 4.2.1), M = L⁻¹
/// by forward substitution, and the inverse MᵀM. Every screening curve
/// needs one, and the general factorisation and triangular solves (through
/// an identity matrix) were a few per cent of a run; the two agree to
/// rounding (tested).
fn covariance4(information: &[[f64; 4]; 4], sse: f64, df: usize) -> Option<[[f64; 4]; 4]> {
    let d: [f64; 4] = std::array::from_fn(|k| information[k][k].sqrt());
    if d.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return None;
    }
    let scaled = |i: usize, j: usize| information[i.min(j)][i.max(j)] / (d[i] * d[j]);
    let mut l = [[0.0; 4]; 4];
    for j in 0..4 {
        let mut pivot = scaled(j, j);
        for k in 0..j {
            pivot -= l[j][k] * l[j][k];
        }
        if !(pivot > 0.0) {
            return None;
        }
        l[j][j] = pivot.sqrt();
        for i in j + 1..4 {
            let mut v = scaled(i, j);
            for k in 0..j {
                v -= l[i][k] * l[j][k];
            }
            l[i][j] = v / l[j][j];
        }
    }
    let mut m = [[0.0; 4]; 4];
    for i in 0..4 {
        m[i][i] = 1.0 / l[i][i];
        for j in 0..i {
            let mut v = 0.0;
            for k in j..i {
                v += l[i][k] * m[k][j];
            }
            m[i][j] = -v / l[i][i];
        }
    }
    let mut inverse = [[0.0; 4]; 4];
    for i in 0..4 {
        for j in 0..=i {
            let mut v = 0.0;
            for k in i..4 {
                v += m[k][i] * m[k][j];
            }
            (inverse[i][j], inverse[j][i]) = (v, v);
        }
    }
    let condition = (0..4).map(|k| inverse[k][k]).fold(0.0, f64::max);
    if !(condition.is_finite() && condition < 1e14) {
        return None;
    }
    let s2 = sse / df as f64;
    let covariance: [[f64; 4]; 4] =
        std::array::from_fn(|i| std::array::from_fn(|j| inverse[i][j] / (d[i] * d[j]) * s2));
    covariance.iter().flatten().all(|v| v.is_finite()).then_some(covariance)
}

/// How far (ln units) the profile walks before calling a side unbounded:
/// the engine's reach (`fit::intervals`), e^25 ≈ 7e10.
const PROFILE_REACH: f64 = 25.0;

/// The profile-likelihood interval of IC50 of a free four-parameter fit,
/// as `fit::intervals::profile` defines it — the ends where the SSE, with
/// IC50 held and h, lower and upper refitted, crosses
/// SSE·(1 + F(confidence; 1, df)/df) (Bates & Watts 1988, §6.1), walked
/// outward from the fit by the engine's steps and reach — but each refit is
/// one-dimensional here: with IC50 held, lower and upper are projected out
/// and h is found by Newton's method on the projected function (the h–h
/// entry of [`Wells::newton_equations`]), warm-started from the last point.
/// The engine spends ~10⁶ instructions per steep curve on these refits, and
/// every steep curve is profiled. `None` whenever a refit is not sure (the
/// caller then runs the engine's profile); the ends agree with the
/// engine's to 1e-6 (tested).
pub fn profile_ic50(data: &Data<Dose>, fit: &Fit, confidence: f64) -> Option<Interval> {
    if fit.fixed.iter().any(|&f| f) || fit.df == 0 || !fit.sse.is_finite() {
        return None;
    }
    match data.len() {
        5..=16 => profile_within::<16>(data, fit, confidence),
        17..=32 => profile_within::<32>(data, fit, confidence),
        33..=MAX_POINTS => profile_within::<MAX_POINTS>(data, fit, confidence),
        _ => None,
    }
}

/// [`profile_ic50`] with stack buffers of `M` wells (as [`fit_within`]).
fn profile_within<const M: usize>(data: &Data<Dose>, fit: &Fit, confidence: f64) -> Option<Interval> {
    let f = f_quantile(confidence, 1, fit.df)?;
    let threshold = fit.sse * (1.0 + f / fit.df as f64);
    let doses = Doses::<M>::of(data);
    let wells = Wells::new(&doses, data)?;
    let (ic50, h) = (fit.theta[Logistic::IC50], fit.theta[Logistic::HILL]);
    let se_internal = fit.se[Logistic::IC50].map(|se| se / ic50);
    let first_step = match se_internal {
        Some(v) if v.is_finite() && v > 0.0 => (0.5 * v).min(1.0),
        _ => 0.1,
    };
    let walk = Walk { wells: &wells, centre: ic50.ln(), h, first_step, threshold };
    Some(Interval { low: walk.side(-1.0)?, high: walk.side(1.0)? })
}

/// One side's walk of [`profile_ic50`].
struct Walk<'a, const M: usize> {
    wells: &'a Wells<'a, M>,
    centre: f64,
    h: f64,
    first_step: f64,
    threshold: f64,
}

impl<const M: usize> Walk<'_, M> {
    /// Outward from the fit by doubling steps until the profile SSE
    /// exceeds the threshold, then the crossing to 1e-10 (the engine's
    /// tolerance); `Unbounded` when the reach is passed first.
    fn side(&self, direction: f64) -> Option<Bound> {
        let (mut step, mut inner, mut h) = (self.first_step, (self.centre, self.h), self.h);
        loop {
            let outer = self.centre + direction * step.min(PROFILE_REACH);
            let (sse, h_outer) = profile_point(self.wells, outer, h)?;
            if sse > self.threshold {
                return self.crossing(inner, (outer, h_outer));
            }
            if step >= PROFILE_REACH {
                return Some(Bound::Unbounded);
            }
            (inner, h) = ((outer, h_outer), h_outer);
            step *= 2.0;
        }
    }

    /// The root of profile SSE − threshold between `inside` (below) and
    /// `outside` (above), each with the h found there, by the Illinois
    /// variant of regula falsi (Dowell & Jarratt, BIT 11, 168–174, 1971),
    /// which keeps the bracket and converges superlinearly.
    fn crossing(&self, inside: (f64, f64), outside: (f64, f64)) -> Option<Bound> {
        let excess = |u: f64, h: f64| profile_point(self.wells, u, h).map(|(sse, h)| (sse - self.threshold, h));
        let (mut a, mut ha) = inside;
        let (mut b, mut hb) = outside;
        let (mut fa, _) = excess(a, ha)?;
        let (mut fb, _) = excess(b, hb)?;
        let mut side = 0;
        for _ in 0..200 {
            let tol = 1e-10 * (1.0 + a.abs().max(b.abs()));
            if (b - a).abs() <= tol {
                break;
            }
            let c = (a * fb - b * fa) / (fb - fa);
            let warm = if (c - a).abs() < (c - b).abs() { ha } else { hb };
            let (fc, hc) = excess(c, warm)?;
            if fc == 0.0 {
                return Some(Bound::At(c.exp()));
            }
            if (fc > 0.0) == (fb > 0.0) {
                (b, fb, hb) = (c, fc, hc);
                if side == 1 {
                    fa *= 0.5;
                }
                side = 1;
            } else {
                (a, fa, ha) = (c, fc, hc);
                if side == -1 {
                    fb *= 0.5;
                }
                side = -1;
            }
            if fc.abs() <= 1e-13 * self.threshold {
                return Some(Bound::At(c.exp()));
            }
        }
        Some(Bound::At((0.5 * (a + b)).exp()))
    }
}

/// The SSE with ln IC50 held at `a`, lower and upper projected out and h
/// minimised by Newton's method from `h` (downhill by half of |h| where the
/// function is not convex; a step that raises the SSE is halved); with the
/// h found. `None` when the slope leaves the kernel's range
/// or the minimum is not clear (the engine then profiles).
fn profile_point<const M: usize>(wells: &Wells<M>, a: f64, mut h: f64) -> Option<(f64, f64)> {
    let n = wells.y.len();
    let (mut s, mut trial) = ([0.0; M], [0.0; M]);
    let (s, trial) = (&mut s[..n], &mut trial[..n]);
    wells.fractions(a, h, s);
    let mut lin = wells.project(s)?;
    for _ in 0..MAX_ITERATIONS {
        // A slope running past the range means a step between two
        // concentrations, where the engine's refit is left to decide.
        if !(h.abs() >= SLOPE_RANGE.0 && h.abs() <= SLOPE_RANGE.1) {
            return None;
        }
        let (hessian, g) = wells.newton_equations(a, h, s, &lin);
        let curvature = hessian[(1, 1)];
        let mut step = if curvature > 0.0 {
            let full = g[1] / curvature;
            if full.abs() <= STEP_TOLERANCE * h.abs().max(1.0) {
                return Some((lin.sse, h));
            }
            full
        } else if g[1] != 0.0 {
            // Not convex here (a warm start away from the minimum): downhill
            // by half the slope's size, then halved until the SSE drops.
            g[1].signum() * 0.5 * h.abs().max(1.0)
        } else {
            return None;
        };
        let accepted = (0..40).any(|_| {
            wells.fractions(a, h + step, trial);
            match wells.project(trial) {
                Some(c) if c.sse <= lin.sse * (1.0 + 1e-12) => {
                    (h, lin) = (h + step, c);
                    s.copy_from_slice(trial);
                    true
                }
                _ => {
                    step *= 0.5;
                    false
                }
            }
        });
        if !accepted {
            return None;
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{FitSettings, Model, fit_from};
    use rand::{Rng, SeedableRng};
    use rand_distr::{Distribution, Normal};

    fn curve(conc: &[f64], ic50: f64, hill: f64, lower: f64, upper: f64, sd: f64, rng: &mut impl Rng) -> Data<Dose> {
        let noise = Normal::new(0.0, sd).unwrap();
        let x: Vec<Dose> = conc.iter().map(|&c| Dose::new(c)).collect();
        let y =
            conc.iter().map(|&c| lower + (upper - lower) / (1.0 + (c / ic50).powf(hill)) + noise.sample(rng)).collect();
        Data::unweighted(x, y)
    }

    /// The reference: the general engine at its tightest settings, from the
    /// model's starts and the kernel's grid start.
    fn reference(data: &Data<Dose>) -> Fit {
        let mut starts = Logistic.starts(data);
        let n = data.len();
        let doses = Doses::<MAX_POINTS>::of(data);
        let wells = Wells::new(&doses, data).expect("test curves have finite responses");
        let mut s = vec![0.0; n];
        if let Some((a, h)) = wells.ln_range().and_then(|range| best_start(&wells, range, &mut s)) {
            let l = wells.project(&s).unwrap();
            starts.push(vec![a.exp(), h, l.lower, l.upper]);
        }
        fit_from(&Logistic, data, &starts, &[None; 4], &FitSettings::default())
    }

    /// Estimates and SEs with h made positive (the mirror image swaps the asymptotes).
    fn upright(f: &Fit) -> ([f64; 4], [f64; 4]) {
        let se: Vec<f64> = f.se.iter().map(|s| s.unwrap()).collect();
        let t = &f.theta;
        if t[1] < 0.0 {
            ([t[0], -t[1], t[3], t[2]], [se[0], se[1], se[3], se[2]])
        } else {
            ([t[0], t[1], t[2], t[3]], [se[0], se[1], se[2], se[3]])
        }
    }

    /// Every simulated test curve — % activity and raw counts from 10³ to
    /// 10⁷, potent to weak, shallow to steep, with and without a zero-dose
    /// well — fitted by the kernel and by the general engine: estimates agree
    /// to 1e-8 (relative) and SEs to 1e-6 wherever the kernel answers, and
    /// it answers on nearly all well-determined curves.
    #[test]
    fn agrees_with_the_general_engine() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(20261202);
        let dilution: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        let mut with_zero = dilution.clone();
        with_zero.push(0.0);
        let (mut answered, mut total) = (0, 0);
        for (scale, conc) in [(1.0, &dilution), (1e3, &dilution), (1e5, &with_zero), (1e7, &dilution)] {
            for _ in 0..60 {
                let ic50 = (rng.random_range(3f64.ln()..3000f64.ln())).exp();
                let hill = rng.random_range(0.6..3.0);
                let lower = scale * rng.random_range(-5.0..10.0);
                let upper = scale * 100.0;
                let data = curve(conc, ic50, hill, lower, upper, scale * 3.0, &mut rng);
                total += 1;
                let Some(k) = fit_logistic_projected(&data) else { continue };
                answered += 1;
                let e = reference(&data);
                assert!(e.converged());
                let ((kt, kse), (et, ese)) = (upright(&k), upright(&e));
                for j in 0..4 {
                    let tol = 1e-8 * et[j].abs().max(scale * 1e-3 * (j >= 2) as u8 as f64);
                    assert!((kt[j] - et[j]).abs() <= tol, "param {j}: kernel {kt:?} engine {et:?}");
                    let (ks, es) = (kse[j], ese[j]);
                    assert!((ks - es).abs() <= 1e-6 * es, "se {j}: kernel {ks} engine {es}");
                }
                assert!((k.sse - e.sse).abs() <= 1e-10 * e.sse);
            }
        }
        assert!(answered * 100 >= total * 99, "kernel answered {answered} of {total}");
    }

    /// The stack capacity is chosen by the number of wells only to save
    /// zeroing: a curve gets the very same bits (estimates, SEs, covariance,
    /// leverages, profile ends) from every capacity that holds it, on 10,
    /// 20 and 40 wells (single, duplicate and quadruplicate dilutions).
    #[test]
    fn every_capacity_gives_the_same_bits() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(17);
        let dilution: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        let bits = |f: &Option<Fit>| {
            f.as_ref().map(|f| {
                let cov = f.covariance.as_ref().map(|c| c.iter().map(|v| v.to_bits()).collect::<Vec<_>>());
                let lev = f.leverage.as_ref().map(|l| l.iter().map(|v| v.to_bits()).collect::<Vec<_>>());
                let se: Vec<_> = f.se.iter().map(|s| s.map(f64::to_bits)).collect();
                (f.theta.iter().map(|v| v.to_bits()).collect::<Vec<_>>(), se, cov, lev, f.sse.to_bits())
            })
        };
        let ends = |i: Option<Interval>| i.map(|i| format!("{:?} {:?}", i.low, i.high));
        let mut answered = 0;
        for copies in [1, 2, 4] {
            let conc: Vec<f64> = dilution.iter().flat_map(|&c| std::iter::repeat_n(c, copies)).collect();
            for _ in 0..40 {
                let ic50 = (rng.random_range(3f64.ln()..3000f64.ln())).exp();
                let data = curve(&conc, ic50, rng.random_range(0.6..3.0), 2.0, 100.0, 3.0, &mut rng);
                let widest = fit_within::<MAX_POINTS>(&data);
                answered += usize::from(widest.is_some());
                let capacities: Vec<Option<Fit>> = match conc.len() {
                    0..=16 => vec![fit_within::<16>(&data), fit_within::<32>(&data)],
                    17..=32 => vec![fit_within::<32>(&data)],
                    _ => vec![],
                };
                for fit in &capacities {
                    assert_eq!(bits(fit), bits(&widest), "{} wells", conc.len());
                }
                let Some(fit) = widest else { continue };
                let profile = ends(profile_within::<MAX_POINTS>(&data, &fit, 0.95));
                if conc.len() <= 16 {
                    assert_eq!(ends(profile_within::<16>(&data, &fit, 0.95)), profile);
                }
                if conc.len() <= 32 {
                    assert_eq!(ends(profile_within::<32>(&data, &fit, 0.95)), profile);
                }
            }
        }
        assert!(answered >= 110, "the kernel answered {answered} of 120");
    }

    /// Screening curves — ten 3-fold dilutions, IC50 inside the range, Hill
    /// 0.7–1.5, noise SD 3 % — are the kernel's job: it must answer nearly
    /// all of them itself. (Before the Newton polish, about 1 curve in 20 of
    /// this kind stopped converging linearly short of the tolerance and went
    /// to the much slower general engine.)
    #[test]
    fn answers_nearly_every_screening_curve() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(13);
        let dilution: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        let total = 1000;
        let answered = (0..total)
            .filter(|_| {
                let ic50 = (rng.random_range(3f64.ln()..3000f64.ln())).exp();
                let (hill, lower) = (rng.random_range(0.7..1.5), rng.random_range(-5.0..10.0));
                fit_logistic_projected(&curve(&dilution, ic50, hill, lower, 100.0, 3.0, &mut rng)).is_some()
            })
            .count();
        assert!(answered * 1000 >= total * 995, "kernel answered {answered} of {total}");
    }

    /// The leverages the kernel hands the outlier rule are the ones the
    /// rule computes itself from the model's gradient and the covariance,
    /// gᵀ(C/s²)g, on curves of every shape it answers (with and without a
    /// zero-dose well).
    #[test]
    fn leverages_are_the_models() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(29);
        let mut conc: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        let mut checked = 0;
        for k in 0..200 {
            if k == 100 {
                conc[9] = 0.0;
            }
            let ic50 = (rng.random_range(1f64.ln()..10000f64.ln())).exp();
            let (hill, lower) = (rng.random_range(0.4..3.0), rng.random_range(-5.0..30.0));
            let data = curve(&conc, ic50, hill, lower, 100.0, 4.0, &mut rng);
            let Some(fit) = fit_logistic_projected(&data) else { continue };
            let (leverage, cov) = (fit.leverage.as_ref().unwrap(), fit.covariance.as_ref().unwrap());
            let s2 = fit.sse / fit.df as f64;
            let mut g = [0.0; 4];
            for (i, x) in data.x.iter().enumerate() {
                Logistic.gradient(&fit.theta, x, &mut g);
                let q: f64 =
                    (0..4).flat_map(|a| (0..4).map(move |b| (a, b))).map(|(a, b)| g[a] * cov[(a, b)] * g[b]).sum();
                let h = q / s2;
                assert!(
                    (leverage[i] - h).abs() <= 1e-10 * h.abs().max(1e-3),
                    "well {i}: kernel {} model {h}",
                    leverage[i]
                );
            }
            // Leverages of a four-parameter fit sum to four: the trace of the hat matrix of a
            // linearised fit is its number of parameters (Cook & Weisberg 1982, ch. 2).
            let trace: f64 = leverage.iter().sum();
            assert!((trace - 4.0).abs() < 1e-8, "sum of leverages {trace}");
            checked += 1;
        }
        assert!(checked >= 150, "the kernel answered only {checked} of 200");
    }

    /// The start grid's one-pass SSE agrees with the exact projection to
    /// 1e-9 of the SSE on raw counts and % activity, and where s barely
    /// varies over the wells (a transition far outside the range, where the
    /// one-pass difference would cancel) it is the exact projection's value.
    #[test]
    fn grid_sse_is_the_projected_sse() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(5);
        let conc: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        for scale in [1.0, 1e7] {
            for _ in 0..50 {
                let data = curve(&conc, 100.0, 1.0, 0.0, 100.0 * scale, 3.0 * scale, &mut rng);
                let doses = Doses::<MAX_POINTS>::of(&data);
                let wells = Wells::new(&doses, &data).expect("finite responses");
                let mean = data.y.iter().sum::<f64>() / conc.len() as f64;
                let centred: Vec<f64> = data.y.iter().map(|y| y - mean).collect();
                let total: f64 = centred.iter().map(|c| c * c).sum();
                let mut s = vec![0.0; conc.len()];
                for (a, h) in [(rng.random_range(-1.0..10.0), rng.random_range(0.3..3.0)), (25.0, 1.0)] {
                    wells.fractions(a, h, &mut s);
                    let exact = wells.project(&s).map_or(f64::INFINITY, |l| l.sse);
                    assert!(exact.is_finite());
                    let one_pass = wells.grid_sse(&s, &centred, total);
                    assert!((one_pass - exact).abs() <= 1e-9 * exact, "a {a} h {h}: {one_pass} vs {exact}");
                }
            }
        }
    }

    /// The kernel's profile interval of IC50 against the engine's
    /// (`fit::intervals::profile`) on steep curves — the ones every run
    /// profiles — in % activity and raw counts, with IC50 inside the range
    /// and near its ends (where a side can be unbounded): both ends agree to
    /// 1e-6, including which are unbounded, wherever the kernel answers.
    #[test]
    fn profile_agrees_with_the_engines() {
        use crate::fit::intervals::profile;
        let mut rng = rand::rngs::StdRng::seed_from_u64(11);
        let dilution: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        let (mut answered, mut total) = (0, 0);
        for scale in [1.0, 1e6] {
            for _ in 0..40 {
                let ic50 = (rng.random_range(0.3f64.ln()..20000f64.ln())).exp();
                let hill = rng.random_range(2.0..6.0);
                let data = curve(&dilution, ic50, hill, 0.0, 100.0 * scale, 3.0 * scale, &mut rng);
                let Some(fit) = fit_logistic_projected(&data) else { continue };
                if fit.theta[1] < 0.0 {
                    continue;
                }
                total += 1;
                let Some(kernel) = profile_ic50(&data, &fit, 0.95) else { continue };
                answered += 1;
                let engine = profile(&Logistic, &data, &fit, 0, 0.95, &crate::analysis::ic50::screening_settings());
                for (k, e) in [(kernel.low, engine.low), (kernel.high, engine.high)] {
                    match (k, e) {
                        (Bound::At(k), Bound::At(e)) => {
                            assert!((k - e).abs() <= 1e-6 * e, "kernel {kernel:?} engine {engine:?}")
                        }
                        (k, e) => assert_eq!(k, e, "kernel {kernel:?} engine {engine:?}"),
                    }
                }
            }
        }
        // Where a held IC50 makes the best curve a step between two
        // concentrations (h past 100) the kernel leaves the profile to the
        // engine: about half of these very steep test curves.
        assert!(total >= 50 && answered * 2 >= total, "kernel profiled {answered} of {total}");
    }

    /// The kernel's 4×4 covariance against the engine's
    /// (`covariance_of_information4`, nalgebra's Cholesky): on random
    /// positive definite matrices whose parameters differ in scale by up to
    /// 10¹⁰, on the information matrices of fitted curves, and on singular
    /// and indefinite ones (both decline), every entry agrees to 1e-12 of
    /// √(Cᵢᵢ·Cⱼⱼ).
    #[test]
    fn covariance4_is_the_engines() {
        use crate::fit::covariance_of_information4;
        use nalgebra::Matrix4;
        let mut rng = rand::rngs::StdRng::seed_from_u64(41);
        let agree = |upper: &[[f64; 4]; 4]| {
            let full = Matrix4::from_fn(|j, k| upper[j.min(k)][j.max(k)]);
            let (ours, engine) = (covariance4(upper, 3.0, 6), covariance_of_information4(&full, 3.0, 6));
            match (ours, engine) {
                (Some(c), Some(e)) => {
                    for j in 0..4 {
                        for k in 0..4 {
                            let size = (e[(j, j)] * e[(k, k)]).sqrt();
                            assert!((c[j][k] - e[(j, k)]).abs() <= 1e-12 * size, "{upper:?}: {j},{k}");
                        }
                    }
                    true
                }
                (None, None) => false,
                (c, e) => panic!("{upper:?}: kernel {c:?}, engine {e:?}"),
            }
        };
        let mut answered = 0;
        for _ in 0..2000 {
            // JᵀJ of a random 10×4 Jacobian with columns of very different scale.
            let scale: [f64; 4] = std::array::from_fn(|_| 10f64.powf(rng.random_range(-5.0..5.0)));
            let rows: Vec<[f64; 4]> =
                (0..10).map(|_| std::array::from_fn(|k| scale[k] * rng.random_range(-1.0..1.0))).collect();
            let upper: [[f64; 4]; 4] =
                std::array::from_fn(|j| std::array::from_fn(|k| rows.iter().map(|r| r[j] * r[k]).sum()));
            answered += agree(&upper) as usize;
        }
        assert_eq!(answered, 2000);
        let dilution: Vec<f64> = (0..10).map(|k| 10000.0 / 3f64.powi(k)).collect();
        for scale in [1.0, 1e6] {
            for _ in 0..100 {
                let ic50 = (rng.random_range(1f64.ln()..10000f64.ln())).exp();
                let data =
                    curve(&dilution, ic50, rng.random_range(0.5..3.0), 0.0, 100.0 * scale, 3.0 * scale, &mut rng);
                let Some(fit) = fit_logistic_projected(&data) else { continue };
                let mut upper = [[0.0; 4]; 4];
                let mut g = [0.0; 4];
                for x in &data.x {
                    Logistic.gradient(&fit.theta, x, &mut g);
                    for j in 0..4 {
                        for k in j..4 {
                            upper[j][k] += g[j] * g[k];
                        }
                    }
                }
                assert!(agree(&upper));
            }
        }
        // Singular (two equal columns) and indefinite.
        let singular = [[1.0, 1.0, 0.5, 0.2], [0.0, 1.0, 0.5, 0.2], [0.0, 0.0, 2.0, 0.1], [0.0, 0.0, 0.0, 3.0]];
        let indefinite = [[1.0, 2.0, 0.0, 0.0], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]];
        assert!(!agree(&singular) && !agree(&indefinite));
    }

    /// A flat curve has no interior optimum: the kernel declines.
    #[test]
    fn declines_a_flat_curve() {
        let x: Vec<Dose> = (0..10).map(|k| Dose::new(10000.0 / 3f64.powi(k))).collect();
        let y = vec![100.0, 101.0, 99.0, 100.5, 99.5, 100.2, 99.8, 100.1, 99.9, 100.0];
        let data = Data::unweighted(x, y);
        if let Some(f) = fit_logistic_projected(&data) {
            // If it answers, it must be the engine's answer.
            let e = reference(&data);
            assert!((f.sse - e.sse).abs() <= 1e-8 * e.sse.max(1e-300));
        }
    }
}
