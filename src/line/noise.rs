//! Bit errors from noise.
//!
//! With Gaussian noise of rms σ at a receiver whose worst-case margin is m
//! (the smallest distance between the signal it gets and its thresholds),
//! one line bit is received wrong with probability
//!
//! ```text
//! BER = Q(m / σ),   Q(x) = ½·erfc(x / √2)
//! ```
//!
//! (Q the upper tail of the standard normal distribution), and a frame of n
//! line bits arrives intact with probability (1 − BER)ⁿ. A margin of zero or
//! less gives BER ≥ ½: the receiver cannot tell the levels apart, and the
//! budget says so. `line.bit_error_rate` sets the BER directly instead.

use crate::spec::Spec;

use super::figures::margin_of;
use super::LineModel;

/// The standard normal upper tail Q(x) = P(Z > x), to about 1e-15 relative
/// (the complementary error function of `libm`, a port of the C library's).
pub fn q(x: f64) -> f64 {
    0.5 * libm::erfc(x / std::f64::consts::SQRT_2)
}

/// Each receiver's bit error probability: `line.bit_error_rate` if given,
/// else Q(margin / σ) from its noise, else 0 (no noise modelled).
pub fn bit_error_rates(spec: &Spec, line: &LineModel) -> Vec<f64> {
    (0..spec.nodes.len())
        .map(|i| match (spec.line.bit_error_rate, spec.nodes[i].noise_v) {
            (Some(p), _) => p,
            (None, Some(sigma)) => q(margin_of(spec, line, i) / sigma),
            (None, None) => 0.0,
        })
        .collect()
}

/// Does the scenario model bit errors at all?
pub fn modelled(spec: &Spec) -> bool {
    spec.line.bit_error_rate.is_some() || spec.nodes.iter().any(|n| n.noise_v.is_some())
}

/// Probability that a frame of `bits` line bits arrives intact at a
/// receiver with bit error probability `ber`: (1 − ber)^bits.
pub fn survival(ber: f64, bits: u64) -> f64 {
    (bits as f64 * (-ber).ln_1p()).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Q(x) against the normal upper tail computed by mpmath 1.3.0
    /// (`mpmath.ncdf(-x)` at 30 digits), a reference library from the
    /// Python package registry, and against statrs' normal distribution.
    #[test]
    #[allow(clippy::excessive_precision)] // the reference digits as printed
    fn q_matches_reference_normal_tails() {
        let reference = [
            (0.0, 0.5),
            (1.0, 0.158655253931457051414767454368),
            (2.0, 0.0227501319481792072002826371665),
            (3.0, 0.0013498980316300945266518147676),
            (4.5, 3.39767312473006040168744919087e-6),
            (6.0, 9.86587645037698140700864132398e-10),
            (7.0, 1.27981254388583500438362369078e-12),
            (-1.0, 0.841344746068542948585232545632),
        ];
        let normal = statrs::distribution::Normal::new(0.0, 1.0).unwrap();
        for (x, want) in reference {
            let got = q(x);
            assert!(((got - want) / want).abs() < 1e-9, "Q({x}) = {got}, reference {want}");
            let other = statrs::distribution::ContinuousCDF::sf(&normal, x);
            assert!(((got - other) / other).abs() < 1e-9, "Q({x}) = {got}, statrs {other}");
        }
    }

    #[test]
    fn survival_is_the_binomial_zero_term() {
        assert_eq!(survival(0.0, 1000), 1.0);
        let p: f64 = 1e-4;
        let want = (1.0 - p).powi(100);
        assert!(((survival(p, 100) - want) / want).abs() < 1e-13);
        assert!((survival(0.5, 1) - 0.5).abs() < 1e-15);
    }
}
