//! Running a sweep's runs on a bounded pool of blocking workers (tokio).
//!
//! At most `jobs` runs are in flight; a finished run's row is handed to the
//! caller at once and then dropped, so memory is bounded by the running
//! runs, not by the size of the sweep. Simulations are synchronous and
//! share nothing, so the rows do not depend on `jobs` or on finishing order.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

use tokio::sync::Notify;
use tokio::task::JoinSet;

use super::row::Row;
use super::{Plan, RunId};
use crate::engine::Simulation;
use crate::units::Picos;

/// Stop requests from outside (a signal handler, a test).
#[derive(Debug, Default)]
pub struct Control {
    stop: AtomicBool,
    abandon: AtomicBool,
    wake: Notify,
}

impl Control {
    /// Launch no new runs; let the running ones finish.
    pub fn stop(&self) {
        self.stop.store(true, Ordering::SeqCst);
        self.wake.notify_one();
    }

    /// Also end the running runs early and discard them.
    pub fn abandon(&self) {
        self.abandon.store(true, Ordering::SeqCst);
        self.stop();
    }

    pub fn stopped(&self) -> bool {
        self.stop.load(Ordering::SeqCst)
    }

    pub fn abandoned(&self) -> bool {
        self.abandon.load(Ordering::SeqCst)
    }
}

/// What the caller hears about as the sweep goes.
pub trait Observer {
    fn started(&mut self, run: RunId);
    /// A run finished; an error here stops the sweep (nothing more is launched).
    fn finished(&mut self, row: Row) -> Result<(), String>;
}

/// How the sweep ended.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Outcome {
    pub finished: u64,
    /// Runs that were running when the sweep was abandoned (no row written).
    pub abandoned: u64,
    /// Runs never started because of a stop request.
    pub not_started: u64,
}

/// How a failed (panicked) worker's error begins.
pub const WORKER_FAILED: &str = "a sweep worker failed";

/// Simulate one run; `None` if abandoned part-way.
pub fn simulate_run(plan: &Plan, run: RunId, abandon: &AtomicBool) -> Result<Option<Row>, String> {
    let spec = plan.run_spec(run).map_err(|e| e.to_string())?;
    let started = Instant::now();
    let mut sim = Simulation::new(&spec, crate::scheme::build(&spec));
    // Slices of simulated time, so that an abandon request is seen promptly.
    const SLICES: u64 = 64;
    let step = Picos((spec.duration.0 / SLICES).max(1));
    let mut t = Picos::ZERO;
    while t < spec.duration {
        if abandon.load(Ordering::Relaxed) {
            return Ok(None);
        }
        t = (t + step).min(spec.duration);
        sim.run_until(t);
        if let Some(at) = sim.stalled() {
            return Err(format!(
                "sweep point {} ({}): simulated time stopped advancing at {at}",
                run.point,
                plan.describe(run.point)
            ));
        }
    }
    let mut report = crate::report::Report::of(sim.finish());
    report.set_wall_time(started.elapsed().as_secs_f64());
    Ok(Some(Row::from_run(plan, run, &spec, &report)))
}

/// Run `runs` (in the order given, taken lazily) on at most `jobs` blocking
/// workers of the current tokio runtime.
pub async fn execute(
    plan: Arc<Plan>,
    runs: impl IntoIterator<Item = RunId>,
    jobs: usize,
    control: Arc<Control>,
    observer: &mut dyn Observer,
) -> Result<Outcome, String> {
    let jobs = jobs.max(1);
    let mut pending = runs.into_iter();
    let mut set: JoinSet<Result<Option<Row>, String>> = JoinSet::new();
    let mut finished = 0;
    let mut abandoned = 0;
    let mut error = None;
    loop {
        while set.len() < jobs && !control.stopped() && error.is_none() {
            let Some(run) = pending.next() else { break };
            observer.started(run);
            let (plan, control) = (plan.clone(), control.clone());
            set.spawn_blocking(move || simulate_run(&plan, run, &control.abandon));
        }
        if set.is_empty() {
            break;
        }
        tokio::select! {
            joined = set.join_next() => {
                let result = joined.expect("the set is not empty").map_err(|e| format!("{WORKER_FAILED}: {e}"))?;
                match result {
                    Ok(Some(row)) => {
                        finished += 1;
                        if let Err(e) = observer.finished(row) {
                            error.get_or_insert(e);
                            control.stop();
                        }
                    }
                    Ok(None) => abandoned += 1,
                    Err(e) => {
                        error.get_or_insert(e);
                        control.stop();
                    }
                }
            }
            _ = control.wake.notified() => {}
        }
    }
    if let Some(e) = error {
        return Err(e);
    }
    Ok(Outcome { finished, abandoned, not_started: pending.count() as u64 })
}

/// Build a runtime whose blocking pool has exactly `jobs` workers and run
/// the sweep on it.
pub fn execute_blocking(
    plan: Arc<Plan>,
    runs: impl IntoIterator<Item = RunId>,
    jobs: usize,
    control: Arc<Control>,
    observer: &mut dyn Observer,
) -> Result<Outcome, String> {
    let runtime = tokio::runtime::Builder::new_current_thread()
        .max_blocking_threads(jobs.max(1))
        .build()
        .map_err(|e| format!("cannot start the worker pool: {e}"))?;
    runtime.block_on(execute(plan, runs, jobs, control, observer))
}
