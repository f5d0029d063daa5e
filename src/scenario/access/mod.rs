//! Validation of `[access]`: one file per scheme, sharing the helpers here.
//!
//! `[access]` is parsed into one flat struct holding every scheme's keys;
//! a key that does not apply to the chosen scheme is an error that says so.

mod aloha;
mod arbitration;
mod csma;
mod polling;
mod tdma;
mod token;

use std::ops::Range;

use super::check::{latency, unknown_node, R, V};
use super::raw::{RawAccess, S};
use crate::spec::{AccessSpec, FrameFormat, Latency, LineSpec, NodeId, NodeSpec, WorstTimes};
use crate::units::Picos;

/// Values of `access.scheme`.
pub const SCHEMES: &[&str] = &["polling", "token", "tdma", "aloha", "csma", "arbitration"];

/// Keys every scheme accepts.
const COMMON: &[&str] = &["scheme", "order", "turnaround", "response_latency"];

/// What a scheme validator works from.
pub(crate) struct Access<'a> {
    pub v: &'a V<'a>,
    pub a: &'a RawAccess,
    pub span: Range<usize>,
    pub nodes: &'a [NodeSpec],
    pub line: &'a LineSpec,
    pub frame: &'a FrameFormat,
    pub names: Vec<String>,
    pub scheme: &'static str,
}

pub fn validate(
    v: &V,
    a: &RawAccess,
    span: Range<usize>,
    nodes: &[NodeSpec],
    line: &LineSpec,
    frame: &FrameFormat,
) -> R<AccessSpec> {
    let scheme = v.choice(&a.scheme, "access.scheme", SCHEMES)?;
    let allowed: &[&str] = match scheme {
        "polling" => polling::KEYS,
        "token" => token::KEYS,
        "aloha" => aloha::KEYS,
        "tdma" => tdma::KEYS,
        "arbitration" => arbitration::KEYS,
        _ => csma::KEYS,
    };
    for (key, at) in a.present() {
        if !COMMON.contains(&key) && !allowed.contains(&key) {
            let mut e = v.err(at, &format!("access.{key}"), format!("`{key}` does not apply to scheme \"{scheme}\""));
            let mut keys: Vec<&str> = COMMON.iter().chain(allowed).copied().filter(|k| *k != "scheme").collect();
            keys.sort_unstable();
            e = e.with_hint(format!("keys of \"{scheme}\": {}", keys.join(", ")));
            return Err(e);
        }
    }
    let ctx = Access { v, a, span, nodes, line, frame, names: nodes.iter().map(|n| n.name.clone()).collect(), scheme };
    match scheme {
        "polling" => polling::validate(&ctx),
        "token" => token::validate(&ctx),
        "aloha" => aloha::validate(&ctx),
        "tdma" => tdma::validate(&ctx),
        "arbitration" => arbitration::validate(&ctx),
        _ => csma::validate(&ctx),
    }
}

/// `access.faults`, sorted by time (equal times keep the file's order).
#[derive(Debug, Default)]
pub(crate) struct Faults {
    pub lose_token_at: Vec<Picos>,
    pub nodes: Vec<crate::spec::NodeFault>,
}

/// Fault kinds every scheme supports.
pub const NODE_FAULTS: &[&str] = &["node-down", "node-up"];

/// Most faults a scenario may list.
pub const MAX_FAULTS: usize = 10_000;

impl<'a> Access<'a> {
    /// `access.faults`, each of a kind in `kinds`. A `node-up` needs the
    /// node down at that instant and a `node-down` needs it up.
    pub fn faults(&self, kinds: &[&str]) -> R<Faults> {
        let v = self.v;
        let mut out = Faults::default();
        let Some(list) = &self.a.faults else { return Ok(out) };
        if list.get_ref().len() > MAX_FAULTS {
            return Err(v.err(list.span(), "access.faults", format!("at most {MAX_FAULTS} faults are supported")));
        }
        let mut nodes = Vec::new();
        for (i, raw) in list.get_ref().iter().enumerate() {
            let key = format!("access.faults[{i}]");
            let f = raw.get_ref();
            let kind = v.choice(&f.kind, &format!("{key}.kind"), kinds)?;
            let at = v.time(&f.at, &format!("{key}.at"))?;
            if kind == "lose-token" {
                if let Some(n) = &f.node {
                    return Err(v.err(
                        n.span(),
                        &format!("{key}.node"),
                        "a lost token concerns no node: remove `node`",
                    ));
                }
                out.lose_token_at.push(at);
                continue;
            }
            let name = f.node.as_ref().ok_or_else(|| {
                v.err(
                    raw.span(),
                    &format!("{key}.node"),
                    format!("a {kind} fault needs the node, e.g. node = \"{}\"", self.names[0]),
                )
            })?;
            let node = self.find(name, &format!("{key}.node"))?;
            nodes.push((at, i, node, kind == "node-down", raw.span()));
        }
        out.lose_token_at.sort();
        nodes.sort_by_key(|&(at, i, ..)| (at, i));
        let mut down = vec![false; self.nodes.len()];
        for (at, i, node, is_down, span) in nodes {
            if down[node] == is_down {
                let key = format!("access.faults[{i}]");
                let name = &self.names[node];
                return Err(if is_down {
                    v.err(span, &key, format!("\"{name}\" is already down at {at}: a node-down needs it up"))
                } else {
                    v.err(span, &key, format!("\"{name}\" is not down at {at}: a node-up needs an earlier node-down"))
                        .with_hint("list the node-down first, at an earlier time")
                });
            }
            down[node] = is_down;
            out.nodes.push(crate::spec::NodeFault { at, node, down: is_down });
        }
        Ok(out)
    }

