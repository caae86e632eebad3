//! Small statistics used to judge fits: the runs test on residual signs, AICc
//! and Akaike weights, and the extra-sum-of-squares F test.

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, FisherSnedecor};
use statrs::function::factorial::ln_binomial;
use statrs::function::gamma::ln_gamma;
use statrs::prec::F64_PREC;
use std::sync::atomic::{AtomicU64, Ordering};

/// Result of the Wald–Wolfowitz runs test on the signs of the residuals.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RunsTest {
    /// Number of runs (maximal blocks of equal sign) observed.
    pub runs: usize,
    /// Number of positive residuals.
    pub positive: usize,
    /// Number of negative residuals.
    pub negative: usize,
    /// P(R ≤ observed runs) under random signs: small when the residuals
    /// cluster, the mark of a systematic misfit. Exact, from the
    /// permutation distribution (Wald & Wolfowitz, Ann. Math. Stat. 11,
    /// 147–162, 1940; Swed & Eisenhart, Ann. Math. Stat. 14, 66–87, 1943).
    pub p_too_few: f64,
}

/// Runs test on residuals in the order given (sort by the independent
/// variable first). Zero residuals are skipped; `None` if either sign is absent.
pub fn runs_test(residuals: &[f64]) -> Option<RunsTest> {
    let signs: Vec<bool> = residuals.iter().filter(|r| **r != 0.0 && r.is_finite()).map(|r| *r > 0.0).collect();
    let positive = signs.iter().filter(|s| **s).count();
    let negative = signs.len() - positive;
    if positive == 0 || negative == 0 {
        return None;
    }
    let runs = 1 + signs.windows(2).filter(|w| w[0] != w[1]).count();
    let p_too_few = (2..=runs).map(|r| runs_probability(r, positive, negative)).sum::<f64>().min(1.0);
    Some(RunsTest { runs, positive, negative, p_too_few })
}

/// P(R = r) for n1 and n2 signs in random order.
fn runs_probability(r: usize, n1: usize, n2: usize) -> f64 {
    let ln_total = ln_binomial((n1 + n2) as u64, n1 as u64);
    let ln_c = |n: usize, k: usize| -> Option<f64> { if k > n { None } else { Some(ln_binomial(n as u64, k as u64)) } };
    let term = |a: Option<f64>, b: Option<f64>| a.zip(b).map_or(0.0, |(a, b)| (a + b - ln_total).exp());
    let k = r / 2;
    if r.is_multiple_of(2) {
        2.0 * term(ln_c(n1 - 1, k - 1), ln_c(n2 - 1, k - 1))
    } else {
        term(ln_c(n1 - 1, k), ln_c(n2 - 1, k - 1)) + term(ln_c(n1 - 1, k - 1), ln_c(n2 - 1, k))
    }
}

/// Corrected Akaike information criterion for least squares,
/// AICc = n·ln(SSE/n) + 2K + 2K(K+1)/(n−K−1), K = fitted parameters + 1
/// (the +1 is the residual variance; Burnham & Anderson, *Model Selection and
/// Multimodel Inference*, 2nd ed., 2002, §2.4). `None` when n ≤ K + 1.
pub fn aicc(n: usize, fitted_parameters: usize, sse: f64) -> Option<f64> {
    let k = fitted_parameters + 1;
    if n <= k + 1 || sse.is_nan() || sse <= 0.0 {
        return None;
    }
    let (n, k) = (n as f64, k as f64);
    Some(n * (sse / n).ln() + 2.0 * k + 2.0 * k * (k + 1.0) / (n - k - 1.0))
}

/// Akaike weights exp(−Δi/2)/Σ exp(−Δj/2); models without an AICc get weight 0.
pub fn akaike_weights(aicc: &[Option<f64>]) -> Vec<f64> {
    let best = aicc.iter().flatten().cloned().fold(f64::INFINITY, f64::min);
    let raw: Vec<f64> = aicc.iter().map(|a| a.map_or(0.0, |a| (-(a - best) / 2.0).exp())).collect();
    let total: f64 = raw.iter().sum();
    raw.iter().map(|r| if total > 0.0 { r / total } else { 0.0 }).collect()
}

/// Extra-sum-of-squares F test of a simpler model nested in a fuller one:
/// F = ((SSE₁ − SSE₂)/(df₁ − df₂)) / (SSE₂/df₂) (Bates & Watts 1988, §3.10;
/// Seber & Wild 1989, §5.3). Returns (F, p).
pub fn extra_sum_of_squares(sse_simple: f64, df_simple: usize, sse_full: f64, df_full: usize) -> Option<(f64, f64)> {
    if df_simple <= df_full || df_full == 0 || sse_full.is_nan() || sse_full <= 0.0 {
        return None;
    }
    let d1 = (df_simple - df_full) as f64;
    let d2 = df_full as f64;
    let f = ((sse_simple - sse_full).max(0.0) / d1) / (sse_full / d2);
    Some((f, f_sf(df_simple - df_full, df_full, f)?))
}

