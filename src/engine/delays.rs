//! Delays a scheme or the engine draws: firmware latencies from their
//! distributions, and the cap that keeps every sum of times in range.

use rand::Rng;
use rand_distr::{Distribution, Exp, Normal};

use super::rng::Stream;
use crate::spec::Latency;
use crate::units::Picos;

/// The longest delay a scheme ever schedules: a draw beyond it would land
/// after the end of any run (runs last at most this long), so capping at it
/// changes no result and keeps every sum of times inside `u64` picoseconds.
pub const MAX_DELAY: Picos = crate::scenario::check::MAX_TIME;

/// A delay computed in wide arithmetic, capped at [`MAX_DELAY`].
pub fn capped_delay(ps: u128) -> Picos {
    Picos(ps.min(u128::from(MAX_DELAY.0)) as u64)
}

/// Does a latency draw from its stream? (A fixed one, or a normal one of
/// zero spread, does not: periods with it can repeat exactly.)
pub fn draws(latency: &Latency) -> bool {
    !matches!(*latency, Latency::Fixed(_) | Latency::Normal { sd: Picos(0), .. })
}

/// Draw a firmware latency. Normal draws are truncated at zero, and every
/// draw is capped at [`MAX_DELAY`].
pub fn sample_latency(latency: &Latency, rng: &mut Stream) -> Picos {
    draw(latency, rng).min(MAX_DELAY)
}

fn draw(latency: &Latency, rng: &mut Stream) -> Picos {
    match *latency {
        Latency::Fixed(t) => t,
        Latency::Uniform { min, max } => Picos(rng.random_range(min.0..=max.0)),
        Latency::Normal { mean, sd } => {
            if sd.0 == 0 {
                return mean;
            }
            let n = Normal::new(mean.0 as f64, sd.0 as f64).expect("sd validated ≥ 0");
            Picos(n.sample(rng).max(0.0).round() as u64)
        }
        Latency::Exponential { mean } => {
            let e = Exp::new(1.0 / mean.0 as f64).expect("mean validated > 0");
            let x: f64 = e.sample(rng);
            Picos(x.round() as u64)
        }
    }
}
