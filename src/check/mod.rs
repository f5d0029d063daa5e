//! Expectations and report comparison: the regression workflow's logic,
//! with no I/O. A report is flattened into dotted metric paths (the same
//! names as the JSON), each with a physical dimension inferred from its
//! name, so that `"150 us"` can be compared with `latency_s.all.p99`.

pub mod diff;

use std::collections::BTreeMap;

use serde_json::Value;

use crate::scenario::error::{did_you_mean, ScenarioError};
use crate::spec::{ExpectValue, Expectation, Op};
use crate::units::{self, Dimension};

/// Every numeric leaf of a report, by dotted path, without the machine-dependent `run`.
pub fn flatten(report: &Value) -> BTreeMap<String, f64> {
    fn walk(v: &Value, path: &str, out: &mut BTreeMap<String, f64>) {
        match v {
            Value::Object(m) => {
                for (k, x) in m {
                    let p = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
                    if p != "run" {
                        walk(x, &p, out);
                    }
                }
            }
            Value::Number(n) => {
                if let Some(x) = n.as_f64() {
                    out.insert(path.to_owned(), x);
                }
            }
            Value::Bool(b) => {
                out.insert(path.to_owned(), f64::from(u8::from(*b)));
            }
            _ => {}
        }
    }
    let mut out = BTreeMap::new();
    walk(report, "", &mut out);
    out
}

/// Metrics a report has only once there is something to measure, with why
/// a run may have no value: an expectation may name them all the same.
pub const CONDITIONAL: &[(&str, &str)] = &[
    ("handover.slack_min_s", "no hand-over from one driver to another happened in the measured window"),
    ("handover.slack_p01_s", "no hand-over from one driver to another happened in the measured window"),
    ("recovery.found_silent_after_max_s", "no down period was found silent (see recovery.never_found_silent)"),
    ("recovery.answered_after_max_s", "no node came back and answered (see recovery.never_answered)"),
];

fn conditional(metric: &str) -> Option<&'static str> {
    if metric.starts_with("bound_s.flows.") {
        return Some("the flow has no worst-case bound (`halfwire bound` says why)");
    }
    CONDITIONAL.iter().find(|(m, _)| *m == metric).map(|(_, why)| *why)
}

/// The physical dimension of a metric, from its name; `None` for counts and fractions.
pub fn dimension_of(path: &str) -> Option<Dimension> {
    let parts: Vec<&str> = path.split('.').collect();
    let leaf = *parts.last()?;
    if leaf == "count" || leaf.ends_with("_node") {
        return None;
    }
    let has = |suffix: &str| leaf.ends_with(suffix);
    if has("_bit_s") {
        Some(Dimension::BitRate)
    } else if has("_s_per_m") {
        Some(Dimension::DelayPerLength)
    } else if has("_s") || parts.first() == Some(&"latency_s") || parts.first() == Some(&"bound_s") {
        Some(Dimension::Time)
    } else if has("_v") {
        Some(Dimension::Voltage)
    } else if has("_ohm") {
        Some(Dimension::Resistance)
    } else if has("_m") {
        Some(Dimension::Length)
    } else {
        None
    }
}

/// An expectation resolved against a report's metrics: ready to evaluate.
#[derive(Clone, Debug)]
pub struct Resolved {
    pub expectation: Expectation,
    pub required: f64,
}

/// Check every expectation's metric path and value unit against `metrics`
/// (a report of this scenario). Errors point at the scenario file.
pub fn resolve(
    file: &str,
    expect: &[Expectation],
    metrics: &BTreeMap<String, f64>,
) -> Result<Vec<Resolved>, ScenarioError> {
    let mut out = Vec::new();
    for (i, e) in expect.iter().enumerate() {
        let place = |at: (usize, usize), key: &str, msg: String| ScenarioError {
            file: file.to_owned(),
            line: at.0,
            column: at.1,
            key: format!("expect[{i}].{key}"),
            message: msg,
            hint: None,
            source_line: None,
        };
        if !metrics.contains_key(&e.metric) && conditional(&e.metric).is_none() {
            let mut err = place(e.metric_at, "metric", format!("the report has no metric \"{}\"", e.metric));
            if let Some(m) = did_you_mean(&e.metric, metrics.keys().map(String::as_str)) {
                err = err.with_hint(format!("did you mean \"{m}\"?"));
            }
            return Err(err);
        }
        let dim = dimension_of(&e.metric);
        let required = match (&e.value, dim) {
            (ExpectValue::Number(x), None) => *x,
            (ExpectValue::Number(x), Some(_)) if *x == 0.0 => 0.0,
            (ExpectValue::Number(x), Some(d)) => {
                return Err(place(
                    e.value_at,
                    "value",
                    format!(
                        "{} is {}: write the value with a unit, e.g. \"{}\" (a bare {x} is ambiguous)",
                        e.metric,
                        units::describe(d),
                        units::example(d)
                    ),
                ))
            }
            (ExpectValue::Text(s), Some(d)) => units::parse_quantity(s, d).map_err(|err| {
                place(e.value_at, "value", format!("{} is {}: {}", e.metric, units::describe(d), err.message))
            })?,
            (ExpectValue::Text(s), None) => s.trim().parse::<f64>().map_err(|_| {
                place(
                    e.value_at,
                    "value",
                    format!("{} is a plain number (a count or a fraction), not \"{s}\"", e.metric),
                )
            })?,
        };
        out.push(Resolved { expectation: e.clone(), required });
    }
    Ok(out)
}

