//! Sweep scaling: the same CPU-bound 16-point sweep with 1 and with 2
//! workers, timed in one process, and the ratio printed.
//!
//! `cargo bench -p halfwire-benches --bench sweep` (the target on a 2-core machine: ≥ 1.8×).

use std::sync::Arc;
use std::time::Instant;

use halfwire::sweep::row::Row;
use halfwire::sweep::runner::{execute_blocking, Control, Observer};
use halfwire::sweep::{axis, Mode, Overrides, Plan, RunId};

struct Count(u64);

impl Observer for Count {
    fn started(&mut self, _: RunId) {}
    fn finished(&mut self, row: Row) -> Result<(), String> {
        self.0 += row.metrics["frames.delivered"] as u64;
        Ok(())
    }
}

fn main() {
    let file = "reference-polling.toml";
    let text = halfwire_benches::reference_text();
    // 16 turnarounds on the 32-node reference bus at 50 % load, 0.5 s each:
    // points of about equal cost, so the ratio measures the worker pool.
    let axes = vec![axis::parse_vary("access.turnaround=20ns..95ns step 5ns").expect("valid axis")];
    let overrides = Overrides { duration: Some("500 ms".into()), ..Overrides::default() };
    let plan = Arc::new(Plan::new(file, &text, axes, Mode::Grid, 1, overrides).expect("valid plan"));
    assert_eq!(plan.points(), 16);
    let runs: Vec<RunId> = (0..plan.runs()).map(|n| plan.run_id(n)).collect();
    let mut times = Vec::new();
    for jobs in [1usize, 2] {
        let mut count = Count(0);
        let t = Instant::now();
        execute_blocking(plan.clone(), runs.clone(), jobs, Arc::new(Control::default()), &mut count)
            .expect("sweep runs");
        let wall = t.elapsed().as_secs_f64();
        println!("sweep/16 points --jobs {jobs}: {wall:.3} s ({} frames delivered)", count.0);
        times.push((wall, count.0));
    }
    assert_eq!(times[0].1, times[1].1, "the same results with 1 and 2 workers");
    println!("sweep/speed-up --jobs 2 over --jobs 1: {:.2}x", times[0].0 / times[1].0);
}
