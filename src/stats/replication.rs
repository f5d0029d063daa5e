//! Replications: the same scenario under independent seeds, summarised per
//! metric with the mean, its standard error and a 95 % confidence interval
//! from Student's t distribution.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, StudentsT};

/// Two-sided 95 % quantile of Student's t with `df` degrees of freedom, t(0.975; df).
pub fn t975(df: u64) -> f64 {
    StudentsT::new(0.0, 1.0, df as f64).expect("df ≥ 1").inverse_cdf(0.975)
}

#[derive(Clone, Copy, Debug, Serialize, Deserialize, PartialEq)]
pub struct MetricCi {
    pub mean: f64,
    pub stderr: f64,
    pub ci95_low: f64,
    pub ci95_high: f64,
}

/// Summarise each metric present in every replication (at least two).
pub fn summarize(runs: &[BTreeMap<String, f64>]) -> BTreeMap<String, MetricCi> {
    let n = runs.len();
    assert!(n >= 2, "a confidence interval needs at least two replications");
    let t = t975(n as u64 - 1);
    let mut out = BTreeMap::new();
    for key in runs[0].keys() {
        let xs: Vec<f64> = runs.iter().filter_map(|r| r.get(key).copied()).collect();
        if xs.len() != n {
            continue;
        }
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n as f64 - 1.0);
        let stderr = (var / n as f64).sqrt();
        out.insert(key.clone(), MetricCi { mean, stderr, ci95_low: mean - t * stderr, ci95_high: mean + t * stderr });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn student_t_quantiles_match_the_tables() {
        // Two-sided 95 % Student t quantiles, from any statistics table.
        for (df, t) in [(4, 2.776), (9, 2.262), (29, 2.045)] {
            assert!((t975(df) - t).abs() < 5e-4, "t(0.975; {df}) = {}", t975(df));
        }
        assert!((t975(1_000_000) - 1.960).abs() < 5e-4);
    }

    #[test]
    fn interval_of_known_samples() {
        let runs: Vec<BTreeMap<String, f64>> =
            [1.0, 2.0, 3.0, 4.0, 5.0].iter().map(|&x| [("m".to_owned(), x)].into()).collect();
        let s = summarize(&runs)["m"];
        // mean 3, sd sqrt(2.5), se sqrt(0.5), half-width t(0.975;4)·se = 2.776·0.7071.
        assert_eq!(s.mean, 3.0);
        assert!((s.stderr - 0.5f64.sqrt()).abs() < 1e-12);
        assert!((s.ci95_high - 3.0 - 2.776 * 0.5f64.sqrt()).abs() < 1e-3);
    }
}