/// P(F > f) for F(d1, d2): statrs' `FisherSnedecor::sf`, which is the
/// regularized incomplete beta function I_x(d2/2, d1/2) at
/// x = 1 − d1·f/(d1·f + d2), to the bit — but with the complete beta
/// function's part of it, lnΓ(a + b) − lnΓ(a) − lnΓ(b), looked up instead of
/// computed: it depends on the degrees of freedom only, and its three
/// log-gammas were half the cost of the test that `ic50` runs on every curve.
/// Anything but an ordinary argument (0 < x < 1, not within statrs' few ulps
/// of 1) goes to statrs itself.
fn f_sf(d1: usize, d2: usize, f: f64) -> Option<f64> {
    let dist = FisherSnedecor::new(d1 as f64, d2 as f64).ok()?;
    let (fd1, fd2) = (d1 as f64, d2 as f64);
    if !(f >= 0.0 && f.is_finite()) {
        return Some(dist.sf(f));
    }
    let x = 1. - ((fd1 * f) / (fd1 * f + fd2));
    let (a, b) = (fd2 / 2.0, fd1 / 2.0);
    // statrs takes x within 1e-15 (or 5 ulps) of 1 as 1; anything that near is left to it.
    if !(x > 0.0 && x < 1.0 - 1e-14) {
        return Some(dist.sf(f));
    }
    Some(beta_reg_from(a, b, x, ln_beta_part(d1, d2, a, b)))
}

/// lnΓ(a + b) − lnΓ(a) − lnΓ(b) for a = d2/2, b = d1/2, in statrs' order of
/// operations; remembered for small degrees of freedom (the bits of the
/// answer, `UNSET` until first asked for).
fn ln_beta_part(d1: usize, d2: usize, a: f64, b: f64) -> f64 {
    const UNSET: u64 = u64::MAX;
    const D1: usize = 8;
    const D2: usize = 128;
    static KNOWN: [[AtomicU64; D2]; D1] = [const { [const { AtomicU64::new(UNSET) }; D2] }; D1];
    let compute = || ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b);
    let Some(slot) = KNOWN.get(d1).and_then(|row| row.get(d2)) else {
        return compute();
    };
    match slot.load(Ordering::Relaxed) {
        UNSET => {
            let v = compute();
            slot.store(v.to_bits(), Ordering::Relaxed);
            v
        }
        bits => f64::from_bits(bits),
    }
}

/// statrs' `checked_beta_reg(a, b, x)` (the continued fraction of Numerical
/// Recipes §6.4, as statrs 0.19 writes it, operation for operation) for
/// 0 < x < 1 not at 1, with `ln_beta_part` = lnΓ(a + b) − lnΓ(a) − lnΓ(b)
/// given. A test holds it to statrs' own to the bit. Adapted from statrs
/// 0.19 (`function::beta`), MIT licence, Copyright (c) 2016 Michael Ma.
fn beta_reg_from(a: f64, b: f64, x: f64, ln_beta_part: f64) -> f64 {
    let bt = (ln_beta_part + a * x.ln() + b * (1.0 - x).ln()).exp();
    let symm_transform = x >= (a + 1.0) / (a + b + 2.0);
    let eps = F64_PREC;
    let fpmin = f64::MIN_POSITIVE / eps;

    let mut a = a;
    let mut b = b;
    let mut x = x;
    if symm_transform {
        let swap = a;
        x = 1.0 - x;
        a = b;
        b = swap;
    }

    let qab = a + b;
    let qap = a + 1.0;
    let qam = a - 1.0;
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;

    if d.abs() < fpmin {
        d = fpmin;
    }
    d = 1.0 / d;
    let mut h = d;

    // One step of the modified Lentz recurrence for the term `aa`: the new
    // (c, 1/d), each kept away from zero.
    let lentz = |aa: f64, c: f64, d: f64| {
        let mut d = 1.0 + aa * d;
        if d.abs() < fpmin {
            d = fpmin;
        }
        let mut c = 1.0 + aa / c;
        if c.abs() < fpmin {
            c = fpmin;
        }
        (c, 1.0 / d)
    };
    for m in 1..141 {
        let m = f64::from(m);
        let m2 = m * 2.0;
        (c, d) = lentz(m * (b - m) * x / ((qam + m2) * (a + m2)), c, d);
        h = h * d * c;
        (c, d) = lentz(-(a + m) * (qab + m) * x / ((a + m2) * (qap + m2)), c, d);
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() <= eps {
            break;
        }
    }
    if symm_transform { 1.0 - bt * h / a } else { bt * h / a }
}

