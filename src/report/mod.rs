//! The run report: plain data that every output format renders.
//!
//! All figures are SI base units (seconds, bit/s, metres, ohms, volts) or
//! plain counts and fractions. Only the `run` object depends on the machine;
//! everything else is a pure function of the scenario and seed.

pub mod firmware;
pub mod invariants;
pub mod json;
pub mod tallies;
pub mod text;

use std::collections::BTreeMap;

use serde::Serialize;

use crate::bus::trace::BusEvent;
use crate::engine::{Finished, SchemeReport, World};
pub use crate::line::figures::LineFigures;
use crate::line::IdleState;
use crate::stats::LatencySummary;
use crate::units::Picos;

/// Version tag of the JSON report.
pub const SCHEMA: &str = "halfwire-report/1";

#[derive(Clone, Debug, Serialize)]
pub struct Report {
    pub schema: &'static str,
    pub scenario: ScenarioId,
    /// Length of the measured window (duration − warmup).
    pub simulated_s: f64,
    pub frames: Frames,
    pub throughput: Throughput,
    pub latency_s: Latency,
    pub contention: Contention,
    pub handover: firmware::HandoverFigures,
    pub floating: Floating,
    pub utilization: Utilization,
    pub line: LineFigures,
    pub scheme: SchemeReport,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub uart: Option<firmware::UartFigures>,
    /// Down periods of nodes (`access.faults`), in the order they began.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub outages: Vec<OutageFigures>,
    /// Worst-case latency bounds of the flows (`halfwire bound`), beside the
    /// simulated maxima; present when at least one flow has a bound.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub bounds: Vec<BoundFigures>,
    /// The bounded flows' bounds by name (`bound_s.flows.<flow>`, the metric
    /// an expectation gates on); present with `bounds`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub bound_s: Option<BoundMetrics>,
    /// Totals over the down periods, when the scenario injects node faults.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub recovery: Option<RecoveryFigures>,
    pub warnings: Vec<Warning>,
    /// Set when simulated time stopped advancing: the run ended there.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stalled_at_s: Option<f64>,
    /// Set when a co-simulation ended early (a client fault under `abort`, or Ctrl-C).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub aborted_at_s: Option<f64>,
    pub run: RunInfo,
    /// The exact counters behind the figures (for merging; not in the JSON
    /// report), without the latency tallies: see [`Report::tallies`].
    #[serde(skip)]
    counters: tallies::Tallies,
    /// The latency accumulators, encoded only on request.
    #[serde(skip)]
    latency_set: tallies::LatencySet,
}

#[derive(Clone, Debug, Serialize)]
pub struct ScenarioId {
    pub name: String,
    pub seed: u64,
    /// The whole simulated time (the run stops here) and the warmup left out of the statistics.
    pub duration_s: f64,
    pub warmup_s: f64,
}

#[derive(Clone, Copy, Debug, Serialize)]
pub struct Frames {
    pub attempts: u64,
    pub delivered: u64,
    pub corrupted: u64,
    /// Messages dropped at a full queue.
    pub dropped: u64,
    /// Messages the scheme gave up on after its last allowed attempt.
    pub given_up: u64,
    pub arrived: u64,
    pub control: u64,
    pub control_corrupted: u64,
    /// Messages still queued, held by the scheme for a retry, or on the wire when the run ended.
    pub queued_at_end: u64,
    /// Data frames lost at a receiver that was down.
    pub unheard: u64,
    /// Corrupted data-frame deliveries by cause; they add up to `corrupted`.
    pub corrupted_by: crate::stats::CorruptedBy,
}

/// `bound_s.flows.<flow>`: each bounded flow's bound in seconds.
#[derive(Clone, Debug, Serialize)]
pub struct BoundMetrics {
    pub flows: BTreeMap<String, f64>,
}

/// A flow's worst-case bound beside what the run saw.
#[derive(Clone, Debug, Serialize)]
pub struct BoundFigures {
    pub flow: String,
    /// Null when the flow has no bound (see `unbounded`).
    pub bound_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub unbounded: Option<String>,
    /// The flow's longest latency in the measured window (null when the
    /// report cannot single it out: a node with several sources without identifiers).
    pub simulated_max_s: Option<f64>,
    /// simulated_max_s / bound_s.
    pub ratio: Option<f64>,
}

/// Down periods together: how many, and the longest times to notice and to recover.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct RecoveryFigures {
    pub outages: u64,
    /// Down periods the scheme never treated as silent (short ones, or no `dead_after`).
    pub never_found_silent: u64,
    /// Down periods that ended but whose node never answered afterwards.
    pub never_answered: u64,
    /// The longest time from a node going down to the scheme skipping it (null if none was).
    pub found_silent_after_max_s: Option<f64>,
    /// The longest time from a node coming back to its first answer (null if none did).
    pub answered_after_max_s: Option<f64>,
}

