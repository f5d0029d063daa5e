//! The invariants every run report obeys, checked on its JSON form (so the
//! same checker serves in-process tests and reports read back from the
//! binary). A violation means the model or the accounting is wrong: the
//! test suite runs this on every demo and on thousands of mutated scenarios.
//!
//! - every number is finite and every count, time and fraction is ≥ 0;
//! - fractions lie in [0, 1] and the utilization classes sum to 1;
//! - a total is at least its maximum, and a maximum at least its mean;
//! - no duration exceeds the run (`simulated_s`, or the whole duration for
//!   latencies, which may begin before the warmup ends);
//! - data frames resolved = delivered + corrupted; latency samples = deliveries;
//!   per-node latency counts add up to the total; percentiles are ordered;
//! - hand-over slack: the minimum bounds the quantiles, the pairs add up to
//!   the total, and a hand-over contends exactly when its slack is negative
//!   (two computations: the closed-form slack and the overlap geometry);
//! - UART rule counts do not exceed the deliveries.

use serde_json::Value;

/// Tolerance for sums of fractions that are each rounded to a double.
const SUM_TOLERANCE: f64 = 1e-9;

/// Every invariant the report breaks, as readable sentences (empty: none).
pub fn violations(report: &Value) -> Vec<String> {
    let mut out = Vec::new();
    let mut bad = |m: String| out.push(m);
    let num = |path: &str| -> Option<f64> { lookup(report, path).and_then(Value::as_f64) };
    let count = |path: &str| -> u64 { lookup(report, path).and_then(Value::as_u64).unwrap_or(0) };

    finite_everywhere(report, "", &mut bad);

    let Some(run_s) = num("simulated_s") else {
        bad("simulated_s is missing".into());
        return out;
    };
    // Latency may begin before the measured window (a message queued during
    // the warmup), so it is bounded by the whole simulated time.
    let whole_s = num("scenario.duration_s").unwrap_or(f64::NAN);
    if whole_s.is_nan() || whole_s < run_s * (1.0 - SUM_TOLERANCE) {
        bad(format!("scenario.duration_s ({whole_s}) is shorter than simulated_s ({run_s})"));
    }

    // Utilization partitions the window.
    let classes = ["payload", "overhead", "gaps", "idle", "wasted"];
    let mut sum = 0.0;
    for c in classes {
        let x = num(&format!("utilization.{c}")).unwrap_or(f64::NAN);
        if !(0.0..=1.0 + SUM_TOLERANCE).contains(&x) {
            bad(format!("utilization.{c} = {x} is not a fraction in [0, 1]"));
        }
        sum += x;
    }
    if run_s > 0.0 && (sum - 1.0).abs() > SUM_TOLERANCE * 10.0 {
        bad(format!("the utilization classes sum to {sum}, not 1"));
    }
    if let Some(c) = num("throughput.carried") {
        if !(0.0..=1.0 + SUM_TOLERANCE).contains(&c) {
            bad(format!("throughput.carried = {c} is not a fraction in [0, 1]"));
        }
    }

    // Frames.
    let (attempts, delivered, corrupted, unheard) =
        (count("frames.attempts"), count("frames.delivered"), count("frames.corrupted"), count("frames.unheard"));
    if attempts != delivered + corrupted + unheard {
        bad(format!(
            "frames.attempts ({attempts}) ≠ delivered ({delivered}) + corrupted ({corrupted}) + unheard ({unheard})"
        ));
    }
    let by: u64 =
        ["contention", "floating", "framing", "noise"].iter().map(|k| count(&format!("frames.corrupted_by.{k}"))).sum();
    if by != corrupted {
        bad(format!("frames.corrupted_by adds up to {by}, not frames.corrupted ({corrupted})"));
    }
    if count("frames.control_corrupted") > count("frames.control") {
        bad("frames.control_corrupted exceeds frames.control".into());
    }

    // Worst-case bounds: no simulated maximum above its bound.
    if let Some(Value::Array(bounds)) = lookup(report, "bounds") {
        for b in bounds {
            if let (Some(max), Some(bound)) = (b["simulated_max_s"].as_f64(), b["bound_s"].as_f64()) {
                if max > bound * (1.0 + 1e-12) {
                    bad(format!("flow {}: simulated maximum {max} s exceeds its bound {bound} s", b["flow"]));
                }
            }
        }
    }

    // Latency.
    let lat_count = count("latency_s.all.count");
    if lat_count != delivered {
        bad(format!("latency_s.all.count ({lat_count}) ≠ frames.delivered ({delivered})"));
    }
    summary(report, "latency_s.all", whole_s, &mut bad);
    if let Some(Value::Object(nodes)) = lookup(report, "latency_s.nodes") {
        let mut total = 0;
        for name in nodes.keys() {
            let p = format!("latency_s.nodes.{name}");
            total += lookup(report, &format!("{p}.count")).and_then(Value::as_u64).unwrap_or(0);
            summary(report, &p, whole_s, &mut bad);
        }
        if total != lat_count {
            bad(format!("per-node latency counts sum to {total}, not latency_s.all.count ({lat_count})"));
        }
    }
    if let Some(Value::Object(ids)) = lookup(report, "latency_s.ids") {
        for id in ids.keys() {
            summary(report, &format!("latency_s.ids.{id}"), whole_s, &mut bad);
        }
    }

    // Contention and floating windows: totals ≥ maxima, maxima within the window.
    totals(report, "contention", "events", "overlap_total_s", "overlap_max_s", run_s, &mut bad);
    if let Some(Value::Array(first)) = lookup(report, "contention.first") {
        if first.len() as u64 > count("contention.events") {
            bad("contention.first lists more events than contention.events".into());
        }
    }
    totals(report, "floating", "windows", "total_s", "longest_s", run_s, &mut bad);

    handover(report, &mut bad);
    // UART rules count deliveries, of data and control frames alike.
    let deliveries = count("frames.attempts") + count("frames.control");
    for k in ["char_timeouts", "silence_violations", "unsettled_frames"] {
        let n = count(&format!("uart.{k}"));
        if n > deliveries {
            bad(format!("uart.{k} ({n}) exceeds the frames delivered ({deliveries})"));
        }
    }

    // The scheme's own figures.
    if let Some(Value::Object(scheme)) = lookup(report, "scheme") {
        for (k, v) in scheme {
            let Some(x) = v.as_f64() else { continue };
            if x < 0.0 {
                bad(format!("scheme.{k} = {x} is negative"));
            }
            if (k.ends_with("_fraction") || k == "persistence") && x > 1.0 + SUM_TOLERANCE {
                bad(format!("scheme.{k} = {x} is not a fraction in [0, 1]"));
            }
            if let Some(stem) = k.strip_suffix("_max_s") {
                if x > whole_s * (1.0 + SUM_TOLERANCE) {
                    bad(format!("scheme.{k} = {x} s exceeds the run ({whole_s} s)"));
                }
                if let Some(mean) = scheme.get(&format!("{stem}_mean_s")).and_then(Value::as_f64) {
                    if mean > x * (1.0 + SUM_TOLERANCE) {
                        bad(format!("scheme.{stem}_mean_s ({mean}) exceeds scheme.{k} ({x})"));
                    }
                }
            }
        }
    }
    out
}

