//! The engine driven from outside: a stall guard, and slicing a run.
//! (End-to-end on the library; the engine's own unit tests use no report.)

use halfwire::engine::{Finished, Simulation};
use halfwire::report::Report;
use halfwire::units::Picos;

fn fruit_grader() -> halfwire::spec::Spec {
    let text = std::fs::read_to_string("scenarios/fruit-grader.toml").unwrap();
    halfwire::scenario::parse_str(&text, "fruit-grader.toml").unwrap()
}

#[test]
fn a_cycle_without_time_is_caught_as_a_stall() {
    // Validation refuses zero-bit frames; force one past it to check the guard.
    let mut spec = fruit_grader();
    if let halfwire::spec::AccessSpec::Polling(p) = &mut spec.access {
        p.request_bits = 0;
        p.reply_timeout = Picos::ZERO;
    }
    spec.frame.interframe_gap = Picos::ZERO;
    for n in &mut spec.nodes {
        n.transceiver.enable_time = Picos::ZERO;
        n.transceiver.disable_time = Picos::ZERO;
    }
    let mut sim = Simulation::new(&spec, halfwire::scheme::build(&spec));
    sim.run_until(Picos::from_ms(1));
    assert_eq!(sim.stalled(), Some(Picos::ZERO));
}

#[test]
fn slicing_a_run_changes_nothing() {
    let mut spec = fruit_grader();
    spec.duration = Picos::from_ms(6);
    let strip = |r: Finished| {
        let mut v = serde_json::to_value(Report::of(r)).unwrap();
        v.as_object_mut().unwrap().remove("run");
        serde_json::to_string(&v).unwrap()
    };
    let whole = strip(Simulation::new(&spec, halfwire::scheme::build(&spec)).run());
    let mut sim = Simulation::new(&spec, halfwire::scheme::build(&spec));
    for k in 1..=37u64 {
        sim.run_until(Picos(spec.duration.0 * k / 37));
    }
    assert_eq!(strip(sim.finish()), whole);
}

#[test]
#[should_panic(expected = "the scheme handed in is not the one the spec asks for")]
fn a_scheme_of_another_spec_is_refused() {
    let spec = fruit_grader();
    let other = halfwire::scenario::parse_str(
        &std::fs::read_to_string("scenarios/lighting-truss-tdma.toml").unwrap(),
        "lighting-truss-tdma.toml",
    )
    .unwrap();
    let _ = Simulation::new(&spec, halfwire::scheme::build(&other));
}