/// One down period of a node.
#[derive(Clone, Debug, Serialize)]
pub struct OutageFigures {
    pub node: String,
    pub down_at_s: f64,
    /// From going down to the scheme treating it as silent (polling: the
    /// timeout that made it skip the node); null if it never did.
    pub found_silent_after_s: Option<f64>,
    /// Null if the node stayed down to the end.
    pub up_at_s: Option<f64>,
    /// From coming back to its first answer; null if it never answered.
    pub answered_after_s: Option<f64>,
}

#[derive(Clone, Copy, Debug, Serialize)]
pub struct Throughput {
    /// Payload bits delivered per second.
    pub payload_bit_s: f64,
    /// On-wire time of delivered data frames / simulated time.
    pub carried: f64,
    /// Channel access attempts × mean data-frame on-wire time / simulated time.
    pub offered: f64,
    pub access_attempts: u64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Latency {
    pub all: LatencySummary,
    /// Per source node (the node where the message was queued).
    pub nodes: BTreeMap<String, LatencySummary>,
    /// Per traffic identifier (hexadecimal), for sources that have one.
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub ids: BTreeMap<String, LatencySummary>,
    /// Significant digits of the per-node and per-identifier percentiles
    /// (3, written only when fewer: buses of more than 256 nodes keep 2).
    /// `all` always keeps 3. Means and maxima are exact.
    #[serde(skip_serializing_if = "is_three")]
    pub per_source_digits: u8,
}

fn is_three(d: &u8) -> bool {
    *d == 3
}

#[derive(Clone, Debug, Serialize)]
pub struct ContentionItem {
    pub at_s: f64,
    pub nodes: [String; 2],
    pub position_m: f64,
    pub overlap_s: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Contention {
    pub events: u64,
    pub overlap_total_s: f64,
    pub overlap_max_s: f64,
    pub first: Vec<ContentionItem>,
}

#[derive(Clone, Debug, Serialize)]
pub struct Floating {
    /// Windows summed over every receiver that reads an idle line as undefined.
    pub windows: u64,
    pub total_s: f64,
    pub longest_s: f64,
    /// The receivers counted (idle state undefined).
    pub hazard_receivers: Vec<String>,
}

#[derive(Clone, Copy, Debug, Serialize)]
pub struct Utilization {
    pub payload: f64,
    pub overhead: f64,
    pub gaps: f64,
    pub idle: f64,
    pub wasted: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Warning {
    pub code: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub node: Option<String>,
    pub message: String,
}

/// Machine-dependent figures, filled in by the caller that timed the run.
#[derive(Clone, Copy, Debug, Default, Serialize)]
pub struct RunInfo {
    pub wall_s: f64,
    pub events: u64,
    pub events_per_s: f64,
    /// Periods (polling cycles) done in closed form instead of event by
    /// event (`engine::shortcut`); 0 under `--no-shortcuts`.
    pub closed_form_periods: u64,
    /// Co-simulation: batches exchanged with external nodes.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cosim_exchanges: Option<u64>,
}

impl Report {
    pub(crate) fn build(w: &World, scheme: SchemeReport) -> Report {
        let spec = &w.spec;
        let line = &w.line;
        // The counters, once; the figures below are derived from them.
        let flow_bounds = crate::bound::bounds(&w.spec, &w.line);
        let t = tallies::Tallies::from_world(w, &flow_bounds);
        let st = &w.stats;
        let frames = t.frames();
        let mean_wire_s =
            if st.data_frames_sent > 0 { st.data_wire_ps as f64 / st.data_frames_sent as f64 / 1e12 } else { 0.0 };
        let measured = t.measured_s();
        let throughput = Throughput {
            payload_bit_s: t.payload_bit_s(),
            carried: t.carried(),
            offered: if measured > 0.0 { t.access_attempts as f64 * mean_wire_s / measured } else { 0.0 },
            access_attempts: t.access_attempts,
        };
        let nodes = spec
            .nodes
            .iter()
            .enumerate()
            .filter(|(_, n)| !n.traffic.is_empty())
            .map(|(i, n)| (n.name.clone(), st.latency_node[i].summary()))
            .collect();
        let ids = st.latency_id.iter().map(|(id, l)| (format!("{id:#06x}"), l.summary())).collect();
        let per_source_digits = st.latency_node.first().map_or(3, |l| l.digits());
        let latency = Latency { all: st.latency_all.summary(), nodes, ids, per_source_digits };
        let c = &w.bus.contention;
        let contention = Contention {
            events: t.contention_events,
            overlap_total_s: t.overlap_total_ps as f64 / 1e12,
            overlap_max_s: t.overlap_max_ps as f64 / 1e12,
            first: c
                .listed
                .iter()
                .map(|e| ContentionItem {
                    at_s: e.at.as_secs_f64(),
                    nodes: [spec.nodes[e.first].name.clone(), spec.nodes[e.second].name.clone()],
                    position_m: e.position_m,
                    overlap_s: e.overlap.as_secs_f64(),
                })
                .collect(),
        };
        let hazard: Vec<String> = (0..spec.nodes.len())
            .filter(|&i| {
                line.idle_state(spec, i) == IdleState::Undefined || line.settled.settle[i].is_some_and(|t| t.0 > 0)
            })
            .map(|i| spec.nodes[i].name.clone())
            .collect();
        let floating = Floating {
            windows: t.floating_windows,
            total_s: t.floating_total_ps as f64 / 1e12,
            longest_s: t.floating_longest_ps as f64 / 1e12,
            hazard_receivers: hazard,
        };
        let utilization = t.utilization();
        let line_fig = crate::line::figures::line_figures(spec, line);
        let uart = firmware::UartFigures::of(w);
        let mut warnings = warnings(w, &contention, &floating, &frames);
        let bounds = bound_figures(w, &flow_bounds, &mut warnings);
        if let Some(u) = &uart {
            uart_warnings(u, &mut warnings);
        }
        Report {
            schema: SCHEMA,
            scenario: ScenarioId {
                name: spec.name.clone(),
                seed: spec.seed,
                duration_s: spec.duration.as_secs_f64(),
                warmup_s: spec.warmup.as_secs_f64(),
            },
            simulated_s: measured,
            frames,
            throughput,
            latency_s: latency,
            contention,
            handover: firmware::HandoverFigures::of(w),
            floating,
            utilization,
            line: line_fig,
            scheme,
            uart,
            outages: w
                .health
                .outages()
                .iter()
                .map(|o| OutageFigures {
                    node: spec.nodes[o.node].name.clone(),
                    down_at_s: o.down_at.as_secs_f64(),
                    found_silent_after_s: o.found_silent_at.map(|t| (t - o.down_at).as_secs_f64()),
                    up_at_s: o.up_at.map(Picos::as_secs_f64),
                    answered_after_s: o.answered_at.zip(o.up_at).map(|(a, u)| (a - u).as_secs_f64()),
                })
                .collect(),
            recovery: t.outages.map(|o| o.figures()),
            bound_s: (!bounds.is_empty()).then(|| BoundMetrics {
                flows: t.bounds_ps.iter().map(|(k, v)| (k.clone(), Picos(*v).as_secs_f64())).collect(),
            }),
            bounds,
            warnings,
            stalled_at_s: None,
            aborted_at_s: None,
            run: RunInfo { events: w.events, closed_form_periods: w.closed_form_periods, ..RunInfo::default() },
            counters: t,
            // Moved in by `from_run` once the report is built.
            latency_set: tallies::LatencySet::default(),
        }
    }

