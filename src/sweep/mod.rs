//! Sweeps: one scenario run over a grid (or a zip) of values of any of its
//! keys, with replications per point. No I/O: the caller reads the scenario,
//! writes the rows and handles signals.
//!
//! A sweep is a list of *runs*: (point, replication) pairs, numbered
//! point-major. Each run produces one [`row::Row`]. Rows of one point add up
//! exactly ([`row::merge`]), whichever process or shard produced them.

pub mod axis;
pub mod row;
pub mod runner;
pub mod shard;

use sha2::{Digest, Sha256};
use toml_edit::DocumentMut;

use crate::scenario::ScenarioError;
use crate::spec::Spec;
pub use axis::{Axis, AxisValue, Literal};

/// Version tag of sweep rows.
pub const SCHEMA: &str = "halfwire-sweep/1";

/// Most points one sweep may have (each is validated before any run).
pub const MAX_POINTS: u64 = 1_000_000;

/// Most runs (points × replications) one sweep may have.
pub const MAX_RUNS: u64 = 100_000_000;

/// How several axes combine.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// Every combination (the first axis varies slowest).
    Grid,
    /// The k-th value of every axis together; all axes have one length.
    Zip,
}

/// Settings applied to every point after the varied keys (validated with it).
pub use crate::scenario::Overrides;

/// One simulation of the sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct RunId {
    pub point: u64,
    pub replication: u64,
}

/// A validated sweep description.
#[derive(Clone, Debug)]
pub struct Plan {
    file: String,
    text: String,
    axes: Vec<Axis>,
    mode: Mode,
    replications: u64,
    overrides: Overrides,
    points: u64,
    id: String,
}

/// Why a sweep cannot start.
#[derive(Clone, Debug, PartialEq)]
pub enum PlanError {
    /// A mistake in the command line (`--vary`, `--zip`, …).
    Arguments(String),
    /// The scenario itself, or one point of it, does not validate.
    Scenario(ScenarioError),
}

impl std::fmt::Display for PlanError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PlanError::Arguments(m) => f.write_str(m),
            PlanError::Scenario(e) => e.fmt(f),
        }
    }
}

impl Plan {
    /// Check the axes and validate the scenario at every point.
    pub fn new(
        file: &str,
        text: &str,
        axes: Vec<Axis>,
        mode: Mode,
        replications: u64,
        overrides: Overrides,
    ) -> Result<Plan, PlanError> {
        let args = |m: String| PlanError::Arguments(m);
        if axes.is_empty() {
            return Err(args("a sweep needs at least one --vary KEY=SPEC".into()));
        }
        for (i, a) in axes.iter().enumerate() {
            if axes[..i].iter().any(|b| b.key == a.key) {
                return Err(args(format!("--vary {}: the key is varied twice", a.key)));
            }
        }
        if !(1..=10_000).contains(&replications) {
            return Err(args("--replications takes 1 to 10000".into()));
        }
        let points = match mode {
            Mode::Grid => axes.iter().try_fold(1u64, |n, a| n.checked_mul(a.values.len() as u64)),
            Mode::Zip => {
                let n = axes[0].values.len();
                if let Some(b) = axes.iter().find(|a| a.values.len() != n) {
                    return Err(args(format!(
                        "--zip pairs values one to one, but {} has {n} values and {} has {}",
                        axes[0].key,
                        b.key,
                        b.values.len()
                    )));
                }
                Some(n as u64)
            }
        };
        let points = points.filter(|&n| n <= MAX_POINTS).ok_or_else(|| {
            args(format!("the sweep has more than {MAX_POINTS} points: split it into several sweeps"))
        })?;
        if points * replications > MAX_RUNS {
            return Err(args(format!(
                "the sweep has {points} points × {replications} replications, more than {MAX_RUNS} runs: split it"
            )));
        }
        // The scenario as given must be valid before any point is.
        crate::scenario::parse_str(text, file).map_err(PlanError::Scenario)?;
        let id = sweep_id(text, &axes, mode, replications, &overrides);
        let plan =
            Plan { file: file.to_owned(), text: text.to_owned(), axes, mode, replications, overrides, points, id };
        for p in 0..plan.points {
            plan.spec(p)?;
        }
        Ok(plan)
    }

    /// A short fingerprint of everything that determines the results.
    pub fn id(&self) -> &str {
        &self.id
    }

    pub fn points(&self) -> u64 {
        self.points
    }

    pub fn replications(&self) -> u64 {
        self.replications
    }

    pub fn runs(&self) -> u64 {
        self.points * self.replications
    }

    pub fn axes(&self) -> &[Axis] {
        &self.axes
    }

    pub fn file(&self) -> &str {
        &self.file
    }

    /// The run with this number (point-major).
    pub fn run_id(&self, n: u64) -> RunId {
        RunId { point: n / self.replications, replication: n % self.replications }
    }

    /// The value of every axis at `point`, in axis order.
    pub fn values(&self, point: u64) -> Vec<(&str, &AxisValue)> {
        let mut out = Vec::with_capacity(self.axes.len());
        match self.mode {
            Mode::Zip => {
                for a in &self.axes {
                    out.push((a.key.as_str(), &a.values[point as usize]));
                }
            }
            Mode::Grid => {
                let mut rest = point;
                let mut below: u64 = self.axes.iter().map(|a| a.values.len() as u64).product();
                for a in &self.axes {
                    below /= a.values.len() as u64;
                    out.push((a.key.as_str(), &a.values[(rest / below) as usize]));
                    rest %= below;
                }
            }
        }
        out
    }

