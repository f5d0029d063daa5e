//! Worst-case bounds against the simulation: on random periodic flow sets
//! no simulated latency exceeds its bound. References: the response-time
//! analysis of Davis, Burns, Bril & Lukkien (2007), Real-Time Systems 35(3)
//! for arbitration; the worst-case poll cycle of the documented timing model
//! for polling. The simulation is the independent side of each check: it
//! does not use the analysis.

use halfwire::bound::{bounds, Outcome};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Simulated maximum latency of each flow (by its bound's name) and its bound.
fn compare(toml: &str) -> Vec<(String, f64, Option<f64>)> {
    let spec = halfwire::scenario::parse_str(toml, "bounds.toml").unwrap_or_else(|e| panic!("{e}\n{toml}"));
    let line = halfwire::line::LineModel::new(&spec);
    let b = bounds(&spec, &line);
    let report = serde_json::to_value(halfwire::simulate(&spec)).unwrap();
    b.iter()
        .map(|f| {
            let by_id = &report["latency_s"]["ids"][&f.name]["max"];
            let by_node = &report["latency_s"]["nodes"][&spec.nodes[f.node].name]["max"];
            let max = by_id.as_f64().or(by_node.as_f64()).unwrap_or(0.0);
            let bound = match &f.outcome {
                Outcome::Bounded { bound, .. } => Some(bound.as_secs_f64()),
                Outcome::Unbounded { .. } => None,
            };
            (f.name.clone(), max, bound)
        })
        .collect()
}

/// Every simulated maximum of every set at most its bound; more than
/// `min_bounded` flows bounded, and the bounds not vacuous (some flow comes
/// within half of its bound).
fn assert_bounds_hold(scheme: &str, sets: &[String], min_bounded: usize) {
    let results = crate::common::par_map(sets, |t| compare(t));
    let (mut bounded, mut tightest) = (0, 0.0f64);
    for (set, flows) in sets.iter().zip(&results) {
        for (name, max, bound) in flows {
            if let Some(b) = bound {
                bounded += 1;
                assert!(max <= b, "flow {name}: simulated {max} s above its bound {b} s in\n{set}");
                tightest = tightest.max(max / b);
            }
        }
    }
    assert!(bounded > min_bounded, "{bounded} flows bounded");
    assert!(tightest > 0.5, "the closest simulated maximum reached {tightest} of its bound");
    eprintln!("{scheme}: {bounded} flows bounded; the closest simulated maximum reached {tightest:.3} of its bound");
}

fn arbitration_set(rng: &mut ChaCha8Rng, seed: u64) -> String {
    let nodes = rng.random_range(2..6);
    let mut s = format!(
        r#"
seed = {seed}
duration = "300 ms"
[line]
length = "40 m"
impedance = "120 ohm"
velocity_factor = 0.66
[transceiver]
drive_current = "11.3 mA"
enable_time = "60 ns"
disable_time = "60 ns"
receiver_delay = "50 ns"
load = "30 pF"
receiver = "type2"
[frame]
bit_rate = "250 kbit/s"
overhead_bits = 36
[access]
scheme = "arbitration"
id_bits = 11
idle_bits = 11
sample_point = 0.8
"#
    );
    let mut id = 1u32;
    for n in 0..nodes {
        let flows = rng.random_range(1..3);
        s += &format!("[[node]]\nname = \"n{n}\"\nposition = \"{} m\"\ntraffic = [\n", n * 9);
        for _ in 0..flows {
            id += rng.random_range(1..40);
            let period_ms = rng.random_range(3..40);
            let jitter_us = rng.random_range(0..(period_ms * 500));
            let phase_us = rng.random_range(0..(period_ms * 1000));
            let bytes = rng.random_range(1..9);
            s += &format!(
                "  {{ pattern = \"periodic\", period = \"{period_ms} ms\", phase = \"{phase_us} us\", jitter = \"{jitter_us} us\", payload = \"{bytes} B\", id = {id} }},\n"
            );
        }
        s += "]\n";
    }
    s
}

#[test]
fn no_arbitration_latency_exceeds_its_bound_on_200_random_flow_sets() {
    let mut rng = ChaCha8Rng::seed_from_u64(2007);
    let sets: Vec<String> = (0..200).map(|k| arbitration_set(&mut rng, k)).collect();
    assert_bounds_hold("arbitration", &sets, 400);
}

/// The three-message example of Davis, Burns, Bril & Lukkien (2007),
/// section 3 (values from memory), on this bus: 125 kbit/s (τ_bit = 8 µs),
/// transceivers and wire with no delay, and every round 125 bit times = 1 ms
/// (12 bits of start edge and identifier, a 110-bit frame, 3 idle bits).
/// Periods 2.5, 3.5 and 3.5 ms, priorities A > B > C; published response
/// times 2, 3 and 3.5 ms (the 1994 analysis gave 3 ms for C).
const THREE_MESSAGES: &str = r#"
name = "three messages"
seed = 1
duration = "70 ms"
[line]
length = "1 m"
impedance = "120 ohm"
velocity_factor = 0.66
[transceiver]
drive_current = "11.3 mA"
enable_time = "0 ns"
disable_time = "0 ns"
receiver_delay = "0 ns"
load = "30 pF"
receiver = "type2"
[frame]
bit_rate = "125 kbit/s"
overhead_bits = 46
[access]
scheme = "arbitration"
id_bits = 11
idle_bits = 3
sample_point = 0.8
[[node]]
name = "a"
position = "0 m"
traffic = { pattern = "periodic", period = "2.5 ms", payload = "8 B", id = 1 }
[[node]]
name = "b"
position = "0 m"
traffic = { pattern = "periodic", period = "3.5 ms", payload = "8 B", id = 2 }
[[node]]
name = "c"
position = "0 m"
traffic = { pattern = "periodic", period = "3.5 ms", payload = "8 B", id = 3 }
"#;

#[test]
fn arbitration_gives_the_published_response_times_and_c_reaches_its_bound_exactly() {
    let ps = |s: f64| (s * 1e12).round() as u64;
    let got = compare(THREE_MESSAGES);
    let bound = |i: usize| ps(got[i].2.expect("bounded"));
    // This bus delivers at the frame's end, 3 idle bits (24 µs) before the
    // end of the published C, so A and B are the published 2 and 3 ms less
    // 24 µs. C is the lowest priority: nothing lower blocks it, but the bus
    // must show 3 idle bits before its first round, which costs those 24 µs
    // back, so C's bound is the published 3.5 ms itself.
    assert_eq!(bound(0), 2_000_000_000 - 24_000_000);
    assert_eq!(bound(1), 3_000_000_000 - 24_000_000);
    assert_eq!(bound(2), 3_500_000_000);
    // The simulation meets C's bound to the picosecond: its second instance,
    // released at 3.5 ms with B, waits behind B and then A's third instance
    // (released at 5 ms, as B's round ends), the case the 1994 analysis missed.
    assert_eq!(ps(got[2].1), bound(2), "{got:?}");
    for (name, max, b) in &got {
        assert!(ps(*max) <= ps(b.unwrap()), "{name}: {max} s above its bound");
    }
}

/// Three fixed-timing buses (every time a single value, so the worst case
/// is the case): the node under test, "x", sends one 24-byte message every
/// 3 ms; the two others always have a message waiting, so every cycle is
/// its longest. The bound is the supremum over messages arriving just after
/// x's service instant (its receiver showing the poll's or the token's end,
/// or its slot's start), with x's previous service empty.
const FIXED_BUSES: [(&str, &str); 4] = [
    (
        "polling",
        r#"
[access]
scheme = "polling"
master = "m"
max_per_poll = 1
request_bits = 24
empty_reply_bits = 16
turnaround = "10 us"
response_latency = "3 us"
reply_timeout = "200 us"
[[node]]
name = "m"
position = "0 m"
"#,
    ),
    (
        "token",
        r#"
[access]
scheme = "token"
token_bits = 24
max_per_token = 1
turnaround = "10 us"
response_latency = "3 us"
token_timeout = "5 ms"
"#,
    ),
    (
        "tdma",
        r#"
[access]
scheme = "tdma"
timekeeper = "m"
beacon_bits = 32
slot_length = "300 us"
guard = "500 ns"
[[node]]
name = "m"
position = "0 m"
"#,
    ),
    (
        // The timekeeper itself sends, in the slot right after its beacon:
        // its driver is still turning off from the beacon when the slot begins.
        "tdma",
        r#"
[access]
scheme = "tdma"
timekeeper = "x"
beacon_bits = 32
slots = [{ node = "x", length = "300 us" }, { node = "a", length = "300 us" }, { node = "b", length = "300 us" }]
guard = "500 ns"
"#,
    ),
];

fn fixed_bus(access: &str, x_traffic: &str) -> String {
    format!(
        r#"
name = "fixed timing"
seed = 1
duration = "5 ms"
[line]
length = "30 m"
impedance = "120 ohm"
velocity_factor = 0.66
[transceiver]
family = "tia485"
enable_time = "200 ns"
disable_time = "150 ns"
receiver_delay = "60 ns"
load = "30 pF"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 32
interframe_gap = "5 us"
{access}
[[node]]
name = "a"
position = "10 m"
traffic = {{ pattern = "periodic", period = "100 us", payload = "16 B", to = "x" }}
[[node]]
name = "b"
position = "20 m"
traffic = {{ pattern = "periodic", period = "100 us", payload = "8 B", to = "x" }}
[[node]]
name = "x"
position = "30 m"
{x_traffic}
"#
    )
}

#[test]
fn polling_token_and_tdma_bounds_are_reached_to_the_picosecond() {
    use crate::common::halfwire;
    let dir = tempfile::tempdir().unwrap();
    for (scheme, access) in FIXED_BUSES {
        // x's first service instant, from a run where x always has a message:
        // its first enable, less its turnaround and response latency (the
        // poll and the token are taken when they end at x's receiver; a slot
        // at its start, where x enables). What x sends does not move it.
        let quiet = dir.path().join(format!("{scheme}-probe.toml"));
        let busy = "traffic = { pattern = \"periodic\", period = \"100 us\", payload = \"24 B\", to = \"a\" }";
        std::fs::write(&quiet, fixed_bus(access, busy)).unwrap();
        let events = dir.path().join(format!("{scheme}.jsonl"));
        let out =
            halfwire(&["run", quiet.to_str().unwrap(), "--duration", "1 ms", "--events", events.to_str().unwrap()]);
        assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
        let log: Vec<serde_json::Value> =
            std::fs::read_to_string(&events).unwrap().lines().map(|l| serde_json::from_str(l).unwrap()).collect();
        let first = |event: &str, frame: Option<&str>| {
            log.iter()
                .find(|e| e["event"] == event && e["node"] == "x" && frame.is_none_or(|f| e["frame"] == f))
                .map(|e| e["t_ps"].as_u64().unwrap())
                .expect("x's event")
        };
        let service = match (scheme, access.contains("timekeeper = \"x\"")) {
            // The timekeeper's slot starts a guard (500 ns) after its own
            // beacon ends; its enable can come later, once the beacon's
            // driver is off plus the gap.
            ("tdma", true) => first("frame_end", Some("beacon")) + 500_000,
            ("tdma", false) => first("driver_enable", None),
            _ => first("driver_enable", None) - 13_000_000,
        };
        // The worst arrival the engine's 1 ps clock allows: 1 ps after it.
        let traffic = format!(
            "traffic = {{ pattern = \"periodic\", period = \"3 ms\", phase = \"{} ps\", payload = \"24 B\", to = \"a\" }}",
            service + 1
        );
        let flows = compare(&fixed_bus(access, &traffic));
        let (_, max, bound) = flows.iter().find(|f| f.0 == "x").expect("x's flow");
        let (max, bound) = ((max * 1e12).round() as u64, (bound.expect("x is bounded") * 1e12).round() as u64);
        assert_eq!(max, bound - 1, "{scheme}: simulated {max} ps against the bound {bound} ps");
    }
}

/// A random 30 m TIA-485 bus at 1 Mbit/s with `access` (given the drawn
/// turnaround and latency bound, in µs), then `count` nodes named
/// `prefix0…` from `first` m, 5 m apart, each with one random periodic flow.
fn random_tia485_bus(
    rng: &mut ChaCha8Rng,
    seed: u64,
    count: usize,
    prefix: &str,
    first: usize,
    access: impl FnOnce(u32, u32) -> String,
) -> String {
    let (en, dis, rx, ifg) =
        (rng.random_range(50..500), rng.random_range(50..500), rng.random_range(20..200), rng.random_range(0..20));
    let (turn, lat) = (rng.random_range(2..30), rng.random_range(0..40));
    let mut s = format!(
        r#"
seed = {seed}
duration = "200 ms"
[line]
length = "30 m"
impedance = "120 ohm"
velocity_factor = 0.66
[transceiver]
family = "tia485"
enable_time = "{en} ns"
disable_time = "{dis} ns"
receiver_delay = "{rx} ns"
load = "30 pF"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 32
interframe_gap = "{ifg} us"
{}"#,
        access(turn, lat)
    );
    for n in 0..count {
        let period_ms = rng.random_range(2..20);
        let jitter_us = rng.random_range(0..(period_ms * 500));
        let phase_us = rng.random_range(0..(period_ms * 1000));
        let bytes = rng.random_range(1..40);
        s += &format!(
            "[[node]]\nname = \"{prefix}{n}\"\nposition = \"{} m\"\ntraffic = {{ pattern = \"periodic\", period = \"{period_ms} ms\", phase = \"{phase_us} us\", jitter = \"{jitter_us} us\", payload = \"{bytes} B\" }}\n",
            n * 5 + first
        );
    }
    s
}

fn polling_set(rng: &mut ChaCha8Rng, seed: u64) -> String {
    let slaves = rng.random_range(2..7);
    let mpp = rng.random_range(0..3);
    random_tia485_bus(rng, seed, slaves, "s", 2, |turn, lat| {
        format!(
            r#"[access]
scheme = "polling"
master = "m"
max_per_poll = {mpp}
request_bits = 24
empty_reply_bits = 16
turnaround = "{turn} us"
response_latency = {{ min = "0 us", max = "{lat} us" }}
reply_timeout = "200 us"
[[node]]
name = "m"
position = "0 m"
"#
        )
    })
}

#[test]
fn no_polling_latency_exceeds_its_bound_on_200_random_buses() {
    let mut rng = ChaCha8Rng::seed_from_u64(1994);
    let sets: Vec<String> = (0..200).map(|k| polling_set(&mut rng, k)).collect();
    assert_bounds_hold("polling", &sets, 300);
}

#[test]
fn bound_prints_each_flow_and_refuses_what_it_cannot_bound() {
    use crate::common::halfwire;
    let out = halfwire(&["bound", "scenarios/irrigation-valves.toml", "--format", "json"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let flows = j["flows"].as_array().unwrap();
    assert_eq!(flows.len(), 24);
    assert!(flows.iter().all(|f| f["bound_s"].as_f64().is_some() && f["source"].is_string()), "{j}");
    // Poisson flows without min_interval, and a random-access scheme: reasons, never numbers.
    let text = String::from_utf8_lossy(&halfwire(&["bound", "scenarios/fruit-grader.toml"]).stdout).into_owned();
    assert!(text.contains("unbounded: ") && text.contains("min_interval"), "{text}");
    let text = String::from_utf8_lossy(&halfwire(&["bound", "scenarios/greenhouse-csma.toml"]).stdout).into_owned();
    assert!(text.contains("unbounded: csma is random access"), "{text}");
    // A bound is a metric an expectation can gate on; an unbounded flow's bound fails with the reason.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("gate.toml");
    let base = std::fs::read_to_string("scenarios/irrigation-valves.toml").unwrap();
    let base = base[..base.find("[[expect]]").unwrap()].to_owned();
    std::fs::write(
        &path,
        format!("{base}\n[[expect]]\nmetric = \"bound_s.flows.valve01\"\nop = \"<=\"\nvalue = \"600 ms\"\n"),
    )
    .unwrap();
    let out = halfwire(&["check", path.to_str().unwrap(), "--duration", "3 s"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    let base = base.replace(
        "pattern = \"periodic\", period = \"2 s\", jitter = \"1 s\"",
        "pattern = \"poisson\", rate = \"0.5/s\"",
    );
    std::fs::write(
        &path,
        format!("{base}\n[[expect]]\nmetric = \"bound_s.flows.valve01\"\nop = \"<=\"\nvalue = \"600 ms\"\n"),
    )
    .unwrap();
    let out = halfwire(&["check", path.to_str().unwrap(), "--duration", "3 s"]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(1), "{text}");
    assert!(text.contains("no worst-case bound"), "{text}");
    // A sporadic source gets a bound once it has a minimum gap.
    let sporadic = base.replace("rate = \"0.5/s\"", "rate = \"0.5/s\", min_interval = \"1 s\"");
    std::fs::write(&path, &sporadic).unwrap();
    let j: serde_json::Value =
        serde_json::from_slice(&halfwire(&["bound", path.to_str().unwrap(), "--format", "json"]).stdout).unwrap();
    assert!(j["flows"][0]["bound_s"].as_f64().is_some(), "{j}");
    // min_interval must lie below the mean gap.
    std::fs::write(&path, base.replace("rate = \"0.5/s\"", "rate = \"0.5/s\", min_interval = \"3 s\"")).unwrap();
    let out = halfwire(&["bound", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("min_interval"));
}

#[test]
fn the_bounds_of_64_flows_take_under_100_ms() {
    let mut rng = ChaCha8Rng::seed_from_u64(64);
    let mut set = arbitration_set(&mut rng, 1);
    set = set[..set.find("[[node]]").unwrap()].to_owned();
    for n in 0..32 {
        set += &format!(
            "[[node]]\nname = \"n{n}\"\nposition = \"{} m\"\ntraffic = [ {{ pattern = \"periodic\", period = \"{} ms\", payload = \"4 B\", id = {} }}, {{ pattern = \"periodic\", period = \"{} ms\", payload = \"8 B\", id = {} }} ]\n",
            n,
            20 + n,
            2 * n + 1,
            40 + n,
            2 * n + 2
        );
    }
    let spec = halfwire::scenario::parse_str(&set, "64.toml").unwrap();
    let line = halfwire::line::LineModel::new(&spec);
    let start = std::time::Instant::now();
    let b = bounds(&spec, &line);
    let took = start.elapsed();
    assert_eq!(b.len(), 64);
    assert!(b.iter().all(|f| f.bound().is_some()), "{b:?}");
    assert!(took.as_millis() < 100, "took {took:?}");
}

fn tdma_set(rng: &mut ChaCha8Rng, seed: u64) -> String {
    let nodes = rng.random_range(2..6);
    let slot_us = rng.random_range(60..200);
    let mut s = format!(
        r#"
seed = {seed}
duration = "200 ms"
[line]
length = "30 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "{en} ns"
disable_time = "{dis} ns"
receiver_delay = "{rx} ns"
load = "10 pF"
receiver = "type2"
[frame]
bit_rate = "10 Mbit/s"
overhead_bits = 48
interframe_gap = "{ifg} ns"
[access]
scheme = "tdma"
timekeeper = "tk"
beacon_bits = 32
slot_length = "{slot_us} us"
guard = "{guard} ns"
compensate = {comp}
[[node]]
name = "tk"
position = "0 m"
{tk_traffic}
"#,
        // Half the time the timekeeper has traffic too, so it owns a slot
        // right after its own beacon.
        tk_traffic = if rng.random_bool(0.5) {
            format!(
                "traffic = {{ pattern = \"periodic\", period = \"{} us\", payload = \"{} B\", to = \"n0\" }}",
                rng.random_range(300..3000),
                rng.random_range(1..20)
            )
        } else {
            String::new()
        },
        en = rng.random_range(10..100),
        dis = rng.random_range(10..100),
        rx = rng.random_range(5..50),
        ifg = rng.random_range(0..400),
        guard = rng.random_range(200..1000),
        comp = rng.random_bool(0.5),
    );
    // Half the schedules are explicit, with n0 owning two adjacent slots
    // (its second slot's start then waits for its own output to end).
    if rng.random_bool(0.5) {
        let mut slots = vec![format!("{{ node = \"n0\", length = \"{slot_us} us\" }}"); 2];
        if s.contains("to = \"n0\"") {
            // The busy timekeeper's slot comes first, right after its beacon.
            slots.insert(0, format!("{{ node = \"tk\", length = \"{slot_us} us\" }}"));
        }
        slots.extend((1..nodes).map(|n| format!("{{ node = \"n{n}\", length = \"{slot_us} us\" }}")));
        s = s.replace(&format!("slot_length = \"{slot_us} us\""), &format!("slots = [{}]", slots.join(", ")));
    }
    for n in 0..nodes {
        let period_us = rng.random_range(200..3000);
        let jitter_us = rng.random_range(0..period_us / 2);
        let phase_us = rng.random_range(0..period_us);
        let bytes = rng.random_range(1..40);
        s += &format!(
            "[[node]]\nname = \"n{n}\"\nposition = \"{} m\"\ntraffic = {{ pattern = \"periodic\", period = \"{period_us} us\", phase = \"{phase_us} us\", jitter = \"{jitter_us} us\", payload = \"{bytes} B\", to = \"tk\" }}\n",
            n * 6 + 3
        );
    }
    s
}

#[test]
fn no_tdma_latency_exceeds_its_bound_on_200_random_schedules() {
    let mut rng = ChaCha8Rng::seed_from_u64(1981);
    let sets: Vec<String> = (0..200).map(|k| tdma_set(&mut rng, k)).collect();
    assert_bounds_hold("tdma", &sets, 200);
}

fn token_set(rng: &mut ChaCha8Rng, seed: u64) -> String {
    let nodes = rng.random_range(2..7);
    let per = rng.random_range(0..3);
    let hold =
        if rng.random_bool(0.5) { format!("token_hold = \"{} us\"", rng.random_range(50..400)) } else { String::new() };
    random_tia485_bus(rng, seed, nodes, "t", 1, |turn, lat| {
        format!(
            r#"[access]
scheme = "token"
token_bits = 24
max_per_token = {per}
{hold}
turnaround = "{turn} us"
response_latency = {{ min = "0 us", max = "{lat} us" }}
token_timeout = "5 ms"
"#
        )
    })
}

#[test]
fn no_token_latency_exceeds_its_bound_on_200_random_rings() {
    let mut rng = ChaCha8Rng::seed_from_u64(1985);
    let sets: Vec<String> = (0..200).map(|k| token_set(&mut rng, k)).collect();
    assert_bounds_hold("token", &sets, 300);
}

/// `size` over nodes.count on the irrigation demo (shorter, valves 10 m apart).
fn size_args(extra: &[&str]) -> Vec<String> {
    let mut v: Vec<String> =
        ["size", "scenarios/irrigation-valves.toml", "--duration", "10 s", "--set", "nodes.spacing=\"10 m\""]
            .iter()
            .map(|s| s.to_string())
            .collect();
    v.extend(extra.iter().map(|s| s.to_string()));
    v
}

#[test]
fn size_finds_the_boundary_a_check_confirms() {
    use crate::common::halfwire;
    let args = size_args(&["--key", "nodes.count", "--range", "2..64", "--replications", "2", "--format", "json"]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = halfwire(&args);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let answer: u64 = j["answer"].as_str().unwrap().parse().unwrap();
    assert!((3..64).contains(&answer), "{j}");
    // No more points than the bracket ends and a bisection of 62 values: 2 + ⌈log2 62⌉ = 8.
    assert!(j["points"].as_array().unwrap().len() <= 8, "{j}");
    assert_eq!(j["monotone_over_points"], true);
    // The boundary as check sees it, at the same replications: the answer passes, the next value fails.
    let check = |n: u64| {
        let set = format!("nodes.count={n}");
        halfwire(&[
            "check",
            "scenarios/irrigation-valves.toml",
            "--duration",
            "10 s",
            "--set",
            "nodes.spacing=\"10 m\"",
            "--set",
            &set,
            "--replications",
            "2",
        ])
        .status
        .code()
    };
    assert_eq!(check(answer), Some(0), "the answer {answer} meets every requirement");
    assert_eq!(check(answer + 1), Some(1), "the next value {} fails one", answer + 1);
}

#[test]
fn size_draws_the_binding_requirement() {
    use crate::common::halfwire;
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("size.svg");
    let args = size_args(&["--key", "nodes.count", "--range", "2..64", "--plot", svg.to_str().unwrap()]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    assert_eq!(halfwire(&args).status.code(), Some(0));
    let text = std::fs::read_to_string(&svg).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed SVG");
    let texts: Vec<String> =
        doc.descendants().filter(|n| n.has_tag_name("text")).filter_map(|n| n.text().map(str::to_owned)).collect();
    assert!(texts.iter().any(|t| t.contains("latency_s.all.p99 against nodes.count")), "{texts:?}");
    assert!(texts.iter().any(|t| t.starts_with("requirement: ≤ 1 s")), "{texts:?}");
    assert!(texts.iter().any(|t| t.contains("some requirement fails")), "{texts:?}");
}

#[test]
fn size_refuses_bad_questions() {
    use crate::common::halfwire;
    let run = |extra: &[&str]| {
        let args = size_args(extra);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let out = halfwire(&args);
        (out.status.code(), String::from_utf8_lossy(&out.stderr).into_owned())
    };
    let (code, err) = run(&["--key", "nodes.cuont", "--range", "2..8"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("cuont"), "{err}");
    let (code, err) = run(&["--key", "nodes.count", "--range", "8..8"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("more than one point"), "{err}");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("free.toml");
    let text = std::fs::read_to_string("scenarios/irrigation-valves.toml").unwrap();
    std::fs::write(&path, &text[..text.find("[[expect]]").unwrap()]).unwrap();
    let out = halfwire(&[
        "size",
        path.to_str().unwrap(),
        "--key",
        "nodes.count",
        "--range",
        "2..8",
        "--set",
        "nodes.spacing=\"10 m\"",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no [[expect]]"));
}

#[test]
fn ctrl_c_stops_size_like_a_sweep() {
    use std::io::{BufRead, BufReader};
    use std::process::{Command, Stdio};
    // Runs of about a second each, one at a time, so the signal lands mid-run.
    let mut child = Command::new(crate::common::exe())
        .args(["size", "scenarios/irrigation-valves.toml", "--set", "nodes.spacing=\"10 m\"", "--duration", "20000 s"])
        .args(["--key", "nodes.count", "--range", "2..64", "--jobs", "1"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut err = BufReader::new(child.stderr.take().unwrap());
    let mut line = String::new();
    err.read_line(&mut line).unwrap();
    assert!(line.contains("trying nodes.count = 2"), "{line}");
    // SIGINT, as Ctrl-C at a terminal sends: no new runs; the running one finishes.
    assert!(Command::new("kill").args(["-INT", &child.id().to_string()]).status().unwrap().success());
    let mut rest = String::new();
    std::io::Read::read_to_string(&mut err, &mut rest).unwrap();
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(130), "{rest}");
    assert!(rest.contains("interrupted: no new runs"), "{rest}");
    assert!(rest.contains("size: interrupted at nodes.count = 2, after 0 values; no answer"), "{rest}");
}
