//! Raw scenario structs, exactly as written in the file.
//!
//! Every quantity stays a string with its span until validation, so an error
//! can point at the value. Unknown keys are rejected here by serde.

use std::fmt;

use serde::de::{self, Deserializer, MapAccess, SeqAccess, Visitor};
use serde::Deserialize;
use toml::Spanned;

pub type S = Spanned<String>;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawScenario {
    pub name: Option<S>,
    pub seed: Option<Spanned<u64>>,
    pub duration: S,
    pub warmup: Option<S>,
    pub timing: Option<S>,
    pub line: Spanned<RawLine>,
    pub transceiver: Option<RawTransceiver>,
    pub frame: Spanned<RawFrame>,
    pub access: Spanned<RawAccess>,
    pub node: Option<Vec<Spanned<RawNode>>>,
    pub nodes: Option<Spanned<RawNodeRow>>,
    pub expect: Option<Vec<Spanned<RawExpect>>>,
}

/// `[[expect]]`: a requirement on a report metric.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawExpect {
    pub metric: S,
    pub op: S,
    pub value: Spanned<toml::Value>,
    pub message: Option<S>,
    pub confidence: Option<Spanned<bool>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLine {
    pub length: S,
    pub impedance: S,
    pub delay: Option<S>,
    pub velocity_factor: Option<Spanned<f64>>,
    pub termination: Option<Spanned<RawTermination>>,
    pub bias: Option<Spanned<RawBias>>,
    pub conductor_resistance: Option<S>,
    pub attenuation: Option<Spanned<RawAttenuation>>,
    /// RMS differential noise at every receiver (a voltage).
    pub noise: Option<S>,
    /// Probability that one line bit is received wrong, at every receiver.
    pub bit_error_rate: Option<Spanned<f64>>,
}

/// `attenuation = { db = 2.2, per = "100 m", at = "1 MHz" }`: cable loss at a frequency.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawAttenuation {
    pub db: Option<Spanned<f64>>,
    pub per: Option<S>,
    pub at: Option<S>,
}

/// `[line.bias]`: pull-up and pull-down resistors to a supply.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawBias {
    pub supply: S,
    pub pull_up: S,
    pub pull_down: S,
    pub position: Option<S>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTransceiver {
    pub family: Option<S>,
    pub driver: Option<S>,
    pub drive_current: Option<Spanned<RawTime>>,
    pub output_voltage: Option<S>,
    pub output_resistance: Option<S>,
    pub min_output: Option<Spanned<Vec<S>>>,
    pub input_resistance: Option<S>,
    pub unit_loads: Option<Spanned<f64>>,
    pub transition_time: Option<S>,
    pub stub_length: Option<S>,
    pub ground_offset: Option<S>,
    pub common_mode: Option<Spanned<Vec<S>>>,
    pub offset: Option<Spanned<RawTime>>,
    pub edge_fraction: Option<Spanned<f64>>,
    pub enable_lead: Option<S>,
    pub release_after_stop: Option<S>,
    pub react_at: Option<S>,
    pub enable_time: Option<Spanned<RawTime>>,
    pub disable_time: Option<Spanned<RawTime>>,
    pub receiver_delay: Option<Spanned<RawTime>>,
    pub load: Option<S>,
    pub receiver: Option<S>,
    pub thresholds: Option<Spanned<Vec<S>>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFrame {
    pub bit_rate: S,
    pub overhead_bits: Option<Spanned<u64>>,
    pub encoding: Option<S>,
    pub interframe_gap: Option<S>,
    pub char_gap: Option<Spanned<RawLatency>>,
    pub char_timeout: Option<S>,
    pub silence: Option<S>,
}

/// `[access]`: the keys of every scheme; validation rejects the ones that do
/// not apply to the chosen scheme.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawAccess {
    pub scheme: S,
    pub master: Option<S>,
    pub order: Option<Spanned<Vec<S>>>,
    pub max_per_poll: Option<Spanned<u32>>,
    pub request_bits: Option<Spanned<u64>>,
    pub empty_reply_bits: Option<Spanned<u64>>,
    pub turnaround: Option<S>,
    pub response_latency: Option<Spanned<RawLatency>>,
    pub reply_timeout: Option<S>,
    pub token_bits: Option<Spanned<u64>>,
    pub max_per_token: Option<Spanned<u32>>,
    pub token_hold: Option<S>,
    pub token_timeout: Option<S>,
    pub recovery_node: Option<S>,
    pub faults: Option<Spanned<Vec<Spanned<RawFault>>>>,
    pub retries: Option<Spanned<u32>>,
    pub backup_master: Option<S>,
    pub successor_timeout: Option<S>,
    pub holdover: Option<Spanned<u32>>,
    pub solicit_every: Option<Spanned<u32>>,
    pub takeover_after: Option<S>,
    pub dead_after: Option<Spanned<u32>>,
    pub probe_every: Option<Spanned<u32>>,
    pub slotted: Option<Spanned<bool>>,
    pub slot_time: Option<S>,
    pub ack_timeout: Option<S>,
    pub backoff: Option<Spanned<RawLatency>>,
    pub max_attempts: Option<Spanned<u32>>,
    pub persistence: Option<Spanned<RawPersistence>>,
    pub collision_detect: Option<Spanned<bool>>,
    pub detect_delay: Option<S>,
    pub jam_bits: Option<Spanned<u64>>,
    pub timekeeper: Option<S>,
    pub beacon_bits: Option<Spanned<u64>>,
    pub slot_length: Option<S>,
    pub slots: Option<Spanned<Vec<Spanned<RawSlot>>>>,
    pub guard: Option<S>,
    pub drift_ppm: Option<Spanned<f64>>,
    pub clock_ppm: Option<Spanned<std::collections::BTreeMap<String, f64>>>,
    pub compensate: Option<Spanned<bool>>,
    pub id_bits: Option<Spanned<u32>>,
    pub idle_bits: Option<Spanned<u32>>,
    pub sample_point: Option<Spanned<f64>>,
}

