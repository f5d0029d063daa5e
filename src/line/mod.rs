//! The line model: loaded impedance and delay, wire delays between nodes,
//! driver amplitudes and receiver margins.
//!
//! Everything here is a pure function of the [`Spec`]; the engine and the
//! budget share it, so both report the same figures.

pub mod amplitude;
pub mod loaded;
pub mod receiver;

pub use loaded::LoadedLine;
pub use receiver::{IdleState, ReceiverClass};

use crate::spec::{NodeId, Spec};
use crate::units::Picos;
use amplitude::Ends;

/// Line figures and the node-to-node delay matrix for one scenario.
#[derive(Clone, Debug)]
pub struct LineModel {
    pub loaded: LoadedLine,
    pub ends: Ends,
    pub length_m: f64,
    /// `length · tpd'`.
    pub end_to_end: Picos,
    /// Node count, the side of `delays`.
    n: usize,
    /// Wire delay between node i and node j, row-major, rounded to the picosecond.
    delays: Vec<u64>,
    /// Largest wire delay between any two nodes.
    pub max_node_delay: Picos,
    /// Step amplitude each node's driver produces (V).
    pub amplitude_v: Vec<f64>,
    /// The impedance each node's driver sees (Ω).
    pub drive_load_ohm: Vec<f64>,
}

impl LineModel {
    pub fn new(spec: &Spec) -> Self {
        let total_load: f64 = spec.nodes.iter().map(|n| n.transceiver.load_f).sum();
        let loaded = LoadedLine::new(
            spec.line.impedance_ohm,
            spec.line.delay_s_per_m,
            spec.line.length_m,
            total_load,
        );
        let ends = Ends::resolve(&spec.line.termination, loaded.impedance_ohm);
        let n = spec.nodes.len();
        let mut delays = vec![0u64; n * n];
        let mut max = 0;
        for (i, a) in spec.nodes.iter().enumerate() {
            for (j, b) in spec.nodes.iter().enumerate() {
                let d = ((a.position_m - b.position_m).abs() * loaded.delay_s_per_m * 1e12).round()
                    as u64;
                delays[i * n + j] = d;
                max = max.max(d);
            }
        }
        let drive_load_ohm: Vec<f64> = spec
            .nodes
            .iter()
            .map(|node| {
                ends.step_load_ohm(node.position_m, spec.line.length_m, loaded.impedance_ohm)
            })
            .collect();
        let amplitude_v = spec
            .nodes
            .iter()
            .zip(&drive_load_ohm)
            .map(|(node, r)| amplitude::current_mode_v(node.transceiver.drive_current_a, *r))
            .collect();
        LineModel {
            loaded,
            ends,
            length_m: spec.line.length_m,
            end_to_end: Picos((spec.line.length_m * loaded.delay_s_per_m * 1e12).round() as u64),
            n,
            delays,
            max_node_delay: Picos(max),
            amplitude_v,
            drive_load_ohm,
        }
    }

    /// Wire delay from node `a` to node `b`.
    #[inline]
    pub fn delay(&self, a: NodeId, b: NodeId) -> Picos {
        Picos(self.delays[a * self.n + b])
    }

    /// Wire delay as a raw picosecond count (hot-loop form).
    #[inline]
    pub fn delay_ps(&self, a: NodeId, b: NodeId) -> u64 {
        self.delays[a * self.n + b]
    }

    /// Wire delays from node `a` to every node, in node order (ps).
    #[inline]
    pub fn delay_row(&self, a: NodeId) -> &[u64] {
        &self.delays[a * self.n..(a + 1) * self.n]
    }

    /// The smallest driver amplitude on the bus and the node that produces it.
    pub fn worst_amplitude(&self) -> (NodeId, f64) {
        self.amplitude_v
            .iter()
            .copied()
            .enumerate()
            .fold(
                (0, f64::INFINITY),
                |acc, (i, v)| if v < acc.1 { (i, v) } else { acc },
            )
    }
}
