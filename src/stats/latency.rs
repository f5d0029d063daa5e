//! Latency accumulation: an HDR histogram plus an exact count, sum and
//! maximum, so the mean and maximum are exact and only the percentiles carry
//! histogram precision.
//!
//! A run's histograms take their shape from the scenario before it starts
//! ([`LatencyShape`]): the range up to the run's duration and the precision
//! (3 significant digits; 2 for the per-node and per-source histograms of a
//! bus of more than [`PER_NODE_FULL_PRECISION_MAX`] nodes), so memory is set
//! when the run starts and does not grow with simulated time.

use base64::Engine as _;
use hdrhistogram::serialization::{Deserializer, Serializer, V2Serializer};
use hdrhistogram::Histogram;

#[derive(Clone, Debug)]
pub struct LatencyStats {
    hist: Histogram<u64>,
    count: u64,
    sum_ps: u128,
    max_ps: u64,
}

/// Summary figures in seconds.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LatencySummary {
    pub count: u64,
    pub mean: f64,
    pub p50: f64,
    pub p90: f64,
    pub p99: f64,
    pub p999: f64,
    pub max: f64,
}

impl Default for LatencyStats {
    fn default() -> Self {
        Self::new()
    }
}

/// Buses up to this many nodes keep 3 significant digits in every latency
/// histogram; larger ones keep 2 in the per-node and per-source histograms
/// (the all-nodes histogram keeps 3). At 4 096 nodes, 3 digits would take
/// about 0.8 GB of histograms on a 3 s run.
pub const PER_NODE_FULL_PRECISION_MAX: usize = 256;

/// The fixed shape of a run's latency histograms.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LatencyShape {
    /// Lowest discernible value (ps): a power of two no larger than the
    /// shortest possible latency (the engine's `shortest_latency`) divided
    /// by the histogram's sub-bucket count. HdrHistogram puts every value of
    /// at least half the sub-bucket count times this in the same bucket as a
    /// 1 ps histogram would, so every latency does, with a factor 2 to spare.
    pub lowest_ps: u64,
    /// Highest value the histogram holds without growing (ps): the run's
    /// duration. Latencies are recorded only before the duration, so a run's
    /// histograms never grow; if one did, it would keep its buckets.
    pub highest_ps: u64,
    /// Significant decimal digits (2 or 3).
    pub digits: u8,
}

impl LatencyShape {
    /// `shortest_ps`: no latency is shorter (a frame's overhead bits on the
    /// wire); `duration_ps`: the run's length.
    pub fn new(shortest_ps: u64, duration_ps: u64, digits: u8) -> Self {
        // HdrHistogram's sub-bucket count: 2·10^digits rounded up to a power of two.
        let sub_buckets = (2 * 10u64.pow(u32::from(digits))).next_power_of_two();
        let fit = (shortest_ps / sub_buckets).max(1);
        let lowest_ps = 1u64 << (63 - fit.leading_zeros());
        LatencyShape { lowest_ps, highest_ps: duration_ps.max(2 * lowest_ps), digits }
    }

    /// The shapes of a run: (all nodes, per node and per source).
    pub fn for_run(shortest_ps: u64, duration_ps: u64, nodes: usize) -> (Self, Self) {
        let per_node = if nodes <= PER_NODE_FULL_PRECISION_MAX { 3 } else { 2 };
        (Self::new(shortest_ps, duration_ps, 3), Self::new(shortest_ps, duration_ps, per_node))
    }
}

impl LatencyStats {
    /// The longest latency recorded, exactly (ps).
    pub fn max_ps(&self) -> u64 {
        self.max_ps
    }

    /// An empty accumulator of 3 significant digits with 1 ps resolution,
    /// growing as values come (merging and reading tallies).
    pub fn new() -> Self {
        let hist = Histogram::new(3).expect("3 significant digits is a valid precision");
        LatencyStats { hist, count: 0, sum_ps: 0, max_ps: 0 }
    }

    /// An empty accumulator of a run's fixed shape.
    pub fn with_shape(shape: LatencyShape) -> Self {
        let mut hist = Histogram::new_with_bounds(shape.lowest_ps, shape.highest_ps, shape.digits)
            .expect("a shape has lowest ≥ 1, highest ≥ 2·lowest and 2 or 3 digits");
        hist.auto(true);
        LatencyStats { hist, count: 0, sum_ps: 0, max_ps: 0 }
    }

    /// Significant decimal digits of the percentiles.
    pub fn digits(&self) -> u8 {
        self.hist.sigfig()
    }

    #[inline]
    pub fn record(&mut self, ps: u64) {
        if ps > self.hist.high() {
            self.hist = grown(&self.hist, ps);
        }
        self.hist.record(ps.max(1)).expect("an auto-resizing histogram accepts any u64");
        self.count += 1;
        self.sum_ps += u128::from(ps);
        self.max_ps = self.max_ps.max(ps);
    }

    pub fn count(&self) -> u64 {
        self.count
    }

