//! Speed of the reference polling bus: 32 nodes on a 3.1 m backplane,
//! 100 Mbit/s, Poisson load at 50 % of the line, 1 s simulated.
//!
//! `cargo bench -p halfwire-benches --bench polling` reports wall time per simulated second;
//! events per second follow from the event count printed once at start.

use criterion::{criterion_group, criterion_main, Criterion};

fn reference(receiver: &str) -> halfwire::spec::Spec {
    let text = halfwire_benches::reference_text();
    let text = text.replace("receiver = \"type1\"", &format!("receiver = \"{receiver}\""));
    halfwire::scenario::parse_str(&text, "reference-polling.toml").expect("valid")
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("reference polling bus, 1 s simulated");
    group.sample_size(10);
    for receiver in ["type1", "type2"] {
        let spec = reference(receiver);
        let events = halfwire::simulate(&spec).run.events;
        eprintln!("{receiver}: {events} events per simulated second");
        group.bench_function(receiver, |b| b.iter(|| halfwire::simulate(&spec)));
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
