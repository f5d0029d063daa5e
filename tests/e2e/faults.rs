//! Bit errors, retries and dead nodes under polling.
//!
//! References: a frame of n bits survives bit errors of probability p with
//! probability (1 − p)ⁿ (independent bit errors: the binomial zero term);
//! the normal upper tail Q(x) from statrs (a reference library from the
//! package registry); the truncated geometric mean 1 + q + … + q^r of the
//! polls one exchange takes when each fails with probability q and at most
//! r retries follow. Times come from the documented polling timing model
//! (README, "Timing model"), with every node at one position (no wire delay).

use crate::common::{budget_toml, halfwire, run_toml};
use serde_json::Value;

/// The transceivers and framing of both test buses: TIA-485, enable and
/// disable 100 ns, receiver delay 50 ns, 1 Mbit/s NRZ, 32 overhead bits.
const TIA485_1M: &str = r#"[transceiver]
family = "tia485"
enable_time = "100 ns"
disable_time = "100 ns"
receiver_delay = "50 ns"
load = "20 pF"

[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 32
"#;

/// A polling bus of `slaves` slaves, every node at 0 m: enable and disable
/// 100 ns, receiver delay 50 ns, 1 Mbit/s NRZ, 16-bit polls and empty
/// replies, 32 overhead bits, turnarounds 5 µs, reply timeout 20 µs.
fn bus(slaves: usize, duration: &str, line_extra: &str, access_extra: &str, traffic: &str) -> String {
    format!(
        r#"
name = "fault test"
seed = 11
duration = "{duration}"

[line]
length = "10 m"
impedance = "120 ohm"
velocity_factor = 0.7
{line_extra}

{TIA485_1M}
[access]
scheme = "polling"
master = "m"
request_bits = 16
empty_reply_bits = 16
turnaround = "5 us"
reply_timeout = "20 us"
{access_extra}

[[node]]
name = "m"
position = "0 m"

[nodes]
count = {slaves}
first = "0 m"
spacing = "0 m"
prefix = "s"
{traffic}
"#
    )
}

fn u(j: &Value, path: &str) -> u64 {
    path.split('.').fold(j, |v, k| &v[k]).as_u64().unwrap_or_else(|| panic!("{path} in {j}"))
}

fn ps(x: &Value) -> u64 {
    (x.as_f64().expect("a number") * 1e12).round() as u64
}

/// The 99 % two-sided normal-approximation interval of a binomial proportion.
fn within_binomial_99(hits: u64, n: u64, p: f64) -> bool {
    let half = 2.576 * (p * (1.0 - p) / n as f64).sqrt();
    ((hits as f64 / n as f64) - p).abs() <= half
}

#[test]
fn noise_corrupts_data_frames_as_the_binomial_zero_term_says() {
    let ber: f64 = 1e-4;
    // Three frame lengths: 96, 544 and 2032 line bits; each slave sends one
    // frame per period, well inside what the bus carries.
    for (payload_bytes, period, seed) in [(8u64, "2 ms", 1), (64, "4 ms", 2), (250, "12 ms", 3)] {
        let traffic =
            format!("traffic = {{ pattern = \"periodic\", period = \"{period}\", payload = \"{payload_bytes} B\" }}");
        let toml = bus(4, "3 s", &format!("bit_error_rate = {ber}"), "", &traffic)
            .replace("seed = 11", &format!("seed = {seed}"));
        let j = run_toml(&toml);
        let bits = 32 + 8 * payload_bytes; // NRZ: one line bit per data bit
        let p = 1.0 - (1.0 - ber).powi(bits as i32);
        let (n, noisy) = (u(&j, "frames.attempts"), u(&j, "frames.corrupted_by.noise"));
        assert!(n >= 990, "{n} frames");
        assert!(within_binomial_99(noisy, n, p), "{payload_bytes} B: {noisy} of {n} corrupted, expected fraction {p}");
        assert_eq!(u(&j, "frames.corrupted"), noisy, "noise is the only cause here");
        // Without retries a corrupted reply's message is given up, never lost silently.
        assert_eq!(u(&j, "frames.given_up"), noisy);
    }
}

#[test]
fn noise_and_margin_give_q_of_their_ratio() {
    let base = bus(
        4,
        "2 s",
        "noise = \"320 mV\"",
        "",
        "traffic = { pattern = \"periodic\", period = \"2 ms\", payload = \"64 B\" }",
    );
    let b = budget_toml(&base, &[]);
    let normal = statrs::distribution::Normal::new(0.0, 1.0).unwrap();
    let m = &b["nodes"]["m"];
    let margin = m["margin_v"].as_f64().unwrap();
    let ber = m["bit_error_rate"].as_f64().unwrap();
    let want = statrs::distribution::ContinuousCDF::sf(&normal, margin / 0.32);
    assert!(((ber - want) / want).abs() < 1e-9, "budget BER {ber}, Q(m/σ) {want}");
    assert!(ber > 1e-6 && ber < 1e-3, "a noise level that corrupts some frames: {ber}");
    // The master receives the data replies: their corrupted fraction follows its BER.
    let j = run_toml(&base);
    let p = 1.0 - (1.0 - ber).powi(32 + 8 * 64);
    let (n, noisy) = (u(&j, "frames.attempts"), u(&j, "frames.corrupted_by.noise"));
    assert!(within_binomial_99(noisy, n, p), "{noisy} of {n} corrupted, expected fraction {p}");
}

#[test]
fn retries_take_the_truncated_geometric_number_of_polls() {
    // No traffic: every exchange is a poll (16 bits) and an empty reply (16
    // bits); it fails when either is hit: q = 1 − (1 − p)^32.
    let p = 2e-3;
    for r in [1u32, 3] {
        let toml = bus(4, "4 s", &format!("bit_error_rate = {p}"), &format!("retries = {r}"), "");
        let j = run_toml(&toml);
        let s = &j["scheme"];
        let (polls, retries) = (s["polls"].as_u64().unwrap(), s["retries"].as_u64().unwrap());
        let exchanges = polls - retries;
        let q = 1.0 - (1.0f64 - p).powi(32);
        // X = polls of one exchange: P(X = k) = q^(k−1)(1 − q) for k ≤ r, P(X = r + 1) = q^r.
        let dist: Vec<(f64, f64)> = (1..=r + 1)
            .map(|k| {
                let pk = if k <= r { q.powi(k as i32 - 1) * (1.0 - q) } else { q.powi(r as i32) };
                (f64::from(k), pk)
            })
            .collect();
        let mean: f64 = dist.iter().map(|(k, pk)| k * pk).sum();
        let geometric: f64 = (0..=r).map(|i| q.powi(i as i32)).sum();
        assert!((mean - geometric).abs() < 1e-12);
        let var: f64 = dist.iter().map(|(k, pk)| (k - mean).powi(2) * pk).sum();
        let half = 1.96 * (var / exchanges as f64).sqrt();
        let got = polls as f64 / exchanges as f64;
        assert!((got - mean).abs() <= half, "r = {r}: {got} polls per exchange, expected {mean} ± {half}");
    }
}

#[test]
fn a_down_slave_is_found_silent_at_the_exact_timeout() {
    // Zero load, four slaves. An answered exchange takes
    // e + 16 tb + r + T + e + 16 tb + r + T = 42.3 µs; one that times out
    // e + 16 tb + reply_timeout = 36.1 µs. s01 is polled at k · 169.2 µs; the
    // first poll after its fault at 1 ms is at 1015.2 µs, timing out at
    // 1051.3 µs; each later cycle lasts 36.1 + 3 · 42.3 = 163.0 µs, so the
    // third timeout in a row is at 1051.3 + 2 · 163.0 = 1377.3 µs.
    let faults = r#"dead_after = 3
probe_every = 4
faults = [ { at = "1 ms", kind = "node-down", node = "s01" }, { at = "3 ms", kind = "node-up", node = "s01" } ]"#;
    let j = run_toml(&bus(4, "6 ms", "", faults, ""));
    let o = &j["outages"][0];
    assert_eq!(o["node"], "s01");
    assert_eq!(ps(&o["down_at_s"]), 1_000_000_000);
    assert_eq!(ps(&o["found_silent_after_s"]), 377_300_000, "{o}");
    assert_eq!(ps(&o["up_at_s"]), 3_000_000_000);
    // Back up, it answers at its next probe, probe_every cycles at most after
    // the last one it missed: at worst it comes back just after a probe's
    // poll, whose timeout (36.1 µs) and the rest of that cycle pass, then
    // four cycles of three answered slots (126.9 µs, its own skipped or
    // missed), then its own answered exchange (42.3 µs).
    let answered = ps(&o["answered_after_s"]);
    assert!(answered <= 36_100_000 + 4 * 126_900_000 + 42_300_000, "answered after {answered} ps");
    assert!(u(&j, "scheme.skipped_polls") > 0);
}

#[test]
fn every_message_is_delivered_dropped_given_up_or_still_queued() {
    let traffic = "traffic = { pattern = \"poisson\", rate = \"800/s\", payload = \"40 B\" }\nqueue_limit = 40";
    let faults = r#"retries = 1
dead_after = 2
faults = [ { at = "20 ms", kind = "node-down", node = "s02" }, { at = "60 ms", kind = "node-up", node = "s02" },
           { at = "70 ms", kind = "node-down", node = "s03" } ]"#;
    let j = run_toml(&bus(6, "100 ms", "bit_error_rate = 3e-4", faults, &traffic.replace("queue_limit = 40", "")));
    let f = &j["frames"];
    let arrived = u(&j, "frames.arrived");
    let accounted =
        u(&j, "frames.delivered") + u(&j, "frames.dropped") + u(&j, "frames.given_up") + u(&j, "frames.queued_at_end");
    assert_eq!(accounted, arrived, "{f}");
    assert!(u(&j, "frames.given_up") > 0 && u(&j, "scheme.retries") > 0, "{f}");
    assert_eq!(j["outages"].as_array().unwrap().len(), 2);
    assert!(j["outages"][1]["up_at_s"].is_null());
}

/// A user's mistake: exit 2 and a message naming file:line:column and the key.
fn refused(toml: &str, key: &str, words: &str) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.toml");
    std::fs::write(&path, toml).unwrap();
    let out = halfwire(&["run", path.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    let file = path.to_str().unwrap();
    assert!(err.contains(&format!("{file}:")) && err.contains(key) && err.contains(words), "{err}");
    let (_, rest) = err.split_once(&format!("{file}:")).unwrap();
    let mut parts = rest.splitn(3, ':');
    assert!(parts.next().unwrap().parse::<u32>().is_ok() && parts.next().unwrap().parse::<u32>().is_ok(), "{err}");
}

#[test]
fn bad_fault_and_noise_input_is_refused_with_its_place() {
    let down = |node: &str| format!("faults = [ {{ at = \"1 ms\", kind = \"node-down\", node = \"{node}\" }} ]");
    refused(&bus(3, "5 ms", "", &down("s9"), ""), "access.faults[0].node", "no node is called \"s9\"");
    refused(&bus(3, "5 ms", "", &down("m"), ""), "access.faults", "no backup_master");
    refused(&bus(3, "5 ms", "", "backup_master = \"s02\"", ""), "access.takeover_after", "needs takeover_after");
    refused(
        &bus(3, "5 ms", "", "backup_master = \"s02\"\ntakeover_after = \"10 us\"", ""),
        "access.takeover_after",
        "longer than reply_timeout",
    );
    refused(
        &bus(3, "5 ms", "", "backup_master = \"m\"\ntakeover_after = \"1 ms\"", ""),
        "access.backup_master",
        "must be a slave",
    );
    refused(
        &bus(3, "5 ms", "", "faults = [ { at = \"1 ms\", kind = \"node-up\", node = \"s01\" } ]", ""),
        "access.faults[0]",
        "needs an earlier node-down",
    );
    refused(
        &bus(3, "5 ms", "", "faults = [ { at = \"1 ms\", kind = \"node-down\" } ]", ""),
        "access.faults[0].node",
        "needs the node",
    );
    refused(&bus(3, "5 ms", "", "probe_every = 3", ""), "access.probe_every", "dead_after");
    refused(&bus(3, "5 ms", "", "retries = 5000", ""), "access.retries", "outside 0 to 1000");
    refused(&bus(3, "5 ms", "bit_error_rate = 0.7", "", ""), "line.bit_error_rate", "outside 0 to 0.5");
    refused(&bus(3, "5 ms", "bit_error_rate = 1e-6\nnoise = \"10 mV\"", "", ""), "line.bit_error_rate", "not both");
    refused(&bus(3, "5 ms", "noise = \"-3 mV\"", "", ""), "line.noise", "negative");
    // A scheme without replies has no retries.
    let tdma = bus(3, "5 ms", "", "", "").replace("scheme = \"polling\"", "scheme = \"csma\"").replace("retries", "x");
    let tdma = tdma.replace("master = \"m\"\n", "").replace("request_bits = 16\nempty_reply_bits = 16\n", "");
    let tdma = tdma.replace("reply_timeout = \"20 us\"", "retries = 2");
    refused(&tdma, "access.retries", "does not apply to scheme \"csma\"");
}

#[test]
fn no_demo_loses_a_message_silently() {
    // With no warmup every arrival is counted, so each message must be
    // delivered, dropped, given up or still queued (held or on the wire) at the end.
    let mut demos: Vec<_> = std::fs::read_dir("scenarios")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    demos.sort();
    // As written, and with noise that corrupts frames under every scheme.
    let cases: Vec<_> =
        demos.iter().flat_map(|p| [(p.clone(), "warmup=\"0 s\""), (p.clone(), "line.noise=\"300 mV\"")]).collect();
    let results = crate::common::par_map(&cases, |(p, set)| {
        let out = halfwire(&[
            "run",
            p.to_str().unwrap(),
            "--format",
            "json",
            "--duration",
            "300 ms",
            "--set",
            "warmup=\"0 s\"",
            "--set",
            set,
        ]);
        assert!(out.status.success(), "{}: {}", p.display(), String::from_utf8_lossy(&out.stderr));
        (p.clone(), serde_json::from_slice::<Value>(&out.stdout).unwrap())
    });
    let mut corrupted = 0;
    for (p, j) in results {
        corrupted += u(&j, "frames.corrupted");
        let arrived = u(&j, "frames.arrived");
        let accounted = u(&j, "frames.delivered")
            + u(&j, "frames.dropped")
            + u(&j, "frames.given_up")
            + u(&j, "frames.queued_at_end");
        assert_eq!(accounted, arrived, "{}: {}", p.display(), j["frames"]);
    }
    assert!(corrupted > 1000, "the noisy variants corrupt frames: {corrupted}");
}

#[test]
fn the_backup_master_takes_over_after_the_exact_silence() {
    // The master's last poll before its fault at 3 ms begins at t; its end
    // reaches the backup e + 16 tb + disable + r = 16.25 µs later, and the
    // backup polls takeover_after (1 ms) after that: 1016.25 µs without a poll.
    let access = r#"backup_master = "s04"
takeover_after = "1 ms"
faults = [ { at = "3 ms", kind = "node-down", node = "m" } ]"#;
    let j = run_toml(&bus(4, "10 ms", "", access, ""));
    let s = &j["scheme"];
    assert_eq!(s["takeovers"], 1, "{s}");
    assert_eq!(ps(&s["unpolled_max_s"]), 1_016_250_000, "{s}");
    // The backup then polls the three other slaves: 3 × 42.3 µs per cycle.
    let polls_after = s["polls"].as_u64().unwrap();
    assert!(polls_after > 150, "{s}");
    assert_eq!(j["outages"][0]["node"], "m");
    // Polls begin every 42.3 µs from 0; the last before 3 ms is the 70th, at
    // 2961 µs, so the takeover comes at 3977.25 µs, 977.25 µs after the fault.
    assert_eq!(ps(&j["outages"][0]["found_silent_after_s"]), 977_250_000);
    // A master back before the watchdog fires resumes polling itself.
    let access = r#"backup_master = "s04"
takeover_after = "1 ms"
faults = [ { at = "3 ms", kind = "node-down", node = "m" }, { at = "3.2 ms", kind = "node-up", node = "m" } ]"#;
    let j = run_toml(&bus(4, "10 ms", "", access, ""));
    assert_eq!(j["scheme"]["takeovers"], 0, "{}", j["scheme"]);
    assert!(j["scheme"]["cycles"].as_u64().unwrap() > 50);
}

/// A token ring of four nodes at one position, no traffic: every hop takes
/// T + e + 16 tb + r = 5 + 0.1 + 16 + 0.05 = 21.15 µs (README, "Timing model").
fn ring(access_extra: &str) -> String {
    format!(
        r#"
name = "ring test"
seed = 5
duration = "12 ms"

[line]
length = "10 m"
impedance = "120 ohm"
velocity_factor = 0.7

{TIA485_1M}
[access]
scheme = "token"
order = ["n01", "n02", "n03", "n04"]
token_bits = 16
turnaround = "5 us"
{access_extra}

[nodes]
count = 4
first = "0 m"
spacing = "0 m"
prefix = "n"
"#
    )
}

#[test]
fn a_silent_successor_is_dropped_at_the_exact_timeout_and_rejoins() {
    // n02 holds at (4m + 1) · 21.15 µs; its first pass that reaches n03
    // (16.15 µs after its enable) after the fault at 3 ms is at 145 · 21.15
    // = 3066.75 µs. Its output is off 16.2 µs later, and 30 µs after that,
    // at 3112.95 µs, it drops n03: 112.95 µs after the fault.
    let access = r#"token_timeout = "1 ms"
successor_timeout = "30 us"
solicit_every = 4
faults = [ { at = "3 ms", kind = "node-down", node = "n03" }, { at = "8 ms", kind = "node-up", node = "n03" } ]"#;
    let j = run_toml(&ring(access));
    let o = &j["outages"][0];
    assert_eq!(ps(&o["found_silent_after_s"]), 112_950_000, "{o}");
    let s = &j["scheme"];
    assert_eq!(s["ring_repairs"], 1, "{s}");
    assert_eq!(s["readmissions"], 1, "{s}");
    assert_eq!(s["recoveries"], 0, "the repair keeps the token alive: {s}");
    // Back up, n03 rejoins at a solicitation: the head solicits every fourth
    // visit, and a rotation of the three others takes 3 · 21.15 µs (plus one
    // unanswered solicitation of 16.2 + 30 µs per cycle while it was down).
    let answered = ps(&o["answered_after_s"]);
    assert!(answered <= 4 * (63_450_000 + 46_200_000) + 2 * 21_150_000, "answered after {answered} ps");
}

#[test]
fn a_down_recovery_node_is_replaced_by_the_next_in_order() {
    // Without repair, a token passed to the down recovery node n01 is lost.
    // n01's watchdog cannot fire; n02 regenerates after token_timeout plus
    // one zero-load rotation bounded with the worst enable time (4 · 21.15 =
    // 84.6 µs): 200 + 84.6 µs after the lost token's end reaches it
    // (disable 0.1 µs + receiver 0.05 µs): a recovery of 284.75 µs.
    let access = r#"token_timeout = "200 us"
faults = [ { at = "3 ms", kind = "node-down", node = "n01" } ]"#;
    let j = run_toml(&ring(access));
    let s = &j["scheme"];
    assert!(s["recoveries"].as_u64().unwrap() >= 10, "{s}");
    assert_eq!(ps(&s["recovery_max_s"]), 284_750_000, "{s}");
    assert_eq!(ps(&s["recovery_mean_s"]), 284_750_000, "{s}");
    assert_eq!(s["spurious_regenerations"], 0, "{s}");
}

#[test]
fn bad_ring_repair_input_is_refused_with_its_place() {
    refused(&ring("solicit_every = 3"), "access.solicit_every", "without successor_timeout");
    // A live successor answers within 2 × (0 + 50 ns) + 5 µs = 5.1 µs.
    refused(&ring("successor_timeout = \"5 us\""), "access.successor_timeout", "would drop live nodes");
    refused(
        &ring("faults = [ { at = \"1 ms\", kind = \"node-down\", node = \"n02\" } ]"),
        "access.faults",
        "nothing repairs the ring",
    );
    refused(
        &ring("token_timeout = \"1 ms\"\nfaults = [ { at = \"1 ms\", kind = \"lose-token\", node = \"n02\" } ]"),
        "access.faults[0].node",
        "concerns no node",
    );
}

#[test]
fn tdma_nodes_hold_over_for_the_stated_beacon_periods() {
    // The timekeeper is down for 10 ms (about 600 cycles of 16.5 µs). p runs
    // 200 ppm fast and r 200 ppm slow: on their own clocks the gap from r's
    // slot to p's next one shrinks by about 400 ppm of a cycle (6.6 ns) per
    // cycle, from guard + beacon slot (about 0.53 µs), so it closes after
    // roughly 80 cycles (the drift bound in the scheme's documentation).
    let run = |holdover: u32| {
        let extra = format!(
            "clock_ppm = {{ p = 200, r = -200 }}\nholdover = {holdover}\nfaults = [ {{ at = \"5 ms\", kind = \"node-down\", node = \"tk\" }}, {{ at = \"15 ms\", kind = \"node-up\", node = \"tk\" }} ]"
        );
        run_toml(&crate::common::tdma_pair(200_000, 8_000_000, 8_000_000, &extra))
    };
    let short = run(20);
    assert_eq!(short["scheme"]["free_running_cycles"], 40, "{}", short["scheme"]);
    assert_eq!(short["scheme"]["holdovers_expired"], 2, "{}", short["scheme"]);
    assert_eq!(short["contention"]["events"], 0);
    assert_eq!(short["scheme"]["slot_overruns"], 0, "{}", short["scheme"]);
    let long = run(500);
    assert_eq!(long["scheme"]["free_running_cycles"], 1000, "{}", long["scheme"]);
    assert!(
        long["contention"]["events"].as_u64().unwrap() > 0,
        "drift past the guard contends: {}",
        long["contention"]
    );
}

#[test]
fn a_node_down_under_every_scheme_loses_nothing_and_sends_nothing() {
    // One sending node of each demo is down from 100 ms to 200 ms: every
    // message is still accounted for, and what it queued meanwhile waits
    // for its return (its longest latency spans the outage).
    let mut demos: Vec<_> = std::fs::read_dir("scenarios")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    demos.sort();
    let results = crate::common::par_map(&demos, |p| {
        let path = p.to_str().unwrap();
        let base = ["run", path, "--format", "json", "--duration", "300 ms", "--set", "warmup=\"0 s\""];
        let first: Value = serde_json::from_slice(&halfwire(&base).stdout).unwrap();
        let nodes = first["latency_s"]["nodes"].as_object().unwrap();
        // The busiest sender, so the outage is visible in its latency.
        let (name, _) = nodes.iter().max_by_key(|(_, l)| l["count"].as_u64().unwrap()).unwrap();
        let faults = format!(
            "access.faults=[{{ at = \"100 ms\", kind = \"node-down\", node = \"{name}\" }}, {{ at = \"200 ms\", kind = \"node-up\", node = \"{name}\" }}]"
        );
        let mut args = base.to_vec();
        args.extend(["--set", &faults, "--set", "access.successor_timeout=\"1 ms\""]);
        let mut out = halfwire(&args);
        if !out.status.success() {
            // Schemes without ring repair: the fault alone.
            args.truncate(args.len() - 2);
            out = halfwire(&args);
        }
        assert!(out.status.success(), "{}: {}", p.display(), String::from_utf8_lossy(&out.stderr));
        (p.clone(), name.clone(), first, serde_json::from_slice::<Value>(&out.stdout).unwrap())
    });
    for (p, name, before, j) in results {
        let arrived = u(&j, "frames.arrived");
        let accounted = u(&j, "frames.delivered")
            + u(&j, "frames.dropped")
            + u(&j, "frames.given_up")
            + u(&j, "frames.queued_at_end");
        assert_eq!(accounted, arrived, "{}: {}", p.display(), j["frames"]);
        assert_eq!(j["outages"][0]["node"], name.as_str(), "{}", p.display());
        let count = before["latency_s"]["nodes"][&name]["count"].as_u64().unwrap();
        if count >= 20 {
            let max = j["latency_s"]["nodes"][&name]["max"].as_f64().unwrap();
            assert!(max >= 0.05, "{}: {name}'s longest latency {max} s does not span the outage", p.display());
        }
    }
}

#[test]
fn a_beacon_lost_to_noise_is_bridged_by_holdover() {
    // Every beacon a node misses (corrupted by noise) makes it hold over one
    // period, or, if its holdover is spent, fall silent until the next beacon.
    let extra = "holdover = 1";
    let toml = crate::common::tdma_pair(200_000, 8_000_000, 8_000_000, extra)
        .replace("[line]", "[line]\nbit_error_rate = 2e-3");
    let j = run_toml(&toml);
    let s = &j["scheme"];
    let missed = s["beacons_missed"].as_u64().unwrap();
    let bridged = s["free_running_cycles"].as_u64().unwrap() + s["holdovers_expired"].as_u64().unwrap();
    assert!(missed > 50, "{s}");
    // The window's edges may split one miss from its consequence.
    assert!(missed.abs_diff(bridged) <= 2, "{missed} beacons missed, {bridged} bridged or expired: {s}");
    assert!(s["holdovers_expired"].as_u64().unwrap() > 0, "two misses in a row happen at this rate: {s}");
}
