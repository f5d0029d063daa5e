//! Sweep rows: one per run (or, after [`merge`], one per point), holding
//! the point's parameters, its headline metrics, the exact tallies and
//! latency histograms they come from, and the full report.

use std::collections::{BTreeMap, BTreeSet};

use serde::{Deserialize, Serialize};

use super::{Plan, RunId, SCHEMA};
use crate::report::tallies::Tallies;
use crate::report::Report;
use crate::spec::Spec;
use crate::stats::replication::{summarize, MetricCi};
use crate::sweep::axis::Literal;

/// One varied key's value at this point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Param {
    pub key: String,
    pub value: Literal,
    /// The value in SI base units (or the plain number).
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub si: Option<f64>,
    /// The SI base unit of `si`.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub unit: Option<String>,
}

/// One replication's own figures, kept so that intervals can be formed after merging.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Replication {
    pub replication: u64,
    pub seed: u64,
    pub metrics: BTreeMap<String, f64>,
    /// Metric paths of the scenario's `[[expect]]` entries that this replication fails.
    pub failed: Vec<String>,
}

/// The scenario's `[[expect]]` requirements at this point.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Expectations {
    pub checked: u64,
    /// Metrics failed by at least one replication.
    pub failed: Vec<String>,
    /// Each requirement: its metric, operator and value in SI base units
    /// (for drawing it on a chart).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub required: Vec<Required>,
}

/// One `[[expect]]`: `metric op value`, the value in SI base units.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Required {
    pub metric: String,
    pub op: String,
    pub value: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Row {
    pub schema: String,
    /// Fingerprint of the sweep: rows of different sweeps never merge.
    pub sweep: String,
    pub scenario: String,
    /// Points in the whole sweep, and replications per point.
    pub points: u64,
    pub replications_per_point: u64,
    pub point: u64,
    pub params: Vec<Param>,
    /// The replications this row holds.
    pub replications: Vec<u64>,
    /// Headline metrics pooled over the replications held: sums of the
    /// counters and of the latency histograms (see [`Tallies::metrics`]).
    pub metrics: BTreeMap<String, f64>,
    /// With two or more replications: mean and 95 % interval of each metric across them.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub ci95: BTreeMap<String, MetricCi>,
    pub expectations: Expectations,
    pub per_replication: Vec<Replication>,
    pub tallies: Tallies,
    /// The full report of the lowest replication held.
    pub report: serde_json::Value,
    /// Wall-clock seconds spent (machine-dependent, like the report's `run`).
    pub wall_s: f64,
}

impl Row {
    /// The row of one finished run.
    pub fn from_run(plan: &Plan, run: RunId, spec: &Spec, report: &Report) -> Row {
        let params = plan
            .values(run.point)
            .into_iter()
            .map(|(k, v)| Param { key: k.to_owned(), value: v.value.clone(), si: v.si, unit: v.unit.clone() })
            .collect();
        let json = serde_json::to_value(report).expect("a report serializes");
        let tallies = report.tallies();
        let metrics = tallies.metrics().expect("a fresh tally decodes");
        let (failed, required) = failed_expectations(plan.file(), spec, &json);
        Row {
            schema: SCHEMA.to_owned(),
            sweep: plan.id().to_owned(),
            scenario: spec.name.clone(),
            points: plan.points(),
            replications_per_point: plan.replications(),
            point: run.point,
            params,
            replications: vec![run.replication],
            metrics: metrics.clone(),
            ci95: BTreeMap::new(),
            expectations: Expectations { checked: spec.expect.len() as u64, failed: failed.clone(), required },
            per_replication: vec![Replication { replication: run.replication, seed: spec.seed, metrics, failed }],
            tallies,
            report: json,
            wall_s: report.run.wall_s,
        }
    }

    /// The runs this row covers.
    pub fn runs(&self) -> impl Iterator<Item = RunId> + '_ {
        self.replications.iter().map(|&r| RunId { point: self.point, replication: r })
    }
}

/// The expectations a run fails, and every requirement with its value.
fn failed_expectations(file: &str, spec: &Spec, report: &serde_json::Value) -> (Vec<String>, Vec<Required>) {
    if spec.expect.is_empty() {
        return (Vec::new(), Vec::new());
    }
    let metrics = crate::check::flatten(report);
    match crate::check::resolve(file, &spec.expect, &metrics) {
        Ok(resolved) => (
            resolved
                .iter()
                .map(|r| crate::check::evaluate(r, &metrics, None))
                .filter(|o| !o.pass)
                .map(|o| o.metric)
                .collect(),
            resolved
                .iter()
                .map(|r| Required {
                    metric: r.expectation.metric.clone(),
                    op: r.expectation.op.symbol().to_owned(),
                    value: r.required,
                })
                .collect(),
        ),
        Err(_) => (spec.expect.iter().map(|e| e.metric.clone()).collect(), Vec::new()),
    }
}

