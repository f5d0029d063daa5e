//! Hand-over slack: how much room each hand-over of the line leaves.
//!
//! When driver R's occupancy follows driver P's, the slack is the smallest,
//! over every position x on the line, of (R's occupancy start arriving at x)
//! − (P's occupancy end arriving at x). With wire delays d_P(x), d_R(x) and
//! D = d(P, R), d_R(x) − d_P(x) takes its least value −D on P's side of R
//! (triangle inequality, equality at and beyond R), so
//!
//! ```text
//! slack = a_R − b_P − D
//! ```
//!
//! It is negative exactly when the two occupancies overlap somewhere on the
//! line (the bus checks that against its own overlap geometry, per hand-over).
//!
//! The smallest slack is exact; quantiles come from an HDR histogram of the
//! magnitudes (3 significant digits), rounded towards the smaller slack so a
//! quantile never shows more room than there is.

use std::collections::HashMap;

use hdrhistogram::Histogram;

/// Pairs tracked one by one; hand-overs between further pairs count only
/// in the totals (a bound on memory for schemes where any node follows any).
pub const MAX_PAIRS: usize = 4096;

/// Signed slacks (ps): exact count and minimum, histogram quantiles.
#[derive(Clone, Debug, Default)]
pub struct SlackStats {
    pub count: u64,
    pub min: Option<i64>,
    /// Hand-overs whose occupancies overlap somewhere (by the overlap geometry).
    pub contended: u64,
    negative: Option<Histogram<u64>>,
    positive: Option<Histogram<u64>>,
    negatives: u64,
}

fn histogram() -> Histogram<u64> {
    Histogram::new(3).expect("3 significant digits is a valid precision")
}

impl SlackStats {
    pub fn record(&mut self, slack: i64, contended: bool) {
        self.count += 1;
        self.min = Some(self.min.map_or(slack, |m| m.min(slack)));
        self.contended += u64::from(contended);
        if slack < 0 {
            self.negatives += 1;
            self.negative.get_or_insert_with(histogram).record(slack.unsigned_abs()).expect("auto-resizing");
        } else {
            self.positive.get_or_insert_with(histogram).record(slack as u64).expect("auto-resizing");
        }
    }

    /// The slack at quantile `q` (the value of rank ⌈q·n⌉, at least 1, in
    /// ascending order), never above the true value by the histogram's rounding.
    pub fn quantile(&self, q: f64) -> Option<i64> {
        let min = self.min?;
        let rank = ((q * self.count as f64).ceil() as u64).clamp(1, self.count);
        let v = if rank <= self.negatives {
            // Ascending signed order is descending magnitude among the negatives.
            let h = self.negative.as_ref().expect("negatives were recorded");
            let m = at_rank(h, self.negatives - rank + 1);
            -(h.highest_equivalent(m) as i64)
        } else {
            let h = self.positive.as_ref().expect("non-negatives were recorded");
            h.lowest_equivalent(at_rank(h, rank - self.negatives)) as i64
        };
        Some(v.max(min))
    }
}

/// The recorded value of rank `r` (1-based, ascending).
fn at_rank(h: &Histogram<u64>, r: u64) -> u64 {
    let mut seen = 0;
    for v in h.iter_recorded() {
        seen += v.count_at_value();
        if seen >= r {
            return v.value_iterated_to();
        }
    }
    h.max()
}

/// Every hand-over in the measured window, overall and per (from, to) pair.
#[derive(Clone, Debug, Default)]
pub struct HandoverStats {
    pub all: SlackStats,
    index: HashMap<(u32, u32), usize>,
    pub pairs: Vec<((u32, u32), SlackStats)>,
    /// Hand-overs of pairs beyond [`MAX_PAIRS`].
    pub untracked: u64,
}

impl HandoverStats {
    pub fn record(&mut self, from: usize, to: usize, slack: i64, contended: bool) {
        self.all.record(slack, contended);
        let key = (from as u32, to as u32);
        let i = match self.index.get(&key) {
            Some(&i) => i,
            None if self.pairs.len() < MAX_PAIRS => {
                self.pairs.push((key, SlackStats::default()));
                self.index.insert(key, self.pairs.len() - 1);
                self.pairs.len() - 1
            }
            None => {
                self.untracked += 1;
                return;
            }
        };
        self.pairs[i].1.record(slack, contended);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantiles_by_rank_across_the_sign() {
        let mut s = SlackStats::default();
        for x in [-30, -10, 0, 5, 7, 1000] {
            s.record(x, x < 0);
        }
        assert_eq!(s.min, Some(-30));
        assert_eq!(s.contended, 2);
        // Ranks: 1 → −30, 2 → −10, 3 → 0, 4 → 5 (ceil(q·6)).
        assert_eq!(s.quantile(0.01), Some(-30));
        assert_eq!(s.quantile(0.3), Some(-10));
        assert_eq!(s.quantile(0.5), Some(0));
        assert_eq!(s.quantile(0.6), Some(5));
        assert_eq!(s.quantile(1.0), Some(1000));
        assert_eq!(SlackStats::default().quantile(0.5), None);
    }

    #[test]
    fn large_values_round_towards_less_room() {
        let mut s = SlackStats::default();
        s.record(123_456_789, false);
        s.record(-123_456_789, true);
        let hi = s.quantile(1.0).unwrap();
        assert!((123_456_789 - 123_456_789 / 1000..=123_456_789).contains(&hi), "{hi}");
        assert_eq!(s.quantile(0.5), Some(-123_456_789), "the exact minimum bounds the rounding");
    }

    #[test]
    fn pairs_beyond_the_cap_count_in_the_totals_only() {
        let mut h = HandoverStats::default();
        for k in 0..MAX_PAIRS + 3 {
            h.record(k, k + 1, 10, false);
        }
        assert_eq!(h.pairs.len(), MAX_PAIRS);
        assert_eq!(h.untracked, 3);
        assert_eq!(h.all.count, MAX_PAIRS as u64 + 3);
    }
}