/// Hand-over slack: the minimum bounds every quantile, the pairs add up to
/// the total, and a hand-over contends exactly when its slack is negative.
fn handover(report: &Value, bad: &mut impl FnMut(String)) {
    let num = |p: &str| lookup(report, p).and_then(Value::as_f64);
    let count = |p: &str| lookup(report, p).and_then(Value::as_u64).unwrap_or(0);
    let (n, contended) = (count("handover.count"), count("handover.contended"));
    if contended > n {
        bad(format!("handover.contended ({contended}) exceeds handover.count ({n})"));
    }
    match (num("handover.slack_min_s"), num("handover.slack_p01_s")) {
        (Some(min), Some(p01)) => {
            if p01 < min {
                bad(format!("handover.slack_p01_s ({p01}) is below handover.slack_min_s ({min})"));
            }
            if (min < 0.0) != (contended > 0) {
                bad(format!("handover.slack_min_s is {min} s but {contended} hand-overs contend"));
            }
        }
        (None, None) if n == 0 => {}
        _ => bad(format!("handover: {n} hand-overs but slack_min_s/slack_p01_s do not match that")),
    }
    let Some(Value::Array(pairs)) = lookup(report, "handover.pairs") else {
        bad("handover.pairs is missing".into());
        return;
    };
    let mut sum = count("handover.pairs_untracked");
    for p in pairs {
        let get = |k: &str| p.get(k).and_then(Value::as_f64).unwrap_or(f64::NAN);
        let (c, min, p50, pc) = (get("count"), get("slack_min_s"), get("slack_p50_s"), get("contended"));
        sum += c as u64;
        if p50.is_nan() || p50 < min {
            bad(format!("handover pair {p}: slack_p50_s below slack_min_s"));
        }
        if (min < 0.0) != (pc > 0.0) || pc > c {
            bad(format!("handover pair {p}: contended {pc} of {c} with smallest slack {min} s"));
        }
        if num("handover.slack_min_s").is_some_and(|all| min < all) {
            bad(format!("handover pair {p}: slack below the overall minimum"));
        }
    }
    if sum != n {
        bad(format!("handover pairs (with the untracked) count {sum} hand-overs, not handover.count ({n})"));
    }
}

fn lookup<'a>(v: &'a Value, path: &str) -> Option<&'a Value> {
    path.split('.').try_fold(v, |v, k| v.get(k))
}

