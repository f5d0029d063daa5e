//! Node faults: which nodes are down now, and every down period with what
//! the scheme made of it (when it noticed, when the node answered again).

use crate::spec::NodeId;
use crate::units::Picos;

/// One period during which a node was down, and what the scheme made of it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Outage {
    pub node: NodeId,
    pub down_at: Picos,
    /// When the scheme first treated the node as silent (polling: skipped it).
    pub found_silent_at: Option<Picos>,
    pub up_at: Option<Picos>,
    /// When the node, back up, first answered.
    pub answered_at: Option<Picos>,
}

/// The nodes' health over a run.
#[derive(Debug)]
pub struct Health {
    down: Vec<bool>,
    /// Every down period so far, in the order they began.
    outages: Vec<Outage>,
}

impl Health {
    pub fn new(nodes: usize) -> Self {
        Health { down: vec![false; nodes], outages: Vec::new() }
    }

    pub fn is_down(&self, node: NodeId) -> bool {
        self.down[node]
    }

    /// Every down period so far, in the order they began.
    pub fn outages(&self) -> &[Outage] {
        &self.outages
    }

    /// `node` goes down or comes back up at `now`.
    pub fn set_down(&mut self, node: NodeId, down: bool, now: Picos) {
        self.down[node] = down;
        if down {
            self.outages.push(Outage { node, down_at: now, found_silent_at: None, up_at: None, answered_at: None });
        } else if let Some(o) = self.latest(node) {
            o.up_at = Some(now);
        }
    }

    fn latest(&mut self, node: NodeId) -> Option<&mut Outage> {
        self.outages.iter_mut().rev().find(|o| o.node == node)
    }

    /// Has `node` come back up from a down period and not answered since?
    pub fn is_back(&self, node: NodeId) -> bool {
        self.outages.iter().rev().find(|o| o.node == node).is_some_and(|o| o.up_at.is_some() && o.answered_at.is_none())
    }

    /// The scheme treats `node` as silent from `now` on (the first time during a down period counts).
    pub fn found_silent(&mut self, node: NodeId, now: Picos) {
        if let Some(o) = self.latest(node) {
            if o.up_at.is_none() && o.found_silent_at.is_none() {
                o.found_silent_at = Some(now);
            }
        }
    }

    /// `node` answered the scheme at `now` (the first answer after coming back counts).
    pub fn answered(&mut self, node: NodeId, now: Picos) {
        if let Some(o) = self.latest(node) {
            if o.up_at.is_some() && o.answered_at.is_none() {
                o.answered_at = Some(now);
            }
        }
    }

    /// What a closed-form stretch needs to see unchanged: the down periods
    /// and which nodes are down or back without an answer yet.
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        v.same(self.outages.len() as u64);
        v.same(self.down.iter().filter(|&&d| d).count() as u64);
        v.same(self.outages.iter().filter(|o| o.up_at.is_none() || o.answered_at.is_none()).count() as u64);
    }
}
