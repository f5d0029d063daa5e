//! End-to-end tests of `halfwire run` through the built binary.

use crate::common;

use common::halfwire;
use serde_json::Value;

fn run_json(args: &[&str]) -> Value {
    let out = halfwire(args);
    assert!(out.status.success(), "stderr: {}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("stdout is one JSON document")
}

fn without_run(mut v: Value) -> Value {
    v.as_object_mut().unwrap().remove("run");
    v
}

#[test]
fn demos_run_and_report_the_contract_fields() {
    for demo in ["scenarios/fruit-grader.toml", "scenarios/buoy-link.toml"] {
        let j = run_json(&["run", demo, "--format", "json"]);
        assert_eq!(j["schema"], "halfwire-report/1");
        for path in [
            "/scenario/name",
            "/scenario/seed",
            "/simulated_s",
            "/frames/attempts",
            "/frames/delivered",
            "/frames/corrupted",
            "/frames/dropped",
            "/throughput/payload_bit_s",
            "/throughput/carried",
            "/throughput/offered",
            "/latency_s/all/count",
            "/latency_s/all/mean",
            "/latency_s/all/p50",
            "/latency_s/all/p90",
            "/latency_s/all/p99",
            "/latency_s/all/p999",
            "/latency_s/all/max",
            "/contention/events",
            "/contention/overlap_total_s",
            "/contention/overlap_max_s",
            "/contention/first",
            "/floating/windows",
            "/floating/total_s",
            "/floating/longest_s",
            "/utilization/payload",
            "/utilization/overhead",
            "/utilization/gaps",
            "/utilization/idle",
            "/utilization/wasted",
            "/line/loaded_impedance_ohm",
            "/line/loaded_delay_s_per_m",
            "/line/end_to_end_delay_s",
            "/line/worst_amplitude_v",
            "/scheme/name",
            "/scheme/cycle_mean_s",
            "/scheme/cycle_max_s",
            "/scheme/timeouts",
            "/run/wall_s",
            "/run/events",
            "/run/events_per_s",
        ] {
            assert!(j.pointer(path).is_some(), "{demo}: missing {path}");
        }
        assert!(j["latency_s"]["all"]["count"].as_u64().unwrap() > 0, "{demo}: no deliveries");
        assert!(!j["latency_s"]["nodes"].as_object().unwrap().is_empty());
    }
}

#[test]
fn text_summary_has_units_and_sections() {
    let out = halfwire(&["run", "scenarios/fruit-grader.toml"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for needle in ["Throughput", "Latency", "Hand-overs", "Scheme: polling", "Mbit/s", "µs", "Ω"] {
        assert!(text.contains(needle), "missing {needle:?} in:\n{text}");
    }
    assert!(!text.contains('\u{1b}'), "no colour when NO_COLOR is set and stdout is not a terminal");
}

#[test]
fn same_seed_gives_identical_json_apart_from_run() {
    let a = run_json(&["run", "scenarios/fruit-grader.toml", "--format", "json"]);
    let b = run_json(&["run", "scenarios/fruit-grader.toml", "--format", "json"]);
    assert_eq!(serde_json::to_string(&without_run(a)).unwrap(), serde_json::to_string(&without_run(b)).unwrap());
}

#[test]
fn seed_and_duration_overrides() {
    let base = run_json(&["run", "scenarios/fruit-grader.toml", "--format", "json"]);
    let other = run_json(&["run", "scenarios/fruit-grader.toml", "--format", "json", "--seed", "99"]);
    assert_eq!(other["scenario"]["seed"], 99);
    assert_ne!(base["latency_s"]["all"]["mean"], other["latency_s"]["all"]["mean"]);
    let short = run_json(&["run", "scenarios/fruit-grader.toml", "--format", "json", "--duration", "10 ms"]);
    // 10 ms duration minus the scenario's 2 ms warmup.
    assert!((short["simulated_s"].as_f64().unwrap() - 8e-3).abs() < 1e-15);
}

#[test]
fn event_log_is_json_lines_inside_the_window() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("events.jsonl");
    let p = path.to_str().unwrap();
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--events", p, "--window", "100us..120us"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(&path).unwrap();
    let mut kinds = std::collections::BTreeSet::new();
    let mut last = 0u64;
    for line in text.lines() {
        let v: Value = serde_json::from_str(line).expect("each line is JSON");
        let t = v["t_ps"].as_u64().unwrap();
        assert!((100_000_000..=120_000_000).contains(&t), "{line}");
        assert!(t >= last, "sorted by time");
        last = t;
        kinds.insert(v["event"].as_str().unwrap().to_owned());
    }
    for k in ["driver_enable", "driver_release", "driver_off", "frame_start", "frame_end"] {
        assert!(kinds.contains(k), "no {k} in the log");
    }
}

/// Bad input: exit 2, a message naming the place, no panic.
fn bad(toml: &str, expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.toml");
    std::fs::write(&path, toml).unwrap();
    let out = halfwire(&["run", path.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "exit status; stderr: {err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(err.contains("bad.toml:"), "names the file: {err}");
    for e in expect {
        assert!(err.contains(e), "expected {e:?} in: {err}");
    }
    assert!(out.stdout.is_empty(), "no report on bad input");
}

fn good() -> String {
    std::fs::read_to_string("scenarios/fruit-grader.toml").unwrap()
}

#[test]
fn malformed_toml() {
    bad("name = \"x\"\n[line\nlength = \"2 m\"\n", &["bad.toml:2:"]);
}

#[test]
fn unknown_key_with_hint() {
    let t = good().replace("length = \"2.4 m\"", "lenght = \"2.4 m\"");
    bad(&t, &[":10:1:", "line.lenght", "unknown key `lenght`", "did you mean `length`?"]);
}

#[test]
fn missing_and_wrong_units() {
    bad(&good().replace("enable_time = \"7 ns\"", "enable_time = \"7\""), &["transceiver.enable_time", "missing unit"]);
    bad(
        &good().replace("enable_time = \"7 ns\"", "enable_time = \"35 nz\""),
        &["transceiver.enable_time", "unknown unit \"nz\""],
    );
    bad(&good().replace("enable_time = \"7 ns\"", "enable_time = \"7 m\""), &["transceiver.enable_time", "length"]);
}

#[test]
fn negative_length() {
    bad(&good().replace("length = \"2.4 m\"", "length = \"-2.4 m\""), &[":10:10:", "line.length", "negative length"]);
}

#[test]
fn node_outside_the_line() {
    bad(&good().replace("position = \"0 m\"", "position = \"3 m\""), &["node[0].position", "outside the line"]);
    bad(&good().replace("spacing = \"0.1 m\"", "spacing = \"0.2 m\""), &["nodes", "outside the line"]);
}

#[test]
fn duplicate_name() {
    let t = good() + "\n[[node]]\nname = \"controller\"\nposition = \"1 m\"\n";
    bad(&t, &["duplicate node name \"controller\""]);
}

#[test]
fn zero_bit_rate() {
    bad(
        &good().replace("bit_rate = \"100 Mbit/s\"", "bit_rate = \"0 Mbit/s\""),
        &["frame.bit_rate", "greater than zero"],
    );
}

#[test]
fn master_not_a_node() {
    bad(
        &good().replace("master = \"controller\"", "master = \"controler\""),
        &["access.master", "no node is called \"controler\"", "did you mean \"controller\"?"],
    );
}

#[test]
fn empty_order() {
    bad(&good().replace("max_per_poll = 1", "max_per_poll = 1\norder = []"), &["access.order", "empty"]);
}

#[test]
fn unknown_scheme_and_value_hints() {
    bad(
        &good().replace("scheme = \"polling\"", "scheme = \"poling\""),
        &["access.scheme", "did you mean \"polling\"?"],
    );
    bad(&good().replace("encoding = \"8b10b\"", "encoding = \"8b/10b\""), &["frame.encoding", "8b10b"]);
}

#[test]
fn missing_file_and_bad_options() {
    let out = halfwire(&["run", "no/such/file.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no/such/file.toml"));
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--duration", "5"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--duration"));
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--events", "x.jsonl", "--window", "9us..3us"]);
    assert_eq!(out.status.code(), Some(2));
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--bogus"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn no_partial_output_file_on_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("missing-folder").join("events.jsonl");
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--events", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("does not exist"));
    // A bad window after a valid events path leaves no file behind either.
    let ok_path = dir.path().join("events.jsonl");
    let out = halfwire(&[
        "run",
        "scenarios/fruit-grader.toml",
        "--events",
        ok_path.to_str().unwrap(),
        "--window",
        "1 s..2 s",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(!ok_path.exists());
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0, "no temporary files left");
}

#[test]
fn debug_log_shows_scheme_decisions() {
    let out = std::process::Command::new(common::exe())
        .args(["run", "scenarios/buoy-link.toml", "--duration", "60 ms"])
        .env("RUST_LOG", "halfwire=debug")
        .output()
        .unwrap();
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("DEBUG poll") && err.contains("slave=sensor"), "{err}");
    assert!(!err.contains('\u{1b}'), "no ANSI codes when stderr is not a terminal");
}

#[test]
fn event_log_is_complete_to_the_end_of_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("all.jsonl");
    let out = halfwire(&["run", "scenarios/buoy-link.toml", "--duration", "60 ms", "--events", path.to_str().unwrap()]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(&path).unwrap();
    let count = |k: &str| text.lines().filter(|l| l.contains(&format!("\"event\":\"{k}\""))).count();
    assert!(count("driver_enable") > 100);
    assert_eq!(count("driver_enable"), count("driver_release"));
    assert_eq!(count("driver_enable"), count("driver_off"));
    assert_eq!(count("frame_start"), count("frame_end"));
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o644);
    }
}

