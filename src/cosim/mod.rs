//! The co-simulation wire protocol, `halfwire-cosim/1`: JSON lines over TCP.
//! Message types and their translation to and from the engine's notices and
//! intents. No I/O: the CLI's gateway moves the lines.
//!
//! Every message is one JSON object on one line with a `"type"`. Times are
//! integer picoseconds of virtual time (`*_ps`). The full description is in
//! `docs/cosim-protocol.md`, and `schemas/halfwire-cosim-1.schema.json`
//! validates every message.

use serde::Deserialize;
use serde_json::{json, Value};

use crate::engine::external::{Batch, FrameIntent, Intent, Notice};
use crate::engine::FrameKind;
use crate::spec::{AccessSpec, NodeId, Spec};
use crate::units::Picos;

/// The protocol version both sides name in the handshake.
pub const PROTOCOL: &str = "halfwire-cosim/1";

/// The longest `release_after_stop_ps` either way (1 s, the transceiver-time bound).
pub const MAX_RELEASE_AFTER_PS: u64 = crate::scenario::transceiver::MAX_TRANSCEIVER_TIME.0;

/// The largest control frame a node may send, in data bits.
pub const MAX_CONTROL_BITS: u64 = 1 << 20;

/// A message from a node.
#[derive(Clone, Debug, PartialEq, Deserialize)]
#[serde(tag = "type", rename_all = "snake_case", deny_unknown_fields)]
pub enum ClientMessage {
    Hello {
        protocol: String,
        node: String,
    },
    Transmit {
        at_ps: u64,
        frames: Vec<FrameRequest>,
        /// Release the enable this long after the last bit's end (signed ps;
        /// default: the node's `release_after_stop`). Negative cuts the last bit.
        release_after_stop_ps: Option<i64>,
    },
    Timer {
        at_ps: u64,
        tag: u64,
    },
    WatchLine {
        on: bool,
    },
    Wait {},
}

/// One frame of a `transmit`.
#[derive(Clone, Debug, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FrameRequest {
    /// `data` (carries the next queued message) or a control kind: `empty-reply`, `poll`, `token`, `beacon`.
    pub kind: String,
    /// Data bits of a control frame.
    pub bits: Option<u64>,
    /// Destination node of a control frame (default: the scheme's default, the master under polling).
    pub to: Option<String>,
    /// Contents shown to external receivers (hex); otherwise they see a stand-in pattern.
    pub payload_hex: Option<String>,
}

/// Read one line from a node.
pub fn parse_line(line: &str) -> Result<ClientMessage, String> {
    let value: Value = serde_json::from_str(line.trim()).map_err(|e| format!("malformed line (not JSON): {e}"))?;
    let kind = value.get("type").and_then(Value::as_str).ok_or("malformed message: no \"type\" string")?.to_owned();
    const KNOWN: [&str; 5] = ["hello", "transmit", "timer", "watch_line", "wait"];
    if !KNOWN.contains(&kind.as_str()) {
        return Err(format!("unknown message type \"{kind}\" (known: {})", KNOWN.join(", ")));
    }
    serde_json::from_value(value).map_err(|e| format!("malformed \"{kind}\" message: {e}"))
}

fn frame_kind(name: &str) -> Result<FrameKind, String> {
    Ok(match name {
        "data" => FrameKind::Data,
        "empty-reply" => FrameKind::EmptyReply,
        "poll" => FrameKind::Poll,
        "token" => FrameKind::Token,
        "beacon" => FrameKind::Beacon,
        other => return Err(format!("unknown frame kind \"{other}\" (data, empty-reply, poll, token, beacon)")),
    })
}

fn check_hex(h: &Option<String>) -> Result<(), String> {
    match h {
        Some(h) if h.len() % 2 != 0 || !h.chars().all(|c| c.is_ascii_hexdigit()) => {
            Err(format!("payload_hex {h:?} is not an even number of hexadecimal digits"))
        }
        _ => Ok(()),
    }
}