    /// The report of a finished run, and the bus events recorded while
    /// closing it.
    pub fn from_run(run: Finished) -> (Report, Vec<BusEvent>) {
        let Finished { mut world, scheme, stalled, cosim, events } = run;
        let mut report = Report::build(&world, scheme);
        // The world is done with its latency accumulators: moved, not copied.
        report.latency_set = tallies::LatencySet::take(&mut world);
        report.stalled_at_s = stalled.map(Picos::as_secs_f64);
        if let Some(c) = cosim {
            report.aborted_at_s = c.aborted.map(|t| t.as_secs_f64());
            report.run.cosim_exchanges = Some(c.exchanges);
            for f in c.faults {
                report.warnings.push(Warning {
                    code: "cosim-client-fault",
                    node: Some(world.spec.nodes[f.node].name.clone()),
                    message: format!("at {} (virtual time): {}", f.at, f.message),
                });
            }
        }
        (report, events)
    }

    /// The report of a finished run.
    pub fn of(run: Finished) -> Report {
        Self::from_run(run).0
    }

    /// The exact counters behind the figures, with the latency histograms
    /// encoded (for sweep rows and merging).
    pub fn tallies(&self) -> tallies::Tallies {
        let mut t = self.counters.clone();
        self.latency_set.encode_into(&mut t);
        t
    }

    /// The run's latency accumulators, overall and per node with traffic.
    pub fn latency_set(&self) -> &tallies::LatencySet {
        &self.latency_set
    }