#[test]
fn refuses_to_overwrite_the_scenario() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.toml");
    std::fs::copy("scenarios/buoy-link.toml", &path).unwrap();
    let p = path.to_str().unwrap();
    let out = halfwire(&["run", p, "--events", p]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("refusing to overwrite"));
    assert_eq!(std::fs::read_to_string(&path).unwrap(), std::fs::read_to_string("scenarios/buoy-link.toml").unwrap());
}

#[test]
#[cfg(target_os = "linux")]
fn a_full_stdout_is_an_error_not_a_panic() {
    let full = std::fs::OpenOptions::new().write(true).open("/dev/full").unwrap();
    let out = std::process::Command::new(common::exe())
        .args(["run", "scenarios/buoy-link.toml", "--duration", "60 ms"])
        .stdout(full)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("cannot write to stdout") && !err.contains("panicked"), "{err}");
}

#[test]
fn a_late_reply_meets_the_next_poll_on_the_wire() {
    // The sensor's firmware may take up to 50 µs + 120 µs + the reply to
    // answer, but the logger times out after 100 µs: late replies collide
    // with the next poll, and a busy sensor ignores polls meanwhile.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("late.toml");
    let text = std::fs::read_to_string("scenarios/buoy-link.toml")
        .unwrap()
        .replace("reply_timeout = \"1 ms\"", "reply_timeout = \"100 us\"");
    std::fs::write(&path, text).unwrap();
    let j = run_json(&["run", path.to_str().unwrap(), "--format", "json"]);
    assert!(j["scheme"]["timeouts"].as_u64().unwrap() > 0);
    assert!(j["contention"]["events"].as_u64().unwrap() > 0);
    // Every contention is between the two different drivers.
    for e in j["contention"]["first"].as_array().unwrap() {
        assert_ne!(e["nodes"][0], e["nodes"][1]);
    }
}
