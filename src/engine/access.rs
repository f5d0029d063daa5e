//! The interface between the engine and an access scheme, and the scheme's
//! figures for the report. Schemes (`crate::scheme`) implement it; the
//! engine calls it and knows no scheme by name.

use super::{FrameKind, Reception, TxTimes, World};
use crate::spec::NodeId;

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
    fn on_external_tx(&mut self, _world: &mut World, _node: NodeId, _tx: &TxTimes, _kinds: &[FrameKind]) {}

    /// The scheme's own figures for the report.
    fn report(&self, world: &World) -> SchemeReport;
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
