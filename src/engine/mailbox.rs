//! Message queues: each node's waiting messages, the messages its scheme
//! holds outside the queue, and the limit on both together.

use std::collections::VecDeque;

use crate::spec::{NodeId, Spec, DEFAULT_QUEUE_LIMIT};
use crate::traffic::Message;

/// Every node's messages waiting for the line.
#[derive(Debug)]
pub struct Mailboxes {
    queues: Vec<VecDeque<Message>>,
    limit: Vec<usize>,
    /// Messages a scheme has taken from a queue but still holds (in flight,
    /// awaiting an outcome or a retry); they count against the limit.
    holding: Vec<usize>,
}

impl Mailboxes {
    pub fn new(spec: &Spec) -> Self {
        let n = spec.nodes.len();
        Mailboxes {
            queues: (0..n).map(|_| VecDeque::with_capacity(16)).collect(),
            limit: spec.nodes.iter().map(|n| n.queue_limit.unwrap_or(DEFAULT_QUEUE_LIMIT)).collect(),
            holding: vec![0; n],
        }
    }

    /// Queue `msg` at its source, unless the source's queue and held
    /// messages already reach its limit (then it is dropped: false).
    pub fn offer(&mut self, msg: Message) -> bool {
        let node = msg.source;
        if self.queues[node].len() + self.holding[node] >= self.limit[node] {
            return false;
        }
        self.queues[node].push_back(msg);
        true
    }

    pub fn len(&self, node: NodeId) -> usize {
        self.queues[node].len()
    }

    /// Take the oldest message queued at `node`.
    pub fn pop(&mut self, node: NodeId) -> Option<Message> {
        self.queues[node].pop_front()
    }

    /// How many messages the scheme holds for `node` outside its queue.
    pub fn set_holding(&mut self, node: NodeId, messages: usize) {
        self.holding[node] = messages;
    }

    /// Take the queued message of `node` with the smallest `key` (the oldest among equals).
    pub fn pop_min_by_key<K: Ord>(&mut self, node: NodeId, key: impl Fn(&Message) -> K) -> Option<Message> {
        let q = &mut self.queues[node];
        let best = (0..q.len()).min_by_key(|&i| (key(&q[i]), i))?;
        q.remove(best)
    }

    /// The smallest `key` among `node`'s queued messages.
    pub fn min_key<K: Ord>(&self, node: NodeId, key: impl Fn(&Message) -> K) -> Option<K> {
        self.queues[node].iter().map(key).min()
    }

    /// Put a message back at the head of its queue (for retransmission).
    pub fn push_front(&mut self, node: NodeId, msg: Message) {
        self.queues[node].push_front(msg);
    }

    /// Messages still waiting or held, over every node.
    pub fn total(&self) -> u64 {
        self.queues.iter().map(|q| q.len() as u64).sum::<u64>() + self.holding.iter().map(|&h| h as u64).sum::<u64>()
    }
}
