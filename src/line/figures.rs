//! The line figures shared by the run report and the budget: one
//! implementation, so both always agree.

use serde::Serialize;

use super::{IdleState, LineModel};
use crate::spec::Spec;

/// Line-level figures (SI base units).
#[derive(Clone, Debug, Serialize)]
pub struct LineFigures {
    /// Z' and tpd' with every node's load averaged over the whole line
    /// (Johnson & Graham's formula); wire delays use the sections instead.
    pub loaded_impedance_ohm: f64,
    pub loaded_delay_s_per_m: f64,
    /// The lowest loaded impedance of any section (its nodes' own stretch).
    pub loaded_impedance_min_ohm: f64,
    /// Signal time end to end, summed over the sections.
    pub end_to_end_delay_s: f64,
    /// C_d·n / C0 with the loads averaged.
    pub load_ratio: f64,
    /// Γ at each end against the loaded impedance of the end's section (+1: open).
    pub reflection_near: f64,
    pub reflection_far: f64,
    /// The smallest settled (DC) load any driver sees: terminations ∥ receiver
    /// inputs ∥ bias network, through the conductors' resistance; `None`
    /// (null) when nothing loads the pair at DC (an open line).
    pub dc_load_ohm: Option<f64>,
    /// The lowest voltage of the undriven line at any node (the bias network's, or 0 V).
    pub idle_v: f64,
    pub unit_loads: f64,
    /// The weakest signal any receiver gets (the smaller of the step, less
    /// the cable's loss, and the settled level), and the driver that sends it.
    pub worst_amplitude_v: f64,
    pub worst_amplitude_node: String,
    /// Smallest receiver margin against the signal it gets (V); negative fails.
    pub worst_margin_v: f64,
    pub worst_margin_node: String,
    pub bit_time_s: f64,
}

/// Per-node electrical figures.
#[derive(Clone, Debug, Serialize)]
pub struct NodeFigures {
    /// This node's weakest driver: initial step and settled amplitude at its own position.
    pub amplitude_step_v: f64,
    /// `None` (null) on an open line: the settled level is then set by the
    /// driver's own output limits, which the model does not know.
    pub amplitude_dc_v: Option<f64>,
    /// The step of this node's typical driver (common practice), beside the minimum.
    pub amplitude_typical_v: f64,
    /// The impedance its driver sees when it switches.
    pub drive_load_ohm: f64,
    /// The weakest signal any other receiver gets while this node drives.
    pub weakest_received_v: f64,
    /// Its receiver's margin against the weakest signal it gets.
    pub margin_v: f64,
    /// The undriven line's voltage at this node, and what its receiver reads there.
    pub idle_v: f64,
    pub idle_state: IdleState,
    /// On a biased line: how long after each release the line takes to
    /// settle past this receiver's threshold (it floats meanwhile); `None`
    /// (null) without a bias network or where the bias leaves it undefined.
    pub settle_s: Option<f64>,
    /// The rms noise at its receiver (`line.noise` or the node's `noise`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub noise_v: Option<f64>,
    /// Probability that its receiver takes one line bit wrong: Q(margin / noise),
    /// or `line.bit_error_rate`. Absent when the scenario models no noise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub bit_error_rate: Option<f64>,
}

/// A driver's worst amplitude at its own position: the smaller of its step and settled values.
pub fn amplitude_of(line: &LineModel, node: usize) -> f64 {
    line.amplitude_v[node].min(line.amplitude_dc_v[node])
}

/// Receiver `node`'s margin against the weakest signal it gets, around the idle voltage at its position.
pub fn margin_of(spec: &Spec, line: &LineModel, node: usize) -> f64 {
    let s = &line.settled;
    spec.nodes[node].transceiver.receiver.margin_biased_v(s.received_v[node], s.idle_v[node])
}

/// The weakest signal any receiver gets, and the driver that sends it.
pub fn weakest(line: &LineModel) -> (usize, f64) {
    let s = &line.settled;
    (0..s.received_v.len()).map(|r| (s.received_from[r], s.received_v[r])).fold((0, f64::INFINITY), |acc, x| {
        if x.1 < acc.1 {
            x
        } else {
            acc
        }
    })
}

pub fn line_figures(spec: &Spec, line: &LineModel) -> LineFigures {
    let (amp_node, amp) = weakest(line);
    let (margin_node, margin) = (0..spec.nodes.len())
        .map(|i| (i, margin_of(spec, line, i)))
        .fold((0, f64::INFINITY), |acc, x| if x.1 < acc.1 { x } else { acc });
    let (reflection_near, reflection_far) = line.reflections();
    LineFigures {
        loaded_impedance_ohm: line.loaded.impedance_ohm,
        loaded_delay_s_per_m: line.loaded.delay_s_per_m,
        loaded_impedance_min_ohm: line.sections.min_impedance_ohm(),
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

pub fn node_figures(spec: &Spec, line: &LineModel, node: usize) -> NodeFigures {
    let dc = line.amplitude_dc_v[node];
    NodeFigures {
        amplitude_step_v: line.amplitude_v[node],
        amplitude_dc_v: dc.is_finite().then_some(dc),
        amplitude_typical_v: line.amplitude_typical_v[node],
        drive_load_ohm: line.drive_load_ohm[node],
        weakest_received_v: line.settled.weakest_received_v[node],
        margin_v: margin_of(spec, line, node),
        idle_v: line.settled.idle_v[node],
        idle_state: line.idle_state(spec, node),
        settle_s: line.settled.settle[node].map(|t| t.as_secs_f64()),
        noise_v: spec.nodes[node].noise_v.filter(|_| spec.line.bit_error_rate.is_none()),
        bit_error_rate: super::noise::modelled(spec).then(|| match spec.line.bit_error_rate {
            Some(p) => p,
            None => spec.nodes[node].noise_v.map_or(0.0, |s| super::noise::q(margin_of(spec, line, node) / s)),
        }),
    }
}
