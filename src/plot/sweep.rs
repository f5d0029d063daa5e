//! A sweep chart: one metric against the first varied key, one series per
//! value of another varied key, and a ring on points that fail the
//! scenario's `[[expect]]` requirements.

use std::collections::BTreeMap;

use super::axis::{Axis, Scale};
use super::chart::{Chart, Guide, Series};
use crate::scenario::error::did_you_mean;
use crate::sweep::row::Row;

/// Check that `metric` is one the rows carry (or, before a sweep, one the
/// metric list `names` has), with a "did you mean" hint otherwise.
pub fn check_metric<'a>(metric: &str, names: impl Iterator<Item = &'a str> + Clone) -> Result<(), String> {
    if names.clone().any(|n| n == metric) {
        return Ok(());
    }
    let hint = did_you_mean(metric, names.clone()).map(|m| format!(": did you mean \"{m}\"?")).unwrap_or_else(|| {
        format!(
            ": sweep metrics are {}",
            names.filter(|n| !n.starts_with("latency_s.nodes.")).collect::<Vec<_>>().join(", ")
        )
    });
    Err(format!("--y {metric:?} is not a sweep metric{hint}"))
}

/// True when sorted, distinct, positive values are evenly spaced in logarithm.
fn geometric(xs: &[f64]) -> bool {
    if xs.len() < 3 || xs.iter().any(|&x| x <= 0.0) {
        return false;
    }
    let r = xs[1] / xs[0];
    r > 1.0 && xs.windows(2).all(|w| ((w[1] / w[0]) / r - 1.0).abs() < 0.01)
}

pub fn chart(rows: &[Row], metric: &str, series_key: Option<&str>) -> Result<Chart, String> {
    let first = rows.first().ok_or("the sweep has no rows to plot")?;
    // Every row must carry the varied keys in one order (a row file edited by hand may not).
    let keys_of = |r: &Row| r.params.iter().map(|p| p.key.clone()).collect::<Vec<_>>();
    if first.params.is_empty() || rows.iter().any(|r| keys_of(r) != keys_of(first)) {
        return Err("the rows do not carry the sweep's varied parameters in one order, so there is no x axis to \
                    plot against (were the row files edited?)"
            .into());
    }
    let x_key = first.params[0].key.clone();
    let keys: Vec<&str> = first.params.iter().map(|p| p.key.as_str()).collect();
    if let Some(s) = series_key {
        if s == x_key {
            return Err(format!("--series {s}: that key is already the x axis (the first --vary)"));
        }
        if !keys.contains(&s) {
            return Err(format!("--series {s}: not a varied key (the sweep varies {})", keys.join(", ")));
        }
    }
    check_metric(metric, first.metrics.keys().map(String::as_str))?;
    // Series: the chosen key first, then any other non-x key.
    let mut others: Vec<&str> = keys.iter().copied().filter(|k| *k != x_key).collect();
    if let Some(s) = series_key {
        others.retain(|k| *k != s);
        others.insert(0, s);
    }
    let mut groups: BTreeMap<Vec<String>, Vec<&Row>> = BTreeMap::new();
    let mut order: Vec<Vec<String>> = Vec::new();
    for r in rows {
        let label: Vec<String> = others
            .iter()
            .map(|k| {
                r.params
                    .iter()
                    .find(|p| p.key == *k)
                    .map_or(String::new(), |p| format!("{} = {}", key_words(k), p.value_text()))
            })
            .collect();
        if !groups.contains_key(&label) {
            order.push(label.clone());
        }
        groups.entry(label).or_default().push(r);
    }
    let x_of = |r: &Row| r.params[0].si;
    if rows.iter().any(|r| x_of(r).is_none()) {
        return Err(format!(
            "{x_key} takes values that are not numbers, so it cannot be an x axis; vary a numeric key first"
        ));
    }
    let mut series = Vec::new();
    for label in order {
        let mut pts: Vec<&Row> = groups[&label].clone();
        pts.sort_by(|a, b| x_of(a).partial_cmp(&x_of(b)).unwrap_or(std::cmp::Ordering::Equal));
        series.push(Series {
            name: if label.is_empty() { metric.to_owned() } else { label.join(", ") },
            points: pts
                .iter()
                .map(|r| (x_of(r).unwrap_or(0.0), r.metrics.get(metric).copied().unwrap_or(f64::NAN)))
                .collect(),
            failed: pts.iter().map(|r| r.expectations.failed.iter().any(|m| m == metric)).collect(),
            failed_other: pts.iter().map(|r| r.expectations.failed.iter().any(|m| m != metric)).collect(),
            background: false,
            emphasis: false,
            markers: true,
            end_marker: false,
        });
    }
    let mut xs: Vec<f64> = rows.iter().filter_map(x_of).collect();
    xs.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    xs.dedup();
    let x_scale = if geometric(&xs) { Scale::Log10 } else { Scale::Linear };
    let x_unit = first.params[0].unit.clone();
    let y_unit = crate::check::dimension_of(metric).map(|d| crate::sweep::axis::base_unit(d).to_owned());
    // The scenario's requirements on the plotted metric, as lines.
    let mut guides: Vec<Guide> = Vec::new();
    for q in first.expectations.required.iter().filter(|q| q.metric == metric) {
        if !guides.iter().any(|g| g.y == Some(q.value)) {
            guides.push(Guide {
                x: None,
                y: Some(q.value),
                label: format!("requirement: {} {}", op_symbol(&q.op), crate::check::show(metric, q.value)),
            });
        }
    }
    let ys: Vec<f64> =
        series.iter().flat_map(|s| s.points.iter().map(|p| p.1)).chain(guides.iter().filter_map(|g| g.y)).collect();
    let from_zero = ys.iter().all(|&y| y >= 0.0);
    let x = if x_scale == Scale::Log10 {
        Axis { lo: xs[0], hi: xs[xs.len() - 1], scale: Scale::Log10, unit: x_unit.clone() }
    } else {
        Axis::fit(xs.iter().copied(), Scale::Linear, x_unit.clone(), false)
    };
    let with_unit = |k: String, u: &Option<String>| match u {
        Some(u) => format!("{k} [{u}]"),
        None => k,
    };
    let replications = first.replications.len();
    Ok(Chart {
        title: format!("{} against {}: {}", metric_words(metric), key_words(&x_key), first.scenario),
        subtitle: format!(
            "sweep {} · {} points · {} replication{} per point (pooled)",
            first.sweep,
            rows.len(),
            replications,
            if replications == 1 { "" } else { "s" }
        ),
        x_label: with_unit(key_words(&x_key), &x_unit),
        y_label: with_unit(metric_words(metric), &y_unit),
        x,
        y: Axis::fit(ys.iter().copied(), Scale::Linear, y_unit, from_zero),
        series,
        failed_label: format!("fails the requirement on {}", metric_words(metric)),
        failed_other_label: "meets it, but fails another requirement".into(),
        end_label: String::new(),
        guides,
    })
}

