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
//! The smallest slack is exact. Up to [`FEW`] distinct values are kept
//! exactly, so their quantiles are exact too; past that they move to HDR
//! histograms of the magnitudes (2 significant digits: within 1 %), rounded
//! towards the smaller slack so a quantile never shows more room than there
//! is. Each hand-over is recorded once, in its pair's statistics; the overall
//! quantile merges the pairs' when the report is built.
//!
//! Memory: a pair costs a few hundred bytes until it has more than [`FEW`]
//! distinct slacks, then two histograms sized once for the run's duration
//! (about 2 × 43 KB for 200 s: 64-bit counts, which cannot saturate). Pairs are at most [`MAX_PAIRS`].

use hdrhistogram::Histogram;
use rustc_hash::FxHashMap;

/// Pairs tracked one by one; hand-overs between further pairs count only
/// in the totals (a bound on memory for schemes where any node follows any).
pub const MAX_PAIRS: usize = 4096;

/// Distinct slack values kept exactly before a pair's statistics move to
/// histograms (on a random-access bus most pairs hand over only a few times).
pub const FEW: usize = 16;

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
    /// The latest value and how often it came in a row, not yet in a
    /// histogram (fixed timing repeats each pair's slack exactly).
    run: Option<(i64, u32)>,
    /// Values and their counts, exactly, while there are at most [`FEW`]
    /// (then the histograms are `None`).
    few: Vec<(i64, u64)>,
    /// The largest magnitude the histograms hold without growing (ps; 0:
    /// grow from a small range as values come). A run sets its duration: no
    /// slack is longer, so a run's histograms never grow.
    high: u64,
}

fn histogram(high: u64) -> Histogram<u64> {
    let mut h = if high < 2 { Histogram::new(2) } else { Histogram::new_with_bounds(1, high, 2) }
        .expect("2 significant digits from 1 ps is a valid precision");
    h.auto(true);
    h
}

/// Add `b` into the histogram slot `a`.
fn merge(a: &mut Option<Histogram<u64>>, b: &Option<Histogram<u64>>) {
    if let Some(b) = b {
        a.get_or_insert_with(|| histogram(0)).add(b).expect("auto-resizing");
    }
}

impl SlackStats {
    /// Empty statistics whose histograms hold magnitudes up to `high_ps`
    /// from the start (see [`HandoverStats::new`]).
    pub fn up_to(high_ps: u64) -> Self {
        SlackStats { high: high_ps, ..Default::default() }
    }

    #[inline]
    pub fn record(&mut self, slack: i64, contended: bool) {
        self.count += 1;
        self.contended += u64::from(contended);
        if let Some((v, n)) = &mut self.run {
            if *v == slack && *n < u32::MAX {
                // The same value again: the minimum cannot change.
                *n += 1;
                return;
            }
        }
        self.start_run(slack);
    }

    /// Record `n` hand-overs of slack `slack`, exactly as `n` calls of
    /// [`SlackStats::record`] in a row would (closed-form stretches).
    pub fn record_n(&mut self, slack: i64, contended: bool, n: u64) {
        if n == 0 {
            return;
        }
        self.record(slack, contended);
        let mut rest = n - 1;
        self.count += rest;
        self.contended += rest * u64::from(contended);
        while rest > 0 {
            let (_, run) = self.run.as_mut().expect("record leaves a run of this value");
            let take = rest.min(u64::from(u32::MAX - *run));
            *run += take as u32;
            rest -= take;
            if rest > 0 {
                // A full run: the next record starts another.
                self.start_run(slack);
                rest -= 1;
            }
        }
    }

    #[cold]
    fn start_run(&mut self, slack: i64) {
        self.min = Some(self.min.map_or(slack, |m| m.min(slack)));
        self.flush();
        self.run = Some((slack, 1));
    }

    /// Put the pending run of equal values into the histograms.
    fn flush(&mut self) {
        let Some((slack, n)) = self.run.take() else { return };
        self.put(slack, u64::from(n));
    }

    /// Record `n` hand-overs of slack `slack`: among the few exact values
    /// while there is room, else in the histograms.
    fn put(&mut self, slack: i64, n: u64) {
        if self.negative.is_none() && self.positive.is_none() {
            if let Some(e) = self.few.iter_mut().find(|e| e.0 == slack) {
                e.1 += n;
                return;
            }
            if self.few.len() < FEW {
                self.few.push((slack, n));
                return;
            }
            self.spill();
        }
        self.put_histogram(slack, n);
    }

    /// Move the exact values into the histograms.
    fn spill(&mut self) {
        for (v, k) in std::mem::take(&mut self.few) {
            self.put_histogram(v, k);
        }
    }