/// Lack-of-fit F test against pure error from replicate groups
/// (Draper & Smith, *Applied Regression Analysis*, 3rd ed., 1998, §2.1).
/// `groups[i]` labels which replicate set observation i belongs to.
/// Returns (F, p) or `None` without replicates or spare degrees of freedom.
pub fn lack_of_fit(residuals: &[f64], weights: &[f64], groups: &[usize], n_params: usize) -> Option<(f64, f64)> {
    let levels = groups.iter().max().map_or(0, |m| m + 1);
    let mut count = vec![0usize; levels];
    let mut wsum = vec![0.0; levels];
    let mut wres = vec![0.0; levels];
    for ((r, w), g) in residuals.iter().zip(weights).zip(groups) {
        count[*g] += 1;
        wsum[*g] += w;
        wres[*g] += w * r;
    }
    let pure: f64 = residuals
        .iter()
        .zip(weights)
        .zip(groups)
        .map(|((r, w), g)| {
            let d = r - wres[*g] / wsum[*g];
            w * d * d
        })
        .sum();
    let total: f64 = residuals.iter().zip(weights).map(|(r, w)| w * r * r).sum();
    let distinct = count.iter().filter(|c| **c > 0).count();
    let df_pure = residuals.len().checked_sub(distinct)?;
    let df_lack = distinct.checked_sub(n_params)?;
    if df_pure == 0 || df_lack == 0 || pure.is_nan() || pure <= 0.0 {
        return None;
    }
    let f = ((total - pure).max(0.0) / df_lack as f64) / (pure / df_pure as f64);
    let dist = FisherSnedecor::new(df_lack as f64, df_pure as f64).ok()?;
    Some((f, dist.sf(f)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Brute force over all arrangements of n1 pluses and n2 minuses: the
    /// exact distribution is then just counting, independent of the formula.
    fn brute_force_p(runs: usize, n1: usize, n2: usize) -> f64 {
        let n = n1 + n2;
        let (mut hits, mut total) = (0u64, 0u64);
        for mask in 0u32..(1 << n) {
            if mask.count_ones() as usize != n1 {
                continue;
            }
            total += 1;
            let r = 1 + (1..n).filter(|i| ((mask >> i) & 1) != ((mask >> (i - 1)) & 1)).count();
            if r <= runs {
                hits += 1;
            }
        }
        hits as f64 / total as f64
    }

    #[test]
    fn runs_test_matches_enumeration() {
        for (n1, n2) in [(3, 4), (5, 5), (6, 3), (7, 8)] {
            for runs in 2..=(n1 + n2) {
                let exact = (2..=runs).map(|r| runs_probability(r, n1, n2)).sum::<f64>();
                assert_relative_eq!(exact.min(1.0), brute_force_p(runs, n1, n2), max_relative = 1e-9);
            }
        }
    }

    #[test]
    fn runs_test_counts_runs() {
        let t = runs_test(&[1.0, 2.0, -1.0, -1.0, 3.0, 0.0, -2.0]).unwrap();
        assert_eq!((t.runs, t.positive, t.negative), (4, 3, 3));
        assert!(runs_test(&[1.0, 2.0]).is_none());
    }

    /// The F test's p with the beta function's constant looked up is
    /// statrs' own to the bit, over the degrees of freedom `ic50` and `mode`
    /// meet and beyond the table, and F from 0 to far in the tail.
    #[test]
    fn f_test_p_is_statrs_to_the_bit() {
        for d1 in [1, 2, 3, 4, 7, 8, 9] {
            for d2 in [1, 2, 3, 5, 6, 17, 60, 127, 128, 300] {
                let dist = FisherSnedecor::new(d1 as f64, d2 as f64).unwrap();
                for f in [0.0, 1e-300, 1e-9, 0.01, 0.3, 1.0, 2.5, 7.7, 31.0, 1e3, 1e6, 1e12, 1e17, 1e300] {
                    for f in [f, f * 1.000_000_1, f * 0.999_999_9] {
                        assert_eq!(f_sf(d1, d2, f).unwrap().to_bits(), dist.sf(f).to_bits(), "d1 {d1} d2 {d2} f {f}");
                    }
                }
                // Twice: the second call reads the table.
                assert_eq!(f_sf(d1, d2, 4.2).unwrap().to_bits(), dist.sf(4.2).to_bits());
            }
        }
        assert_eq!(f_sf(3, 6, f64::INFINITY), Some(0.0));
    }

    #[test]
    fn akaike_weights_sum_to_one() {
        let w = akaike_weights(&[Some(10.0), Some(12.0), None]);
        assert_relative_eq!(w.iter().sum::<f64>(), 1.0, epsilon = 1e-12);
        // Burnham & Anderson (2002): weight ratio exp(Δ/2) for Δ = 2.
        assert_relative_eq!(w[0] / w[1], 1f64.exp(), max_relative = 1e-12);
        assert!(w[2].abs() < 1e-300);
    }
}