    /// Fill the machine-dependent `run` object.
    pub fn set_wall_time(&mut self, wall_s: f64) {
        self.run.wall_s = wall_s;
        self.run.events_per_s = if wall_s > 0.0 { self.run.events as f64 / wall_s } else { 0.0 };
    }
}

fn uart_warnings(u: &firmware::UartFigures, out: &mut Vec<Warning>) {
    let mut say = |code: &'static str, n: u64, what: &str| {
        if n > 0 {
            out.push(Warning { code, node: None, message: format!("{n} {what}") });
        }
    };
    say(
        "cut-frames",
        u.cut_frames,
        "frames lost their first or last bit to the driver enable (enable_lead, release_after_stop): framing errors at every receiver",
    );
    say(
        "char-timeouts",
        u.char_timeouts,
        "deliveries discarded: a gap between characters was longer than frame.char_timeout",
    );
    say(
        "silence-violations",
        u.silence_violations,
        "deliveries lost: the frame started less than frame.silence after the one before it, so the receiver merged them",
    );
    say(
        "unsettled-frames",
        u.unsettled_frames,
        "deliveries from auto-direction drivers received wrong: the bias does not settle the recessive bits within a bit",
    );
}

/// Each flow's bound beside its simulated maximum; a maximum above its bound
/// is a loud warning (the model or the analysis is wrong).
fn bound_figures(w: &World, all: &[crate::bound::FlowBound], warnings: &mut Vec<Warning>) -> Vec<BoundFigures> {
    if all.iter().all(|b| b.bound().is_none()) {
        return Vec::new();
    }
    let st = &w.stats;
    all.iter()
        .map(|b| {
            let node = &w.spec.nodes[b.node];
            let by_id = st.latency_id.iter().find(|(id, _)| format!("{id:#06x}") == b.name).map(|(_, l)| l);
            let stats = by_id.or((node.traffic.len() == 1).then(|| &st.latency_node[b.node]));
            let max = stats.map(|l| l.summary()).filter(|s| s.count > 0).map(|s| s.max);
            let bound = b.bound().map(|x| x.as_secs_f64());
            if let (Some(m), Some(bd)) = (max, b.bound()) {
                // Compared exactly, in picoseconds.
                if stats.is_some_and(|l| l.max_ps() > bd.0) {
                    warnings.push(Warning {
                        code: "bound-exceeded",
                        node: Some(node.name.clone()),
                        message: format!(
                            "flow {}: a latency of {} exceeds its worst-case bound of {}; the timing model or the analysis is wrong, please report this scenario",
                            b.name,
                            crate::units::format_si(m, "s"),
                            crate::units::format_si(bd.as_secs_f64(), "s")
                        ),
                    });
                }
            }
            BoundFigures {
                flow: b.name.clone(),
                bound_s: bound,
                unbounded: match &b.outcome {
                    crate::bound::Outcome::Unbounded { reason } => Some(reason.clone()),
                    _ => None,
                },
                simulated_max_s: max,
                ratio: max.zip(bound).map(|(m, b)| if b > 0.0 { m / b } else { 0.0 }),
            }
        })
        .collect()
}

fn warnings(w: &World, c: &Contention, f: &Floating, frames: &Frames) -> Vec<Warning> {
    let mut out = Vec::new();
    for (i, n) in w.spec.nodes.iter().enumerate() {
        let margin = crate::line::figures::margin_of(&w.spec, &w.line, i);
        if margin < 0.0 {
            out.push(Warning {
                code: "amplitude-below-threshold",
                node: Some(n.name.clone()),
                message: format!(
                    "its weakest signal ({}, from {}) is {} short of this {} receiver's threshold",
                    crate::units::format_si(w.line.settled.received_v[i], "V"),
                    w.spec.nodes[w.line.settled.received_from[i]].name,
                    crate::units::format_si(-margin, "V"),
                    n.transceiver.receiver.name
                ),
            });
        }
    }
    if c.events > 0 {
        out.push(Warning {
            code: "contention",
            node: None,
            message: format!(
                "{} contention events: two drivers on the line at once (worst overlap {})",
                c.events,
                crate::units::format_seconds(c.overlap_max_s)
            ),
        });
    }
    if f.windows > 0 {
        out.push(Warning {
            code: "floating-line",
            node: None,
            message: format!(
                "{} floating-line windows at receivers without failsafe (longest {}); they may see phantom bits",
                f.windows,
                crate::units::format_seconds(f.longest_s)
            ),
        });
    }
    if frames.dropped > 0 {
        out.push(Warning {
            code: "drops",
            node: None,
            message: format!(
                "{} messages dropped at full queues (queue_limit reached): the offered load may exceed what the scheme carries",
                frames.dropped
            ),
        });
    }
    if frames.given_up > 0 {
        out.push(Warning {
            code: "given-up",
            node: None,
            message: format!(
                "{} messages given up: their last allowed attempt failed (max_attempts, polling retries; token, TDMA and arbitration send a message once)",
                frames.given_up
            ),
        });
    }
    if frames.arrived > 0 && frames.queued_at_end > frames.arrived / 10 + 100 {
        out.push(Warning {
            code: "backlog",
            node: None,
            message: format!(
                "{} messages still queued at the end: the offered load may exceed what the scheme carries",
                frames.queued_at_end
            ),
        });
    }
    out
}
