//! UART framing and firmware enable timing, through the built binary: frame
//! lengths against the character arithmetic, the enable cutting a bit, the
//! stop-bit reaction point, the silence rule, gaps between characters,
//! auto-direction parts and hand-over slack against the budget.
//!
//! Sources: a UART character is a start bit, 5–9 data bits, an optional
//! parity bit and 1, 1.5 or 2 stop bits, and a receiver samples each bit in
//! its middle (common practice; any UART datasheet). The silence rule is the
//! open serial-line standard's RTU framing (Modbus over Serial Line
//! Specification and Implementation Guide V1.02, §2.5.1.1, from memory):
//! frames are separated by at least 3.5 character times of silence, and a gap
//! of more than 1.5 character times inside a frame makes the receiver discard it.

use crate::common;

use common::{halfwire, run_toml};
use serde_json::Value;

fn ps(x: &Value) -> i128 {
    (x.as_f64().unwrap_or_else(|| panic!("{x} is not a number")) * 1e12).round() as i128
}

/// `n` half bits at `rate` bit/s, rounded to the picosecond (exact rational arithmetic).
fn halves_ps(n: u128, rate: u128) -> i128 {
    let num = n * 1_000_000_000_000;
    let den = 2 * rate;
    ((num + den / 2) / den) as i128
}

/// A master `m` polling one slave `s` 100 m away over a biased TIA-485 line,
/// at 19 200 bit/s; `frame`, `transceiver` and `access` add or replace keys.
fn bus(frame: &str, transceiver: &str, access: &str, slave: &str) -> String {
    format!(
        r#"
duration = "400 ms"
warmup = "0 s"
timing = "worst"
[line]
length = "100 m"
impedance = "120 ohm"
velocity_factor = 0.66
termination = "120 ohm"
[line.bias]
supply = "5 V"
pull_up = "560 ohm"
pull_down = "560 ohm"
[transceiver]
family = "tia485"
enable_time = "1 us"
disable_time = "2 us"
receiver_delay = "200 ns"
load = "50 pF"
{transceiver}
[frame]
bit_rate = "19200 bit/s"
overhead_bits = 16
{frame}
[access]
scheme = "polling"
master = "m"
request_bits = 64
empty_reply_bits = 24
reply_timeout = "30 ms"
{access}
[[node]]
name = "m"
position = "0 m"
[[node]]
name = "s"
position = "100 m"
traffic = {{ pattern = "periodic", period = "20 ms", payload = "8 B" }}
{slave}
"#
    )
}

fn with_events(toml: &str) -> (Value, Vec<Value>) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("u.toml");
    let events = dir.path().join("ev.jsonl");
    std::fs::write(&path, toml).unwrap();
    let out = halfwire(&[
        "run",
        path.to_str().unwrap(),
        "--format",
        "json",
        "--events",
        events.to_str().unwrap(),
        "--window",
        "0ms..100ms",
    ]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let lines = std::fs::read_to_string(events).unwrap().lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    (serde_json::from_slice(&out.stdout).unwrap(), lines)
}

/// (kind, start, end) of every frame in the event log, at its driver.
fn frames(events: &[Value]) -> Vec<(String, i128, i128)> {
    let mut open: Vec<(String, i128)> = Vec::new();
    let mut out = Vec::new();
    for e in events {
        match e["event"].as_str().unwrap() {
            "frame_start" => open.push((e["frame"].as_str().unwrap().to_owned(), e["t_ps"].as_i64().unwrap().into())),
            "frame_end" => {
                let kind = e["frame"].as_str().unwrap();
                let t: i128 = e["t_ps"].as_i64().unwrap().into();
                if let Some(i) = open.iter().position(|(k, s)| k == kind && *s < t) {
                    let (k, s) = open.remove(i);
                    out.push((k, s, t));
                }
            }
            _ => {}
        }
    }
    out
}

use common::budget_toml as budget_json;

fn handover<'a>(b: &'a Value, from: &str, to: &str) -> &'a Value {
    b["handovers"].as_array().unwrap().iter().find(|h| h["from"] == from && h["to"] == to).unwrap()
}

