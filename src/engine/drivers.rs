//! Each node's driver between transmissions: when its latest occupancy
//! releases the enable, and the earliest instant it may enable again.

use crate::spec::NodeId;

/// The drivers' hand-back times (ps).
#[derive(Debug)]
pub struct Drivers {
    /// Per node: when its latest transmission releases the enable. A
    /// transceiver has one driver, so a new transmission may not start earlier.
    last_release: Vec<u64>,
    /// Per node: the earliest instant its driver may be enabled for a new
    /// transmission: the previous occupancy's output-off plus the interframe
    /// gap (0 before its first). `World::begin_tx` never enables earlier.
    next_enable: Vec<u64>,
    /// The interframe gap every node keeps after its output is off.
    gap: u64,
}

impl Drivers {
    pub fn new(nodes: usize, interframe_gap: u64) -> Self {
        Drivers { last_release: vec![0; nodes], next_enable: vec![0; nodes], gap: interframe_gap }
    }

    /// When `node`'s latest occupancy releases its enable.
    pub fn last_release(&self, node: NodeId) -> u64 {
        self.last_release[node]
    }

    /// The earliest enable of `node`'s next transmission (before "now" is applied).
    pub fn next_enable(&self, node: NodeId) -> u64 {
        self.next_enable[node]
    }

    /// `node`'s latest occupancy releases at `release` and is off at `off`.
    pub fn released(&mut self, node: NodeId, release: u64, off: u64) {
        self.last_release[node] = release;
        self.next_enable[node] = off + self.gap;
    }

    /// Every driver's times, for a closed-form stretch. They only bound
    /// enables at or after now from below (`World::earliest_enable`, the
    /// asserts of `begin_tx`; arbitration reads a release directly, but it
    /// has no closed form), so a time already past is as good as never.
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        for t in self.last_release.iter_mut().chain(self.next_enable.iter_mut()) {
            v.bound(t);
        }
    }
}
