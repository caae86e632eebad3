//! A polynomial in one variable, c0 + c1·t + … + cd·t^d: the straight line
//! (d = 1) whose slope is an initial rate, and the quadratic (d = 2) that
//! tests the line for curvature.

use crate::fit::{Data, Model, Scale};

const NAMES: [&str; 3] = ["c0", "c1", "c2"];
const SCALES: [Scale; 3] = [Scale::Linear; 3];

/// A polynomial of degree 1 or 2 with coefficients `[c0, c1, (c2)]`.
#[derive(Debug, Clone, Copy)]
pub struct Polynomial {
    degree: usize,
}

impl Polynomial {
    /// The straight line c0 + c1·t.
    pub const LINE: Polynomial = Polynomial { degree: 1 };
    /// The parabola c0 + c1·t + c2·t².
    pub const QUADRATIC: Polynomial = Polynomial { degree: 2 };
}

impl Model for Polynomial {
    type Point = f64;

    fn names(&self) -> &[&'static str] {
        &NAMES[..=self.degree]
    }

    fn scales(&self) -> &[Scale] {
        &SCALES[..=self.degree]
    }

    fn value(&self, theta: &[f64], t: &f64) -> f64 {
        theta.iter().rev().fold(0.0, |acc, c| acc * t + c)
    }

    fn gradient(&self, _theta: &[f64], t: &f64, grad: &mut [f64]) {
        let mut power = 1.0;
        for g in grad.iter_mut() {
            *g = power;
            power *= t;
        }
    }

    /// The problem is linear, so any start converges in one step; the chord
    /// from the first to the last point is a sensible one.
    fn starts(&self, data: &Data<f64>) -> Vec<Vec<f64>> {
        let (first, last) = (0, data.len().saturating_sub(1));
        let dt = data.x[last] - data.x[first];
        let slope = if dt != 0.0 { (data.y[last] - data.y[first]) / dt } else { 0.0 };
        let mut start = vec![data.y[first] - slope * data.x[first], slope];
        start.resize(self.degree + 1, 0.0);
        vec![start]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn evaluates_by_horner_and_differentiates_by_powers() {
        let q = Polynomial::QUADRATIC;
        assert_relative_eq!(q.value(&[1.0, 2.0, 3.0], &2.0), 1.0 + 4.0 + 12.0);
        let mut g = [0.0; 3];
        q.gradient(&[1.0, 2.0, 3.0], &2.0, &mut g);
        assert_relative_eq!(g[2], 4.0);
    }
}
