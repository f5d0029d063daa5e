//! The exact integer counters behind a report, in a form that adds: two
//! runs' tallies sum to the tallies of both, and the headline metrics are
//! recomputed from the sum. This is what lets sweep rows from different
//! replications, shards or machines merge exactly.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::{Frames, Utilization};
use crate::engine::World;
use crate::stats::latency::{LatencyStats, LatencyTally};
use crate::units::Picos;

/// Counters of one run or of several merged. Every field is an integer
/// (picoseconds, bits or counts), so merging is exact and order-free.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Tallies {
    /// Length of the measured window(s), summed.
    pub measured_ps: u64,
    /// Sums that can exceed 2^64 (over nodes or receivers) are 128-bit.
    pub payload_bits: u128,
    pub carried_ps: u128,
    pub attempts: u64,
    pub delivered: u64,
    pub corrupted: u64,
    pub dropped: u64,
    #[serde(default)]
    pub given_up: u64,
    pub arrived: u64,
    pub control: u64,
    pub control_corrupted: u64,
    #[serde(default)]
    pub corrupted_by: crate::stats::CorruptedBy,
    #[serde(default)]
    pub unheard: u64,
    pub queued_at_end: u64,
    pub access_attempts: u64,
    pub contention_events: u64,
    pub overlap_total_ps: u128,
    pub overlap_max_ps: u64,
    pub floating_windows: u64,
    pub floating_total_ps: u128,
    pub floating_longest_ps: u64,
    pub util_payload_ps: u64,
    pub util_overhead_ps: u64,
    pub util_gaps_ps: u64,
    pub util_idle_ps: u64,
    pub util_wasted_ps: u64,
    pub latency: LatencyTally,
    /// Per source node that has traffic.
    pub latency_nodes: BTreeMap<String, LatencyTally>,
    #[serde(default)]
    pub handovers: u64,
    /// The smallest hand-over slack (ps, signed; none without a hand-over).
    #[serde(default)]
    pub handover_slack_min_ps: Option<i64>,
    #[serde(default)]
    pub handovers_contended: u64,
    /// Worst-case latency bound of each bounded flow (ps): a function of the
    /// scenario, the same in every run of it.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub bounds_ps: BTreeMap<String, u64>,
    /// Down periods of nodes, when the scenario injects node faults.
    #[serde(default)]
    pub outages: Option<OutageTally>,
    /// UART framing faults, when the report has a `uart` object.
    #[serde(default)]
    pub uart: Option<UartTally>,
}

/// Down periods, for merging: counts and the longest times.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct OutageTally {
    pub count: u64,
    /// Down periods the scheme never treated as silent.
    pub never_found_silent: u64,
    /// Down periods that ended but whose node never answered afterwards.
    pub never_answered: u64,
    pub found_silent_after_max_ps: Option<u64>,
    pub answered_after_max_ps: Option<u64>,
}

impl OutageTally {
    fn of(w: &World) -> Option<OutageTally> {
        if w.spec.access.node_faults().is_empty() {
            return None;
        }
        let mut t = OutageTally::default();
        for o in w.health.outages() {
            t.count += 1;
            match o.found_silent_at {
                Some(f) => t.found_silent_after_max_ps = t.found_silent_after_max_ps.max(Some((f - o.down_at).0)),
                None => t.never_found_silent += 1,
            }
            match (o.up_at, o.answered_at) {
                (Some(u), Some(a)) => t.answered_after_max_ps = t.answered_after_max_ps.max(Some((a - u).0)),
                (Some(_), None) => t.never_answered += 1,
                (None, _) => {}
            }
        }
        Some(t)
    }

    /// The report's `recovery` object.
    pub fn figures(&self) -> super::RecoveryFigures {
        super::RecoveryFigures {
            outages: self.count,
            never_found_silent: self.never_found_silent,
            never_answered: self.never_answered,
            found_silent_after_max_s: self.found_silent_after_max_ps.map(|x| Picos(x).as_secs_f64()),
            answered_after_max_s: self.answered_after_max_ps.map(|x| Picos(x).as_secs_f64()),
        }
    }