    /// An optional count of at most `max`.
    pub fn count(&self, field: &Option<toml::Spanned<u32>>, key: &str, min: u32, max: u32) -> R<Option<u32>> {
        let Some(f) = field else { return Ok(None) };
        let n = *f.get_ref();
        if !(min..=max).contains(&n) {
            return Err(self.v.err(
                f.span(),
                &format!("access.{key}"),
                format!("{key} = {n} is outside {min} to {max}"),
            ));
        }
        Ok(Some(n))
    }

    /// Resolve a node name.
    pub fn find(&self, s: &S, key: &str) -> R<NodeId> {
        self.names.iter().position(|n| n == s.get_ref()).ok_or_else(|| unknown_node(self.v, s, key, &self.names))
    }

    /// A required key, or an error naming it with an example.
    pub fn required<'b, T>(&self, field: &'b Option<T>, key: &str, example: &str) -> R<&'b T> {
        field.as_ref().ok_or_else(|| {
            self.v.err(
                self.span.clone(),
                &format!("access.{key}"),
                format!("{} needs {key}, e.g. {example}", self.scheme),
            )
        })
    }

    /// `access.order`, or every node but `exclude` in position order.
    /// `what` names the list in errors ("poll order", "token ring").
    pub fn order(&self, exclude: Option<NodeId>, what: &str) -> R<Vec<NodeId>> {
        match &self.a.order {
            Some(list) => {
                if list.get_ref().is_empty() {
                    return Err(self.v.err(
                        list.span(),
                        "access.order",
                        format!("the {what} is empty: list at least one node"),
                    ));
                }
                let mut out = Vec::new();
                for (i, s) in list.get_ref().iter().enumerate() {
                    let key = format!("access.order[{i}]");
                    let id = self.find(s, &key)?;
                    if Some(id) == exclude {
                        return Err(self.v.err(s.span(), &key, format!("\"{}\" cannot be in the {what}", s.get_ref())));
                    }
                    out.push(id);
                }
                Ok(out)
            }
            None => {
                let mut ids: Vec<NodeId> = (0..self.nodes.len()).filter(|&i| Some(i) != exclude).collect();
                ids.sort_by(|&x, &y| self.nodes[x].position_m.total_cmp(&self.nodes[y].position_m));
                Ok(ids)
            }
        }
    }

    /// Every node with traffic must appear in `order`.
    pub fn all_senders_in(&self, order: &[NodeId], what: &str) -> R<()> {
        for (i, n) in self.nodes.iter().enumerate() {
            if !n.traffic.is_empty() && !order.contains(&i) {
                return Err(self.v.err(
                    self.a.order.as_ref().map(|o| o.span()).unwrap_or(self.span.clone()),
                    "access.order",
                    format!("\"{}\" has traffic but is not in the {what}", n.name),
                ));
            }
        }
        Ok(())
    }

    /// Per-node turnaround: the node's own, else `access.turnaround`.
    pub fn turnarounds(&self) -> R<Vec<Picos>> {
        let default = self.a.turnaround.as_ref().map(|t| self.v.time(t, "access.turnaround")).transpose()?;
        self.nodes
            .iter()
            .map(|n| {
                n.turnaround.or(default).ok_or_else(|| {
                    self.v.err(
                        self.span.clone(),
                        "access.turnaround",
                        format!(
                            "node \"{}\" has no turnaround: set access.turnaround or the node's turnaround",
                            n.name
                        ),
                    )
                })
            })
            .collect()
    }

    pub fn response_latency(&self) -> R<Latency> {
        match &self.a.response_latency {
            None => Ok(Latency::Fixed(Picos::ZERO)),
            Some(l) => latency(self.v, l, "access.response_latency"),
        }
    }

    /// The largest wire delay between any two nodes plus the largest
    /// receiver delay: how long until every node can know a frame's fate.
    pub fn max_lag(&self) -> Picos {
        WorstTimes::of(self.nodes).lag(self.max_wire())
    }

    /// The largest wire delay between two nodes, on the loaded line (section by section).
    pub fn max_wire(&self) -> Picos {
        let (_, times) = crate::line::node_times(self.line, self.nodes);
        Picos(crate::line::max_wire_ps(&crate::line::times_ps(&times)))
    }

    /// `access.slot_time` if given (> 0), else `default`.
    pub fn slot_time(&self, default: Picos) -> R<Picos> {
        match &self.a.slot_time {
            Some(s) => {
                let t = self.v.time(s, "access.slot_time")?;
                if t == Picos::ZERO {
                    return Err(self.v.err(s.span(), "access.slot_time", "slot_time must be greater than zero"));
                }
                Ok(t)
            }
            None => Ok(default),
        }
    }

    /// `access.ack_timeout`, which must leave time for the answer to arrive;
    /// `None` when absent.
    pub fn ack_timeout(&self) -> R<Option<Picos>> {
        let Some(raw) = &self.a.ack_timeout else {
            return Ok(None);
        };
        let t = self.v.time(raw, "access.ack_timeout")?;
        let lag = self.max_lag();
        if t < lag {
            return Err(self.v.err(
                raw.span(),
                "access.ack_timeout",
                format!("ack_timeout ({t}) is shorter than the longest wire plus receiver delay ({lag}): no answer can arrive that soon"),
            ));
        }
        Ok(Some(t))
    }

    /// Time on the wire of the longest data frame any source can send.
    pub fn longest_data_frame(&self) -> Picos {
        (0..self.nodes.len()).map(|n| self.longest_data_frame_of(n)).max().unwrap_or(Picos::ZERO)
    }

    /// Time on the wire of the longest data frame node `n` can send (zero without traffic).
    pub fn longest_data_frame_of(&self, n: NodeId) -> Picos {
        if self.nodes[n].traffic.is_empty() {
            return Picos::ZERO;
        }
        self.frame.data_time(self.nodes[n].longest_payload_bits())
    }

    /// One transmission of back-to-back data frames must fit the longest
    /// supported time: `per_tx` data frames at most (0: no limit), and never
    /// more than the node's queue holds; `hold` caps its length when given.
    pub fn check_burst(&self, per_tx: u32, hold: Option<Picos>, key: &str) -> R<()> {
        let gap = u128::from(self.frame.interframe_gap.0);
        for (n, node) in self.nodes.iter().enumerate() {
            if node.traffic.is_empty() {
                continue;
            }
            let queue = node.queue_limit.unwrap_or(crate::spec::DEFAULT_QUEUE_LIMIT) as u128;
            let frames = if per_tx == 0 { queue } else { u128::from(per_tx).min(queue) };
            let frame = u128::from(self.longest_data_frame_of(n).0);
            let mut time = u128::from(node.transceiver.enable_range.max.0) + frames * (frame + gap);
            if let Some(h) = hold {
                time = time.min(u128::from(h.0) + frame + gap);
            }
            if time > u128::from(crate::scenario::check::MAX_TIME.0) {
                let span = self.a.scheme.span();
                return Err(self
                    .v
                    .err(
                        span,
                        &format!("access.{key}"),
                        format!(
                            "\"{}\" could send {frames} data frames in one transmission, longer than 10^6 s",
                            node.name
                        ),
                    )
                    .with_hint(format!("limit access.{key} or the node's queue_limit")));
            }
        }
        Ok(())
    }

    /// The size of a control frame (poll, reply, token) in data bits:
    /// default `frame.overhead_bits`, and at least one bit, so that every
    /// hand-over takes time.
    pub fn control_bits(&self, field: &Option<toml::Spanned<u64>>, key: &str) -> R<u64> {
        let bits = field.as_ref().map(|x| *x.get_ref()).unwrap_or(self.frame.overhead_bits);
        if bits == 0 {
            let span = field.as_ref().map(|f| f.span()).unwrap_or(self.span.clone());
            return Err(self
                .v
                .err(
                    span,
                    &format!("access.{key}"),
                    format!("{key} must be at least 1 (a frame without bits takes no time)"),
                )
                .with_hint(format!("set {key}, or frame.overhead_bits, which is its default")));
        }
        self.bit_count(bits, field.as_ref().map(|f| f.span()), key, "a control frame")
    }

    /// A count of line-level bits (a frame, a jam): at most 2^40, and short
    /// enough at this bit rate to fit the longest supported time.
    pub fn bit_count(&self, bits: u64, span: Option<Range<usize>>, key: &str, what: &str) -> R<u64> {
        let span = span.unwrap_or(self.span.clone());
        let k = format!("access.{key}");
        if bits > crate::scenario::validate::MAX_FRAME_BITS {
            return Err(self.v.err(span, &k, format!("{what} of more than 2^40 bits is not supported")));
        }
        if !crate::scenario::validate::fits_time(self.frame, bits) {
            return Err(self.v.err(
                span,
                &k,
                format!("{what} of {bits} bits would last longer than 10^6 s at this bit rate"),
            ));
        }
        Ok(bits)
    }
}