#[test]
fn frame_lengths_follow_the_character_arithmetic_to_the_picosecond() {
    // (encoding, data bits per character, line half bits per character)
    let mut kinds = std::collections::BTreeSet::new();
    let cases =
        [("uart-8n1", 8, 20), ("uart-8e1", 8, 22), ("uart-8n2", 8, 22), ("uart-9n1", 9, 22), ("uart-7o1.5", 7, 21)];
    for (enc, data, halves) in cases {
        for gap_us in [0u128, 100] {
            let frame = format!("encoding = \"{enc}\"\nchar_gap = \"{gap_us} us\"");
            let (_, ev) = with_events(&bus(&frame, "", "turnaround = \"4 char\"", ""));
            let fr = frames(&ev);
            let mut seen = std::collections::BTreeSet::new();
            for (kind, s, e) in &fr {
                // Polls carry 64 data bits, empty replies 24, data frames 16 + 64.
                let bits: u128 = match kind.as_str() {
                    "poll" => 64,
                    "empty-reply" => 24,
                    "data" => 80,
                    other => panic!("unexpected frame {other}"),
                };
                let chars = bits.div_ceil(data);
                let want = halves_ps(chars * halves, 19_200) + (chars as i128 - 1) * gap_us as i128 * 1_000_000;
                assert_eq!(e - s, want, "{enc}, gap {gap_us} µs, {kind} frame of {chars} characters");
                seen.insert(kind.clone());
            }
            assert!(seen.contains("poll") && seen.len() >= 2, "{enc}: polls and replies checked ({seen:?})");
            kinds.extend(seen);
        }
    }
    assert_eq!(kinds.len(), 3, "polls, empty and data replies all checked");
}

#[test]
fn character_and_bit_units_convert_with_the_frame() {
    // 3.5 characters of 8E1 (11 bits) at 19 200 bit/s: 3.5 × 11 / 19 200 s = 2.005208333… ms.
    let toml = bus("encoding = \"uart-8e1\"", "", "turnaround = \"3.5 char\"", "");
    let b = budget_json(&toml, &[]);
    let h = handover(&b, "m", "s");
    assert_eq!(ps(&h["configured_s"]), 2_005_208_333, "{h}");
    assert_eq!(halves_ps(77, 19_200), 2_005_208_333);
    // "10 bit" is ten bit times: 520.833… µs.
    let toml = bus("encoding = \"uart-8e1\"", "", "turnaround = \"10 bit\"", "");
    assert_eq!(ps(&handover(&budget_json(&toml, &[]), "m", "s")["configured_s"]), 520_833_333);
}

