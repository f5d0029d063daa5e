//! Worst-case latency bounds: for every flow whose arrivals are bounded, an
//! upper bound on the time from a message's arrival to its delivery, from
//! the scenario's own timing model with every time at its worst (the top of
//! each transceiver range, the longest frames with their longest character
//! gaps, the longest firmware latency).
//!
//! A bound is a guarantee only as good as the model: where the analysis
//! does not cover a case (unbounded arrivals, random latencies without an
//! upper end, bit errors, faults, a scheme not analysed here) the flow is
//! "unbounded" with the reason, never a number. Pure functions of the spec:
//! no I/O.

mod arbitration;
mod polling;
mod tdma;
mod token;

use crate::line::LineModel;
use crate::spec::{Latency, NodeId, Pattern, Spec, TrafficSpec};
use crate::units::Picos;

/// The bound of one flow (a traffic source).
#[derive(Clone, Debug, PartialEq)]
pub struct FlowBound {
    /// `node` for a node's only source, `node[k]` for one of several, or the
    /// identifier (`0x0123`) when the source has one.
    pub name: String,
    pub node: NodeId,
    pub outcome: Outcome,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Outcome {
    Bounded {
        bound: Picos,
        /// The formula used, in words and symbols.
        formula: &'static str,
        /// Where the method comes from.
        source: &'static str,
    },
    Unbounded {
        reason: String,
    },
}

impl FlowBound {
    pub fn bound(&self) -> Option<Picos> {
        match self.outcome {
            Outcome::Bounded { bound, .. } => Some(bound),
            Outcome::Unbounded { .. } => None,
        }
    }
}

/// The bounds of every flow of the scenario.
pub fn bounds(spec: &Spec, line: &LineModel) -> Vec<FlowBound> {
    let flows = flows(spec);
    let common = common_reason(spec);
    // Each analysis gives a bound or a reason per flow, or one reason for all.
    let analysed = match (common, &spec.access) {
        (Some(r), _) => Err(r),
        (None, crate::spec::AccessSpec::Polling(p)) => polling::bounds(spec, line, p, &flows),
        (None, crate::spec::AccessSpec::Arbitration(a)) => arbitration::bounds(spec, line, a, &flows),
        (None, crate::spec::AccessSpec::Tdma(t)) => tdma::bounds(spec, line, t, &flows),
        (None, crate::spec::AccessSpec::Token(t)) => token::bounds(spec, line, t, &flows),
        (None, a) => {
            Err(format!("{} is random access: a message can lose every contention, so it has no worst case", a.name()))
        }
    };
    let out =
        analysed.unwrap_or_else(|reason| flows.iter().map(|_| Outcome::Unbounded { reason: reason.clone() }).collect());
    flows.iter().zip(out).map(|(f, outcome)| FlowBound { name: f.name.clone(), node: f.node, outcome }).collect()
}

/// A traffic source, with what the analyses need of it.
#[derive(Clone, Debug)]
pub(crate) struct Flow {
    pub name: String,
    pub node: NodeId,
    pub traffic: TrafficSpec,
}

impl Flow {
    /// Most arrivals in any closed window of length `t`; `None` for a source
    /// without a bound (Poisson without `min_interval`).
    pub fn arrivals_within(&self, t: u128) -> Option<u128> {
        match self.traffic.pattern {
            Pattern::Periodic { period, jitter, .. } => Some((t + u128::from(jitter.0)) / u128::from(period.0) + 1),
            Pattern::Poisson { min_interval, .. } if min_interval.0 > 0 => Some(t / u128::from(min_interval.0) + 1),
            Pattern::Poisson { .. } => None,
        }
    }

    /// The window lengths t in (lo, hi) at which [`Flow::arrivals_within`]
    /// steps up (t = k·T − J); none for a source without a bound.
    pub fn steps(&self, lo: u128, hi: u128) -> impl Iterator<Item = u128> {
        let (t, j) = self.interval_and_jitter().unwrap_or((1, 0));
        let first = if self.interval_and_jitter().is_some() { (lo + j) / t + 1 } else { u128::MAX };
        (first..).map(move |k| k * t - j).take_while(move |&x| x < hi)
    }

