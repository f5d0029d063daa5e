//! The settled line and what each receiver actually gets.
//!
//! For every driver the DC ladder ([`super::dc`]) gives the settled voltage at
//! every receiver; cable attenuation (if given) reduces the step that reaches
//! a distant receiver. A receiver's signal from driver n is the smaller of
//! the two. The bias network, alone on the undriven line, gives each node its
//! idle voltage, and after a driver releases, the line relaxes to it with the
//! time constant of the network's resistance and the line's capacitance.

use super::amplitude::Ends;
use super::dc::Ladder;
use crate::spec::Spec;
use crate::units::Picos;

/// The settled figures of one scenario.
#[derive(Clone, Debug, Default)]
pub struct Settled {
    /// The smallest DC load any driver sees (Ω; infinite on an open line).
    pub dc_load_ohm: f64,
    /// Per driver: its settled amplitude at its own position (V).
    pub amplitude_dc_v: Vec<f64>,
    /// Per receiver: the weakest signal it gets from any other driver (V).
    pub received_v: Vec<f64>,
    /// Per receiver: the driver that gives it that weakest signal.
    pub received_from: Vec<usize>,
    /// Per driver: the weakest signal any other receiver gets from it (V).
    pub weakest_received_v: Vec<f64>,
    /// Per node: the undriven line's voltage at its position (the bias network's, or 0 V).
    pub idle_v: Vec<f64>,
    /// Per driver: its largest swing (strongest drive, step or settled), for the common-mode check (V).
    pub swing_max_v: Vec<f64>,
    /// Per receiver: on a biased line, how long after a release the line
    /// takes to reach the receiver's defined idle state (it floats meanwhile);
    /// `None` without a bias network or when the bias never makes it defined.
    pub settle: Vec<Option<Picos>>,
    /// The relaxation time constant of the undriven line (s), with a bias network.
    pub tau_s: Option<f64>,
}

impl Settled {
    /// The figures with every node as a driver.
    pub fn new(spec: &Spec, ends: &Ends, step_v: &[f64], drive_load_ohm: &[f64]) -> Settled {
        let all: Vec<usize> = (0..spec.nodes.len()).collect();
        Settled::for_drivers(spec, ends, step_v, drive_load_ohm, &all)
    }