#[test]
fn releasing_the_enable_half_a_bit_early_cuts_every_frame() {
    let run = |release: &str| {
        let t = format!("release_after_stop = \"{release}\"");
        run_toml(&bus("encoding = \"uart-8e1\"", "", "turnaround = \"4 char\"", &format!("[node.transceiver]\n{t}")))
    };
    let early = run("-0.5 bit");
    let f = &early["frames"];
    assert!(f["attempts"].as_u64().unwrap() > 10, "{f}");
    assert_eq!(f["corrupted"], f["attempts"], "every data frame of the slave is cut: {f}");
    assert_eq!(f["delivered"], 0);
    assert!(early["uart"]["cut_frames"].as_u64().unwrap() >= f["attempts"].as_u64().unwrap(), "{}", early["uart"]);
    assert!(early["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "cut-frames"));
    // On time, and just under half a bit early: nothing is lost.
    for ok in ["0 s", "-0.49 bit", "30 us"] {
        let r = run(ok);
        assert_eq!(r["frames"]["corrupted"], 0, "{ok}: {}", r["frames"]);
        assert_eq!(r["uart"]["cut_frames"], 0, "{ok}");
        assert!(r["frames"]["delivered"].as_u64().unwrap() > 10);
    }
    // The budget flags the early release, and not the others.
    let flagged = |release: &str| {
        let t = format!("[node.transceiver]\nrelease_after_stop = \"{release}\"");
        let b = budget_json(&bus("encoding = \"uart-8e1\"", "", "turnaround = \"4 char\"", &t), &[]);
        b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "stop-bit-cut" && w["node"] == "s")
    };
    assert!(flagged("-0.5 bit"));
    assert!(!flagged("0 s"));
}

#[test]
fn a_hold_after_the_stop_bit_raises_the_next_drivers_minimum_by_the_hold() {
    let min = |hold: &str| {
        let t = format!("[node.transceiver]\nrelease_after_stop = \"{hold}\"");
        ps(&handover(&budget_json(&bus("encoding = \"uart-8n1\"", "", "turnaround = \"4 char\"", &t), &[]), "s", "m")
            ["min_turnaround_s"])
    };
    // disable 2 µs − receiver 200 ns = 1.8 µs; a 30 µs firmware hold adds to it.
    assert_eq!(min("0 s"), 1_800_000);
    assert_eq!(min("30 us"), 31_800_000);
}

#[test]
fn reacting_at_the_stop_sample_moves_the_minimum_by_half_a_bit_and_the_run_agrees() {
    // The slave's UART interrupt fires in the middle of the stop bit, half a
    // bit before the frame ends: its turnaround counts from half a bit
    // earlier, so it must wait half a bit longer than the frame-end minimum.
    let slave = "[node.transceiver]\nreact_at = \"stop-sample\"";
    let plain = budget_json(&bus("encoding = \"uart-8e1\"", "", "turnaround = \"4 char\"", ""), &[]);
    let toml = |t: &str| bus("encoding = \"uart-8e1\"", "", &format!("turnaround = \"{t}\""), slave);
    let sampled = budget_json(&toml("4 char"), &[]);
    let half = halves_ps(1, 19_200);
    let (a, b) =
        (ps(&handover(&plain, "m", "s")["min_turnaround_s"]), ps(&handover(&sampled, "m", "s")["min_turnaround_s"]));
    assert_eq!(b - a, half, "the minimum moves by exactly half a bit ({half} ps)");
    // The run: the slave's turnaround at the new minimum, and 1 ps below it
    // (the master's own turnaround stays long).
    let at_ps = b;
    let set = |t: i128| {
        let s = toml("4 char")
            .replace("[[node]]\nname = \"s\"", &format!("[[node]]\nname = \"s\"\nturnaround = \"{t} ps\""));
        run_toml(&s)
    };
    let at = set(at_ps);
    let below = set(at_ps - 1);
    assert_eq!(at["contention"]["events"], 0, "{}", at["contention"]);
    assert!(below["contention"]["events"].as_u64().unwrap() > 0);
    assert_eq!(ps(&below["contention"]["overlap_max_s"]), 1, "the overlap is the 1 ps shortfall");
    // The run's smallest slack on that hand-over is exactly zero at the minimum.
    let pair = at["handover"]["pairs"].as_array().unwrap().iter().find(|p| p["from"] == "m" && p["to"] == "s").unwrap();
    assert_eq!(ps(&pair["slack_min_s"]), 0, "{pair}");
}

#[test]
fn the_silence_rule_loses_replies_that_come_too_soon() {
    let frame =
        "encoding = \"uart-8e1\"\ninterframe_gap = \"3.5 char\"\nchar_timeout = \"1.5 char\"\nsilence = \"3.5 char\"";
    let early = run_toml(&bus(frame, "", "turnaround = \"1 char\"", ""));
    assert!(early["uart"]["silence_violations"].as_u64().unwrap() > 10, "{}", early["uart"]);
    assert_eq!(early["frames"]["delivered"], 0, "every reply merges with the poll before it");
    assert_eq!(early["contention"]["events"], 0, "a silence violation is not contention");
    let late = run_toml(&bus(frame, "", "turnaround = \"4 char\"", ""));
    assert_eq!(late["uart"]["silence_violations"], 0, "{}", late["uart"]);
    assert!(late["frames"]["delivered"].as_u64().unwrap() > 10);
    // The budget states the silence minimum beside the electrical one:
    // 3.5 char − receiver 200 ns − enable lead 1 µs.
    let b = budget_json(&bus(frame, "", "turnaround = \"1 char\"", ""), &[]);
    let h = handover(&b, "m", "s");
    assert_eq!(ps(&h["silence_min_s"]), halves_ps(77, 19_200) - 1_200_000, "{h}");
    assert_eq!(h["ok"], false);
    assert!(b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "silence-too-short"));
}

