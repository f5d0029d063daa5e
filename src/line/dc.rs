//! The settled (DC) line: a resistor ladder along the pair.
//!
//! At DC the line is a ladder. Between neighbouring points x_k < x_{k+1} the
//! differential loop has the resistance of both conductors, 2·r·(x_{k+1} − x_k)
//! (r: resistance per metre of one conductor). At each point, shunt
//! conductances join the two conductors: the terminations at the ends,
//! receiver inputs at the nodes and the bias network where it sits. Sources
//! are currents injected at a point (a Norton source). Nodal analysis gives a
//! tridiagonal system, solved exactly in O(points) (the Thomas algorithm; the
//! matrix is diagonally dominant, so no pivoting is needed). With r = 0 the
//! whole ladder is one node.

/// A ladder of shunt conductances joined by series conductances.
#[derive(Clone, Debug, PartialEq)]
pub struct Ladder {
    /// Distinct positions, increasing (m).
    xs: Vec<f64>,
    /// Shunt conductance at each point (S).
    shunt: Vec<f64>,
    /// Series conductance between point k and k+1 (S); empty when r = 0
    /// (the points are then one node).
    series: Vec<f64>,
}

/// Positions closer than this are one point (1 nm).
const SAME_POINT_M: f64 = 1e-9;

impl Ladder {
    /// A ladder over `positions` (any order, repeats allowed) of a line with
    /// `ohm_per_m` per conductor; shunts are added with [`Ladder::add_shunt`].
    pub fn new(positions: &[f64], ohm_per_m: f64) -> Ladder {
        let mut xs: Vec<f64> = positions.to_vec();
        xs.sort_by(f64::total_cmp);
        xs.dedup_by(|a, b| (*a - *b).abs() <= SAME_POINT_M);
        let series = if ohm_per_m > 0.0 {
            xs.windows(2).map(|w| 1.0 / (2.0 * ohm_per_m * (w[1] - w[0]).max(SAME_POINT_M))).collect()
        } else {
            Vec::new()
        };
        let shunt = vec![0.0; xs.len()];
        Ladder { xs, shunt, series }
    }

    /// The point at (or nearest to) position `x`.
    pub fn point(&self, x: f64) -> usize {
        let k = self.xs.partition_point(|&p| p < x - SAME_POINT_M);
        if k == self.xs.len() || (k > 0 && (x - self.xs[k - 1]).abs() < (self.xs[k] - x).abs()) {
            k.saturating_sub(1).min(self.xs.len() - 1)
        } else {
            k
        }
    }

    pub fn positions(&self) -> &[f64] {
        &self.xs
    }

    /// Add a resistance `ohm` across the pair at point `k` (infinite: nothing).
    pub fn add_shunt(&mut self, k: usize, ohm: f64) {
        if ohm.is_finite() {
            self.shunt[k] += 1.0 / ohm;
        }
    }

    /// Total shunt conductance (S).
    pub fn total_shunt(&self) -> f64 {
        self.shunt.iter().sum()
    }

    /// Voltage at every point for a current `amps` injected at point `at`
    /// with the extra shunt `ohm` (a Norton source's own resistance) there.
    /// `None` when no DC path joins the conductors (an open line).
    pub fn solve_one(&self, at: usize, amps: f64, ohm: f64) -> Option<Vec<f64>> {
        let mut inject = vec![0.0; self.xs.len()];
        inject[at] = amps;
        let mut extra = vec![0.0; self.xs.len()];
        if ohm.is_finite() {
            extra[at] = 1.0 / ohm;
        }
        self.solve(&inject, &extra)
    }

    /// Voltages for currents `inject` with extra shunts `extra` (S) per point.
    fn solve(&self, inject: &[f64], extra: &[f64]) -> Option<Vec<f64>> {
        let n = self.xs.len();
        let g = |k: usize| self.shunt[k] + extra[k];
        let total: f64 = (0..n).map(g).sum();
        if total.is_nan() || total <= 0.0 {
            return None;
        }
        if self.series.is_empty() || n == 1 {
            let v = inject.iter().sum::<f64>() / total;
            return Some(vec![v; n]);
        }
        // Tridiagonal: a_k V_{k−1} + b_k V_k + c_k V_{k+1} = d_k.
        let mut c_prime = vec![0.0; n];
        let mut d_prime = vec![0.0; n];
        for k in 0..n {
            let left = if k > 0 { self.series[k - 1] } else { 0.0 };
            let right = if k + 1 < n { self.series[k] } else { 0.0 };
            let b = g(k) + left + right;
            let a = -left;
            let c = -right;
            let (cp_prev, dp_prev) = if k > 0 { (c_prime[k - 1], d_prime[k - 1]) } else { (0.0, 0.0) };
            let denom = b - a * cp_prev;
            c_prime[k] = c / denom;
            d_prime[k] = (inject[k] - a * dp_prev) / denom;
        }
        let mut v = vec![0.0; n];
        v[n - 1] = d_prime[n - 1];
        for k in (0..n - 1).rev() {
            v[k] = d_prime[k] - c_prime[k] * v[k + 1];
        }
        v.iter().all(|x| x.is_finite()).then_some(v)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn without_conductor_resistance_everything_is_one_node() {
        // 120 Ω ∥ 120 Ω ∥ 750 Ω (32 unit loads of 24 kΩ) = 55.56 Ω, by hand.
        let mut l = Ladder::new(&[0.0, 5.0, 10.0], 0.0);
        l.add_shunt(0, 120.0);
        l.add_shunt(2, 120.0);
        l.add_shunt(1, 750.0);
        let v = l.solve_one(1, 1.0, f64::INFINITY).unwrap();
        assert!(v.iter().all(|x| (x - 55.5556).abs() < 1e-3), "{v:?}");
    }

    #[test]
    fn a_resistive_line_divides_like_a_hand_calculation() {
        // 1 A into the near end of 100 m with 1 Ω/m per conductor (200 Ω loop)
        // and 100 Ω at each end: the near end sees 100 ∥ 300 = 75 Ω; the far
        // end gets 75 V · 100/300 = 25 V.
        let mut l = Ladder::new(&[0.0, 40.0, 100.0], 1.0);
        l.add_shunt(0, 100.0);
        l.add_shunt(2, 100.0);
        let v = l.solve_one(0, 1.0, f64::INFINITY).unwrap();
        assert!((v[0] - 75.0).abs() < 1e-9 && (v[2] - 25.0).abs() < 1e-9, "{v:?}");
        assert!((v[1] - (25.0 + 50.0 * 0.6)).abs() < 1e-9, "{v:?}");
        // An open line has no DC solution.
        assert!(Ladder::new(&[0.0, 1.0], 1.0).solve_one(0, 1.0, f64::INFINITY).is_none());
    }
}