/// Turn a node's message into an engine intent (`None` for `wait` and `hello`).
pub fn to_intent(spec: &Spec, node: NodeId, msg: ClientMessage) -> Result<Option<Intent>, String> {
    Ok(Some(match msg {
        ClientMessage::Hello { .. } => return Err("hello sent twice".into()),
        ClientMessage::Wait {} => return Ok(None),
        ClientMessage::Timer { at_ps, tag } => Intent::Timer { at: Picos(at_ps), tag },
        ClientMessage::WatchLine { on } => Intent::WatchLine(on),
        ClientMessage::Transmit { at_ps, frames, release_after_stop_ps } => {
            if let Some(r) = release_after_stop_ps {
                if r.unsigned_abs() > MAX_RELEASE_AFTER_PS {
                    return Err(format!(
                        "release_after_stop_ps {r} is beyond ±{MAX_RELEASE_AFTER_PS} ps (1 s), the longest transceiver time supported"
                    ));
                }
            }
            let mut out = Vec::with_capacity(frames.len());
            for f in frames {
                check_hex(&f.payload_hex)?;
                let kind = frame_kind(&f.kind)?;
                if kind == FrameKind::Data {
                    if f.bits.is_some() || f.to.is_some() {
                        return Err("a data frame takes its size and destination from the queued message: drop \"bits\" and \"to\"".into());
                    }
                    out.push(FrameIntent::Data { payload_hex: f.payload_hex });
                    continue;
                }
                let bits = f
                    .bits
                    .filter(|b| (1..=MAX_CONTROL_BITS).contains(b))
                    .ok_or_else(|| format!("a {} frame needs \"bits\" from 1 to {MAX_CONTROL_BITS}", f.kind))?;
                let to = match &f.to {
                    Some(name) => spec
                        .nodes
                        .iter()
                        .position(|n| n.name == *name)
                        .ok_or_else(|| format!("\"to\": no node named \"{name}\""))?,
                    None => default_destination(spec, node),
                };
                if to == node {
                    return Err("a frame cannot be addressed to its own sender".into());
                }
                out.push(FrameIntent::Control { kind, bits, to, payload_hex: f.payload_hex });
            }
            Intent::Transmit { at: Picos(at_ps), frames: out, release_after: release_after_stop_ps }
        }
    }))
}

fn default_destination(spec: &Spec, node: NodeId) -> NodeId {
    match &spec.access {
        AccessSpec::Polling(p) => p.master,
        _ => crate::scheme::first_other_node(node),
    }
}

/// The stand-in contents of a frame whose sender gave none: `bytes` bytes
/// of a pattern fixed by the frame's identity.
pub fn stand_in_hex(occupancy: u64, start_ps: u64, bytes: u64) -> String {
    let base = occupancy.rotate_left(17) ^ start_ps;
    (1..=bytes)
        .map(|k| {
            format!("{:02x}", crate::engine::rng::mix64(base.wrapping_add(k.wrapping_mul(0x9e37_79b9_7f4a_7c15))) as u8)
        })
        .collect()
}

/// The `events` message of one batch.
pub fn events_message(spec: &Spec, b: &Batch) -> Value {
    let events: Vec<Value> = b
        .notices
        .iter()
        .map(|n| match n {
            Notice::Start => json!({ "event": "start" }),
            Notice::Timer { tag } => json!({ "event": "timer", "tag": tag }),
            Notice::Message { payload_bits, to } => {
                json!({ "event": "message", "payload_bits": payload_bits, "to": spec.nodes[*to].name })
            }
            Notice::Line { busy } => json!({ "event": "line", "busy": busy }),
            Notice::Frame { from, kind, data_bits, payload_bits, corrupted, start, end, occupancy } => {
                let hex = b.payloads.get(&(*occupancy, start.0)).cloned().unwrap_or_else(|| {
                    stand_in_hex(*occupancy, start.0, payload_bits.unwrap_or(*data_bits).div_ceil(8))
                });
                json!({
                    "event": "frame",
                    "source": spec.nodes[*from].name,
                    "kind": kind.name(),
                    "bits": data_bits,
                    "payload_bits": payload_bits,
                    "payload_hex": hex,
                    "corrupted": corrupted,
                    "start_ps": start.0,
                    "end_ps": end.0,
                })
            }
        })
        .collect();
    json!({
        "type": "events",
        "t_ps": b.t.0,
        "queued": b.queued,
        "busy_until_ps": b.busy_until.0,
        "events": events,
    })
}