/// The outcome of one expectation.
#[derive(Clone, Debug, serde::Serialize)]
pub struct Outcome {
    pub metric: String,
    pub op: &'static str,
    pub required: f64,
    pub measured: f64,
    /// With `confidence = true` and replications: the confidence limit compared.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub limit: Option<f64>,
    pub pass: bool,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
}

/// A scenario's expectations resolved against the metrics a report of it
/// has (from a run of no length), ready to judge `replications` runs of it.
/// A `confidence = true` expectation needs two or more: one run has no
/// interval to compare.
pub fn prepare(file: &str, spec: &crate::spec::Spec, replications: u64) -> Result<Vec<Resolved>, ScenarioError> {
    if replications < 2 {
        if let Some((i, e)) = spec.expect.iter().enumerate().find(|(_, e)| e.confidence) {
            return Err(ScenarioError {
                file: file.to_owned(),
                line: e.metric_at.0,
                column: e.metric_at.1,
                key: format!("expect[{i}].confidence"),
                message: format!(
                    "[[expect]] {}: confidence = true compares the 95 % confidence limit, which needs \
                     --replications N (N ≥ 2); without replications there is no interval",
                    e.metric
                ),
                hint: None,
                source_line: None,
            });
        }
    }
    let mut probe = spec.clone();
    probe.warmup = units::Picos::ZERO;
    probe.duration = units::Picos(1);
    let metrics = flatten(&serde_json::to_value(crate::simulate(&probe)).expect("a report serializes"));
    resolve(file, &spec.expect, &metrics)
}

/// Judge the flattened reports of one scenario's runs: a single run by its
/// own figures; several by their means, with `confidence = true`
/// expectations at the unfavourable end of the 95 % interval.
pub fn judge(resolved: &[Resolved], runs: &[BTreeMap<String, f64>]) -> Vec<Outcome> {
    if let [one] = runs {
        return resolved.iter().map(|r| evaluate(r, one, None)).collect();
    }
    let summary = crate::stats::replication::summarize(runs);
    let means = summary.iter().map(|(k, m)| (k.clone(), m.mean)).collect();
    let intervals = summary.iter().map(|(k, m)| (k.clone(), (m.ci95_low, m.ci95_high))).collect();
    resolved.iter().map(|r| evaluate(r, &means, Some(&intervals))).collect()
}

/// Evaluate against the measured metrics; with `interval`, a confidence
/// expectation must hold at the unfavourable end of the 95 % interval.
pub fn evaluate(
    r: &Resolved,
    metrics: &BTreeMap<String, f64>,
    interval: Option<&BTreeMap<String, (f64, f64)>>,
) -> Outcome {
    let e = &r.expectation;
    let Some(&measured) = metrics.get(&e.metric) else {
        // A metric the run gives no value for fails its expectation, saying why.
        let why = conditional(&e.metric).unwrap_or("the report has no such metric");
        return Outcome {
            metric: e.metric.clone(),
            op: e.op.symbol(),
            required: r.required,
            measured: f64::NAN,
            limit: None,
            pass: false,
            message: Some(format!("no value: {why}")),
        };
    };
    let (limit, pass) = match (e.confidence, interval.and_then(|i| i.get(&e.metric))) {
        // At the confidence limit: the unfavourable end of the interval.
        (true, Some(&(lo, hi))) => match e.op {
            Op::Lt | Op::Le => (Some(hi), e.op.holds(hi, r.required)),
            Op::Gt | Op::Ge => (Some(lo), e.op.holds(lo, r.required)),
            Op::Eq => (Some(if r.required < lo { lo } else { hi }), lo <= r.required && r.required <= hi),
        },
        _ => (None, e.op.holds(measured, r.required)),
    };
    Outcome {
        metric: e.metric.clone(),
        op: e.op.symbol(),
        required: r.required,
        measured,
        limit,
        pass,
        message: e.message.clone(),
    }
}

/// Show a metric's value with its unit.
pub fn show(metric: &str, x: f64) -> String {
    if x.is_nan() {
        return "none".into();
    }
    match dimension_of(metric) {
        Some(Dimension::Time) => units::format_seconds(x),
        Some(Dimension::BitRate) => units::format_si(x, "bit/s"),
        Some(Dimension::Voltage) => units::format_si(x, "V"),
        Some(Dimension::Resistance) => units::format_si(x, "Ω"),
        Some(Dimension::Length) => units::format_si(x, "m"),
        Some(Dimension::DelayPerLength) => format!("{}/m", units::format_seconds(x)),
        _ => {
            if x.fract() == 0.0 && x.abs() < 1e15 {
                format!("{x:.0}")
            } else {
                format!("{x:.6}")
            }
        }
    }
}
