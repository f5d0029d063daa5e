//! Latency distribution per node: percentile curves from p50 to p99.99 on
//! a quantile axis (position log10(1/(1 − q)), the usual way to show the
//! tail of an HDR histogram).

use super::axis::{Axis, Scale};
use super::chart::{Chart, Series};
use crate::report::Report;
use crate::stats::LatencyStats;

/// Above this many nodes, only the overall curve and the slowest nodes get
/// colours; the rest are drawn thin and grey.
pub const COLOURED_NODES: usize = 8;
const HIGHLIGHT: usize = 4;

fn curve(l: &LatencyStats) -> Vec<(f64, f64)> {
    // 0.02-decade steps of 1/(1 − q) from q = 0.5 to q = 0.9999.
    let (a, b) = (2f64.log10(), 4.0);
    let steps = ((b - a) / 0.02).ceil() as usize;
    (0..=steps)
        .map(|k| {
            let u = a + (b - a) * k as f64 / steps as f64;
            let q = 1.0 - 10f64.powf(-u);
            (q, l.quantile_ps(q) as f64 * 1e-12)
        })
        .collect()
}

/// The chart for a run's report; `None` when no message was delivered.
pub fn chart(report: &Report) -> Result<Option<Chart>, String> {
    let t = &report.tallies;
    let all = LatencyStats::from_tally(&t.latency)?;
    if all.count() == 0 {
        return Ok(None);
    }
    let mut nodes = Vec::new();
    for (name, tally) in &t.latency_nodes {
        let l = LatencyStats::from_tally(tally)?;
        if l.count() > 0 {
            nodes.push((name.clone(), l));
        }
    }
    let mut series = Vec::new();
    let few = nodes.len() <= COLOURED_NODES;
    // The slowest tails: highest p99.99 first (ties by name).
    let mut rank: Vec<usize> = (0..nodes.len()).collect();
    rank.sort_by(|&i, &j| nodes[j].1.quantile_ps(0.9999).cmp(&nodes[i].1.quantile_ps(0.9999)).then(i.cmp(&j)));
    let highlighted: Vec<usize> = rank.into_iter().take(HIGHLIGHT).collect();
    for (i, (name, l)) in nodes.iter().enumerate() {
        let shown = few || highlighted.contains(&i);
        series.push(Series {
            name: format!("{name} ({} messages)", l.count()),
            points: curve(l),
            failed: Vec::new(),
            background: !shown,
            emphasis: false,
            markers: false,
        });
    }
    if nodes.len() > 1 {
        series.push(Series {
            name: format!("all nodes ({} messages)", all.count()),
            points: curve(&all),
            failed: Vec::new(),
            background: false,
            emphasis: true,
            markers: false,
        });
    }
    let ys = series.iter().flat_map(|s| s.points.iter().map(|p| p.1));
    let y = Axis::fit(ys, Scale::Linear, Some("s".into()), true);
    let subtitle = if few {
        format!(
            "{} source node{}; latency from a message's arrival in its queue to its delivery",
            nodes.len(),
            if nodes.len() == 1 { "" } else { "s" }
        )
    } else {
        format!(
            "{} source nodes (grey); coloured: the {HIGHLIGHT} with the longest p99.99 tail, and all nodes together",
            nodes.len()
        )
    };
    Ok(Some(Chart {
        title: format!("Latency distribution: {}", report.scenario.name),
        subtitle,
        x_label: "percentile (axis spaced by log10 1/(1 − q))".into(),
        y_label: "latency [s]".into(),
        x: Axis { lo: 0.5, hi: 0.9999, scale: Scale::Percentile, unit: None },
        y,
        series,
        failed_label: String::new(),
    }))
}