/// NaN and infinities cannot be written as JSON numbers: serde writes `null`.
fn finite_everywhere(v: &Value, path: &str, bad: &mut impl FnMut(String)) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                let p = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
                if p == "run" {
                    continue;
                }
                // Fields where null means "none": no edge limit, an open line,
                // a down period not (yet) noticed, ended or answered.
                let nullable = [
                    "limits.max_bit_rate_bit_s",
                    "line.dc_load_ohm",
                    "recovery.found_silent_after_max_s",
                    "recovery.answered_after_max_s",
                    "outages.found_silent_after_s",
                    "outages.up_at_s",
                    "outages.answered_after_s",
                    "bounds.bound_s",
                    "bounds.simulated_max_s",
                    "bounds.ratio",
                ];
                if x.is_null() && !nullable.contains(&p.as_str()) && !p.ends_with(".amplitude_dc_v") {
                    bad(format!("{p} is null (not a finite number)"));
                }
                finite_everywhere(x, &p, bad);
            }
        }
        Value::Array(a) => a.iter().for_each(|x| finite_everywhere(x, path, bad)),
        Value::Number(n) if n.as_f64().is_none_or(|x| !x.is_finite()) => {
            bad(format!("{path} = {n} is not finite"));
        }
        _ => {}
    }
}

/// A latency summary: ordered percentiles, mean ≤ max ≤ the run.
fn summary(report: &Value, p: &str, whole_s: f64, bad: &mut impl FnMut(String)) {
    let get = |k: &str| lookup(report, &format!("{p}.{k}")).and_then(Value::as_f64).unwrap_or(f64::NAN);
    let (mean, p50, p90, p99, p999, max) = (get("mean"), get("p50"), get("p90"), get("p99"), get("p999"), get("max"));
    if get("count") == 0.0 {
        if [mean, p50, p90, p99, p999, max].iter().any(|&x| x != 0.0) {
            bad(format!("{p}: no samples but non-zero figures"));
        }
        return;
    }
    let ordered = [0.0, p50, p90, p99, p999, max];
    if ordered.windows(2).any(|w| w[0].partial_cmp(&w[1]).is_none_or(|o| o.is_gt())) {
        bad(format!("{p}: percentiles out of order (p50 {p50}, p90 {p90}, p99 {p99}, p999 {p999}, max {max})"));
    }
    if mean.is_nan() || mean < 0.0 || mean > max * (1.0 + SUM_TOLERANCE) {
        bad(format!("{p}: mean {mean} outside [0, max {max}]"));
    }
    if max > whole_s {
        bad(format!("{p}: max {max} s is longer than any run"));
    }
}

fn totals(report: &Value, obj: &str, n: &str, total: &str, max: &str, run_s: f64, bad: &mut impl FnMut(String)) {
    let get = |k: &str| lookup(report, &format!("{obj}.{k}")).and_then(Value::as_f64).unwrap_or(f64::NAN);
    let (events, t, m) = (get(n), get(total), get(max));
    if t.is_nan() || m.is_nan() || t < m * (1.0 - SUM_TOLERANCE) {
        bad(format!("{obj}.{total} ({t}) is smaller than {obj}.{max} ({m})"));
    }
    if m > run_s * (1.0 + SUM_TOLERANCE) {
        bad(format!("{obj}.{max} ({m} s) exceeds the measured {run_s} s"));
    }
    if events == 0.0 && (t != 0.0 || m != 0.0) {
        bad(format!("{obj}: no {n} but non-zero times"));
    }
    if events > 0.0 && m <= 0.0 {
        bad(format!("{obj}: {events} {n} but a zero {max}"));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_consistent_report_passes_and_each_break_is_named() {
        let spec = crate::scenario::parse_str(
            &std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/buoy-link.toml")).unwrap(),
            "buoy-link.toml",
        )
        .unwrap();
        let good = serde_json::to_value(crate::simulate(&spec)).unwrap();
        assert_eq!(violations(&good), Vec::<String>::new());
        let mut r = good.clone();
        r["utilization"]["idle"] = serde_json::json!(1.95e11);
        assert!(violations(&r).iter().any(|v| v.contains("utilization.idle")));
        let mut r = good.clone();
        r["contention"] = serde_json::json!({"events": 3, "overlap_total_s": 1e-9, "overlap_max_s": 2e-9, "first": []});
        assert!(violations(&r).iter().any(|v| v.contains("smaller than")));
        let mut r = good.clone();
        r["frames"]["delivered"] = serde_json::json!(r["frames"]["attempts"].as_u64().unwrap() + 1);
        assert!(violations(&r).iter().any(|v| v.contains("frames.attempts")));
        let mut r = good;
        r["scheme"]["cycle_max_s"] = serde_json::json!(18446744.0);
        assert!(violations(&r).iter().any(|v| v.contains("cycle_max_s")));
    }
}
