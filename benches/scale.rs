//! Speed where the bus is large or the run is short: 512 nodes (the
//! per-receiver and per-pair paths of the bus), and a 2 s run of the
//! greenhouse demo (the fixed cost of building a report), which sweeps of
//! many short points pay at every point.
//!
//! `cargo bench -p halfwire-benches --bench scale`

use criterion::{criterion_group, criterion_main, Criterion};

fn spec(text: &str, name: &str) -> halfwire::spec::Spec {
    halfwire::scenario::parse_str(text, name).expect("valid")
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("scale");
    group.sample_size(10);
    // The reference bus with 511 slaves over 52 m (type-1 receivers: floating windows everywhere), 100 ms.
    let polling = halfwire_benches::reference_text()
        .replace("count = 31", "count = 511")
        .replace("length = \"3.1 m\"", "length = \"52 m\"")
        .replace("duration = \"1 s\"", "duration = \"100 ms\"");
    let polling = spec(&polling, "reference-polling.toml");
    group.bench_function("polling, 511 slaves, type 1, 100 ms", |b| b.iter(|| halfwire::simulate(&polling)));
    // The greenhouse CSMA/CD bench with 512 sensors 5 cm apart, 2 s.
    let greenhouse = include_str!("../scenarios/greenhouse-csma.toml");
    let csma = greenhouse.replace("count = 20", "count = 512").replace("spacing = \"1.4 m\"", "spacing = \"0.05 m\"");
    let csma = spec(&csma, "greenhouse-csma.toml");
    group.bench_function("csma/cd, 512 sensors, 2 s", |b| b.iter(|| halfwire::simulate(&csma)));
    // The demo as it is: 2 s, 21 nodes, a few hundred events.
    let short = spec(greenhouse, "greenhouse-csma.toml");
    group.bench_function("greenhouse demo, 2 s (fixed cost)", |b| b.iter(|| halfwire::simulate(&short)));
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