    fn add(&mut self, o: &OutageTally) {
        self.count += o.count;
        self.never_found_silent += o.never_found_silent;
        self.never_answered += o.never_answered;
        self.found_silent_after_max_ps = self.found_silent_after_max_ps.max(o.found_silent_after_max_ps);
        self.answered_after_max_ps = self.answered_after_max_ps.max(o.answered_after_max_ps);
    }
}

/// The `uart` counters, for merging.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct UartTally {
    pub cut_frames: u64,
    pub char_timeouts: u64,
    pub silence_violations: u64,
    pub unsettled_frames: u64,
}

impl Default for LatencyTally {
    fn default() -> Self {
        LatencyStats::new().tally()
    }
}

/// A run's latency accumulators, overall and per node with traffic, kept
/// as they are: encoding them (a tally) is done only when asked for.
#[derive(Clone, Debug, Default)]
pub struct LatencySet {
    pub all: LatencyStats,
    pub nodes: Vec<(String, LatencyStats)>,
}

impl LatencySet {
    /// Move the accumulators out of a finished run (no copy of the histograms).
    pub(crate) fn take(w: &mut World) -> LatencySet {
        let st = &mut w.stats;
        // Moved out whole: no placeholder histograms are built (at 4 096
        // nodes they cost as much as the run's own).
        let nodes = std::mem::take(&mut st.latency_node)
            .into_iter()
            .zip(&w.spec.nodes)
            .filter(|(_, n)| !n.traffic.is_empty())
            .map(|(l, n)| (n.name.clone(), l))
            .collect();
        LatencySet { all: std::mem::take(&mut st.latency_all), nodes }
    }

    /// Encode into `t`'s latency tallies.
    pub fn encode_into(&self, t: &mut Tallies) {
        t.latency = self.all.tally();
        t.latency_nodes = self.nodes.iter().map(|(n, l)| (n.clone(), l.tally())).collect();
    }
}

impl LatencyTally {
    /// A tally not yet encoded (see [`LatencySet::encode_into`]).
    fn pending() -> LatencyTally {
        LatencyTally { count: 0, sum_ps: 0, max_ps: 0, histogram: String::new() }
    }
}

impl Tallies {
    /// The counters of a run, without the latency tallies, which
    /// [`LatencySet::encode_into`] fills when they are needed.
    pub(crate) fn from_world(w: &World, bounds: &[crate::bound::FlowBound]) -> Tallies {
        let st = &w.stats;
        let c = &w.bus.contention;
        let f = w.bus.floating.totals;
        let u = w.bus.util.totals;
        let handover = w.bus.handover.all();
        Tallies {
            measured_ps: w.spec.measured().0,
            payload_bits: st.payload_bits,
            carried_ps: st.carried_ps,
            attempts: st.frames.attempts,
            delivered: st.frames.delivered,
            corrupted: st.frames.corrupted,
            dropped: st.frames.dropped,
            given_up: st.frames.given_up,
            arrived: st.frames.arrived,
            control: st.frames.control_frames,
            control_corrupted: st.frames.control_corrupted,
            corrupted_by: st.frames.corrupted_by,
            queued_at_end: w.mail.total() + st.frames.in_flight_at_end,
            unheard: st.frames.unheard,
            access_attempts: st.frames.access_attempts,
            contention_events: c.events,
            overlap_total_ps: c.overlap_total_ps,
            overlap_max_ps: c.overlap_max_ps,
            floating_windows: f.windows,
            floating_total_ps: f.total_ps,
            floating_longest_ps: f.longest_ps,
            util_payload_ps: u.payload,
            util_overhead_ps: u.overhead,
            util_gaps_ps: u.gaps,
            util_idle_ps: u.idle,
            util_wasted_ps: u.wasted,
            latency: LatencyTally::pending(),
            latency_nodes: BTreeMap::new(),
            handovers: handover.count,
            handover_slack_min_ps: handover.min,
            handovers_contended: handover.contended,
            outages: OutageTally::of(w),
            bounds_ps: bounds.iter().filter_map(|b| Some((b.name.clone(), b.bound()?.0))).collect(),
            uart: super::firmware::UartFigures::of(w).map(|u| UartTally {
                cut_frames: u.cut_frames,
                char_timeouts: u.char_timeouts,
                silence_violations: u.silence_violations,
                unsettled_frames: u.unsettled_frames,
            }),
        }
    }

