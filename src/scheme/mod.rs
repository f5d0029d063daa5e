//! Access schemes: who may drive the line, and when.
//!
//! A scheme is one file implementing [`AccessScheme`]. It reacts to four
//! things (start, a message queued at a node, a timer it set, a frame shown at
//! a node's receiver output) and acts only through the [`World`] handed to it:
//! it reads queues, starts transmissions, sets timers and draws from its
//! nodes' random streams. It never computes physics itself: occupancy,
//! delays, contention and corruption belong to the engine and the bus, so
//! every scheme is judged by the same rules.

pub mod aloha;
pub mod arbitration;
pub mod csma;
pub mod polling;
pub mod tdma;
pub mod token;

pub use crate::engine::access::{AccessScheme, SchemeReport, SchemeValue};
pub use crate::engine::delays::{capped_delay, sample_latency, MAX_DELAY};
use crate::spec::{AccessSpec, NodeId, Spec};

/// Build the scheme a spec asks for (the caller hands it to
/// [`crate::engine::Simulation::new`]).
pub fn build(spec: &Spec) -> Box<dyn AccessScheme> {
    match &spec.access {
        AccessSpec::Polling(p) => Box::new(polling::Polling::new(p.clone())),
        AccessSpec::Token(t) => Box::new(token::Token::new(t.clone())),
        AccessSpec::Aloha(a) => Box::new(aloha::Aloha::new(a.clone(), spec.nodes.len())),
        AccessSpec::Csma(c) => Box::new(csma::Csma::new(c.clone(), spec.nodes.len())),
        AccessSpec::Tdma(t) => Box::new(tdma::Tdma::new(t.clone())),
        AccessSpec::Arbitration(a) => Box::new(arbitration::Arbitration::new(a.clone(), spec.nodes.len())),
    }
}

/// The default destination of schemes without a master: the first node of
/// the scenario, or the second for the first node's own traffic.
pub fn first_other_node(source: NodeId) -> NodeId {
    usize::from(source == 0)
}

/// Running mean and maximum of a duration, for cycle and rotation times.
#[derive(Clone, Copy, Debug, Default)]
pub struct DurationStat {
    pub count: u64,
    pub sum_ps: u128,
    pub max_ps: u64,
}

impl DurationStat {
    pub fn record(&mut self, ps: u64) {
        self.count += 1;
        self.sum_ps += u128::from(ps);
        self.max_ps = self.max_ps.max(ps);
    }
    pub fn mean_s(&self) -> f64 {
        if self.count == 0 {
            0.0
        } else {
            self.sum_ps as f64 / self.count as f64 * 1e-12
        }
    }
    pub fn max_s(&self) -> f64 {
        self.max_ps as f64 * 1e-12
    }
}
