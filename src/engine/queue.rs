//! The event queue.
//!
//! Ordering guarantee: events pop in increasing simulated time; events at the
//! same time pop in the order they were pushed (first in, first out). The tie
//! is broken by a sequence number assigned at push time, so the order never
//! depends on heap layout, hashing or the platform.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

use crate::units::Picos;

/// `key` packs (time, seq) as `time << 64 | seq`, so one integer comparison
/// orders entries.
#[derive(Clone, Copy, Debug)]
struct Entry<E> {
    key: u128,
    event: E,
}

impl<E> PartialEq for Entry<E> {
    fn eq(&self, other: &Self) -> bool {
        self.key == other.key
    }
}
impl<E> Eq for Entry<E> {}
impl<E> PartialOrd for Entry<E> {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl<E> Ord for Entry<E> {
    // Reversed: BinaryHeap is a max-heap and we want the earliest first.
    fn cmp(&self, other: &Self) -> Ordering {
        other.key.cmp(&self.key)
    }
}

/// A time-ordered queue of events with FIFO tie-breaking.
///
/// The heap keeps its capacity, so a steady-state run does not allocate per
/// event.
#[derive(Debug)]
pub struct EventQueue<E> {
    heap: BinaryHeap<Entry<E>>,
    next_seq: u64,
}

impl<E: Copy> EventQueue<E> {
    pub fn with_capacity(cap: usize) -> Self {
        EventQueue { heap: BinaryHeap::with_capacity(cap), next_seq: 0 }
    }

    pub fn push(&mut self, time: Picos, event: E) {
        let seq = self.next_seq;
        self.next_seq += 1;
        let key = (u128::from(time.0) << 64) | u128::from(seq);
        self.heap.push(Entry { key, event });
    }

    /// Time of the next event, if any.
    pub fn peek_time(&self) -> Option<Picos> {
        self.heap.peek().map(|e| Picos((e.key >> 64) as u64))
    }

    pub fn pop(&mut self) -> Option<(Picos, E)> {
        self.heap.pop().map(|e| (Picos((e.key >> 64) as u64), e.event))
    }

    pub fn len(&self) -> usize {
        self.heap.len()
    }

    pub fn is_empty(&self) -> bool {
        self.heap.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn ties_pop_in_push_order() {
        let mut q = EventQueue::with_capacity(4);
        q.push(Picos(5), 'a');
        q.push(Picos(3), 'b');
        q.push(Picos(5), 'c');
        q.push(Picos(3), 'd');
        let order: Vec<char> = std::iter::from_fn(|| q.pop().map(|(_, e)| e)).collect();
        assert_eq!(order, vec!['b', 'd', 'a', 'c']);
    }

    proptest! {
        // Invariant: the pop order is the stable sort of the pushes by time.
        #[test]
        fn pops_are_a_stable_sort(times in proptest::collection::vec(0u64..20, 0..200)) {
            let mut q = EventQueue::with_capacity(times.len());
            for (i, t) in times.iter().enumerate() {
                q.push(Picos(*t), i);
            }
            let mut expected: Vec<(u64, usize)> = times.iter().copied().zip(0..).collect();
            expected.sort_by_key(|&(t, _)| t);
            let got: Vec<(u64, usize)> =
                std::iter::from_fn(|| q.pop().map(|(t, e)| (t.0, e))).collect();
            prop_assert_eq!(got, expected);
        }
    }
}
