//! The line model: loaded impedance and delay (section by section), wire
//! delays between nodes, driver amplitudes, the settled (DC) line with its
//! bias network, and receiver margins.
//!
//! Everything here is a pure function of the [`Spec`]; the engine and the
//! budget share it, so both report the same figures.

pub mod amplitude;
pub mod dc;
pub mod family;
pub mod figures;
pub mod loaded;
pub mod noise;
pub mod receiver;
pub mod sections;
pub mod settled;

pub use loaded::LoadedLine;
pub use receiver::{IdleState, ReceiverClass};

use crate::spec::{NodeId, Spec};
use crate::units::Picos;
use amplitude::Ends;
use sections::Sections;

/// Line figures and the node-to-node wire delays for one scenario.
#[derive(Clone, Debug)]
pub struct LineModel {
    /// The classic figure with every load averaged over the whole line.
    pub loaded: LoadedLine,
    /// The line section by section, each loaded by its own nodes.
    pub sections: Sections,
    pub ends: Ends,
    pub length_m: f64,
    /// Signal time end to end, through every section.
    pub end_to_end: Picos,
    /// Signal time from the near end to each node, rounded to the
    /// picosecond. The wire delay between two nodes is the difference of
    /// their times: memory O(N), not an N×N matrix (134 MB at 4 096 nodes),
    /// and delays add up along the line exactly (d(a,c) = d(a,b) + d(b,c)
    /// for b between a and c).
    times_ps: Vec<u64>,
    /// Largest wire delay between any two nodes.
    pub max_node_delay: Picos,
    /// Step amplitude each node's weakest driver produces (V).
    pub amplitude_v: Vec<f64>,
    /// The same for the typical driver (V).
    pub amplitude_typical_v: Vec<f64>,
    /// The impedance each node's driver sees when it switches (Ω): its
    /// section's impedance on both sides, or a termination ∥ it at an end.
    pub drive_load_ohm: Vec<f64>,
    /// The settled line: DC loads, received amplitudes, idle voltages.
    pub settled: settled::Settled,
    /// The smallest settled (DC) load any driver sees (Ω); infinite on an open line.
    pub dc_load_ohm: f64,
    /// Settled amplitude each node's driver produces at its own position (V; infinite on an open line).
    pub amplitude_dc_v: Vec<f64>,
    /// The lowest idle (undriven) voltage at any node (V).
    pub idle_v: f64,
    /// Unit loads on the bus (TIA-485-A unit load, 24 kΩ across the pair).
    pub unit_loads: f64,
}

/// Signal time (s) from the near end to each node, along the sections.
pub fn node_times(spec_line: &crate::spec::LineSpec, nodes: &[crate::spec::NodeSpec]) -> (Sections, Vec<f64>) {
    let loads: Vec<(f64, f64)> = nodes.iter().map(|n| (n.position_m, n.transceiver.load_f)).collect();
    let sections = Sections::new(spec_line.impedance_ohm, spec_line.delay_s_per_m, spec_line.length_m, &loads);
    let times = nodes.iter().map(|n| sections.time_to(n.position_m)).collect();
    (sections, times)
}

/// The smallest receiver margin when only `drivers` drive: the line's
/// sections, ends and settled network in full, but no wire delays and a
/// few drivers only (the budget's node-count search).
pub fn worst_margin_of_drivers(spec: &Spec, drivers: &[usize]) -> f64 {
    let (sections, _) = node_times(&spec.line, &spec.nodes);
    let first = sections.list.first().expect("a line has a section").line.impedance_ohm;
    let last = sections.list.last().expect("a line has a section").line.impedance_ohm;
    let ends = Ends::resolve(&spec.line.termination, first, last);
    let mut load = vec![0.0; spec.nodes.len()];
    let mut step = vec![0.0; spec.nodes.len()];
    for &d in drivers {
        let x = spec.nodes[d].position_m;
        load[d] = ends.step_load_ohm(x, spec.line.length_m, sections.at(x).line.impedance_ohm);
        step[d] = spec.nodes[d].transceiver.driver.amplitude_v(load[d]);
    }
    let s = settled::Settled::for_drivers(spec, &ends, &step, &load, drivers);
    (0..spec.nodes.len())
        .filter(|&r| s.received_v[r].is_finite())
        .map(|r| spec.nodes[r].transceiver.receiver.margin_biased_v(s.received_v[r], s.idle_v[r]))
        .fold(f64::INFINITY, f64::min)
}

