//! The occupancy log's storage: a vector whose consumed front is dropped in
//! bulk. It reads as a slice from its oldest live entry, so indexing and
//! iteration are plain slice operations (cheaper than a ring buffer's on the
//! bus's per-event path).

use std::ops::{Deref, DerefMut};

use super::Occupancy;

#[derive(Debug)]
pub struct Log {
    v: Vec<Occupancy>,
    /// Entries before this are gone.
    head: usize,
}

impl Log {
    pub fn with_capacity(n: usize) -> Self {
        Log { v: Vec::with_capacity(n), head: 0 }
    }

    /// Insert at position `at` of the live entries.
    pub fn insert(&mut self, at: usize, occ: Occupancy) {
        if self.head >= 64 && self.head * 2 >= self.v.len() {
            // Drop the consumed front now and then (amortised O(1) per entry).
            self.v.drain(..self.head);
            self.head = 0;
        }
        self.v.insert(self.head + at, occ);
    }

    /// Drop the oldest live entry.
    pub fn pop_front(&mut self) {
        debug_assert!(self.head < self.v.len());
        self.head += 1;
    }
}

impl Deref for Log {
    type Target = [Occupancy];
    fn deref(&self) -> &[Occupancy] {
        &self.v[self.head..]
    }
}

impl DerefMut for Log {
    fn deref_mut(&mut self) -> &mut [Occupancy] {
        &mut self.v[self.head..]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn occ(id: u64) -> Occupancy {
        Occupancy { id, node: 0, a: id, last_bit: id, release: id, b: id, pending: 0, dominant: false }
    }

    #[test]
    fn reads_as_the_live_entries_in_order() {
        let mut log = Log::with_capacity(4);
        for i in 0..200 {
            log.insert(log.len(), occ(i));
            if i % 2 == 1 {
                log.pop_front();
            }
        }
        log.insert(1, occ(1000));
        let ids: Vec<u64> = log.iter().map(|o| o.id).collect();
        assert_eq!(ids.len(), 101);
        assert_eq!(&ids[..3], &[100, 1000, 101]);
        assert_eq!(*ids.last().unwrap(), 199);
    }
}