    /// The names [`Tallies::metrics`] gives for a run of `spec`.
    pub fn metric_names(spec: &crate::spec::Spec) -> Vec<String> {
        let mut t = Tallies { handover_slack_min_ps: Some(0), ..Tallies::default() };
        if super::firmware::present(spec) {
            t.uart = Some(UartTally::default());
        }
        if !spec.access.node_faults().is_empty() {
            t.outages = Some(OutageTally {
                found_silent_after_max_ps: Some(0),
                answered_after_max_ps: Some(0),
                ..Default::default()
            });
        }
        for n in spec.nodes.iter().filter(|n| !n.traffic.is_empty()) {
            t.latency_nodes.insert(n.name.clone(), LatencyTally::default());
        }
        for f in crate::bound::flows(spec) {
            t.bounds_ps.insert(f.name, 0);
        }
        t.metrics().map(|m| m.into_keys().collect()).unwrap_or_default()
    }

    /// Add another run's tallies to these.
    pub fn add(&mut self, o: &Tallies) -> Result<(), String> {
        self.measured_ps += o.measured_ps;
        self.payload_bits += o.payload_bits;
        self.carried_ps += o.carried_ps;
        self.attempts += o.attempts;
        self.delivered += o.delivered;
        self.corrupted += o.corrupted;
        self.dropped += o.dropped;
        self.given_up += o.given_up;
        self.arrived += o.arrived;
        self.control += o.control;
        self.control_corrupted += o.control_corrupted;
        self.corrupted_by.add(&o.corrupted_by);
        self.unheard += o.unheard;
        self.queued_at_end += o.queued_at_end;
        self.access_attempts += o.access_attempts;
        self.contention_events += o.contention_events;
        self.overlap_total_ps += o.overlap_total_ps;
        self.overlap_max_ps = self.overlap_max_ps.max(o.overlap_max_ps);
        self.floating_windows += o.floating_windows;
        self.floating_total_ps += o.floating_total_ps;
        self.floating_longest_ps = self.floating_longest_ps.max(o.floating_longest_ps);
        self.util_payload_ps += o.util_payload_ps;
        self.util_overhead_ps += o.util_overhead_ps;
        self.util_gaps_ps += o.util_gaps_ps;
        self.util_idle_ps += o.util_idle_ps;
        self.util_wasted_ps += o.util_wasted_ps;
        self.latency = add_latency(&self.latency, &o.latency)?;
        for (name, t) in &o.latency_nodes {
            let sum = match self.latency_nodes.get(name) {
                Some(mine) => add_latency(mine, t)?,
                None => t.clone(),
            };
            self.latency_nodes.insert(name.clone(), sum);
        }
        self.handovers += o.handovers;
        self.handovers_contended += o.handovers_contended;
        self.handover_slack_min_ps = match (self.handover_slack_min_ps, o.handover_slack_min_ps) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        for (k, v) in &o.bounds_ps {
            let e = self.bounds_ps.entry(k.clone()).or_insert(*v);
            *e = (*e).max(*v);
        }
        if let Some(b) = &o.outages {
            self.outages.get_or_insert_with(OutageTally::default).add(b);
        }
        if let Some(b) = o.uart {
            let a = self.uart.get_or_insert_with(UartTally::default);
            a.cut_frames += b.cut_frames;
            a.char_timeouts += b.char_timeouts;
            a.silence_violations += b.silence_violations;
            a.unsettled_frames += b.unsettled_frames;
        }
        Ok(())
    }

    /// Length of the measured window(s), in seconds.
    pub fn measured_s(&self) -> f64 {
        Picos(self.measured_ps).as_secs_f64()
    }