/// One TDMA slot: `{ node = "s01", length = "10 us" }`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSlot {
    pub node: S,
    pub length: Option<S>,
}

impl RawAccess {
    /// The keys present in the file, with their spans (for the
    /// "does not apply to this scheme" check).
    pub fn present(&self) -> Vec<(&'static str, std::ops::Range<usize>)> {
        fn sp<T>(v: &Option<Spanned<T>>) -> Option<std::ops::Range<usize>> {
            v.as_ref().map(|x| x.span())
        }
        let all = [
            ("order", sp(&self.order)),
            ("turnaround", sp(&self.turnaround)),
            ("response_latency", sp(&self.response_latency)),
            ("master", sp(&self.master)),
            ("max_per_poll", sp(&self.max_per_poll)),
            ("request_bits", sp(&self.request_bits)),
            ("empty_reply_bits", sp(&self.empty_reply_bits)),
            ("reply_timeout", sp(&self.reply_timeout)),
            ("token_bits", sp(&self.token_bits)),
            ("max_per_token", sp(&self.max_per_token)),
            ("token_hold", sp(&self.token_hold)),
            ("token_timeout", sp(&self.token_timeout)),
            ("recovery_node", sp(&self.recovery_node)),
            ("faults", sp(&self.faults)),
            ("retries", sp(&self.retries)),
            ("backup_master", sp(&self.backup_master)),
            ("successor_timeout", sp(&self.successor_timeout)),
            ("holdover", sp(&self.holdover)),
            ("solicit_every", sp(&self.solicit_every)),
            ("takeover_after", sp(&self.takeover_after)),
            ("dead_after", sp(&self.dead_after)),
            ("probe_every", sp(&self.probe_every)),
            ("slotted", sp(&self.slotted)),
            ("slot_time", sp(&self.slot_time)),
            ("ack_timeout", sp(&self.ack_timeout)),
            ("backoff", sp(&self.backoff)),
            ("max_attempts", sp(&self.max_attempts)),
            ("persistence", sp(&self.persistence)),
            ("collision_detect", sp(&self.collision_detect)),
            ("detect_delay", sp(&self.detect_delay)),
            ("jam_bits", sp(&self.jam_bits)),
            ("timekeeper", sp(&self.timekeeper)),
            ("beacon_bits", sp(&self.beacon_bits)),
            ("slot_length", sp(&self.slot_length)),
            ("slots", sp(&self.slots)),
            ("guard", sp(&self.guard)),
            ("drift_ppm", sp(&self.drift_ppm)),
            ("clock_ppm", sp(&self.clock_ppm)),
            ("compensate", sp(&self.compensate)),
            ("id_bits", sp(&self.id_bits)),
            ("idle_bits", sp(&self.idle_bits)),
            ("sample_point", sp(&self.sample_point)),
        ];
        all.into_iter().filter_map(|(k, s)| s.map(|s| (k, s))).collect()
    }
}

