//! halfwire: a deterministic discrete-event simulator of shared half-duplex
//! differential buses (multipoint LVDS, TIA-485 style).
//!
//! The library does the work; the `halfwire` binary is a thin shell around
//! it. A run goes: scenario text → [`scenario::parse_str`] → [`spec::Spec`] →
//! [`engine::Simulation`] → [`report::Report`] → a renderer.
//!
//! The engine, the line model, the bus and the access schemes do no I/O and
//! read no clocks.

pub mod budget;
pub mod bus;
pub mod check;
pub mod engine;
pub mod line;
pub mod report;
pub mod scenario;
pub mod scheme;
pub mod spec;
pub mod stats;
pub mod traffic;
pub mod units;

/// Run a validated scenario to the end (convenience for tests and benches).
pub fn simulate(spec: &spec::Spec) -> report::Report {
    engine::Simulation::new(spec).run()
}