    /// `x` per second of measured time (0 for an empty window).
    fn per_s(&self, x: f64) -> f64 {
        let measured = self.measured_s();
        if measured > 0.0 {
            x / measured
        } else {
            0.0
        }
    }

    /// Payload bits delivered per second.
    pub fn payload_bit_s(&self) -> f64 {
        self.per_s(self.payload_bits as f64)
    }

    /// On-wire time of delivered data frames / measured time.
    pub fn carried(&self) -> f64 {
        self.per_s(self.carried_ps as f64 / 1e12)
    }

    pub fn frames(&self) -> Frames {
        Frames {
            attempts: self.attempts,
            delivered: self.delivered,
            corrupted: self.corrupted,
            dropped: self.dropped,
            given_up: self.given_up,
            arrived: self.arrived,
            control: self.control,
            control_corrupted: self.control_corrupted,
            queued_at_end: self.queued_at_end,
            unheard: self.unheard,
            corrupted_by: self.corrupted_by,
        }
    }

    /// Fractions of the measured window itself, so any gap in the
    /// accounting would show as a sum below 1.
    pub fn utilization(&self) -> Utilization {
        let whole = self.measured_ps.max(1) as f64;
        Utilization {
            payload: self.util_payload_ps as f64 / whole,
            overhead: self.util_overhead_ps as f64 / whole,
            gaps: self.util_gaps_ps as f64 / whole,
            idle: self.util_idle_ps as f64 / whole,
            wasted: self.util_wasted_ps as f64 / whole,
        }
    }

    /// The headline metrics, named as in the JSON report
    /// (`throughput.carried`, `latency_s.all.p99`, …) and computed by the
    /// same functions the report uses, so one run's tallies give exactly its
    /// report's figures.
    pub fn metrics(&self) -> Result<BTreeMap<String, f64>, String> {
        let ps = |x: u128| x as f64 / 1e12;
        let figures = serde_json::json!({
            "simulated_s": self.measured_s(),
            "throughput": {
                "payload_bit_s": self.payload_bit_s(),
                "carried": self.carried(),
                "access_attempts": self.access_attempts,
            },
            "frames": self.frames(),
            "contention": {
                "events": self.contention_events,
                "overlap_total_s": ps(self.overlap_total_ps),
                "overlap_max_s": ps(u128::from(self.overlap_max_ps)),
            },
            "floating": {
                "windows": self.floating_windows,
                "total_s": ps(self.floating_total_ps),
                "longest_s": ps(u128::from(self.floating_longest_ps)),
            },
            "utilization": self.utilization(),
            "handover": {
                "count": self.handovers,
                "contended": self.handovers_contended,
                "slack_min_s": self.handover_slack_min_ps.map(|x| x as f64 / 1e12),
            },
            "uart": self.uart,
            "recovery": self.outages.map(|o| o.figures()),
        });
        let mut m = crate::check::flatten(&figures);
        for (flow, ps) in &self.bounds_ps {
            m.insert(format!("bound_s.flows.{flow}"), Picos(*ps).as_secs_f64());
        }
        put_latency(&mut m, "latency_s.all", &self.latency)?;
        for (name, t) in &self.latency_nodes {
            put_latency(&mut m, &format!("latency_s.nodes.{name}"), t)?;
        }
        Ok(m)
    }
}

fn add_latency(a: &LatencyTally, b: &LatencyTally) -> Result<LatencyTally, String> {
    let mut sum = LatencyStats::from_tally(a)?;
    sum.add(&LatencyStats::from_tally(b)?);
    Ok(sum.tally())
}

fn put_latency(m: &mut BTreeMap<String, f64>, prefix: &str, t: &LatencyTally) -> Result<(), String> {
    let s = LatencyStats::from_tally(t)?.summary();
    for (k, v) in [
        ("count", s.count as f64),
        ("mean", s.mean),
        ("p50", s.p50),
        ("p90", s.p90),
        ("p99", s.p99),
        ("p999", s.p999),
        ("max", s.max),
    ] {
        m.insert(format!("{prefix}.{k}"), v);
    }
    Ok(())
}
