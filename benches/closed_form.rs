//! The SimPy comparison's polling workload (16 slaves, 1 Mbit/s; see
//! `benches/simpy/`) at loads 0.5 and 0.05 of the polling capacity, 20 s
//! simulated, with closed-form cycles and without (`Spec::shortcuts`, the
//! CLI's `--no-shortcuts`): the ratio of the two is what the closed form
//! gains, and the same reports come out of both (tests/e2e/shortcuts.rs).
//!
//! `cargo bench -p halfwire-benches --bench closed_form`

use criterion::{criterion_group, criterion_main, Criterion};

/// The workload's capacity, as `benches/simpy/compare.py` takes it
/// (messages/s over all slaves: one 340 µs data exchange each).
const CAPACITY_PER_S: f64 = 1.0 / 340e-6;

fn bench(c: &mut Criterion) {
    let text = include_str!("simpy/polling.toml");
    let mut group = c.benchmark_group("closed_form");
    group.sample_size(10);
    for load in [0.5, 0.05] {
        let rate = load * CAPACITY_PER_S / 16.0;
        assert!(text.contains("rate = \"91.9/s\""), "the rate key is where expected");
        let text = text.replace("rate = \"91.9/s\"", &format!("rate = \"{rate:.6}/s\""));
        let mut spec = halfwire::scenario::parse_str(&text, "polling.toml").expect("the workload is valid");
        for shortcuts in [true, false] {
            spec.shortcuts = shortcuts;
            let name = format!("load {load}, {}", if shortcuts { "closed form" } else { "every event" });
            group.bench_function(name, |b| b.iter(|| halfwire::simulate(&spec)));
        }
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