#[test]
fn gaps_inside_a_frame_past_the_character_timeout_discard_it() {
    let frame = |gap: &str| {
        format!("encoding = \"uart-8n1\"\nchar_gap = \"{gap}\"\ninterframe_gap = \"3.5 char\"\nchar_timeout = \"1.5 char\"\nsilence = \"3.5 char\"")
    };
    let ok = run_toml(&bus(&frame("1.4 char"), "", "turnaround = \"4 char\"", ""));
    assert_eq!(ok["uart"]["char_timeouts"], 0);
    assert!(ok["frames"]["delivered"].as_u64().unwrap() > 10);
    let long = run_toml(&bus(&frame("1.6 char"), "", "turnaround = \"4 char\"", ""));
    let deliveries = long["frames"]["attempts"].as_u64().unwrap() + long["frames"]["control"].as_u64().unwrap();
    assert_eq!(long["uart"]["char_timeouts"].as_u64().unwrap(), deliveries, "every multi-character frame");
    // Random gaps (uniform up to 1.6 characters): some frames have a gap past the timeout, some not.
    let random = run_toml(&bus(
        &frame("1.6 char").replace("\"1.6 char\"", "{ min = \"0 s\", max = \"1.6 char\" }"),
        "",
        "turnaround = \"4 char\"",
        "",
    ));
    let lost = random["uart"]["char_timeouts"].as_u64().unwrap();
    assert!(lost > 0 && random["frames"]["delivered"].as_u64().unwrap() > 0, "{}", random["uart"]);
}

#[test]
fn random_gaps_lengthen_each_frame_within_its_bounds_and_repeat_with_the_seed() {
    let frame = "encoding = \"uart-8n1\"\nchar_gap = { min = \"0 s\", max = \"200 us\" }";
    let toml = bus(frame, "", "turnaround = \"4 char\"", "");
    let (r1, ev1) = with_events(&toml);
    let (r2, ev2) = with_events(&toml);
    assert_eq!(ev1, ev2, "same seed, same gaps");
    assert_eq!(r1["frames"], r2["frames"]);
    let mut longer = 0;
    for (kind, s, e) in frames(&ev1) {
        let chars: i128 = if kind == "poll" {
            8
        } else if kind == "data" {
            10
        } else {
            3
        };
        let base = halves_ps(chars as u128 * 20, 19_200);
        assert!(e - s >= base && e - s <= base + (chars - 1) * 200_000_000, "{kind}: {}", e - s);
        longer += i32::from(e - s > base);
    }
    assert!(longer > 5);
}

#[test]
fn auto_direction_parts_need_a_bias_that_settles_within_a_bit() {
    let auto = "[node.transceiver]\ndriver = \"auto-direction\"";
    let biased = run_toml(&bus("encoding = \"uart-8n1\"", "", "turnaround = \"4 char\"", auto));
    assert_eq!(biased["uart"]["unsettled_frames"], 0, "{}", biased["uart"]);
    assert!(biased["frames"]["delivered"].as_u64().unwrap() > 10);
    // Without the bias network the idle line reads undefined: the recessive
    // bits an auto-direction driver leaves to it are lost.
    let bare = bus("encoding = \"uart-8n1\"", "", "turnaround = \"4 char\"", auto)
        .replace("[line.bias]\nsupply = \"5 V\"\npull_up = \"560 ohm\"\npull_down = \"560 ohm\"\n", "");
    let r = run_toml(&bare);
    assert!(r["uart"]["unsettled_frames"].as_u64().unwrap() > 10, "{}", r["uart"]);
    assert_eq!(r["frames"]["delivered"], 0);
    // Its driver lets go at the end of its last dominant bit, before the stop
    // bit: the master may answer a stop bit (52.08 µs) sooner.
    let b = budget_json(&bus("encoding = \"uart-8n1\"", "", "turnaround = \"4 char\"", auto), &[]);
    let h = handover(&b, "s", "m");
    assert_eq!(ps(&h["min_turnaround_s"]), 0, "{h}");
    assert_eq!(ps(&h["slack_s"]), halves_ps(80, 19_200) - (2_000_000 - halves_ps(2, 19_200) - 200_000), "{h}");
}