    /// `key=value, key=value` for messages.
    pub fn describe(&self, point: u64) -> String {
        self.values(point).iter().map(|(k, v)| format!("{k}={}", v.text())).collect::<Vec<_>>().join(", ")
    }

    /// The validated scenario at `point` (replication 0's seed).
    pub fn spec(&self, point: u64) -> Result<Spec, PlanError> {
        let mut doc: DocumentMut =
            self.text.parse().map_err(|e| PlanError::Arguments(format!("{}: {e}", self.file)))?;
        for (key, v) in self.values(point) {
            crate::scenario::edit::set(&mut doc, key, &v.value)
                .map_err(|e| PlanError::Arguments(format!("--vary {key}: {e}")))?;
        }
        let text = doc.to_string();
        crate::scenario::parse_with(&text, &self.file, &self.overrides).map_err(|e| {
            if e.message.starts_with("unknown key") {
                let key =
                    self.values(point).iter().map(|(k, _)| *k).find(|k| k.ends_with(&e.key) || e.key.ends_with(k));
                let hint = e.hint.as_deref().map(|h| format!(" ({h})")).unwrap_or_default();
                PlanError::Arguments(format!(
                    "--vary {}: not a scenario key: {}{hint}",
                    key.unwrap_or(e.key.as_str()),
                    e.message
                ))
            } else {
                let mut e = e;
                e.message = format!("at sweep point {point} ({}): {}", self.describe(point), e.message);
                PlanError::Scenario(e)
            }
        })
    }

    /// The scenario for one run: the point's, with the replication's seed
    /// (replication 0 keeps the scenario's seed, as `run --replications` does).
    pub fn run_spec(&self, run: RunId) -> Result<Spec, PlanError> {
        let mut spec = self.spec(run.point)?;
        if run.replication > 0 {
            spec.seed = crate::engine::rng::replication_seed(spec.seed, run.replication);
        }
        Ok(spec)
    }
}

fn sweep_id(text: &str, axes: &[Axis], mode: Mode, replications: u64, o: &Overrides) -> String {
    let description = serde_json::json!({
        "schema": SCHEMA,
        "scenario": text,
        "axes": axes.iter().map(|a| serde_json::json!({ "key": a.key, "values": a.values })).collect::<Vec<_>>(),
        "mode": format!("{mode:?}"),
        "replications": replications,
        "seed": o.seed,
        // The duration by its value, so "50ms" and "50 ms" are one sweep.
        "duration_ps": o.duration.as_deref().map(|d| crate::units::parse_time(d).map_or(d.to_owned(), |t| t.0.to_string())),
    });
    let digest = Sha256::digest(description.to_string().as_bytes());
    digest.iter().take(8).map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    const SCENARIO: &str = include_str!("../../scenarios/railcar-doors.toml");

    fn plan(varies: &[&str], mode: Mode) -> Result<Plan, PlanError> {
        let axes = varies.iter().map(|v| axis::parse_vary(v).unwrap()).collect();
        Plan::new("railcar.toml", SCENARIO, axes, mode, 1, Overrides::default())
    }

    #[test]
    fn grid_order_is_first_axis_slowest() {
        let p = plan(&["nodes.count=4,8", "access.turnaround=1us,2us,3us"], Mode::Grid).unwrap();
        assert_eq!(p.points(), 6);
        assert_eq!(p.describe(0), "nodes.count=4, access.turnaround=1 us".replace("1 us", "1us"));
        assert_eq!(p.describe(4), "nodes.count=8, access.turnaround=2us");
        assert_eq!(p.spec(4).unwrap().nodes.len(), 9);
    }

    #[test]
    fn zip_pairs_and_needs_equal_lengths() {
        let p = plan(&["nodes.count=4,8", "access.turnaround=1us,2us"], Mode::Zip).unwrap();
        assert_eq!(p.points(), 2);
        assert_eq!(p.describe(1), "nodes.count=8, access.turnaround=2us");
        let e = plan(&["nodes.count=4,8", "access.turnaround=1us,2us,3us"], Mode::Zip).unwrap_err();
        assert!(e.to_string().contains("has 2 values"), "{e}");
    }

    #[test]
    fn unknown_keys_and_bad_points_are_caught_before_running() {
        let e = plan(&["access.turnarround=1us,2us"], Mode::Grid).unwrap_err().to_string();
        assert!(e.contains("--vary access.turnarround: not a scenario key"), "{e}");
        assert!(e.contains("turnaround"), "{e}");
        let e = plan(&["nodes.count=4,0"], Mode::Grid).unwrap_err().to_string();
        assert!(e.contains("sweep point 1 (nodes.count=0)"), "{e}");
    }

    #[test]
    fn the_id_depends_on_what_determines_results() {
        let a = plan(&["nodes.count=4,8"], Mode::Grid).unwrap();
        let b = plan(&["nodes.count=4,8"], Mode::Grid).unwrap();
        let c = plan(&["nodes.count=4,7"], Mode::Grid).unwrap();
        assert_eq!(a.id(), b.id());
        assert_ne!(a.id(), c.id());
    }
}