    pub fn mean_ps(&self) -> f64 {
        if self.count == 0 {
            0.0
        } else {
            self.sum_ps as f64 / self.count as f64
        }
    }

    /// Quantile `q` in picoseconds (histogram precision).
    pub fn quantile_ps(&self, q: f64) -> u64 {
        if self.count == 0 {
            0
        } else {
            self.hist.value_at_quantile(q).min(self.max_ps)
        }
    }

    pub fn summary(&self) -> LatencySummary {
        let s = |ps: u64| ps as f64 / 1e12;
        // One pass over the histogram for the four quantiles (each exactly
        // what `quantile_ps` gives).
        let mut q = [0u64; 4];
        if self.count > 0 {
            for (slot, v) in q.iter_mut().zip(self.hist.value_at_quantiles([0.50, 0.90, 0.99, 0.999])) {
                *slot = v.min(self.max_ps);
            }
        }
        LatencySummary {
            count: self.count,
            mean: self.mean_ps() / 1e12,
            p50: s(q[0]),
            p90: s(q[1]),
            p99: s(q[2]),
            p999: s(q[3]),
            max: s(self.max_ps),
        }
    }
}

/// `h` in a histogram that reaches `GROWTH` times past `value`: one
/// allocation for the next several orders of magnitude, instead of the
/// auto-resize's one per power of two. It keeps `h`'s lowest value and
/// digits, so its buckets (and every quantile and the canonical encoding) do
/// not depend on the highest trackable value.
#[cold]
pub(crate) fn grown<T: hdrhistogram::Counter>(h: &Histogram<T>, value: u64) -> Histogram<T> {
    /// Headroom: 2^6, six more powers of two (measured: fewer instructions than 2^4,
    /// less memory than 2^8 on 512 nodes).
    const GROWTH: u64 = 64;
    let low = h.low();
    let high = value.saturating_mul(GROWTH).clamp(2 * low, u64::MAX >> 1);
    let mut bigger = Histogram::new_with_bounds(low, high, h.sigfig()).expect("valid bounds");
    bigger.auto(true);
    bigger.add(h).expect("the new bounds cover the old");
    bigger
}

/// A latency accumulator in a mergeable, serializable form: the exact
/// count, sum and maximum, and the histogram in HdrHistogram's V2 format,
/// base64-encoded (readable by any HdrHistogram library; tallies written
/// with the deflated V2 form read back as well).
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct LatencyTally {
    pub count: u64,
    /// Sum of the latencies in picoseconds (a decimal string: it can exceed 2^64).
    #[serde(with = "u128_text")]
    pub sum_ps: u128,
    pub max_ps: u64,
    pub histogram: String,
}

mod u128_text {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(v: &u128, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&v.to_string())
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<u128, D::Error> {
        let text = String::deserialize(d)?;
        text.parse().map_err(serde::de::Error::custom)
    }
}

impl LatencyStats {
    /// Add another accumulator's values: the histograms add bucket by bucket.
    pub fn add(&mut self, other: &LatencyStats) {
        self.hist.add(&other.hist).expect("an auto-resizing histogram accepts any other");
        self.count += other.count;
        self.sum_ps += other.sum_ps;
        self.max_ps = self.max_ps.max(other.max_ps);
    }

    /// The serializable form. The histogram is first copied into one whose
    /// bounds depend only on its largest value, so equal contents always
    /// encode to equal text, however they were accumulated.
    pub fn tally(&self) -> LatencyTally {
        let top = self.hist.max().max(2);
        let mut canonical = Histogram::<u64>::new_with_bounds(1, top, self.hist.sigfig()).expect("valid bounds");
        canonical.add(&self.hist).expect("the bounds cover every recorded value");
        let mut bytes = Vec::new();
        V2Serializer::new().serialize(&canonical, &mut bytes).expect("serializing into memory cannot fail");
        LatencyTally {
            count: self.count,
            sum_ps: self.sum_ps,
            max_ps: self.max_ps,
            histogram: base64::engine::general_purpose::STANDARD.encode(bytes),
        }
    }