/// Signal times (s) rounded to the picosecond: the engine's wire delay
/// between two nodes is the difference of theirs. Below 10 s (the loaded
/// delay is bounded; DEVELOPERS.md), so far inside u64.
pub fn times_ps(times_s: &[f64]) -> Vec<u64> {
    times_s.iter().map(|t| (t * 1e12).round() as u64).collect()
}

/// The largest wire delay between two nodes, from their rounded times: the
/// one figure validation, the budget and the engine all use.
pub fn max_wire_ps(times_ps: &[u64]) -> u64 {
    let earliest = times_ps.iter().copied().min().unwrap_or(0);
    times_ps.iter().copied().max().unwrap_or(0) - earliest
}

impl LineModel {
    pub fn new(spec: &Spec) -> Self {
        let total_load: f64 = spec.nodes.iter().map(|n| n.transceiver.load_f).sum();
        let loaded = LoadedLine::new(spec.line.impedance_ohm, spec.line.delay_s_per_m, spec.line.length_m, total_load);
        let (sections, times) = node_times(&spec.line, &spec.nodes);
        let first = sections.list.first().expect("a line has a section").line.impedance_ohm;
        let last = sections.list.last().expect("a line has a section").line.impedance_ohm;
        let ends = Ends::resolve(&spec.line.termination, first, last);
        let times_ps = times_ps(&times);
        let max = max_wire_ps(&times_ps);
        let drive_load_ohm: Vec<f64> = spec
            .nodes
            .iter()
            .map(|node| {
                ends.step_load_ohm(node.position_m, spec.line.length_m, sections.at(node.position_m).line.impedance_ohm)
            })
            .collect();
        let amplitude_v: Vec<f64> =
            spec.nodes.iter().zip(&drive_load_ohm).map(|(node, r)| node.transceiver.driver.amplitude_v(*r)).collect();
        let amplitude_typical_v = spec
            .nodes
            .iter()
            .zip(&drive_load_ohm)
            .map(|(node, r)| node.transceiver.driver_typical.amplitude_v(*r))
            .collect();
        let settled = settled::Settled::new(spec, &ends, &amplitude_v, &drive_load_ohm);
        let unit_loads = spec.nodes.iter().map(|n| crate::spec::UNIT_LOAD_OHM / n.transceiver.input_ohm).sum();
        LineModel {
            loaded,
            end_to_end: Picos((sections.end_to_end_s() * 1e12).round() as u64),
            sections,
            ends,
            length_m: spec.line.length_m,
            times_ps,
            max_node_delay: Picos(max),
            amplitude_v,
            amplitude_typical_v,
            drive_load_ohm,
            dc_load_ohm: settled.dc_load_ohm,
            amplitude_dc_v: settled.amplitude_dc_v.clone(),
            idle_v: settled.idle_v.iter().copied().reduce(f64::min).unwrap_or(0.0),
            settled,
            unit_loads,
        }
    }

    /// Wire delay from node `a` to node `b`.
    #[inline]
    pub fn delay(&self, a: NodeId, b: NodeId) -> Picos {
        Picos(self.delay_ps(a, b))
    }

    /// Wire delay as a raw picosecond count (hot-loop form).
    #[inline]
    pub fn delay_ps(&self, a: NodeId, b: NodeId) -> u64 {
        self.times_ps[a].abs_diff(self.times_ps[b])
    }

    /// What `node`'s receiver reads on the undriven line at its position.
    pub fn idle_state(&self, spec: &Spec, node: NodeId) -> IdleState {
        spec.nodes[node].transceiver.receiver.read(self.settled.idle_v[node])
    }

    /// Reflection coefficients at the near and far ends, each against the
    /// loaded impedance of the section it terminates.
    pub fn reflections(&self) -> (f64, f64) {
        let first = self.sections.list.first().expect("a line has a section").line.impedance_ohm;
        let last = self.sections.list.last().expect("a line has a section").line.impedance_ohm;
        (loaded::reflection(self.ends.near_ohm, first), loaded::reflection(self.ends.far_ohm, last))
    }
}