    fn put_histogram(&mut self, slack: i64, n: u64) {
        let magnitude = slack.unsigned_abs();
        let slot = if slack < 0 {
            self.negatives += n;
            &mut self.negative
        } else {
            &mut self.positive
        };
        let high = self.high;
        let h = slot.get_or_insert_with(|| histogram(high));
        if magnitude > h.high() {
            *h = crate::stats::latency::grown(h, magnitude);
        }
        h.record_n(magnitude, n).expect("auto-resizing");
    }

    /// Add another set of slacks to these.
    pub fn add(&mut self, o: &SlackStats) {
        self.flush();
        self.count += o.count;
        self.min = match (self.min, o.min) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        self.contended += o.contended;
        if o.negative.is_some() || o.positive.is_some() {
            self.spill();
        }
        self.negatives += o.negatives;
        merge(&mut self.negative, &o.negative);
        merge(&mut self.positive, &o.positive);
        for &(v, n) in &o.few {
            self.put(v, n);
        }
        // The other's pending run, as its flush would have recorded it.
        if let Some((slack, n)) = o.run {
            self.put(slack, u64::from(n));
        }
    }

    /// The slack at quantile `q` (the value of rank ⌈q·n⌉, at least 1, in
    /// ascending order): exact while there are few distinct values, else
    /// never above the true value by the histogram's rounding.
    pub fn quantile(&self, q: f64) -> Option<i64> {
        if self.run.is_some() {
            let mut settled = self.clone();
            settled.flush();
            return settled.quantile(q);
        }
        let min = self.min?;
        let rank = ((q * self.count as f64).ceil() as u64).clamp(1, self.count);
        if !self.few.is_empty() {
            // Exact: the values in ascending order, each as often as it came.
            let mut few = self.few.clone();
            few.sort_unstable();
            let mut seen = 0;
            for (v, n) in few {
                seen += n;
                if seen >= rank {
                    return Some(v);
                }
            }
            unreachable!("the exact values hold every hand-over");
        }
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

/// Where a pair's statistics are: a dense table for buses of up to 256
/// nodes (one lookup, no hashing), a hash map beyond.
#[derive(Clone, Debug)]
enum Index {
    Dense { nodes: usize, slot: Vec<u32> },
    Sparse(FxHashMap<(u32, u32), usize>),
}

/// Every hand-over in the measured window, per (from, to) pair.
#[derive(Clone, Debug)]
pub struct HandoverStats {
    index: Index,
    pub pairs: Vec<((u32, u32), SlackStats)>,
    /// Hand-overs of pairs beyond [`MAX_PAIRS`], together.
    pub rest: SlackStats,
    /// Largest slack magnitude a pair's histograms hold from the start (ps).
    high: u64,
}

impl HandoverStats {
    /// Statistics for a bus of `nodes` nodes whose slacks are at most
    /// `high_ps` in magnitude (the run's duration): each pair's histograms
    /// are sized once, when its first hand-over comes, so memory does not
    /// grow with simulated time beyond the pairs seen.
    pub fn new(nodes: usize, high_ps: u64) -> Self {
        let index = if nodes <= 256 {
            Index::Dense { nodes, slot: vec![u32::MAX; nodes * nodes] }
        } else {
            Index::Sparse(FxHashMap::default())
        };
        HandoverStats { index, pairs: Vec::new(), rest: SlackStats::up_to(high_ps), high: high_ps }
    }

    #[inline]
    pub fn record(&mut self, from: usize, to: usize, slack: i64, contended: bool) {
        self.record_n(from, to, slack, contended, 1);
    }

    /// Record `n` hand-overs of one pair and slack (as `n` calls of `record`).
    #[inline]
    pub fn record_n(&mut self, from: usize, to: usize, slack: i64, contended: bool, n: u64) {
        let key = (from as u32, to as u32);
        let found = match &mut self.index {
            Index::Dense { nodes, slot } => {
                let s = slot[from * *nodes + to];
                (s != u32::MAX).then_some(s as usize)
            }
            Index::Sparse(map) => map.get(&key).copied(),
        };
        let i = match found {
            Some(i) => i,
            None if self.pairs.len() < MAX_PAIRS => {
                self.pairs.push((key, SlackStats::up_to(self.high)));
                let i = self.pairs.len() - 1;
                match &mut self.index {
                    Index::Dense { nodes, slot } => slot[from * *nodes + to] = i as u32,
                    Index::Sparse(map) => {
                        map.insert(key, i);
                    }
                }
                i
            }
            None if n == 1 => return self.rest.record(slack, contended),
            None => return self.rest.record_n(slack, contended, n),
        };
        if n == 1 {
            self.pairs[i].1.record(slack, contended);
        } else {
            self.pairs[i].1.record_n(slack, contended, n);
        }
    }

    /// Every hand-over together.
    pub fn all(&self) -> SlackStats {
        let mut all = self.rest.clone();
        for (_, p) in &self.pairs {
            all.add(p);
        }
        all
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recording_n_at_once_is_recording_n_times() {
        // Closed-form stretches record a period's hand-overs k times at once.
        let mut one = HandoverStats::new(4, 1_000_000);
        let mut many = HandoverStats::new(4, 1_000_000);
        for (from, to, slack, n) in [(0, 1, 40, 3u64), (1, 0, -7, 5), (0, 1, 40, 1), (2, 3, 9, 0), (0, 1, 12, 2)] {
            for _ in 0..n {
                one.record(from, to, slack, slack < 0);
            }
            many.record_n(from, to, slack, slack < 0, n);
        }
        let (a, b) = (one.all(), many.all());
        assert_eq!((a.count, a.min, a.contended), (b.count, b.min, b.contended));
        for q in [0.0, 0.1, 0.5, 0.9, 1.0] {
            assert_eq!(a.quantile(q), b.quantile(q), "quantile {q}");
        }
        // A run longer than a run counter holds splits as separate records would.
        let mut s = SlackStats::default();
        s.record_n(5, false, u64::from(u32::MAX) + 3);
        assert_eq!(s.count, u64::from(u32::MAX) + 3);
        assert_eq!(s.quantile(0.5), Some(5));
    }

    #[test]
    fn quantiles_by_rank_across_the_sign() {
        let mut s = SlackStats::default();
        for x in [-30, -10, 0, 5, 7, 100] {
            s.record(x, x < 0);
        }
        assert_eq!(s.min, Some(-30));
        assert_eq!(s.contended, 2);
        // Ranks: 1 → −30, 2 → −10, 3 → 0, 4 → 5 (ceil(q·6)).
        assert_eq!(s.quantile(0.01), Some(-30));
        assert_eq!(s.quantile(0.3), Some(-10));
        assert_eq!(s.quantile(0.5), Some(0));
        assert_eq!(s.quantile(0.6), Some(5));
        assert_eq!(s.quantile(1.0), Some(100));
        assert_eq!(SlackStats::default().quantile(0.5), None);
    }

    #[test]
    fn large_values_round_towards_less_room() {
        let mut s = SlackStats::default();
        s.record(123_456_789, false);
        s.record(-123_456_789, true);
        let hi = s.quantile(1.0).unwrap();
        assert!((123_456_789 - 123_456_789 / 100..=123_456_789).contains(&hi), "{hi}");
        assert_eq!(s.quantile(0.5), Some(-123_456_789), "the exact minimum bounds the rounding");
    }

    #[test]
    fn few_values_are_exact_and_many_agree_with_the_histogram_alone() {
        // Reference: the rank definition on a sorted list of the values.
        let values: Vec<i64> = (0..200).map(|i: i64| (i * 7_919) % 100_003 - 30_000).collect();
        let mut sorted = values.clone();
        sorted.sort_unstable();
        let rank_value = |q: f64, n: usize| sorted[((q * n as f64).ceil() as usize).clamp(1, n) - 1];
        let mut few = SlackStats::default();
        for &v in &values[..FEW] {
            few.record(v, v < 0);
        }
        let mut first: Vec<i64> = values[..FEW].to_vec();
        first.sort_unstable();
        for (q, r) in [(0.01, 1), (0.5, FEW / 2), (1.0, FEW)] {
            assert_eq!(few.quantile(q), Some(first[r - 1]), "q {q}");
        }
        // Many values: within the histogram's 1 %, never above the truth.
        let mut many = SlackStats::default();
        for &v in &values {
            many.record(v, v < 0);
        }
        for q in [0.01, 0.25, 0.5, 0.9, 1.0] {
            let (got, truth) = (many.quantile(q).unwrap(), rank_value(q, values.len()));
            assert!(got <= truth && truth - got <= truth.abs() / 100 + 1, "q {q}: {got} against {truth}");
        }
        // Merging exact and histogram statistics in either order gives the
        // statistics of all the values together.
        let (mut a, mut b) = (few.clone(), many.clone());
        a.add(&many);
        b.add(&few);
        let mut together = many.clone();
        for &v in &values[..FEW] {
            together.record(v, v < 0);
        }
        for q in [0.01, 0.5, 0.99] {
            assert_eq!(a.quantile(q), together.quantile(q));
            assert_eq!(b.quantile(q), together.quantile(q));
        }
        assert_eq!((a.count, b.count), (216, 216));
    }

    #[test]
    fn pairs_beyond_the_cap_count_in_the_totals_only() {
        let mut h = HandoverStats::new(MAX_PAIRS + 4, 0);
        for k in 0..MAX_PAIRS + 3 {
            h.record(k, k + 1, 10, false);
        }
        assert_eq!(h.pairs.len(), MAX_PAIRS);
        assert_eq!(h.rest.count, 3);
        assert_eq!(h.all().count, MAX_PAIRS as u64 + 3);
    }
}
