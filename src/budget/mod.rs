//! The electrical and timing budget: a static analysis of a scenario, with
//! no traffic simulated. Its line figures are the run report's (one
//! implementation in `line::figures`).

pub mod checks;
pub mod cycle;
pub mod electrical;
pub mod firmware;
pub mod handover;
pub mod text;

use std::collections::BTreeMap;

use serde::Serialize;

use crate::line::figures::{self, LineFigures, NodeFigures};
use crate::line::LineModel;
use crate::spec::Spec;
pub use checks::BudgetWarning;
pub use handover::Handover;

/// Version tag of the budget's JSON.
pub const SCHEMA: &str = "halfwire-budget/1";

/// Settings of the analysis.
#[derive(Clone, Copy, Debug)]
pub struct Options {
    /// A stub is short while its round-trip delay stays within this fraction
    /// of the transition time (published values range from 1/2 to 1/20).
    pub stub_fraction: f64,
    /// Longest floating-line window tolerated at undefined-idle receivers.
    pub float_limit: Option<crate::units::Picos>,
}

impl Default for Options {
    fn default() -> Self {
        Options { stub_fraction: 0.5, float_limit: None }
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Limits {
    /// From the edges (unit interval ≥ 2 × transition time) and the stubs.
    /// `null` when no transceiver gives a transition time.
    pub max_bit_rate_bit_s: Option<f64>,
    /// Largest node count at this node density that meets the amplitude and loading checks.
    pub max_nodes: usize,
    pub unit_loads: f64,
    pub unit_load_limit: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Budget {
    pub schema: &'static str,
    pub scenario: String,
    pub scheme: &'static str,
    pub line: LineFigures,
    pub nodes: BTreeMap<String, NodeFigures>,
    pub limits: Limits,
    pub handovers: Vec<Handover>,
    /// The undriven line and its loading along the line, node by node in position order.
    pub profile: Vec<ProfilePoint>,
    /// The scheme's zero-load cycle and the bandwidth it leaves (`null` for random access).
    pub cycle: Option<cycle::Cycle>,
    pub warnings: Vec<BudgetWarning>,
}

/// One node's place on the line.
#[derive(Clone, Debug, Serialize)]
pub struct ProfilePoint {
    pub node: String,
    pub position_m: f64,
    /// The undriven line's voltage there.
    pub idle_v: f64,
    /// The loaded impedance of the section there.
    pub impedance_ohm: f64,
}

impl Budget {
    pub fn compute(spec: &Spec, options: Options) -> Budget {
        let line = LineModel::new(spec);
        let nodes = (0..spec.nodes.len())
            .map(|i| (spec.nodes[i].name.clone(), figures::node_figures(spec, &line, i)))
            .collect();
        let limits = Limits {
            max_bit_rate_bit_s: electrical::max_bit_rate(spec, options.stub_fraction),
            max_nodes: electrical::max_nodes(spec),
            unit_loads: line.unit_loads,
            unit_load_limit: crate::spec::MAX_UNIT_LOADS,
        };
        let handovers = handover::handovers(spec, &line, options.float_limit);
        let warnings = checks::warnings(spec, &line, &handovers, options);
        let mut order: Vec<usize> = (0..spec.nodes.len()).collect();
        order.sort_by(|&a, &b| spec.nodes[a].position_m.total_cmp(&spec.nodes[b].position_m));
        let profile = order
            .into_iter()
            .map(|i| ProfilePoint {
                node: spec.nodes[i].name.clone(),
                position_m: spec.nodes[i].position_m,
                idle_v: line.settled.idle_v[i],
                impedance_ohm: line.sections.at(spec.nodes[i].position_m).line.impedance_ohm,
            })
            .collect();
        Budget {
            schema: SCHEMA,
            scenario: spec.name.clone(),
            scheme: spec.access.name(),
            line: figures::line_figures(spec, &line),
            nodes,
            limits,
            handovers,
            profile,
            cycle: cycle::cycle(spec, &line),
            warnings,
        }
    }
}

/// `--verify`: the scenario run at the worst-case corner of its time ranges
/// with every hand-over at its computed minimum, and with the worst one 1 ps
/// below it. Response latencies are zeroed, so that the turnaround alone decides.
#[derive(Clone, Debug, Serialize)]
pub struct Verification {
    pub at_minimum_contention: u64,
    pub below_minimum_contention: u64,
    pub lowered: String,
}

/// `None` when the scheme has no per-node hand-over to vary.
pub fn verify(spec: &Spec, handovers: &[Handover]) -> Option<Verification> {
    use crate::spec::{AccessSpec, Latency};
    use crate::units::Picos;
    let worst = handovers.first()?;
    let from = spec.node_id(&worst.from);
    let set = |spec: &mut Spec, delta: i64| -> Option<()> {
        match &mut spec.access {
            AccessSpec::Polling(p) => {
                p.response_latency = Latency::Fixed(Picos::ZERO);
                apply(&mut p.turnaround, handovers, worst, delta)
            }
            AccessSpec::Token(t) => {
                t.response_latency = Latency::Fixed(Picos::ZERO);
                apply(&mut t.turnaround, handovers, worst, delta)
            }
            AccessSpec::Tdma(t) => {
                // The worst clock corner of the worst hand-over: its releasing
                // owner slow and the next owner fast by their ppm.
                let (p, r) = (from?, worst.responder?);
                let ppm = |d: crate::spec::Drift| match d {
                    crate::spec::Drift::Fixed(x) => x.abs(),
                    crate::spec::Drift::Within(x) => x,
                };
                let (pp, pr) = (ppm(t.drift[p]), ppm(t.drift[r]));
                for d in t.drift.iter_mut() {
                    *d = crate::spec::Drift::Fixed(0.0);
                }
                t.drift[p] = crate::spec::Drift::Fixed(-pp);
                t.drift[r] = crate::spec::Drift::Fixed(pr);
                let g = handovers.iter().map(|h| h.min).max()?;
                t.guard = Picos((g.0 as i64 + delta).max(0) as u64);
                Some(())
            }
            _ => None,
        }
    };
    // The minima are worst-case over the time ranges: run at that corner.
    let mut worst_case = spec.clone();
    worst_case.timing = crate::spec::Timing::Worst;
    for n in &mut worst_case.nodes {
        let t = &mut n.transceiver;
        t.enable_time = t.enable_range.max;
        t.disable_time = t.disable_range.max;
        t.receiver_delay = t.receiver_range.min;
    }
    let mut at = worst_case.clone();
    set(&mut at, 0)?;
    let mut below = worst_case;
    set(&mut below, -1)?;
    let run = |s: &Spec| crate::simulate(s).contention.events;
    Some(Verification {
        at_minimum_contention: run(&at),
        below_minimum_contention: run(&below),
        lowered: format!("{} → {}", worst.from, worst.to),
    })
}

/// Set each responder's turnaround to the largest minimum it needs; move
/// the worst hand-over's responder by `delta` picoseconds.
fn apply(turnaround: &mut [crate::units::Picos], handovers: &[Handover], worst: &Handover, delta: i64) -> Option<()> {
    use crate::units::Picos;
    for t in turnaround.iter_mut() {
        *t = Picos::ZERO;
    }
    for h in handovers {
        let r = h.responder?;
        turnaround[r] = turnaround[r].max(h.min);
    }
    let r = worst.responder?;
    turnaround[r] = Picos((turnaround[r].0 as i64 + delta).max(0) as u64);
    Some(())
}
