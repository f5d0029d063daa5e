//! The line model: loaded impedance and delay, wire delays between nodes,
//! driver amplitudes and receiver margins.
//!
//! Everything here is a pure function of the [`Spec`]; the engine and the
//! budget share it, so both report the same figures.

pub mod amplitude;
pub mod family;
pub mod figures;
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
    /// The impedance each node's driver sees when it switches (Ω).
    pub drive_load_ohm: Vec<f64>,
    /// The settled (DC) load across the pair: terminations ∥ receiver inputs ∥ bias network (Ω).
    pub dc_load_ohm: f64,
    /// Settled amplitude each node's driver produces (V).
    pub amplitude_dc_v: Vec<f64>,
    /// Differential voltage of the undriven line (the bias network's, or 0 V).
    pub idle_v: f64,
    /// Unit loads on the bus (TIA-485-A unit load, 12 kΩ).
    pub unit_loads: f64,
}

impl LineModel {
    pub fn new(spec: &Spec) -> Self {
        let total_load: f64 = spec.nodes.iter().map(|n| n.transceiver.load_f).sum();
        let loaded = LoadedLine::new(spec.line.impedance_ohm, spec.line.delay_s_per_m, spec.line.length_m, total_load);
        let ends = Ends::resolve(&spec.line.termination, loaded.impedance_ohm);
        let n = spec.nodes.len();
        let mut delays = vec![0u64; n * n];
        let mut max = 0;
        for (i, a) in spec.nodes.iter().enumerate() {
            for (j, b) in spec.nodes.iter().enumerate() {
                let d = ((a.position_m - b.position_m).abs() * loaded.delay_s_per_m * 1e12).round() as u64;
                delays[i * n + j] = d;
                max = max.max(d);
            }
        }
        let drive_load_ohm: Vec<f64> = spec
            .nodes
            .iter()
            .map(|node| ends.step_load_ohm(node.position_m, spec.line.length_m, loaded.impedance_ohm))
            .collect();
        let amplitude_v =
            spec.nodes.iter().zip(&drive_load_ohm).map(|(node, r)| node.transceiver.driver.amplitude_v(*r)).collect();
        let inputs = spec.nodes.iter().fold(f64::INFINITY, |acc, n| loaded::parallel(acc, n.transceiver.input_ohm));
        // The undriven network across the pair: terminations ∥ receiver inputs.
        let network = loaded::parallel(ends.dc_load_ohm(), inputs);
        let (idle_v, bias_ohm) = match spec.line.bias {
            // Pull-up and pull-down in series through the supply (an AC ground)
            // form a divider with the network: V = V_s·R_p / (R_up + R_down + R_p).
            Some(b) => {
                let series = b.pull_up_ohm + b.pull_down_ohm;
                let v = if network.is_infinite() { b.supply_v } else { b.supply_v * network / (series + network) };
                (v, series)
            }
            None => (0.0, f64::INFINITY),
        };
        let dc_load_ohm = loaded::parallel(network, bias_ohm);
        let amplitude_dc_v = spec.nodes.iter().map(|n| n.transceiver.driver.amplitude_v(dc_load_ohm)).collect();
        let unit_loads = spec.nodes.iter().map(|n| crate::spec::UNIT_LOAD_OHM / n.transceiver.input_ohm).sum();
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
            dc_load_ohm,
            amplitude_dc_v,
            idle_v,
            unit_loads,
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

    /// What `node`'s receiver reads on the undriven line.
    pub fn idle_state(&self, spec: &Spec, node: NodeId) -> IdleState {
        spec.nodes[node].transceiver.receiver.read(self.idle_v)
    }

    /// Reflection coefficients at the near and far ends against the loaded impedance.
    pub fn reflections(&self) -> (f64, f64) {
        (
            loaded::reflection(self.ends.near_ohm, self.loaded.impedance_ohm),
            loaded::reflection(self.ends.far_ohm, self.loaded.impedance_ohm),
        )
    }
}
