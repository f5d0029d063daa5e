//! Arrival processes and payload sizes.
//!
//! Each traffic source draws from its own stream, keyed by (seed, node name,
//! source index), so a node's arrivals do not depend on any other node.

use rand::Rng;
use rand_distr::{Distribution, Exp};

use crate::engine::rng::{stream, Stream};
use crate::spec::{NodeId, Pattern, Payload, Spec, TrafficSpec};
use crate::units::Picos;

/// A message waiting in a node's queue.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Message {
    /// Arrival time in the source queue (ps).
    pub arrival: u64,
    pub payload_bits: u64,
    pub source: NodeId,
    pub dest: NodeId,
    /// Index of the traffic source at the node.
    pub flow: u16,
}

/// One running traffic source.
#[derive(Debug)]
pub struct Source {
    pub node: NodeId,
    pub flow: u16,
    spec: TrafficSpec,
    rng: Stream,
    /// For periodic sources: the index of the next release.
    k: u64,
    exp: Option<Exp<f64>>,
}

impl Source {
    pub fn new(seed: u64, node_name: &str, node: NodeId, flow: u16, spec: TrafficSpec) -> Self {
        let exp = match spec.pattern {
            Pattern::Poisson { rate_per_s, .. } => Some(Exp::new(rate_per_s).expect("rate validated > 0")),
            Pattern::Periodic { .. } => None,
        };
        Source { node, flow, rng: stream(seed, node_name, &format!("traffic/{flow}")), spec, k: 0, exp }
    }

    /// The time of the next arrival after one at `now` (or the first, at start).
    pub fn next_arrival(&mut self, now: Picos) -> Picos {
        match (&self.spec.pattern, &self.exp) {
            (Pattern::Poisson { .. }, Some(exp)) => {
                let gap_s: f64 = exp.sample(&mut self.rng);
                // At least 1 ps apart so arrivals stay strictly ordered; a gap
                // beyond the range of time means no further arrival (the cast
                // saturates, and so does the sum: both lie past any run's end).
                let Pattern::Poisson { min_interval, .. } = self.spec.pattern else { unreachable!() };
                now.saturating_add(Picos(((gap_s * 1e12).round() as u64).max(1).max(min_interval.0)))
            }
            (Pattern::Periodic { period, phase, jitter }, _) => {
                let base = phase.0 + self.k * period.0;
                self.k += 1;
                let j = if jitter.0 > 0 { self.rng.random_range(0..=jitter.0) } else { 0 };
                Picos(base + j)
            }
            _ => unreachable!("poisson sources carry their distribution"),
        }
    }

    pub fn draw_payload(&mut self) -> u64 {
        match self.spec.payload {
            Payload::Fixed { bits } => bits,
            Payload::Uniform { min_bits, max_bits } => self.rng.random_range(min_bits..=max_bits),
        }
    }

    pub fn dest(&self, default: NodeId) -> NodeId {
        self.spec.to.unwrap_or(default)
    }
}

/// Build every source of the scenario, in node order then source order.
pub fn sources(spec: &Spec) -> Vec<Source> {
    let mut out = Vec::new();
    for (id, node) in spec.nodes.iter().enumerate() {
        for (flow, t) in node.traffic.iter().enumerate() {
            out.push(Source::new(spec.seed, &node.name, id, flow as u16, t.clone()));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::Spec;

    fn spec(count: usize, rate_s01: f64) -> Spec {
        let text = format!(
            r#"
duration = "1 ms"
[line]
length = "2 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "7 ns"
disable_time = "9 ns"
receiver_delay = "5 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
[access]
scheme = "polling"
master = "m"
turnaround = "20 ns"
reply_timeout = "5 us"
[[node]]
name = "m"
position = "0 m"
[[node]]
name = "s01"
position = "0.2 m"
traffic = {{ pattern = "poisson", rate = "{rate_s01}/s", payload = ["8 B", "64 B"] }}
[nodes]
count = {count}
first = "0.5 m"
spacing = "0.1 m"
prefix = "x"
traffic = {{ pattern = "poisson", rate = "10000/s", payload = ["8 B", "64 B"] }}
"#
        );
        crate::scenario::parse_str(&text, "t.toml").unwrap()
    }

    fn arrivals(spec: &Spec, node: &str, n: usize) -> Vec<(u64, u64)> {
        let id = spec.node_id(node).unwrap();
        let mut src = sources(spec).into_iter().find(|s| s.node == id).unwrap();
        let mut t = Picos::ZERO;
        (0..n)
            .map(|_| {
                t = src.next_arrival(t);
                (t.0, src.draw_payload())
            })
            .collect()
    }

    #[test]
    fn a_nodes_arrivals_do_not_depend_on_other_nodes() {
        let base = spec(4, 10_000.0);
        // Changing s01's traffic leaves x03's arrival stream unchanged...
        assert_eq!(arrivals(&base, "x03", 500), arrivals(&spec(4, 77_777.0), "x03", 500));
        // ...while s01's own stream changes.
        assert_ne!(arrivals(&base, "s01", 50), arrivals(&spec(4, 77_777.0), "s01", 50));
        // Adding nodes does not move the others either.
        assert_eq!(arrivals(&base, "x02", 500), arrivals(&spec(9, 10_000.0), "x02", 500));
    }
}
