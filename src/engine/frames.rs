//! Frames in flight: one record per frame from its transmission until its
//! last delivery, in a table whose slots are reused (no allocation per frame
//! once the table has grown to the most frames in flight at once).

use super::FrameKind;
use crate::spec::NodeId;
use crate::traffic::Message;

/// A frame in flight.
#[derive(Clone, Copy, Debug)]
pub(crate) struct FrameRec {
    pub occupancy: u64,
    pub src: NodeId,
    pub kind: FrameKind,
    /// First and last bit at the driver (ps).
    pub s: u64,
    pub e: u64,
    pub data_bits: u64,
    pub message: Option<Message>,
    /// Deliveries still to happen.
    pub remaining: u32,
    pub corrupted_any: bool,
    /// Cut short by its sender (collision detected): never delivered intact.
    pub aborted: bool,
    /// [`FrameRec::CUT`], [`FrameRec::GAP_TIMEOUT`], [`FrameRec::AUTO`].
    pub flags: u8,
}

impl FrameRec {
    /// Its first or last bit was cut by half a bit or more by the enable.
    pub const CUT: u8 = 1;
    /// A gap between two of its characters exceeds `frame.char_timeout`.
    pub const GAP_TIMEOUT: u8 = 2;
    /// Sent by an auto-direction transceiver (its recessive bits come from the bias).
    pub const AUTO: u8 = 4;
}

/// The records of frames in flight, by index.
#[derive(Debug, Default)]
pub(crate) struct FrameTable {
    slots: Vec<FrameRec>,
    free: Vec<u32>,
}

impl FrameTable {
    pub fn with_capacity(n: usize) -> Self {
        FrameTable { slots: Vec::with_capacity(n), free: Vec::with_capacity(n) }
    }

    /// Store a new frame; its index stays valid until [`FrameTable::release`].
    pub fn insert(&mut self, rec: FrameRec) -> u32 {
        match self.free.pop() {
            Some(i) => {
                self.slots[i as usize] = rec;
                i
            }
            None => {
                self.slots.push(rec);
                (self.slots.len() - 1) as u32
            }
        }
    }

    /// Frames in flight.
    pub fn live(&self) -> usize {
        self.slots.len() - self.free.len()
    }

    /// The frame's last delivery is done: its slot can be reused.
    pub fn release(&mut self, idx: u32) {
        self.free.push(idx);
    }

    pub fn get(&self, idx: u32) -> &FrameRec {
        &self.slots[idx as usize]
    }

    pub fn get_mut(&mut self, idx: u32) -> &mut FrameRec {
        &mut self.slots[idx as usize]
    }

    /// Every slot, released ones included (they have no deliveries left).
    pub fn slots_mut(&mut self) -> &mut [FrameRec] {
        &mut self.slots
    }
}
