//! Comparing two reports metric by metric, knowing which way is better.

use std::collections::BTreeMap;

use serde::Serialize;

/// Which way a metric should move.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Better {
    Lower,
    Higher,
    /// Neither: a change is reported, never a regression.
    Neither,
}

/// The good direction of a metric, from its name: latency, contention,
/// waste, drops and the like should fall; throughput, deliveries and margins
/// should rise.
pub fn better(path: &str) -> Better {
    let p = path;
    let lower = [
        "latency_s.",
        "contention.",
        "floating.",
        "frames.corrupted",
        "frames.dropped",
        "frames.given_up",
        "frames.control_corrupted",
        "frames.queued_at_end",
        "utilization.wasted",
        "timeouts",
        "collisions",
        "given_up",
        "lost",
        "arbitration_failures",
        "priority_inversions",
        "slot_overruns",
        "beacons_missed",
        "polls_ignored",
        "cycle_",
        "rotation_",
        "recovery_",
        "deferrals",
    ];
    let higher = [
        "throughput.payload_bit_s",
        "throughput.carried",
        "frames.delivered",
        "utilization.payload",
        "margin_v",
        "usable_fraction",
    ];
    if p.ends_with(".count") {
        return Better::Neither;
    }
    if higher.iter().any(|h| p.contains(h)) {
        Better::Higher
    } else if lower.iter().any(|l| p.contains(l)) {
        Better::Lower
    } else {
        Better::Neither
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Change {
    pub metric: String,
    /// The value in each report; `null` where the metric is missing, null
    /// or not a number.
    pub base: Option<f64>,
    pub new: Option<f64>,
    /// Relative change (new − base)/|base|; infinite from zero; 0 when a side is missing.
    pub relative: f64,
    pub better: Better,
    pub tolerance: f64,
    /// "regression" | "improvement" | "changed" | "within tolerance" |
    /// "missing" (in the base, not a number in the new report) | "added".
    pub verdict: &'static str,
}

/// Compare every metric of either report. `tolerance(path)` is the relative
/// change allowed before a worse value counts as a regression. A metric of
/// the base that the new report lacks (or holds as null or as something
/// other than a number) is "missing", which the caller counts as a
/// regression: a figure that vanishes is never a silent pass.
pub fn compare(
    base: &BTreeMap<String, f64>,
    new: &BTreeMap<String, f64>,
    tolerance: impl Fn(&str) -> f64,
) -> Vec<Change> {
    let mut out = Vec::new();
    for (k, &b) in base {
        let dir = better(k);
        let tol = tolerance(k);
        let Some(&n) = new.get(k) else {
            out.push(Change {
                metric: k.clone(),
                base: Some(b),
                new: None,
                relative: 0.0,
                better: dir,
                tolerance: tol,
                verdict: "missing",
            });
            continue;
        };
        if n == b {
            continue;
        }
        let relative = if b != 0.0 { (n - b) / b.abs() } else { f64::INFINITY.copysign(n - b) };
        let worse = match dir {
            Better::Lower => n > b,
            Better::Higher => n < b,
            Better::Neither => false,
        };
        let verdict = if dir == Better::Neither {
            "changed"
        } else if relative.abs() <= tol {
            "within tolerance"
        } else if worse {
            "regression"
        } else {
            "improvement"
        };
        out.push(Change {
            metric: k.clone(),
            base: Some(b),
            new: Some(n),
            relative,
            better: dir,
            tolerance: tol,
            verdict,
        });
    }
    for (k, &n) in new {
        if !base.contains_key(k) {
            out.push(Change {
                metric: k.clone(),
                base: None,
                new: Some(n),
                relative: 0.0,
                better: better(k),
                tolerance: tolerance(k),
                verdict: "added",
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn directions_and_tolerances() {
        assert_eq!(better("latency_s.all.p99"), Better::Lower);
        assert_eq!(better("throughput.payload_bit_s"), Better::Higher);
        assert_eq!(better("latency_s.all.count"), Better::Neither);
        let base: BTreeMap<String, f64> =
            [("latency_s.all.p99".into(), 100.0), ("throughput.carried".into(), 0.5)].into();
        let new: BTreeMap<String, f64> =
            [("latency_s.all.p99".into(), 110.0), ("throughput.carried".into(), 0.6)].into();
        let c = compare(&base, &new, |_| 0.02);
        assert_eq!(c.iter().find(|c| c.metric == "latency_s.all.p99").unwrap().verdict, "regression");
        assert_eq!(c.iter().find(|c| c.metric == "throughput.carried").unwrap().verdict, "improvement");
        let c = compare(&base, &new, |_| 0.2);
        assert!(c.iter().all(|c| c.verdict == "within tolerance"));
        // A vanished metric is "missing"; a new one "added".
        let mut fewer = new.clone();
        fewer.remove("latency_s.all.p99");
        fewer.insert("frames.given_up".into(), 0.0);
        let c = compare(&base, &fewer, |_| 0.2);
        assert_eq!(c.iter().find(|c| c.metric == "latency_s.all.p99").unwrap().verdict, "missing");
        assert_eq!(c.iter().find(|c| c.metric == "frames.given_up").unwrap().verdict, "added");
    }
}
