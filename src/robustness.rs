//! One scenario text through every stage a user can put it through, for the
//! mutation test and the fuzz target: parse and validate, the budget (and
//! its text), a short run and both report renderers, then the report's
//! invariants. A scenario that does not validate is a fine outcome (a clear
//! error); a panic, a broken invariant or an unreadable output is not.

use crate::engine::Simulation;
use crate::report::{invariants, json, text};
use crate::units::Picos;

/// How far the short run goes: simulated time after a shortened warmup, and
/// engine events, whichever comes first.
#[derive(Clone, Copy, Debug)]
pub struct Limits {
    pub warmup: Picos,
    pub measured: Picos,
    pub events: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits { warmup: Picos::from_us(100), measured: Picos::from_ms(1), events: 100_000 }
    }
}

/// What happened to one text.
#[derive(Clone, Debug, PartialEq)]
pub enum Outcome {
    /// Validation refused it: the error, as the user would read it.
    Refused(String),
    /// It ran; every output was consistent.
    Checked { events: u64 },
}

/// Exercise `text`. `Err` lists what went wrong: broken report invariants
/// or an output that does not parse back.
pub fn exercise(text: &str, limits: Limits) -> Result<Outcome, Vec<String>> {
    let spec = match crate::scenario::parse_str(text, "mutant.toml") {
        Ok(s) => s,
        Err(e) => return Ok(Outcome::Refused(e.to_string())),
    };
    let mut problems = Vec::new();
    let budget = crate::budget::Budget::compute(&spec, crate::budget::Options::default());
    let budget_text = crate::budget::text::render(&budget, None);
    if budget_text.is_empty() {
        problems.push("the budget's text is empty".to_owned());
    }
    if let Err(e) = serde_json::to_string(&budget).map(|s| serde_json::from_str::<serde_json::Value>(&s)) {
        problems.push(format!("the budget's JSON does not serialize: {e}"));
    }
    let mut short = spec.clone();
    short.warmup = short.warmup.min(limits.warmup);
    short.duration = short.warmup + (spec.duration - spec.warmup).min(limits.measured);
    let mut sim = Simulation::new(&short, crate::scheme::build(&short));
    let step = Picos(((short.duration.0) / 16).max(1));
    let mut t = Picos::ZERO;
    while t < short.duration && sim.stalled().is_none() {
        t = (t + step).min(short.duration);
        sim.run_until(t);
        if sim.events() > limits.events {
            sim.end_early();
            break;
        }
    }
    let events = sim.events();
    let report = crate::report::Report::of(sim.finish());
    let json_text = json::render(&report);
    let _ = text::render(&report, false);
    match serde_json::from_str::<serde_json::Value>(&json_text) {
        Ok(v) => problems.extend(invariants::violations(&v)),
        Err(e) => problems.push(format!("the JSON report does not parse back: {e}")),
    }
    if problems.is_empty() {
        Ok(Outcome::Checked { events })
    } else {
        Err(problems)
    }
}
