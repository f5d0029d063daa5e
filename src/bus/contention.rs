//! Where and by how much two drivers' occupancies overlap on the line.
//!
//! Driver j occupies the line at its own position x_j during [a_j, b_j), and
//! driver k at x_k during [a_k, b_k). A point x sees them shifted by the wire
//! delays d_j(x) = τ·|x − x_j| and d_k(x) = τ·|x − x_k|, so their overlap at x is
//!
//! ```text
//! f(x) = min(b_j + d_j, b_k + d_k) − max(a_j + d_j, a_k + d_k)
//!      = min(b_j, b_k − u) − max(a_j, a_k − u),    u = d_j(x) − d_k(x)
//! ```
//!
//! f depends on x only through u, which takes every value in [−D, D]
//! (D = τ·|x_j − x_k|): u = −D at x_j and beyond it, u = +D at x_k and beyond
//! it, linear in between. f is concave in u (a minimum of decreasing terms
//! minus a maximum of decreasing terms), so its maximum lies at an end of
//! [−D, D] or at a kink, u = b_k − b_j or u = a_k − a_j. Four evaluations
//! give the exact worst overlap and its position: no spatial grid.

/// The worst overlap of two occupancies.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Overlap {
    /// Overlap at the worst position (ps, > 0).
    pub overlap_ps: u64,
    /// When the overlap starts there (ps).
    pub start_ps: u64,
    /// The worst position (m).
    pub position_m: f64,
}

/// One driver's occupancy at its own position.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    pub from: u64,
    pub to: u64,
    pub position_m: f64,
}

/// The worst overlap between `j` and `k`, `None` if they never overlap
/// anywhere on the line. `d` is the wire delay between the two drivers (ps).
pub fn worst_overlap(j: Span, k: Span, d: u64) -> Option<Overlap> {
    let (aj, bj, ak, bk) = (j.from as i128, j.to as i128, k.from as i128, k.to as i128);
    let d = d as i128;
    let f = |u: i128| (bj.min(bk - u)) - (aj.max(ak - u));
    // Preference order for ties: the later driver's position first (where a
    // hand-over overlap is largest), then the earlier one's, then the kinks.
    let candidates = [d, -d, (bk - bj).clamp(-d, d), (ak - aj).clamp(-d, d)];
    let mut best_u = candidates[0];
    let mut best = f(best_u);
    for &u in &candidates[1..] {
        let v = f(u);
        if v > best {
            best = v;
            best_u = u;
        }
    }
    if best <= 0 {
        return None;
    }
    // Between the drivers d_j + d_k = D and d_j − d_k = u.
    let dj = (best_u + d) / 2;
    let dk = d - dj;
    let start = (aj + dj).max(ak + dk);
    let position_m = if d == 0 {
        k.position_m
    } else {
        j.position_m + (k.position_m - j.position_m) * ((best_u + d) as f64 / (2 * d) as f64)
    };
    Some(Overlap { overlap_ps: best as u64, start_ps: start as u64, position_m })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn span(from: u64, to: u64, x: f64) -> Span {
        Span { from, to, position_m: x }
    }

    #[test]
    fn hand_over_overlap_is_worst_at_the_new_driver() {
        // j releases at 1000 (output off), k enables at 1000 + d − 30, d = 500:
        // j's tail reaches x_k at 1500, k starts at 1470: 30 ps overlap at x_k.
        let o = worst_overlap(span(0, 1000, 0.0), span(1470, 3000, 0.1), 500).unwrap();
        assert_eq!(o.overlap_ps, 30);
        assert_eq!(o.position_m, 0.1);
        assert_eq!(o.start_ps, 1470);
        // Exactly at the boundary there is no overlap.
        assert_eq!(worst_overlap(span(0, 1000, 0.0), span(1500, 3000, 0.1), 500), None);
    }

    #[test]
    fn simultaneous_starts_overlap_fully_between() {
        let o = worst_overlap(span(0, 1000, 0.0), span(0, 1000, 1.0), 400).unwrap();
        assert_eq!(o.overlap_ps, 1000);
    }

    proptest! {
        // The hand-over slack a_k − b_j − D (see `stats::slack`) is negative
        // exactly when the two occupancies overlap somewhere on the line.
        #[test]
        fn slack_is_negative_exactly_when_they_overlap(aj in 0u64..5000, lj in 1u64..3000, after in 0u64..6000,
                                                       lk in 1u64..3000, d in 0u64..2000) {
            let ak = aj + after;
            let slack = ak as i64 - (aj + lj) as i64 - d as i64;
            let overlap = worst_overlap(span(aj, aj + lj, 0.0), span(ak, ak + lk, 1.0), d);
            prop_assert_eq!(slack < 0, overlap.is_some(), "slack {} overlap {:?}", slack, overlap);
        }

        // The analytic maximum equals a brute-force scan over positions.
        #[test]
        fn matches_brute_force(aj in 0u64..5000, lj in 1u64..3000, ak in 0u64..5000,
                               lk in 1u64..3000, d in 0u64..2000) {
            let j = span(aj, aj + lj, 0.0);
            let k = span(ak, ak + lk, 1.0);
            let mut brute: i64 = 0;
            for step in 0..=(2 * d) {
                // Positions between the drivers, plus the ends (beyond them u is constant).
                let dj = step as i64 / 2;
                let dk = d as i64 - dj;
                let hi = ((aj + lj) as i64 + dj).min((ak + lk) as i64 + dk);
                let lo = (aj as i64 + dj).max(ak as i64 + dk);
                brute = brute.max(hi - lo);
            }
            let got = worst_overlap(j, k, d).map(|o| o.overlap_ps as i64).unwrap_or(0);
            // Integer halving in the scan can miss the exact kink by one picosecond.
            prop_assert!(got >= brute && got <= brute + 1, "got {} brute {}", got, brute);
        }
    }
}
