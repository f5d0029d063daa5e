//! How often a message is slower than each latency: for every node (and
//! all nodes together) the fraction of its messages whose latency exceeds
//! x, on a logarithmic axis read as "1 in 10", "1 in 100", … Each curve
//! stops at 1 in its own message count, where its data ends (a cross marks
//! its slowest message); requirements from the scenario's `[[expect]]` on
//! latency are drawn as the region they forbid.

use super::axis::{Axis, Scale};
use super::chart::{Chart, Guide, Series};
use crate::report::Report;
use crate::stats::LatencyStats;

/// Above this many nodes, only the overall curve and the slowest nodes get
/// colours; the rest are drawn thin and grey.
pub const COLOURED_NODES: usize = 8;
const HIGHLIGHT: usize = 4;

/// A latency requirement: the `quantile` (None: the maximum) of `source`
/// ("all" or a node's name) at most `limit_s`.
#[derive(Clone, Debug, PartialEq)]
pub struct Requirement {
    pub source: String,
    pub quantile: Option<f64>,
    pub limit_s: f64,
    pub label: String,
}

impl Requirement {
    /// The requirement an `[[expect]]` states, if it bounds a latency
    /// quantile or maximum from above: `latency_s.all.p99 <= 1 ms`,
    /// `latency_s.nodes.card07.max < 200 us`.
    pub fn from_expectation(metric: &str, op: &str, limit_s: f64) -> Option<Requirement> {
        if !matches!(op, "<=" | "<") {
            return None;
        }
        let rest = metric.strip_prefix("latency_s.")?;
        let (source, stat) = rest.rsplit_once('.')?;
        let source = match source.split_once('.') {
            None if source == "all" => "all".to_owned(),
            Some(("nodes", name)) => name.to_owned(),
            _ => return None,
        };
        let quantile = match stat {
            "max" => None,
            p => Some(p.strip_prefix('p')?.parse::<f64>().ok().map(|d| {
                // p50 → 0.5, p99 → 0.99, p999 → 0.999, p9999 → 0.9999.
                let digits = p.len() as i32 - 1;
                d / 10f64.powi(digits)
            })?),
        };
        let what = match quantile {
            None => "max".to_owned(),
            Some(_) => stat.to_owned(),
        };
        let shown_op = if op == "<=" { "≤" } else { "<" };
        let label = format!("requirement: {what} {shown_op} {} ({source})", crate::units::format_seconds(limit_s));
        Some(Requirement { source, quantile, limit_s, label })
    }
}

/// (latency in s, fraction of messages slower), from every message to the
/// slowest one (1 in `count`), in 0.02-decade steps of the fraction.
fn curve(l: &LatencyStats) -> Vec<(f64, f64)> {
    let n = l.count() as f64;
    let last = n.log10();
    let steps = (last / 0.02).ceil().max(1.0) as usize;
    let mut out: Vec<(f64, f64)> = (0..=steps)
        .map(|k| {
            let y = 10f64.powf(-last * k as f64 / steps as f64);
            (l.quantile_ps(1.0 - y) as f64 / 1e12, y)
        })
        .collect();
    // The slowest message exactly.
    if let Some(end) = out.last_mut() {
        *end = (l.quantile_ps(1.0) as f64 / 1e12, 1.0 / n);
    }
    out
}

/// The chart for a run's report; `None` when no message was delivered.
pub fn chart(report: &Report, requirements: &[Requirement]) -> Result<Option<Chart>, String> {
    let set = report.latency_set();
    let all = set.all.clone();
    if all.count() == 0 {
        return Ok(None);
    }
    let nodes: Vec<(String, LatencyStats)> = set.nodes.iter().filter(|(_, l)| l.count() > 0).cloned().collect();
    let mut series = Vec::new();
    let few = nodes.len() <= COLOURED_NODES;
    // The slowest nodes: longest maximum first (ties by name).
    let mut rank: Vec<usize> = (0..nodes.len()).collect();
    rank.sort_by(|&i, &j| nodes[j].1.quantile_ps(1.0).cmp(&nodes[i].1.quantile_ps(1.0)).then(i.cmp(&j)));
    let highlighted: Vec<usize> = rank.into_iter().take(HIGHLIGHT).collect();
    for (i, (name, l)) in nodes.iter().enumerate() {
        let shown = few || highlighted.contains(&i);
        let mut s = Series::line(format!("{name} ({} messages)", l.count()), curve(l));
        s.background = !shown;
        s.end_marker = true;
        series.push(s);
    }
    if nodes.len() > 1 {
        let mut s = Series::line(format!("all nodes ({} messages)", all.count()), curve(&all));
        s.emphasis = true;
        s.end_marker = true;
        series.push(s);
    }
    let guides: Vec<Guide> = requirements
        .iter()
        .filter(|r| r.source == "all" || nodes.iter().any(|(n, _)| *n == r.source))
        .map(|r| Guide { x: Some(r.limit_s), y: r.quantile.map(|q| 1.0 - q), label: r.label.clone() })
        .collect();
    // Room right of a requirement, so the region it forbids shows.
    let xs = series
        .iter()
        .flat_map(|s| s.points.iter().map(|p| p.0))
        .chain(guides.iter().filter_map(|g| g.x.map(|x| x * 1.15)));
    let x = Axis::fit(xs, Scale::Linear, Some("s".into()), true);
    let fewest = series.iter().flat_map(|s| s.points.last().map(|p| p.1)).fold(1.0, f64::min);
    let floor = guides.iter().filter_map(|g| g.y).fold(fewest, f64::min);
    let y = Axis { lo: 10f64.powf(floor.log10().floor()).min(0.1), hi: 1.0, scale: Scale::OneIn, unit: None };
    let subtitle = if few {
        format!(
            "{}; latency from a message's arrival in its queue to its delivery; each curve ends at its slowest message",
            crate::units::count(nodes.len() as u64, "source node")
        )
    } else {
        format!(
            "{} source nodes (grey); coloured: the {HIGHLIGHT} with the slowest message, and all nodes together",
            nodes.len()
        )
    };
    Ok(Some(Chart {
        title: format!("How often a message is slower: {}", report.scenario.name),
        subtitle,
        x_label: "latency, arrival to delivery [s]".into(),
        y_label: "messages slower than this latency".into(),
        x,
        y,
        series,
        failed_label: String::new(),
        failed_other_label: String::new(),
        end_label: "the slowest message (1 in the curve's count)".into(),
        guides,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn latency_expectations_become_requirements() {
        let r = Requirement::from_expectation("latency_s.all.p99", "<=", 1e-3).unwrap();
        assert_eq!((r.source.as_str(), r.quantile, r.limit_s), ("all", Some(0.99), 1e-3));
        let r = Requirement::from_expectation("latency_s.nodes.card07.p999", "<", 2e-4).unwrap();
        assert_eq!((r.source.as_str(), r.quantile), ("card07", Some(0.999)));
        let r = Requirement::from_expectation("latency_s.nodes.a.b.max", "<=", 1.0).unwrap();
        assert_eq!((r.source.as_str(), r.quantile), ("a.b", None));
        assert_eq!(Requirement::from_expectation("latency_s.all.p50", "<=", 1.0).unwrap().quantile, Some(0.5));
        assert!(Requirement::from_expectation("latency_s.all.mean", "<=", 1.0).is_none());
        assert!(Requirement::from_expectation("latency_s.all.p99", ">=", 1.0).is_none());
        assert!(Requirement::from_expectation("throughput.carried", "<=", 1.0).is_none());
    }
}