    /// Its minimum inter-arrival time (the period, or `min_interval`) and release jitter.
    pub fn interval_and_jitter(&self) -> Option<(u128, u128)> {
        match self.traffic.pattern {
            Pattern::Periodic { period, jitter, .. } => Some((u128::from(period.0), u128::from(jitter.0))),
            Pattern::Poisson { min_interval, .. } if min_interval.0 > 0 => Some((u128::from(min_interval.0), 0)),
            Pattern::Poisson { .. } => None,
        }
    }
}

/// The flows of each node, for the most arrivals at a node in a window.
pub(crate) struct Arrivals<'a> {
    by_node: Vec<Vec<&'a Flow>>,
}

impl<'a> Arrivals<'a> {
    pub fn new(spec: &Spec, flows: &'a [Flow]) -> Self {
        let mut by_node: Vec<Vec<&Flow>> = vec![Vec::new(); spec.nodes.len()];
        for f in flows {
            by_node[f.node].push(f);
        }
        Arrivals { by_node }
    }

    /// Most arrivals at `node`, over all its sources, in a closed window of
    /// length `t`; `None` if one of its sources has no bound.
    pub fn within(&self, node: NodeId, t: u128) -> Option<u128> {
        self.by_node[node].iter().map(|f| f.arrivals_within(t)).sum()
    }
}

/// Most arrivals a refined service bound looks at; past it the plain
/// bound (every term at A(span)) is used.
const REFINE_MAX_ARRIVALS: u128 = 2_000;

/// The longest latency of a message of `node` under a recurring service (a
/// poll's reaction, the token's take, a slot's start) that sends, at each
/// service instant S_k, every message then queued, oldest first, when the
/// node's arrivals in `span` (the longest time between two services) never
/// exceed what a service sends (no backlog).
///
/// A message m arriving x ≥ 0 after S_k (at S_k itself it may miss it)
/// goes out at S_{k+1}, last among the a ≤ A(x) messages that arrived in
/// [S_k, t_m]. The n messages sent at S_k arrived in [S_{k−1}, S_k], so
/// n + a ≤ A(span + x) and n ≤ `n_max`. With `rest` the longest time
/// between services apart from the node's own turn, `own(n)` that turn
/// with n messages and `deliver(a)` the time from a service to the a-th
/// message's delivery:
///
/// ```text
/// latency ≤ max over x, a of  rest + own(n) − x + deliver(a),  n = min(n_max, A(span + x) − a)
/// ```
///
/// Between the steps of A(x) and A(span + x) the right side falls with x,
/// so x = 0 and the steps in (0, span) are the only candidates. A message
/// arriving just after a service instant with its node's previous service
/// empty meets it: it is reached to within the engine's 1 ps.
pub(crate) fn served_latency(
    arrivals: &Arrivals,
    node: NodeId,
    span: u128,
    n_max: u128,
    rest: u128,
    own: impl Fn(u128) -> u128,
    deliver: impl Fn(u128) -> u128,
) -> Option<u128> {
    let most = arrivals.within(node, 2 * span)?;
    if most > REFINE_MAX_ARRIVALS {
        let a = arrivals.within(node, span)?;
        return Some(rest + own(n_max.min(a)) + deliver(a));
    }
    let mut xs = vec![0u128];
    for f in &arrivals.by_node[node] {
        xs.extend(f.steps(0, span));
        xs.extend(f.steps(span, 2 * span).map(|t| t - span));
    }
    let mut worst = 0u128;
    for x in xs {
        let (ax, total) = (arrivals.within(node, x)?, arrivals.within(node, span + x)?);
        for a in 1..=ax {
            let n = n_max.min(total - a);
            worst = worst.max((rest + own(n) + deliver(a)).saturating_sub(x));
        }
    }
    Some(worst)
}

/// A node with a source without a bound: its flows have none either.
pub(crate) fn unbounded_source(spec: &Spec, node: NodeId) -> Outcome {
    Outcome::Unbounded {
        reason: format!("\"{}\" has a source without a bound (Poisson without min_interval)", spec.nodes[node].name),
    }
}