    /// The figures with only `drivers` driving (the others' per-driver
    /// entries stay zero): for the budget's node-count search, which needs the
    /// worst pairs only.
    pub fn for_drivers(spec: &Spec, ends: &Ends, step_v: &[f64], drive_load_ohm: &[f64], drivers: &[usize]) -> Settled {
        let n = spec.nodes.len();
        let line = &spec.line;
        let mut positions: Vec<f64> = spec.nodes.iter().map(|x| x.position_m).collect();
        positions.extend([0.0, line.length_m]);
        if let Some(b) = line.bias {
            positions.push(b.position_m);
        }
        let mut ladder = Ladder::new(&positions, line.conductor_ohm_per_m);
        ladder.add_shunt(ladder.point(0.0), ends.near_ohm);
        ladder.add_shunt(ladder.point(line.length_m), ends.far_ohm);
        let point: Vec<usize> = spec.nodes.iter().map(|x| ladder.point(x.position_m)).collect();
        for (i, node) in spec.nodes.iter().enumerate() {
            ladder.add_shunt(point[i], node.transceiver.input_ohm);
        }
        let idle_at: Vec<f64> = match line.bias {
            Some(b) => {
                let r = b.pull_up_ohm + b.pull_down_ohm;
                let at = ladder.point(b.position_m);
                ladder.add_shunt(at, r);
                let v = ladder.solve_one(at, b.supply_v / r, f64::INFINITY).expect("the bias itself is a DC path");
                point.iter().map(|&k| v[k]).collect()
            }
            None => vec![0.0; n],
        };
        // Cable loss at the signalling frequency (half the bit rate: a 1010 pattern's fundamental).
        let loss_db_per_m = line.attenuation.map_or(0.0, |a| a.db_per_m_at(spec.frame.bit_rate / 2.0));
        let att = |i: usize, j: usize| {
            if loss_db_per_m == 0.0 {
                1.0
            } else {
                let d = (spec.nodes[i].position_m - spec.nodes[j].position_m).abs();
                10f64.powf(-loss_db_per_m * d / 20.0)
            }
        };
        let one_node = line.conductor_ohm_per_m == 0.0;
        let total = ladder.total_shunt();
        let mut s = Settled {
            dc_load_ohm: f64::INFINITY,
            amplitude_dc_v: vec![0.0; n],
            received_v: vec![f64::INFINITY; n],
            received_from: vec![0; n],
            weakest_received_v: vec![f64::INFINITY; n],
            idle_v: idle_at,
            swing_max_v: vec![0.0; n],
            settle: vec![None; n],
            tau_s: None,
        };
        for &d in drivers {
            let t = &spec.nodes[d].transceiver;
            // Transfer resistances from a unit current at the driver: its own DC
            // load and, in proportion, the voltage at every other point.
            let z = if one_node {
                (total > 0.0).then(|| vec![1.0 / total; ladder.positions().len()])
            } else {
                ladder.solve_one(point[d], 1.0, f64::INFINITY)
            };
            let own = z.as_ref().map_or(f64::INFINITY, |z| z[point[d]]);
            let at_own = t.driver.amplitude_v(own);
            s.amplitude_dc_v[d] = at_own;
            s.dc_load_ohm = s.dc_load_ohm.min(own);
            let strongest = t.driver_max.amplitude_v(drive_load_ohm[d]).max(t.driver_max.amplitude_v(own));
            s.swing_max_v[d] =
                if strongest.is_finite() { strongest } else { t.driver_max.amplitude_v(drive_load_ohm[d]) };
            for r in 0..n {
                if r == d {
                    continue;
                }
                let settled = match &z {
                    Some(z) if own > 0.0 => at_own * z[point[r]] / own,
                    _ => at_own,
                };
                let got = (step_v[d] * att(d, r)).min(settled);
                if got < s.received_v[r] {
                    s.received_v[r] = got;
                    s.received_from[r] = d;
                }
                s.weakest_received_v[d] = s.weakest_received_v[d].min(got);
            }
        }
        if line.bias.is_some() {
            // The undriven line relaxes through the whole network's resistance
            // with the line's capacitance, C0·length plus every node's load.
            let c = line.delay_s_per_m / line.impedance_ohm * line.length_m
                + spec.nodes.iter().map(|x| x.transceiver.load_f).sum::<f64>();
            let tau = c / total;
            s.tau_s = Some(tau);
            let swing = s.swing_max_v.iter().copied().fold(0.0, f64::max);
            for r in 0..n {
                s.settle[r] = settle_time(&spec.nodes[r].transceiver.receiver, s.idle_v[r], swing, tau);
            }
        }
        s
    }
}

/// How long after a release a receiver floats on a biased line: from the far
/// extreme of the swing (the last bit opposite to the idle state, the worst
/// case) the line relaxes exponentially toward the idle voltage `b`,
/// v(t) = b + (v0 − b)·e^(−t/τ), and the receiver reads its idle state once v
/// crosses the threshold on that side: t = τ·ln(|v0 − b| / |threshold − b|).
/// `None` when the idle voltage leaves the receiver undefined.
pub fn settle_time(rx: &super::ReceiverClass, b: f64, swing: f64, tau_s: f64) -> Option<Picos> {
    let (start, threshold) = match rx.read(b) {
        super::IdleState::High => (-swing, rx.high_v),
        super::IdleState::Low => (swing, rx.low_v),
        super::IdleState::Undefined => return None,
    };
    let from = (start - b).abs();
    // A bias exactly at the threshold meets it; the approach is asymptotic, so
    // the last microvolt is taken as reached.
    let to = (threshold - b).abs().max(1e-6);
    if from <= to {
        return Some(Picos::ZERO);
    }
    let t = tau_s * (from / to).ln();
    Some(Picos::from_secs_f64(t).map_or(crate::scenario::check::MAX_TIME, |p| p.min(crate::scenario::check::MAX_TIME)))
}
