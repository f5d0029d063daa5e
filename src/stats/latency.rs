//! Latency accumulation: an HDR histogram (3 significant digits, 1 ps
//! resolution at the low end) plus an exact count, sum and maximum, so the
//! mean and maximum are exact and only the percentiles carry histogram
//! precision.

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

impl LatencyStats {
    pub fn new() -> Self {
        // Auto-resizing from a small initial range: the histogram grows (and
        // allocates) only when a value of a new order of magnitude appears.
        let hist = Histogram::new(3).expect("3 significant digits is a valid precision");
        LatencyStats { hist, count: 0, sum_ps: 0, max_ps: 0 }
    }

    #[inline]
    pub fn record(&mut self, ps: u64) {
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
        let s = |ps: u64| ps as f64 * 1e-12;
        LatencySummary {
            count: self.count,
            mean: self.mean_ps() * 1e-12,
            p50: s(self.quantile_ps(0.50)),
            p90: s(self.quantile_ps(0.90)),
            p99: s(self.quantile_ps(0.99)),
            p999: s(self.quantile_ps(0.999)),
            max: s(self.max_ps),
        }
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
}