    /// Rebuild an accumulator from its serializable form.
    pub fn from_tally(t: &LatencyTally) -> Result<LatencyStats, String> {
        let bytes = base64::engine::general_purpose::STANDARD
            .decode(&t.histogram)
            .map_err(|e| format!("latency histogram is not base64: {e}"))?;
        let mut hist: Histogram<u64> = Deserializer::new()
            .deserialize(&mut bytes.as_slice())
            .map_err(|e| format!("latency histogram is not a V2 HdrHistogram: {e:?}"))?;
        hist.auto(true);
        if hist.len() != t.count {
            return Err(format!("latency histogram holds {} values but its count says {}", hist.len(), t.count));
        }
        Ok(LatencyStats { hist, count: t.count, sum_ps: t.sum_ps, max_ps: t.max_ps })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_mean_and_max_with_three_digit_percentiles() {
        let mut l = LatencyStats::new();
        for v in 1..=1000u64 {
            l.record(v * 1_000_000); // 1 µs .. 1 ms
        }
        assert_eq!(l.count(), 1000);
        assert!((l.mean_ps() - 500.5e6).abs() < 1e-3);
        assert_eq!(l.summary().max, 1e-3);
        let p99 = l.quantile_ps(0.99) as f64;
        assert!((p99 - 990e6).abs() / 990e6 < 1e-3, "p99 {p99}");
    }

    #[test]
    fn merged_histograms_give_the_percentiles_of_the_union() {
        // Reference: one accumulator fed every value, against three fed a
        // share each, serialized, deserialized and added. HdrHistogram's
        // add is exact bucket by bucket, so the percentiles are equal.
        let values: Vec<u64> = (0..30_000u64).map(|i| 1_000 + (i * 7919) % 2_000_000 + (i % 97) * 50_000).collect();
        let mut union = LatencyStats::new();
        let mut parts = [LatencyStats::new(), LatencyStats::new(), LatencyStats::new()];
        for (i, &v) in values.iter().enumerate() {
            union.record(v);
            parts[i % 3].record(v);
        }
        let mut merged = LatencyStats::from_tally(&parts[0].tally()).unwrap();
        for p in &parts[1..] {
            merged.add(&LatencyStats::from_tally(&p.tally()).unwrap());
        }
        for q in [0.5, 0.9, 0.99, 0.999, 0.9999] {
            assert_eq!(merged.quantile_ps(q), union.quantile_ps(q), "quantile {q}");
        }
        assert_eq!(merged.summary(), union.summary());
        // Equal contents encode to equal text whatever the order of adding.
        let mut other_order = LatencyStats::from_tally(&parts[2].tally()).unwrap();
        other_order.add(&parts[0]);
        other_order.add(&parts[1]);
        assert_eq!(other_order.tally(), merged.tally());
        assert_eq!(merged.tally(), union.tally());
    }

    #[test]
    fn a_fixed_shape_gives_the_quantiles_of_1_ps_resolution_above_its_floor() {
        // Reference: a histogram of 1 ps resolution and the same digits, fed
        // the same latencies, all at least the shape's shortest latency.
        for digits in [3u8, 2] {
            for (shortest, duration) in [(480_000u64, 3_000_000_000_000u64), (1_000, 10_000_000), (77_777_777, 1 << 50)]
            {
                let shape = LatencyShape::new(shortest, duration, digits);
                assert!(shape.lowest_ps.is_power_of_two());
                let mut fixed = LatencyStats::with_shape(shape);
                let mut reference = LatencyStats::with_shape(LatencyShape { lowest_ps: 1, ..shape });
                let mut record = |v: u64| {
                    fixed.record(v);
                    reference.record(v);
                };
                record(shortest);
                for i in 0..20_000u64 {
                    record(shortest + (i * 2_654_435_761) % (duration - shortest) + (i % 7) * 13);
                }
                let high = fixed.hist.high();
                assert_eq!(fixed.summary(), reference.summary(), "digits {digits}, shortest {shortest}");
                for q in [0.0, 0.0001, 0.3, 0.77, 0.999_99] {
                    assert_eq!(fixed.quantile_ps(q), reference.quantile_ps(q));
                }
                assert_eq!(fixed.tally(), reference.tally(), "the same canonical encoding");
                // Past the range: it grows, keeping its buckets and digits.
                fixed.record(duration * 3 + 5);
                reference.record(duration * 3 + 5);
                assert!(fixed.hist.high() > high);
                assert_eq!((fixed.digits(), fixed.hist.low()), (digits, shape.lowest_ps));
                assert_eq!(fixed.summary(), reference.summary());
            }
        }
    }

    #[test]
    fn per_node_histograms_keep_two_digits_on_large_buses() {
        let (all, node) = LatencyShape::for_run(1_000_000, 1_000_000_000_000, PER_NODE_FULL_PRECISION_MAX);
        assert_eq!((all.digits, node.digits), (3, 3));
        let (all, node) = LatencyShape::for_run(1_000_000, 1_000_000_000_000, PER_NODE_FULL_PRECISION_MAX + 1);
        assert_eq!((all.digits, node.digits), (3, 2));
        let mut l = LatencyStats::with_shape(node);
        l.record(123_456_789);
        assert_eq!(l.digits(), 2);
        l.record(100_000_000);
        // Two digits: the median reads the lower value's bucket top, within 1 %.
        let p = l.quantile_ps(0.5);
        assert!((100_000_000..=101_000_000).contains(&p) && p != 100_000_000, "{p}");
    }

    #[test]
    fn a_damaged_histogram_is_an_error() {
        let mut l = LatencyStats::new();
        l.record(5);
        let mut t = l.tally();
        t.count = 2;
        assert!(LatencyStats::from_tally(&t).unwrap_err().contains("holds 1 values"));
        t.histogram = "not base64!".into();
        assert!(LatencyStats::from_tally(&t).is_err());
    }
}
