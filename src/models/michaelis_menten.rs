//! The Michaelis–Menten rate law v = Vmax·S/(Km + S) (Michaelis & Menten,
//! Biochem. Z. 49, 333–369, 1913; in the steady-state form of Briggs &
//! Haldane, Biochem. J. 19, 338–339, 1925).

use crate::fit::{Data, Model, Scale};

/// Michaelis–Menten with parameters `[vmax, km]`, both positive.
#[derive(Debug, Clone, Copy, Default)]
pub struct MichaelisMenten;

impl MichaelisMenten {
    /// Index of Vmax in the parameter vector.
    pub const VMAX: usize = 0;
    /// Index of Km in the parameter vector.
    pub const KM: usize = 1;
}

impl Model for MichaelisMenten {
    type Point = f64;

    fn names(&self) -> &[&'static str] {
        &["vmax", "km"]
    }

    fn scales(&self) -> &[Scale] {
        &[Scale::Log, Scale::Log]
    }

    fn value(&self, theta: &[f64], s: &f64) -> f64 {
        theta[0] * s / (theta[1] + s)
    }

    fn gradient(&self, theta: &[f64], s: &f64, grad: &mut [f64]) {
        let denom = theta[1] + s;
        grad[0] = s / denom;
        grad[1] = -theta[0] * s / (denom * denom);
    }

    /// A Hanes–Woolf line (S/v against S; slope 1/Vmax, intercept Km/Vmax),
    /// which is robust enough for a start, plus a spread of Km guesses across
    /// the tested range with Vmax from the largest rate.
    fn starts(&self, data: &Data<f64>) -> Vec<Vec<f64>> {
        let vmax_guess = data.y.iter().cloned().fold(f64::MIN, f64::max).abs().max(f64::MIN_POSITIVE) * 1.2;
        let (s_min, s_max) = crate::fit::span_of(&data.x);
        let mut starts = Vec::new();
        if let Some((vmax, km)) = hanes_woolf(data) {
            starts.push(vec![vmax, km]);
        }
        if s_min > 0.0 && s_max.is_finite() {
            let (lo, hi) = ((s_min / 3.0).ln(), (s_max * 3.0).ln());
            for k in 0..5 {
                let km = (lo + (hi - lo) * k as f64 / 4.0).exp();
                starts.push(vec![vmax_guess, km]);
            }
        }
        starts
    }
}

/// Vmax and Km from the straight line through (S, S/v), when it gives
/// positive values.
fn hanes_woolf(data: &Data<f64>) -> Option<(f64, f64)> {
    let pts: Vec<(f64, f64)> =
        data.x.iter().zip(&data.y).filter(|(_, v)| **v > 0.0).map(|(s, v)| (*s, s / v)).collect();
    if pts.len() < 2 {
        return None;
    }
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let (vmax, km) = (1.0 / slope, intercept / slope);
    (vmax > 0.0 && km > 0.0 && vmax.is_finite() && km.is_finite()).then_some((vmax, km))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn gradient_matches_central_differences() {
        let m = MichaelisMenten;
        let theta = [3.0, 0.7];
        let mut g = [0.0; 2];
        for s in [0.1, 1.0, 10.0] {
            m.gradient(&theta, &s, &mut g);
            for j in 0..2 {
                let h = 1e-6 * theta[j];
                let (mut up, mut dn) = (theta, theta);
                up[j] += h;
                dn[j] -= h;
                let numeric = (m.value(&up, &s) - m.value(&dn, &s)) / (2.0 * h);
                assert_relative_eq!(g[j], numeric, max_relative = 1e-7);
            }
        }
    }
}
