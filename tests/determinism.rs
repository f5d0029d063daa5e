//! Determinism: same scenario and seed → identical results; per-node streams
//! are independent of every other node.

mod common;

use common::Bus;
use halfwire::units::Picos;

fn arrivals(spec: &halfwire::spec::Spec, node: &str, n: usize) -> Vec<(u64, u64)> {
    let id = spec.node_id(node).unwrap();
    let mut src = halfwire::traffic::sources(spec)
        .into_iter()
        .find(|s| s.node == id)
        .unwrap();
    let mut t = Picos::ZERO;
    (0..n)
        .map(|_| {
            t = src.next_arrival(t);
            (t.0, src.draw_payload())
        })
        .collect()
}

#[test]
fn another_nodes_traffic_does_not_move_this_nodes_arrivals() {
    let base = Bus {
        slaves: 4,
        rate_per_s: 10_000.0,
        ..Bus::default()
    };
    let text = base
        .toml()
        .replace("payload = \"64 B\" }", "payload = [\"8 B\", \"64 B\"] }");
    let spec = halfwire::scenario::parse_str(&text, "a.toml").unwrap();
    // Change s01's traffic only: its rate and payload.
    let mut changed = spec.clone();
    let s01 = changed.node_id("s01").unwrap();
    changed.nodes[s01].traffic[0].pattern = halfwire::spec::Pattern::Poisson {
        rate_per_s: 77_777.0,
    };
    let a = arrivals(&spec, "s03", 500);
    let b = arrivals(&changed, "s03", 500);
    assert_eq!(
        a, b,
        "s03's arrival stream must not depend on s01's traffic"
    );
    assert_ne!(arrivals(&spec, "s01", 50), arrivals(&changed, "s01", 50));
    // Adding a node does not move the others either.
    let more =
        halfwire::scenario::parse_str(&text.replace("count = 4", "count = 5"), "b.toml").unwrap();
    assert_eq!(arrivals(&spec, "s02", 500), arrivals(&more, "s02", 500));
}

#[test]
fn identical_reports_for_identical_runs() {
    let bus = Bus {
        rate_per_s: 30_000.0,
        receiver: "type1",
        duration: "3 ms",
        ..Bus::default()
    };
    let spec = bus.spec();
    let strip = |r: halfwire::report::Report| {
        let mut v = serde_json::to_value(r).unwrap();
        v.as_object_mut().unwrap().remove("run");
        serde_json::to_string(&v).unwrap()
    };
    let a = strip(halfwire::simulate(&spec));
    let b = strip(halfwire::simulate(&spec));
    assert_eq!(a, b);
    // Slicing the run differently changes nothing either.
    let mut sim = halfwire::engine::Simulation::new(&spec);
    for k in 1..=37u64 {
        sim.run_until(Picos(spec.duration.0 * k / 37));
    }
    assert_eq!(strip(sim.finish()), a);
}