/// The least fixed point of a non-decreasing `step`, iterated from
/// `start`: a worst-case cycle or rotation. An error when it grows past
/// 10^6 s or has not settled after many steps (never a value short of it).
pub(crate) fn least_fixed_point(
    start: u128,
    what: &str,
    mut step: impl FnMut(u128) -> Result<u128, String>,
) -> Result<u128, String> {
    let cap = u128::from(crate::scenario::check::MAX_TIME.0);
    let mut x = start;
    for _ in 0..100_000 {
        let next = step(x)?;
        if next == x {
            return Ok(x);
        }
        if next > cap {
            return Err(format!("the worst-case {what} grows past 10^6 s: the bus does not keep up"));
        }
        x = next;
    }
    Err(format!("the worst-case {what} did not settle within 100 000 steps of the analysis"))
}

/// Every traffic source, named.
pub(crate) fn flows(spec: &Spec) -> Vec<Flow> {
    let mut out = Vec::new();
    for (i, n) in spec.nodes.iter().enumerate() {
        for (k, t) in n.traffic.iter().enumerate() {
            let name = match t.id {
                Some(id) => format!("{id:#06x}"),
                None if n.traffic.len() == 1 => n.name.clone(),
                None => format!("{}[{k}]", n.name),
            };
            out.push(Flow { name, node: i, traffic: t.clone() });
        }
    }
    out
}

/// Why no flow of the scenario has a bound, if one reason covers them all.
fn common_reason(spec: &Spec) -> Option<String> {
    if crate::line::noise::modelled(spec) {
        return Some(
            "bit errors (line.noise or line.bit_error_rate) can corrupt any frame, so no latency is certain".into(),
        );
    }
    if !spec.access.node_faults().is_empty() {
        return Some("node faults (access.faults) are outside the analysis".into());
    }
    if spec.nodes.iter().any(|n| n.external) {
        return Some("a node driven by an external process (co-simulation) is outside the analysis".into());
    }
    None
}

/// The longest a firmware latency can be; `None` when it has no upper end.
pub(crate) fn latency_max(l: &Latency) -> Option<u128> {
    match *l {
        Latency::Fixed(t) => Some(u128::from(t.0)),
        Latency::Uniform { max, .. } => Some(u128::from(max.0)),
        Latency::Normal { sd, mean } if sd.0 == 0 => Some(u128::from(mean.0)),
        Latency::Normal { .. } | Latency::Exponential { .. } => None,
    }
}

/// Worst-case transceiver times of a node (the tops of its ranges).
pub(crate) struct Worst {
    pub enable: u128,
    pub lead: u128,
    pub disable: u128,
    pub receiver: u128,
    pub react: u128,
}

pub(crate) fn worst(spec: &Spec, node: NodeId) -> Worst {
    let t = &spec.nodes[node].transceiver;
    let enable = u128::from(t.enable_range.max.0);
    // The lead is the enable time unless given.
    let lead = t.enable_lead.map_or(enable, |l| u128::from(l.0));
    Worst {
        enable,
        lead,
        disable: u128::from(t.disable_range.max.0),
        receiver: u128::from(t.receiver_range.max.0),
        react: u128::from(t.react_offset(&spec.frame).0),
    }
}

/// A bound past the range of time is no bound.
/// A flow's bound of `ps`, with its method; past 10^6 s (any time's
/// bound) it is no bound at all.
pub(crate) fn outcome(ps: u128, formula: &'static str, source: &'static str) -> Outcome {
    if ps > u128::from(crate::scenario::check::MAX_TIME.0) {
        return Outcome::Unbounded { reason: "the bound exceeds 10^6 s: the bus does not keep up".into() };
    }
    Outcome::Bounded { bound: Picos(ps as u64), formula, source }
}

/// The frames node `j` sends in one turn (a poll, a token) when its turns
/// are at most `window` apart: its arrivals in that window, capped by the
/// scheme's `limit`; an error when neither bounds them (`no_limit` says
/// which setting would).
pub(crate) fn frames_per_turn(
    spec: &Spec,
    arrivals: &Arrivals,
    j: NodeId,
    window: u128,
    limit: Option<u128>,
    no_limit: &str,
) -> Result<u128, String> {
    if spec.nodes[j].traffic.is_empty() {
        return Ok(0);
    }
    match (arrivals.within(j, window), limit) {
        (Some(a), Some(l)) => Ok(a.min(l)),
        (Some(a), None) => Ok(a),
        (None, Some(l)) => Ok(l),
        (None, None) => Err(format!(
            "\"{}\" has a source without a bound (Poisson without min_interval) and {no_limit}",
            spec.nodes[j].name
        )),
    }
}