/// A scenario key in words: `nodes.traffic.rate` → "Poisson rate per node".
pub fn key_words(key: &str) -> String {
    let known = match key {
        "nodes.traffic.rate" => "Poisson rate per node",
        "nodes.traffic.period" => "period per node",
        "nodes.traffic.payload" => "payload per message",
        "nodes.count" => "number of nodes",
        "nodes.spacing" => "node spacing",
        "access.turnaround" => "turnaround",
        "access.response_latency" => "response latency",
        "access.max_per_poll" => "messages per poll",
        "access.max_per_token" => "messages per token",
        "access.guard" => "guard time",
        "access.slot_length" => "slot length",
        "access.reply_timeout" => "reply timeout",
        "frame.bit_rate" => "bit rate",
        "frame.overhead_bits" => "frame overhead",
        "line.length" => "line length",
        "line.noise" => "noise (rms)",
        "transceiver.enable_time" => "enable time",
        "transceiver.disable_time" => "disable time",
        "transceiver.receiver_delay" => "receiver delay",
        "seed" => "seed",
        "duration" => "simulated time",
        _ => "",
    };
    if !known.is_empty() {
        return known.to_owned();
    }
    // Otherwise the last part, in words, with where it lives: "load (transceiver)".
    match key.rsplit_once('.') {
        Some((head, last)) => format!("{} ({head})", last.replace('_', " ")),
        None => key.replace('_', " "),
    }
}

/// A report metric in words: `latency_s.all.p99` → "p99 latency, all nodes".
pub fn metric_words(metric: &str) -> String {
    let parts: Vec<&str> = metric.split('.').collect();
    match parts.as_slice() {
        ["latency_s", "all", stat] => format!("{} latency, all nodes", stat_words(stat)),
        ["latency_s", "nodes", node @ .., stat] => format!("{} latency of {}", stat_words(stat), node.join(".")),
        ["latency_s", "ids", id, stat] => format!("{} latency of {id}", stat_words(stat)),
        ["throughput", "carried"] => "carried load (share of the line)".into(),
        ["throughput", "offered"] => "offered load (share of the line)".into(),
        ["throughput", "payload_bit_s"] => "payload throughput".into(),
        ["contention", "events"] => "contention events".into(),
        ["contention", "overlap_max_s"] => "longest contention".into(),
        ["floating", "windows"] => "floating-line windows".into(),
        ["floating", "longest_s"] => "longest floating window".into(),
        ["handover", "slack_min_s"] => "smallest hand-over slack".into(),
        ["frames", what] => format!("frames {}", what.replace('_', " ")),
        ["utilization", what] => format!("line time: {}", what.replace('_', " ")),
        _ => metric.to_owned(),
    }
}

fn stat_words(stat: &str) -> String {
    match stat {
        "mean" => "mean".into(),
        "max" => "largest".into(),
        "count" => "count of".into(),
        s => s.to_owned(),
    }
}

/// `<=` as printed: `≤`.
pub fn op_symbol(op: &str) -> &str {
    match op {
        "<=" => "≤",
        ">=" => "≥",
        o => o,
    }
}