/// An injected fault: `{ at = "3 ms", kind = "lose-token" }`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFault {
    pub at: S,
    pub kind: S,
    /// The node a `node-down` or `node-up` fault concerns.
    pub node: Option<S>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawNode {
    pub name: S,
    pub position: S,
    pub traffic: Option<Spanned<OneOrMany<RawTraffic>>>,
    pub turnaround: Option<S>,
    pub transceiver: Option<RawTransceiver>,
    /// RMS differential noise at this node's receiver (overrides `line.noise`).
    pub noise: Option<S>,
    /// Driven by an external process under `halfwire cosim`.
    pub external: Option<Spanned<bool>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawNodeRow {
    pub count: Spanned<u64>,
    pub first: S,
    pub spacing: S,
    pub prefix: S,
    pub traffic: Option<Spanned<OneOrMany<RawTraffic>>>,
    pub turnaround: Option<S>,
    pub transceiver: Option<RawTransceiver>,
    /// RMS differential noise at these nodes' receivers (overrides `line.noise`).
    pub noise: Option<S>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTraffic {
    pub pattern: S,
    pub rate: Option<S>,
    pub period: Option<S>,
    pub phase: Option<S>,
    pub jitter: Option<S>,
    pub payload: Spanned<RawPayload>,
    pub to: Option<S>,
    pub queue_limit: Option<Spanned<u64>>,
    pub id: Option<Spanned<u64>>,
    /// A Poisson source's shortest gap between arrivals (a sporadic source).
    pub min_interval: Option<S>,
}

/// `"64 B"` or `["16 B", "64 B"]`.
#[derive(Debug)]
pub enum RawPayload {
    Fixed(String),
    Range(Vec<S>),
}

/// `"20 ns"`, `{ min = "10 ns", max = "30 ns" }` or `{ mean = "20 ns", sd = "5 ns" }`.
#[derive(Debug)]
pub enum RawLatency {
    Fixed(String),
    Table(RawLatencyTable),
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLatencyTable {
    pub min: Option<S>,
    pub max: Option<S>,
    pub mean: Option<S>,
    pub sd: Option<S>,
}

/// One table or an array of them. A single table gets an empty span here;
/// validation substitutes the span of the whole value.
#[derive(Debug)]
pub struct OneOrMany<T>(pub Vec<Spanned<T>>);

impl<'de, T: Deserialize<'de>> Deserialize<'de> for OneOrMany<T> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V<T>(std::marker::PhantomData<T>);
        impl<'de, T: Deserialize<'de>> Visitor<'de> for V<T> {
            type Value = OneOrMany<T>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a table or an array of tables")
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Self::Value, A::Error> {
                let one = T::deserialize(de::value::MapAccessDeserializer::new(map))?;
                Ok(OneOrMany(vec![Spanned::new(0..0, one)]))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
                let mut out = Vec::new();
                while let Some(x) = seq.next_element()? {
                    out.push(x);
                }
                Ok(OneOrMany(out))
            }
        }
        d.deserialize_any(V(std::marker::PhantomData))
    }
}

impl<'de> Deserialize<'de> for RawPayload {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawPayload;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a size such as \"64 B\" or a range such as [\"16 B\", \"64 B\"]")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(RawPayload::Fixed(v.to_owned()))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
                let mut out = Vec::new();
                while let Some(x) = seq.next_element()? {
                    out.push(x);
                }
                Ok(RawPayload::Range(out))
            }
        }
        d.deserialize_any(V)
    }
}

impl<'de> Deserialize<'de> for RawLatency {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawLatency;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a time such as \"20 ns\", or a table with min and max, or mean and sd")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(RawLatency::Fixed(v.to_owned()))
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Self::Value, A::Error> {
                let t = RawLatencyTable::deserialize(de::value::MapAccessDeserializer::new(map))?;
                Ok(RawLatency::Table(t))
            }
        }
        d.deserialize_any(V)
    }
}

/// `persistence = "non"`, `1` or a probability such as `0.1`.
#[derive(Debug)]
pub enum RawPersistence {
    Word(String),
    Number(f64),
}

impl<'de> Deserialize<'de> for RawPersistence {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawPersistence;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("\"non\", 1, or a probability between 0 and 1")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(RawPersistence::Word(v.to_owned()))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Self::Value, E> {
                Ok(RawPersistence::Number(v as f64))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Self::Value, E> {
                Ok(RawPersistence::Number(v))
            }
        }
        d.deserialize_any(V)
    }
}

/// `termination = "both-ends"` (a word or a resistance) or `{ near = …, far = … }`.
#[derive(Debug)]
pub enum RawTermination {
    Word(String),
    Ends(RawEnds),
}

/// Each end: a resistance or `"matched"`; a missing end is open.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawEnds {
    pub near: Option<S>,
    pub far: Option<S>,
}

impl<'de> Deserialize<'de> for RawTermination {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawTermination;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("\"both-ends\", \"far-end\", \"none\", a resistance, or { near = ..., far = ... }")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(RawTermination::Word(v.to_owned()))
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Self::Value, A::Error> {
                Ok(RawTermination::Ends(RawEnds::deserialize(de::value::MapAccessDeserializer::new(map))?))
            }
        }
        d.deserialize_any(V)
    }
}

/// A transceiver time (or current): `"7 ns"` or a range `["5 ns", "9 ns"]`.
#[derive(Clone, Debug)]
pub enum RawTime {
    One(String),
    Range(Vec<S>),
}

impl<'de> Deserialize<'de> for RawTime {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawTime;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a time such as \"7 ns\" or a range such as [\"5 ns\", \"9 ns\"]")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(RawTime::One(v.to_owned()))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
                let mut out = Vec::new();
                while let Some(x) = seq.next_element()? {
                    out.push(x);
                }
                Ok(RawTime::Range(out))
            }
        }
        d.deserialize_any(V)
    }
}
