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

use rand::Rng;
use rand_distr::{Distribution, Exp, Normal};

use crate::engine::rng::Stream;
use crate::engine::{Reception, World};
use crate::spec::{AccessSpec, Latency, NodeId, Spec};
use crate::units::Picos;

/// The interface every access scheme implements.
pub trait AccessScheme: std::fmt::Debug {
    /// The value of `access.scheme` that selects this scheme.
    fn name(&self) -> &'static str;

    /// Where a message goes when its traffic source names no destination.
    fn default_destination(&self, source: NodeId) -> NodeId;

    /// Called once at time zero.
    fn start(&mut self, world: &mut World);

    /// A message has just been queued at `node`.
    fn on_message(&mut self, _world: &mut World, _node: NodeId) {}

    /// A timer set with [`World::set_timer`] has fired.
    fn on_timer(&mut self, world: &mut World, node: NodeId, tag: u64);

    /// The receiver output of `rx.at` has shown the last bit of a frame.
    fn on_receive(&mut self, world: &mut World, rx: &Reception);

    /// Does the scheme send a corrupted data frame's message again (and count
    /// it as given up itself when it stops trying)? Otherwise the engine
    /// counts the message of every corrupted data frame as given up, except
    /// frames the sender cut short itself (collision detection), whose
    /// messages the scheme keeps.
    fn resends_corrupted(&self) -> bool {
        false
    }

    /// Does the scheme still hold `msg` (to send it again if it is lost)?
    /// A message on the wire at the end of a run that no scheme holds counts
    /// as still queued.
    fn holds(&self, _msg: &crate::traffic::Message) -> bool {
        false
    }

    /// `node` has just gone down (`down`) or come back up (`access.faults`).
    fn on_node_fault(&mut self, _world: &mut World, _node: NodeId, _down: bool) {}

    /// A frame reached `rx.at` while that node was down: nobody took it.
    /// Schemes that wait on the node's answer react here.
    fn on_unheard(&mut self, _world: &mut World, _rx: &Reception) {}

    /// An external node (co-simulation) has just scheduled transmission `tx`
    /// carrying frames of `kinds`. Schemes that coordinate with the node (a
    /// polling master waiting for a reply) react here.
    fn on_external_tx(
        &mut self,
        _world: &mut World,
        _node: NodeId,
        _tx: &crate::engine::TxTimes,
        _kinds: &[crate::engine::FrameKind],
    ) {
    }

    /// The scheme's own figures for the report.
    fn report(&self, world: &World) -> SchemeReport;
}

/// Build the scheme a spec asks for.
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

/// A scheme-specific figure with its unit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SchemeValue {
    Seconds(f64),
    Count(u64),
    Fraction(f64),
    Flag(bool),
}

/// The scheme's object in the report: its name and named figures.
#[derive(Clone, Debug, PartialEq)]
pub struct SchemeReport {
    pub name: &'static str,
    pub fields: Vec<(&'static str, SchemeValue)>,
}

impl serde::Serialize for SchemeReport {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = s.serialize_map(Some(self.fields.len() + 1))?;
        m.serialize_entry("name", self.name)?;
        for (k, v) in &self.fields {
            match *v {
                SchemeValue::Seconds(x) | SchemeValue::Fraction(x) => m.serialize_entry(k, &x)?,
                SchemeValue::Count(n) => m.serialize_entry(k, &n)?,
                SchemeValue::Flag(b) => m.serialize_entry(k, &b)?,
            }
        }
        m.end()
    }
}

/// The longest delay a scheme ever schedules: a draw beyond it would land
/// after the end of any run (runs last at most this long), so capping at it
/// changes no result and keeps every sum of times inside `u64` picoseconds.
pub const MAX_DELAY: Picos = crate::scenario::check::MAX_TIME;

/// A delay computed in wide arithmetic, capped at [`MAX_DELAY`].
pub fn capped_delay(ps: u128) -> Picos {
    Picos(ps.min(u128::from(MAX_DELAY.0)) as u64)
}

/// Draw a firmware latency. Normal draws are truncated at zero, and every
/// draw is capped at [`MAX_DELAY`].
pub fn sample_latency(latency: &Latency, rng: &mut Stream) -> Picos {
    draw(latency, rng).min(MAX_DELAY)
}

fn draw(latency: &Latency, rng: &mut Stream) -> Picos {
    match *latency {
        Latency::Fixed(t) => t,
        Latency::Uniform { min, max } => Picos(rng.random_range(min.0..=max.0)),
        Latency::Normal { mean, sd } => {
            if sd.0 == 0 {
                return mean;
            }
            let n = Normal::new(mean.0 as f64, sd.0 as f64).expect("sd validated ≥ 0");
            Picos(n.sample(rng).max(0.0).round() as u64)
        }
        Latency::Exponential { mean } => {
            let e = Exp::new(1.0 / mean.0 as f64).expect("mean validated > 0");
            let x: f64 = e.sample(rng);
            Picos(x.round() as u64)
        }
    }
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
