//! The demos the speed targets name (fruit grader, buoy link, railcar doors,
//! lighting truss), each run in process at its own duration: the
//! figures to compare, side by side, against a build of an earlier commit
//! (`git worktree add`, then the same command there).
//!
//! `cargo bench -p halfwire-benches --bench demos`

use criterion::{criterion_group, criterion_main, Criterion};

const DEMOS: [(&str, &str); 4] = [
    ("fruit-grader (polling)", include_str!("../scenarios/fruit-grader.toml")),
    ("buoy-link (polling)", include_str!("../scenarios/buoy-link.toml")),
    ("railcar-doors (token)", include_str!("../scenarios/railcar-doors.toml")),
    ("lighting-truss (tdma)", include_str!("../scenarios/lighting-truss-tdma.toml")),
];

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("demos");
    group.sample_size(10);
    for (name, text) in DEMOS {
        let spec = halfwire::scenario::parse_str(text, name).expect("a demo is valid");
        group.bench_function(name, |b| b.iter(|| halfwire::simulate(&spec)));
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