#[test]
fn hand_over_slack_equals_the_budget_on_every_polling_and_token_demo() {
    // At the worst-case corner of the time ranges, with no response latency,
    // every hand-over of a polling or token demo repeats exactly: the run's
    // smallest slack is the budget's smallest (set − minimum), to the picosecond.
    let mut checked = 0;
    for entry in std::fs::read_dir("scenarios").unwrap() {
        let path = entry.unwrap().path();
        let text = std::fs::read_to_string(&path).unwrap();
        if !(text.contains("scheme = \"polling\"") || text.contains("scheme = \"token\"")) {
            continue;
        }
        let p = path.to_str().unwrap();
        let set = ["--set", "timing=worst", "--set", "access.response_latency=0 s"];
        let mut args = vec!["run", p, "--format", "json"];
        args.extend(set);
        let out = halfwire(&args);
        assert!(out.status.success(), "{p}: {}", String::from_utf8_lossy(&out.stderr));
        let run: Value = serde_json::from_slice(&out.stdout).unwrap();
        let b = budget_json(&text, &set);
        let budget_min = b["handovers"].as_array().unwrap().iter().map(|h| ps(&h["slack_s"])).min().unwrap();
        assert_eq!(ps(&run["handover"]["slack_min_s"]), budget_min, "{p}");
        // Pair by pair as well; a hand-over the scheme makes only to recover
        // (a token regenerated after a loss) is not a budgeted one.
        for pair in run["handover"]["pairs"].as_array().unwrap() {
            let (from, to) = (pair["from"].as_str().unwrap(), pair["to"].as_str().unwrap());
            match b["handovers"].as_array().unwrap().iter().find(|h| h["from"] == from && h["to"] == to) {
                Some(h) => assert_eq!(ps(&pair["slack_min_s"]), ps(&h["slack_s"]), "{p}: {pair}"),
                None => assert!(ps(&pair["slack_min_s"]) >= budget_min, "{p}: recovery {pair}"),
            }
        }
        checked += 1;
    }
    assert!(checked >= 5, "{checked} demos");
}

#[test]
fn bad_uart_input_is_refused_with_the_place_and_the_key() {
    let refused = |toml: &str, needles: &[&str]| {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bad.toml");
        std::fs::write(&path, toml).unwrap();
        let out = halfwire(&["run", path.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(err.contains(&format!("{}:", path.display())), "file:line:column in {err}");
        for n in needles {
            assert!(err.contains(n), "{n:?} not in {err}");
        }
    };
    // A character unit without a UART encoding.
    refused(&bus("encoding = \"nrz\"", "", "turnaround = \"3.5 char\"", ""), &["access.turnaround", "UART"]);
    // Ten data bits.
    refused(&bus("encoding = \"uart-10n1\"", "", "turnaround = \"4 char\"", ""), &["frame.encoding", "5 to 9"]);
    // A negative gap between characters.
    refused(
        &bus("encoding = \"uart-8n1\"\nchar_gap = \"-1 us\"", "", "turnaround = \"4 char\"", ""),
        &["frame.char_gap"],
    );
    // A character timeout longer than the silence.
    refused(
        &bus(
            "encoding = \"uart-8n1\"\nchar_timeout = \"4 char\"\nsilence = \"3.5 char\"\ninterframe_gap = \"4 char\"",
            "",
            "turnaround = \"4 char\"",
            "",
        ),
        &["frame.char_timeout", "silence"],
    );
    // Back-to-back frames closer than the silence.
    refused(
        &bus("encoding = \"uart-8n1\"\nsilence = \"3.5 char\"", "", "turnaround = \"4 char\"", ""),
        &["interframe_gap"],
    );
    // Firmware timing outside the schemes that model it, and auto-direction without UART.
    let csma = bus("encoding = \"uart-8n1\"", "release_after_stop = \"1 us\"", "", "").replace(
        "scheme = \"polling\"\nmaster = \"m\"\nrequest_bits = 64\nempty_reply_bits = 24\nreply_timeout = \"30 ms\"",
        "scheme = \"aloha\"\nack_timeout = \"3 ms\"",
    );
    refused(&csma, &["transceiver.release_after_stop", "polling"]);
    refused(
        &bus("encoding = \"nrz\"", "driver = \"auto-direction\"", "turnaround = \"100 us\"", ""),
        &["transceiver.driver", "UART"],
    );
    // An enable lead or release beyond the transceiver-time bound.
    refused(
        &bus("encoding = \"uart-8n1\"", "release_after_stop = \"-2 s\"", "turnaround = \"4 char\"", ""),
        &["release_after_stop", "1 s"],
    );
}
