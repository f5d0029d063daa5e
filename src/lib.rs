//! halfwire: a deterministic discrete-event simulator of shared half-duplex
//! differential buses (multipoint LVDS, TIA-485 style).
//!
//! The library does the work; the `halfwire` binary is a thin shell around
//! it. A run goes: scenario text → [`scenario::parse_str`] → [`spec::Spec`] →
//! [`engine::Simulation`] → [`report::Report`] → a renderer.
//!
//! The engine, the line model, the bus and the access schemes do no I/O and
//! read no clocks.

pub mod bound;
pub mod budget;
pub mod bus;
pub mod check;
pub mod cosim;
pub mod engine;
pub mod line;
pub mod periodic;
pub mod plot;
pub mod report;
pub mod robustness;
pub mod scenario;
pub mod scheme;
pub mod spec;
pub mod stats;
pub mod sweep;
pub mod traffic;
pub mod units;
pub mod wave;

/// Run a validated scenario to the end (convenience for tests and benches).
pub fn simulate(spec: &spec::Spec) -> report::Report {
    report::Report::of(engine::Simulation::new(spec, scheme::build(spec)).run())
}

/// Run `n` replications: seeds derived from the scenario's (replication 0
/// keeps the scenario seed). Runs on up to `jobs` threads; the result does
/// not depend on `jobs`.
pub fn replicate(spec: &spec::Spec, n: u64, jobs: usize) -> Vec<report::Report> {
    let seeds: Vec<u64> =
        (0..n).map(|k| if k == 0 { spec.seed } else { engine::rng::replication_seed(spec.seed, k) }).collect();
    let next = std::sync::atomic::AtomicUsize::new(0);
    let slots: Vec<std::sync::Mutex<Option<report::Report>>> =
        seeds.iter().map(|_| std::sync::Mutex::new(None)).collect();
    std::thread::scope(|s| {
        for _ in 0..jobs.clamp(1, seeds.len().max(1)) {
            s.spawn(|| loop {
                let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let Some(&seed) = seeds.get(i) else { break };
                let mut one = spec.clone();
                one.seed = seed;
                *slots[i].lock().expect("no poisoned slot") = Some(simulate(&one));
            });
        }
    });
    slots.into_iter().map(|m| m.into_inner().expect("no poisoned slot").expect("every replication ran")).collect()
}
