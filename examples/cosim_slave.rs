//! A polling slave for `halfwire cosim`, written as a template for your own
//! firmware-in-the-loop client. It speaks `halfwire-cosim/1` (JSON lines over
//! TCP; see docs/cosim-protocol.md) with nothing but the standard library and
//! serde_json.
//!
//! It follows the same rules as halfwire's built-in polling slave: it answers
//! every intact poll addressed to it, unless its previous reply still holds
//! its enable, after its turnaround plus its response latency, with up to
//! `max_per_poll` queued messages or else an empty reply.
//!
//!     cargo run --release --example cosim_slave -- 127.0.0.1:7400 slave02
//!         [--turnaround-ps N] [--latency-ps N] [--release-after-stop-ps ±N]
//!
//! `--release-after-stop-ps` releases the driver enable that long after the
//! last stop bit ends (negative: before it, as firmware that drops the enable
//! at "transmit register empty" does).
//!
//! Replace `decide` with your firmware's logic (or call into it).

use std::io::{BufRead, BufReader, Write};
use std::net::TcpStream;

use serde_json::{json, Value};

struct Rules {
    turnaround_ps: u64,
    latency_ps: u64,
    max_per_poll: u64,
    empty_reply_bits: u64,
    release_after_stop_ps: Option<i64>,
}

/// What to do about one batch of events: the messages to send before `wait`.
fn decide(rules: &Rules, batch: &Value) -> Vec<Value> {
    let t = batch["t_ps"].as_u64().unwrap_or(0);
    let queued = batch["queued"].as_u64().unwrap_or(0);
    let busy_until = batch["busy_until_ps"].as_u64().unwrap_or(0);
    let mut out = Vec::new();
    for ev in batch["events"].as_array().into_iter().flatten() {
        let is_poll = ev["event"] == "frame" && ev["kind"] == "poll";
        if !is_poll || ev["corrupted"] == true || t < busy_until {
            continue;
        }
        let at = t + rules.turnaround_ps + rules.latency_ps;
        let take = if rules.max_per_poll == 0 { queued } else { queued.min(rules.max_per_poll) };
        let frames: Vec<Value> = if take == 0 {
            vec![json!({ "kind": "empty-reply", "bits": rules.empty_reply_bits })]
        } else {
            (0..take).map(|_| json!({ "kind": "data" })).collect()
        };
        let mut tx = json!({ "type": "transmit", "at_ps": at, "frames": frames });
        if let Some(r) = rules.release_after_stop_ps {
            tx["release_after_stop_ps"] = json!(r);
        }
        out.push(tx);
    }
    out
}

/// Send one message as one line, in one write (so it leaves in one segment).
fn send(w: &mut impl Write, v: &Value) -> std::io::Result<()> {
    let mut line = v.to_string();
    line.push('\n');
    w.write_all(line.as_bytes())?;
    w.flush()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let (Some(addr), Some(node)) = (args.first(), args.get(1)) else {
        eprintln!(
            "usage: cosim_slave ADDR:PORT NODE [--turnaround-ps N] [--latency-ps N] [--release-after-stop-ps ±N]"
        );
        std::process::exit(2);
    };
    let flag = |name: &str| args.iter().position(|a| a == name).and_then(|i| args.get(i + 1)).map(|v| v.parse::<u64>());
    let stream = TcpStream::connect(addr)?;
    stream.set_nodelay(true)?;
    let mut writer = stream.try_clone()?;
    let mut lines = BufReader::new(stream).lines();
    send(&mut writer, &json!({ "type": "hello", "protocol": "halfwire-cosim/1", "node": node }))?;
    let welcome: Value = serde_json::from_str(&lines.next().ok_or("no welcome")??)?;
    if welcome["type"] != "welcome" {
        return Err(format!("refused: {}", welcome["message"]).into());
    }
    let rules = Rules {
        turnaround_ps: flag("--turnaround-ps").transpose()?.unwrap_or(welcome["turnaround_ps"].as_u64().unwrap_or(0)),
        latency_ps: flag("--latency-ps").transpose()?.unwrap_or(welcome["response_latency_ps"].as_u64().unwrap_or(0)),
        max_per_poll: welcome["max_per_poll"].as_u64().unwrap_or(1),
        empty_reply_bits: welcome["empty_reply_bits"].as_u64().unwrap_or(16),
        release_after_stop_ps: args
            .iter()
            .position(|a| a == "--release-after-stop-ps")
            .and_then(|i| args.get(i + 1))
            .map(|v| v.parse::<i64>())
            .transpose()?,
    };
    for line in lines {
        let msg: Value = serde_json::from_str(&line?)?;
        match msg["type"].as_str() {
            Some("events") => {
                for m in decide(&rules, &msg) {
                    send(&mut writer, &m)?;
                }
                send(&mut writer, &json!({ "type": "wait" }))?;
            }
            Some("bye") => return Ok(()),
            Some("error") => return Err(format!("halfwire: {}", msg["message"]).into()),
            _ => return Err(format!("unexpected message: {msg}").into()),
        }
    }
    Ok(())
}
