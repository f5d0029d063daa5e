//! The idle gaps between the characters of one UART frame.
//!
//! A frame of n characters has n − 1 gaps. A fixed gap is the same every
//! time. A random gap is drawn per character, from a generator seeded per
//! frame by the sender's own `chargap` stream: the engine draws the seed
//! when the frame is queued, and anyone holding the seed (the waveform
//! writer, from the trace) draws the very same gaps again.

use rand::SeedableRng;

use super::rng::Stream;
use crate::spec::CharGap;

/// The gaps of one frame, in order (ps).
pub struct Gaps<'a> {
    gap: &'a CharGap,
    rng: Option<Stream>,
    left: u64,
}

impl<'a> Gaps<'a> {
    /// The `chars − 1` gaps of a frame of `chars` characters whose seed is `seed`.
    pub fn new(gap: &'a CharGap, seed: u64, chars: u64) -> Self {
        let rng = matches!(gap, CharGap::Random { .. }).then(|| Stream::seed_from_u64(seed));
        Gaps { gap, rng, left: chars.saturating_sub(1) }
    }
}

impl Iterator for Gaps<'_> {
    type Item = u64;

    fn next(&mut self) -> Option<u64> {
        if self.left == 0 {
            return None;
        }
        self.left -= 1;
        Some(match (self.gap, &mut self.rng) {
            (CharGap::None, _) => 0,
            (CharGap::Fixed(t), _) => t.0,
            (CharGap::Random { latency, cap }, Some(rng)) => super::delays::sample_latency(latency, rng).min(*cap).0,
            (CharGap::Random { .. }, None) => unreachable!("a random gap has its generator"),
        })
    }
}

/// The total and the longest gap of a frame.
pub fn sum_and_max(gap: &CharGap, seed: u64, chars: u64) -> (u64, u64) {
    match gap {
        CharGap::None => (0, 0),
        CharGap::Fixed(t) => (t.0 * chars.saturating_sub(1), if chars > 1 { t.0 } else { 0 }),
        CharGap::Random { .. } => Gaps::new(gap, seed, chars).fold((0, 0), |(s, m), g| (s + g, m.max(g))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::Latency;
    use crate::units::Picos;

    #[test]
    fn fixed_gaps_sum_exactly() {
        let g = CharGap::Fixed(Picos(1_000));
        assert_eq!(sum_and_max(&g, 0, 5), (4_000, 1_000));
        assert_eq!(sum_and_max(&g, 0, 1), (0, 0));
        assert_eq!(Gaps::new(&g, 0, 3).collect::<Vec<_>>(), [1_000, 1_000]);
    }

    #[test]
    fn random_gaps_repeat_from_their_seed_and_respect_the_cap() {
        let g = CharGap::Random { latency: Latency::Uniform { min: Picos(0), max: Picos(10_000) }, cap: Picos(10_000) };
        let a: Vec<u64> = Gaps::new(&g, 42, 50).collect();
        let b: Vec<u64> = Gaps::new(&g, 42, 50).collect();
        assert_eq!(a, b);
        assert_eq!(a.len(), 49);
        assert!(a.iter().all(|&x| x <= 10_000));
        assert_eq!(sum_and_max(&g, 42, 50), (a.iter().sum(), *a.iter().max().unwrap()));
        assert_ne!(a, Gaps::new(&g, 43, 50).collect::<Vec<_>>());
    }
}
