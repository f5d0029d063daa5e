//! The line figures shared by the run report and the budget: one
//! implementation, so both always agree.

use serde::Serialize;

use super::{IdleState, LineModel};
use crate::spec::Spec;

/// Line-level figures (SI base units).
#[derive(Clone, Debug, Serialize)]
pub struct LineFigures {
    pub loaded_impedance_ohm: f64,
    pub loaded_delay_s_per_m: f64,
    pub end_to_end_delay_s: f64,
    /// C_d·n / C0.
    pub load_ratio: f64,
    /// Γ at each end against the loaded impedance (+1: open).
    pub reflection_near: f64,
    pub reflection_far: f64,
    /// Terminations ∥ receiver inputs ∥ bias network; `None` (null) when
    /// nothing loads the pair at DC (an open line).
    pub dc_load_ohm: Option<f64>,
    /// Differential voltage of the undriven line.
    pub idle_v: f64,
    pub unit_loads: f64,
    /// The weakest driver: the smaller of its step and settled amplitudes.
    pub worst_amplitude_v: f64,
    pub worst_amplitude_node: String,
    /// Smallest receiver margin against the worst amplitude (V); negative fails.
    pub worst_margin_v: f64,
    pub worst_margin_node: String,
    pub bit_time_s: f64,
}

/// Per-node electrical figures.
#[derive(Clone, Debug, Serialize)]
pub struct NodeFigures {
    /// This node's driver: initial step and settled amplitude.
    pub amplitude_step_v: f64,
    /// `None` (null) on an open line: the settled level is then set by the
    /// driver's own output limits, which the model does not know.
    pub amplitude_dc_v: Option<f64>,
    /// The impedance its driver sees when it switches.
    pub drive_load_ohm: f64,
    /// Its receiver's margin against the weakest driver on the bus.
    pub margin_v: f64,
    pub idle_v: f64,
    pub idle_state: IdleState,
}

/// A driver's worst amplitude: the smaller of its step and settled values.
pub fn amplitude_of(line: &LineModel, node: usize) -> f64 {
    line.amplitude_v[node].min(line.amplitude_dc_v[node])
}

/// The weakest driver on the bus and its amplitude.
pub fn weakest(line: &LineModel) -> (usize, f64) {
    (0..line.amplitude_v.len()).map(|i| (i, amplitude_of(line, i))).fold((0, f64::INFINITY), |acc, x| {
        if x.1 < acc.1 {
            x
        } else {
            acc
        }
    })
}

pub fn line_figures(spec: &Spec, line: &LineModel) -> LineFigures {
    let (amp_node, amp) = weakest(line);
    let (margin_node, margin) = spec
        .nodes
        .iter()
        .enumerate()
        .map(|(i, n)| (i, n.transceiver.receiver.margin_v(amp)))
        .fold((0, f64::INFINITY), |acc, x| if x.1 < acc.1 { x } else { acc });
    let (reflection_near, reflection_far) = line.reflections();
    LineFigures {
        loaded_impedance_ohm: line.loaded.impedance_ohm,
        loaded_delay_s_per_m: line.loaded.delay_s_per_m,
        end_to_end_delay_s: line.end_to_end.as_secs_f64(),
        load_ratio: line.loaded.load_ratio(),
        reflection_near,
        reflection_far,
        dc_load_ohm: line.dc_load_ohm.is_finite().then_some(line.dc_load_ohm),
        idle_v: line.idle_v,
        unit_loads: line.unit_loads,
        worst_amplitude_v: amp,
        worst_amplitude_node: spec.nodes[amp_node].name.clone(),
        worst_margin_v: margin,
        worst_margin_node: spec.nodes[margin_node].name.clone(),
        bit_time_s: 1.0 / spec.frame.bit_rate,
    }
}

/// `weakest_v` is the weakest driver's amplitude ([`weakest`]).
pub fn node_figures(spec: &Spec, line: &LineModel, node: usize, weakest_v: f64) -> NodeFigures {
    NodeFigures {
        amplitude_step_v: line.amplitude_v[node],
        amplitude_dc_v: line.amplitude_dc_v[node].is_finite().then_some(line.amplitude_dc_v[node]),
        drive_load_ohm: line.drive_load_ohm[node],
        margin_v: spec.nodes[node].transceiver.receiver.margin_v(weakest_v),
        idle_v: line.idle_v,
        idle_state: line.idle_state(spec, node),
    }
}