/// Check rows against the sweep they claim to belong to: one sweep id, one
/// plan size, every point and replication inside it, no run twice. `file`
/// names them in messages. This catches rows that were edited, forged or
/// mixed up, which would otherwise become extra points or counts.
pub fn check_rows(rows: &[Row], file: &str) -> Result<(), String> {
    let Some(first) = rows.first() else { return Ok(()) };
    let mut seen = BTreeSet::new();
    for (i, r) in rows.iter().enumerate() {
        let at = format!("{file}: row {}", i + 1);
        if (r.sweep.as_str(), r.points, r.replications_per_point)
            != (first.sweep.as_str(), first.points, first.replications_per_point)
        {
            return Err(format!(
                "{at}: sweep {} of {} points × {} replications, but row 1 is sweep {} of {} × {}",
                r.sweep, r.points, r.replications_per_point, first.sweep, first.points, first.replications_per_point
            ));
        }
        if r.point >= r.points {
            return Err(format!("{at}: point {} lies outside the sweep's {} points", r.point, r.points));
        }
        if r.replications.is_empty() {
            return Err(format!("{at}: the row holds no replication"));
        }
        let held: BTreeSet<u64> = r.per_replication.iter().map(|x| x.replication).collect();
        if held.len() != r.replications.len() || r.replications.iter().any(|k| !held.contains(k)) {
            return Err(format!("{at}: its replication list and its per-replication figures disagree"));
        }
        for &k in &r.replications {
            if k >= r.replications_per_point {
                return Err(format!(
                    "{at}: replication {k} lies outside the sweep's {} replications per point",
                    r.replications_per_point
                ));
            }
            if !seen.insert((r.point, k)) {
                return Err(format!("{at}: point {} replication {k} appears twice", r.point));
            }
        }
    }
    Ok(())
}

/// Combine rows into one per point, sorted by point. Rows of one point add
/// exactly: counters and latency histograms sum, every replication's own
/// metrics are kept, and the pooled metrics and intervals are recomputed.
/// The result does not depend on the order of `rows` or on how they were
/// split between files, so `merge` may be applied in stages.
pub fn merge(rows: Vec<Row>) -> Result<Vec<Row>, String> {
    let Some(first) = rows.first() else { return Ok(Vec::new()) };
    let (schema, sweep) = (first.schema.clone(), first.sweep.clone());
    let mut by_point: BTreeMap<u64, Vec<Row>> = BTreeMap::new();
    for r in rows {
        if r.schema != schema {
            return Err(format!("rows of two formats: {schema} and {}", r.schema));
        }
        if r.sweep != sweep {
            return Err(format!("rows of two different sweeps: {sweep} and {}", r.sweep));
        }
        by_point.entry(r.point).or_default().push(r);
    }
    by_point.into_values().map(merge_point).collect()
}

fn merge_point(mut rows: Vec<Row>) -> Result<Row, String> {
    rows.sort_by_key(|r| r.replications.iter().min().copied());
    let mut seen = BTreeSet::new();
    for r in &rows {
        if r.params != rows[0].params {
            return Err(format!("point {}: two rows disagree on its parameters", r.point));
        }
        for &k in &r.replications {
            if !seen.insert(k) {
                return Err(format!("point {} replication {k} appears twice", r.point));
            }
        }
    }
    let mut rest = rows.into_iter();
    let mut out = rest.next().expect("a point has a row");
    out.metrics.clear();
    let mut wall = out.wall_s;
    for r in rest {
        out.tallies.add(&r.tallies).map_err(|e| format!("point {}: {e}", r.point))?;
        out.per_replication.extend(r.per_replication);
        out.replications.extend(r.replications);
        out.expectations.checked = out.expectations.checked.max(r.expectations.checked);
        out.expectations.failed.extend(r.expectations.failed);
        wall += r.wall_s;
    }
    out.wall_s = wall;
    out.replications.sort_unstable();
    out.per_replication.sort_by_key(|r| r.replication);
    out.expectations.failed.sort();
    out.expectations.failed.dedup();
    out.metrics = out.tallies.metrics().map_err(|e| format!("point {}: {e}", out.point))?;
    out.ci95 = if out.per_replication.len() >= 2 {
        let runs: Vec<BTreeMap<String, f64>> = out.per_replication.iter().map(|r| r.metrics.clone()).collect();
        summarize(&runs)
    } else {
        BTreeMap::new()
    };
    Ok(out)
}

impl Param {
    /// The value as the user wrote it.
    pub fn value_text(&self) -> String {
        crate::sweep::AxisValue { value: self.value.clone(), si: None, unit: None }.text()
    }
}