/// The `welcome` message: what a node needs to know about itself and the bus.
pub fn welcome_message(spec: &Spec, node: NodeId) -> Value {
    let n = &spec.nodes[node];
    let mut m = json!({
        "type": "welcome",
        "protocol": PROTOCOL,
        "node": n.name,
        "index": node,
        "nodes": spec.nodes.iter().map(|n| n.name.as_str()).collect::<Vec<_>>(),
        "position_m": n.position_m,
        "bit_rate_bit_s": spec.frame.bit_rate,
        "encoding": spec.frame.encoding.name(),
        "overhead_bits": spec.frame.overhead_bits,
        "interframe_gap_ps": spec.frame.interframe_gap.0,
        "enable_time_ps": n.transceiver.enable_time.0,
        "disable_time_ps": n.transceiver.disable_time.0,
        "receiver_delay_ps": n.transceiver.receiver_delay.0,
        "duration_ps": spec.duration.0,
        "warmup_ps": spec.warmup.0,
        "scheme": spec.access.name(),
    });
    if let AccessSpec::Polling(p) = &spec.access {
        let extra = json!({
            "master": spec.nodes[p.master].name,
            "turnaround_ps": p.turnaround[node].0,
            "max_per_poll": p.max_per_poll,
            "request_bits": p.request_bits,
            "empty_reply_bits": p.empty_reply_bits,
            "reply_timeout_ps": p.reply_timeout.0,
        });
        if let (Some(m), Some(e)) = (m.as_object_mut(), extra.as_object()) {
            m.extend(e.clone());
            // A fixed firmware latency is passed on, so a client can follow the scenario's own rule.
            if let crate::spec::Latency::Fixed(t) = p.response_latency {
                m.insert("response_latency_ps".into(), json!(t.0));
            }
        }
    }
    m
}

/// An `error` message.
pub fn error_message(message: &str, at: Option<Picos>) -> Value {
    match at {
        Some(t) => json!({ "type": "error", "message": message, "t_ps": t.0 }),
        None => json!({ "type": "error", "message": message }),
    }
}

/// The `bye` message that ends a session.
pub fn bye_message(at: Picos, reason: &str) -> Value {
    json!({ "type": "bye", "t_ps": at.0, "reason": reason })
}

/// Line of a message (compact JSON and a newline).
pub fn line(v: &Value) -> String {
    let mut s = serde_json::to_string(v).expect("a JSON value serializes");
    s.push('\n');
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_every_client_message_and_names_what_is_wrong() {
        assert_eq!(
            parse_line(r#"{"type":"hello","protocol":"halfwire-cosim/1","node":"s1"}"#).unwrap(),
            ClientMessage::Hello { protocol: PROTOCOL.into(), node: "s1".into() }
        );
        assert_eq!(parse_line(r#"{"type":"wait"}"#).unwrap(), ClientMessage::Wait {});
        assert_eq!(
            parse_line(r#"{"type":"timer","at_ps":5,"tag":1}"#).unwrap(),
            ClientMessage::Timer { at_ps: 5, tag: 1 }
        );
        assert!(parse_line("{not json").unwrap_err().starts_with("malformed line"));
        assert!(parse_line(r#"{"type":"dance"}"#).unwrap_err().contains("unknown message type \"dance\""));
        assert!(parse_line(r#"{"type":"timer","at_ps":-1,"tag":1}"#).unwrap_err().contains("malformed \"timer\""));
        assert!(parse_line(r#"{"type":"wait","x":1}"#).unwrap_err().contains("unknown field"));
    }

    #[test]
    fn stand_in_contents_are_fixed_by_the_frame() {
        assert_eq!(stand_in_hex(3, 1000, 4).len(), 8);
        assert_eq!(stand_in_hex(3, 1000, 4), stand_in_hex(3, 1000, 4));
        assert_ne!(stand_in_hex(3, 1000, 4), stand_in_hex(4, 1000, 4));
    }
}
