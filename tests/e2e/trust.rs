//! The findings of the fuzzing and fault pass, one test each: every one of
//! them printed a wrong figure with exit 0, hung, grew without bound or
//! panicked before it was fixed. Each test runs the built binary.

use crate::common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{halfwire, run_toml};
use serde_json::Value;

/// Write `text` to `name` in `dir` and return the path as a string.
fn put(dir: &Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_owned()
}

fn stderr(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Run `halfwire args` and require exit status 2 with every `needles` in stderr.
fn refused(args: &[&str], needles: &[&str]) {
    let out = halfwire(args);
    let err = stderr(&out);
    assert_eq!(out.status.code(), Some(2), "{args:?} should be refused; stderr: {err}");
    for n in needles {
        assert!(err.contains(n), "{args:?}: stderr lacks {n:?}: {err}");
    }
    assert!(!err.contains("panicked"), "{err}");
}

/// Run a command with a wall-clock limit; `None` if it did not finish in time (then it is killed).
fn bounded(mut cmd: Command, limit: Duration) -> Option<std::process::Output> {
    let mut child = cmd.stdout(Stdio::piped()).stderr(Stdio::piped()).spawn().unwrap();
    let started = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            return Some(child.wait_with_output().unwrap());
        }
        if started.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            return None;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn bin() -> Command {
    let mut c = Command::new(common::exe());
    c.env("NO_COLOR", "1");
    c
}

/// A quiet ALOHA pair: one message every `period` from "a" to "b".
fn sparse(duration: &str, period: &str, line_extra: &str) -> String {
    format!(
        r#"
duration = "{duration}"
[line]
length = "10 m"
impedance = "100 ohm"
{line_extra}
[transceiver]
drive_current = "11.3 mA"
enable_time = "10 ns"
disable_time = "10 ns"
receiver_delay = "10 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 16
[access]
scheme = "aloha"
ack_timeout = "50 us"
[[node]]
name = "a"
position = "0 m"
traffic = {{ pattern = "periodic", period = "{period}", payload = "8 B" }}
[[node]]
name = "b"
position = "10 m"
"#
    )
}

const DELAY: &str = "delay = \"5 ns/m\"";

#[test]
fn f01_a_duration_override_goes_through_the_scenario_validation() {
    let dir = tempfile::tempdir().unwrap();
    let f = put(dir.path(), "s.toml", &sparse("10 s", "1000000 s", DELAY));
    // 18 446 744 s of picoseconds does not fit the engine's time: refused, as the file would be.
    refused(&["run", &f, "--duration", "18446744 s"], &["duration", "--duration", "10^6 s"]);
    refused(&["sweep", &f, "--vary", "seed=1,2", "--duration", "18446744 s"], &["--duration"]);
    // The arrival-count guard applies to the override too.
    let busy = put(dir.path(), "busy.toml", &sparse("10 ms", "1 us", DELAY));
    refused(&["run", &busy, "--duration", "900000 s"], &["messages", "--duration"]);
    // A sensible override still runs.
    let out = halfwire(&["run", &f, "--duration", "2 s", "--format", "json"]);
    assert!(out.status.success(), "{}", stderr(&out));
}

#[test]
fn f02_velocity_factor_has_the_bounds_of_delay() {
    let dir = tempfile::tempdir().unwrap();
    let f = put(dir.path(), "s.toml", &sparse("10 ms", "1 ms", "velocity_factor = 1e-300"));
    refused(&["run", &f], &["line.velocity_factor", "1 µs/m"]);
    let f = put(dir.path(), "s.toml", &sparse("10 ms", "1 ms", "velocity_factor = 0.003"));
    refused(&["budget", &f], &["line.velocity_factor"]);
    let f = put(dir.path(), "s.toml", &sparse("10 ms", "1 ms", "velocity_factor = 0.0034"));
    let out = halfwire(&["run", &f, "--format", "json"]);
    assert!(out.status.success(), "{}", stderr(&out));
}

#[test]
fn f03_a_slow_token_holder_never_makes_a_rotation_longer_than_the_run() {
    let text = std::fs::read_to_string("scenarios/railcar-doors.toml").unwrap().replace(
        r#"response_latency = { mean = "1 us", sd = "300 ns" }"#,
        r#"response_latency = { mean = "1 us", sd = "300 us" }"#,
    );
    let r = run_toml(&text);
    let max = r["scheme"]["rotation_max_s"].as_f64().unwrap();
    let run = r["simulated_s"].as_f64().unwrap();
    assert!(max <= run, "rotation_max_s {max} in a {run} s run");
    assert!(r["scheme"]["rotation_mean_s"].as_f64().unwrap() <= max);
    assert_invariants(&r);
}

#[test]
fn f04_contention_totals_never_wrap() {
    let dir = tempfile::tempdir().unwrap();
    // A disable time of almost 10^6 s: transceiver times are limited to far less.
    let text = std::fs::read_to_string("scenarios/fruit-grader.toml").unwrap();
    let huge = text.replacen("disable_time = ", "disable_time = \"999999999999999999 ps\"\n# was ", 1);
    let f = put(dir.path(), "huge.toml", &huge);
    refused(&["run", &f], &["disable_time"]);
    // The longest transceiver time allowed: every node's first frame overlaps every other's.
    let long = r#"
duration = "20 ms"
[line]
length = "10 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "10 ns"
disable_time = "1 s"
receiver_delay = "10 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 16
[access]
scheme = "aloha"
ack_timeout = "1 us"
[nodes]
count = 24
first = "0 m"
spacing = "0.4 m"
prefix = "n"
traffic = { pattern = "poisson", rate = "1000/s", payload = "8 B" }
"#;
    let r = run_toml(long);
    let c = &r["contention"];
    assert!(c["events"].as_u64().unwrap() > 10, "{c}");
    assert!(c["overlap_total_s"].as_f64().unwrap() >= c["overlap_max_s"].as_f64().unwrap(), "{c}");
    assert_invariants(&r);
}

#[test]
fn f05_jam_bits_are_bounded_like_every_other_bit_count() {
    let text = std::fs::read_to_string("scenarios/greenhouse-csma.toml")
        .unwrap()
        .replace("jam_bits = 32", "jam_bits = 18446744073709");
    let dir = tempfile::tempdir().unwrap();
    let f = put(dir.path(), "s.toml", &text);
    refused(&["run", &f], &["access.jam_bits"]);
}

#[test]
fn f06_a_tdma_cycle_longer_than_the_time_range_is_refused() {
    let slots: Vec<String> = (0..20).map(|i| format!("{{ node = \"n{}\", length = \"1000000 s\" }}", i % 2)).collect();
    let text = format!(
        r#"
duration = "1 s"
[line]
length = "10 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "10 ns"
disable_time = "10 ns"
receiver_delay = "10 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 16
[access]
scheme = "tdma"
timekeeper = "tk"
guard = "1 us"
slots = [{}]
[[node]]
name = "tk"
position = "0 m"
[[node]]
name = "n0"
position = "5 m"
[[node]]
name = "n1"
position = "10 m"
"#,
        slots.join(", ")
    );
    let dir = tempfile::tempdir().unwrap();
    let f = put(dir.path(), "s.toml", &text);
    refused(&["run", &f], &["access.slots", "cycle"]);
}

#[cfg(unix)]
#[test]
fn f07_check_survives_symlink_loops_and_fifos() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::copy("scenarios/buoy-link.toml", d.join("buoy.toml")).unwrap();
    std::os::unix::fs::symlink(".", d.join("loop1")).unwrap();
    std::os::unix::fs::symlink(".", d.join("loop2")).unwrap();
    let mut c = bin();
    c.args(["check", d.to_str().unwrap(), "--duration", "20 ms"]);
    let out = bounded(c, Duration::from_secs(60)).expect("check on a folder with symlink loops finishes");
    assert!(!stderr(&out).contains("panicked"));
    // A FIFO named like a scenario is refused, not read (reading it would block for ever).
    let fifo = d.join("pipe.toml");
    assert!(Command::new("mkfifo").arg(&fifo).status().unwrap().success());
    let mut c = bin();
    c.args(["check", fifo.to_str().unwrap()]);
    let out = bounded(c, Duration::from_secs(30)).expect("check on a FIFO finishes");
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("not a regular file"), "{}", stderr(&out));
    let mut c = bin();
    c.args(["check", d.to_str().unwrap(), "--duration", "20 ms"]);
    let out = bounded(c, Duration::from_secs(60)).expect("check on a folder holding a FIFO finishes");
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("pipe.toml"), "{}", stderr(&out));
}

#[test]
fn f10_oversized_scenarios_are_refused_and_long_lines_cut_in_errors() {
    let dir = tempfile::tempdir().unwrap();
    let big = format!("name = \"{}\"\n", "x".repeat(10 << 20));
    let f = put(dir.path(), "big.toml", &big);
    let mut c = bin();
    c.args(["run", &f]);
    let out = bounded(c, Duration::from_secs(20)).expect("a 10 MB scenario is refused quickly");
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("larger than"), "{}", stderr(&out));
    assert!(out.stderr.len() < 4000, "the error echoes {} bytes", out.stderr.len());
    // A long line under the size limit: the error excerpt is cut around the column.
    let long = format!("name = \"{}\"\nduration = 5\n", "y".repeat(200_000));
    let f = put(dir.path(), "long.toml", &long);
    let out = halfwire(&["run", &f]);
    assert_eq!(out.status.code(), Some(2));
    assert!(out.stderr.len() < 4000, "the error echoes {} bytes", out.stderr.len());
    let long = format!("name = \"{}\" + 1\n", "y".repeat(200_000));
    let f = put(dir.path(), "long2.toml", &long);
    let out = halfwire(&["run", &f]);
    assert_eq!(out.status.code(), Some(2));
    assert!(out.stderr.len() < 4000, "the error echoes {} bytes", out.stderr.len());
}

#[test]
fn f11_waveforms_that_would_be_huge_are_refused_before_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let vcd = dir.path().join("w.vcd");
    let started = Instant::now();
    refused(
        &["run", "scenarios/fruit-grader.toml", "--duration", "50 ms", "--vcd", vcd.to_str().unwrap()],
        &["--window", "estimate"],
    );
    assert!(!vcd.exists());
    let svg = dir.path().join("w.svg");
    refused(&["run", "scenarios/fruit-grader.toml", "--plot-timing", svg.to_str().unwrap()], &["--window"]);
    // Both refusals come before any simulation (the whole run takes seconds).
    assert!(started.elapsed() < Duration::from_secs(5), "{:?}", started.elapsed());
    assert!(!svg.exists());
}

#[test]
fn f12_diff_counts_a_vanished_or_retyped_metric_as_a_regression() {
    let dir = tempfile::tempdir().unwrap();
    let out = halfwire(&["run", "scenarios/buoy-link.toml", "--format", "json"]);
    assert!(out.status.success());
    let base: Value = serde_json::from_slice(&out.stdout).unwrap();
    let b = put(dir.path(), "base.json", &base.to_string());
    let mut gone = base.clone();
    gone.as_object_mut().unwrap().remove("latency_s");
    let n = put(dir.path(), "gone.json", &gone.to_string());
    let out = halfwire(&["diff", &b, &n]);
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stdout));
    assert!(String::from_utf8_lossy(&out.stdout).contains("latency_s.all.p99"));
    let mut retyped = base.clone();
    retyped["throughput"]["carried"] = Value::String("fast".into());
    let n = put(dir.path(), "retyped.json", &retyped.to_string());
    assert_eq!(halfwire(&["diff", &b, &n]).status.code(), Some(1));
    let mut null = base.clone();
    null["contention"]["events"] = Value::Null;
    let n = put(dir.path(), "null.json", &null.to_string());
    assert_eq!(halfwire(&["diff", &b, &n]).status.code(), Some(1));
    // --force accepts a vanished metric (it is still listed).
    let n = put(dir.path(), "gone.json", &gone.to_string());
    let out = halfwire(&["diff", &b, &n, "--force"]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stdout));
}

/// Rows of a two-point, two-replication sweep of the buoy link.
fn sweep_rows(dir: &Path) -> (String, Vec<Value>) {
    let rows = dir.join("rows.jsonl");
    let out = halfwire(&[
        "sweep",
        "scenarios/buoy-link.toml",
        "--vary",
        "seed=1,2",
        "--replications",
        "2",
        "--duration",
        "200 ms",
        "--out",
        rows.to_str().unwrap(),
    ]);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = std::fs::read_to_string(&rows).unwrap();
    (rows.to_str().unwrap().to_owned(), text.lines().map(|l| serde_json::from_str(l).unwrap()).collect())
}

#[test]
fn f13_forged_rows_are_checked_against_the_sweep_plan() {
    let dir = tempfile::tempdir().unwrap();
    let (path, rows) = sweep_rows(dir.path());
    let resume = |forged: &Value, needle: &str| {
        let mut lines: Vec<String> = rows.iter().map(Value::to_string).collect();
        lines.push(forged.to_string());
        std::fs::write(&path, lines.join("\n") + "\n").unwrap();
        refused(
            &[
                "sweep",
                "scenarios/buoy-link.toml",
                "--vary",
                "seed=1,2",
                "--replications",
                "2",
                "--duration",
                "200 ms",
                "--resume",
                &path,
            ],
            &[needle],
        );
        refused(&["merge", &path], &[needle]);
    };
    let mut r = rows[0].clone();
    r["replications"] = serde_json::json!([7]);
    r["per_replication"][0]["replication"] = serde_json::json!(7);
    resume(&r, "replication 7");
    let mut r = rows[0].clone();
    r["point"] = serde_json::json!(5);
    resume(&r, "point 5");
    resume(&rows[1], "twice");
}

#[test]
fn f14_merge_plot_of_rows_without_parameters_is_an_error_not_a_panic() {
    let dir = tempfile::tempdir().unwrap();
    let (path, rows) = sweep_rows(dir.path());
    let stripped: Vec<String> = rows
        .iter()
        .map(|r| {
            let mut r = r.clone();
            r["params"] = serde_json::json!([]);
            r.to_string()
        })
        .collect();
    std::fs::write(&path, stripped.join("\n") + "\n").unwrap();
    let svg = dir.path().join("p.svg");
    refused(&["merge", &path, "--plot", svg.to_str().unwrap(), "--y", "throughput.carried"], &["parameter"]);
}

#[test]
fn f15_a_step_larger_than_the_range_is_an_error() {
    refused(
        &["sweep", "scenarios/buoy-link.toml", "--vary", "access.turnaround=1us..4us step 1ms"],
        &["larger than the range"],
    );
}

#[test]
fn f16_no_node_enables_before_its_previous_occupancy_is_off_plus_the_interframe_gap() {
    let text = r#"
duration = "2 ms"
seed = 4
[line]
length = "5 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
family = "mlvds"
enable_time = "5 ns"
disable_time = "8 ns"
receiver_delay = "6 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 32
interframe_gap = "20 ns"
[access]
scheme = "csma"
persistence = 1
collision_detect = true
[nodes]
count = 8
first = "0 m"
spacing = "0.7 m"
prefix = "n"
traffic = { pattern = "poisson", rate = "200000/s", payload = "16 B" }
"#;
    let dir = tempfile::tempdir().unwrap();
    let f = put(dir.path(), "cd.toml", text);
    let log = dir.path().join("events.jsonl");
    let out = halfwire(&["run", &f, "--events", log.to_str().unwrap()]);
    assert!(out.status.success(), "{}", stderr(&out));
    let mut off: std::collections::HashMap<String, u64> = Default::default();
    let mut enables = 0;
    for line in std::fs::read_to_string(&log).unwrap().lines() {
        let e: Value = serde_json::from_str(line).unwrap();
        let node = e["node"].as_str().unwrap().to_owned();
        let t = e["t_ps"].as_u64().unwrap();
        match e["event"].as_str().unwrap() {
            "driver_enable" => {
                enables += 1;
                if let Some(&b) = off.get(&node) {
                    assert!(t >= b + 20_000, "{node} enables at {t} ps, before its previous off ({b} ps) + 20 ns");
                }
            }
            "driver_off" => {
                off.insert(node, t);
            }
            _ => {}
        }
    }
    assert!(enables > 100, "only {enables} enables");
}

#[test]
fn f17_messages_given_up_are_not_counted_as_dropped_at_full_queues() {
    let text = r#"
duration = "20 ms"
[line]
length = "10 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "10 ns"
disable_time = "10 ns"
receiver_delay = "10 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "1 Mbit/s"
overhead_bits = 16
[access]
scheme = "aloha"
ack_timeout = "1 us"
max_attempts = 1
[nodes]
count = 6
first = "0 m"
spacing = "2 m"
prefix = "n"
traffic = { pattern = "poisson", rate = "4000/s", payload = "16 B" }
"#;
    let r = run_toml(text);
    let f = &r["frames"];
    assert!(f["given_up"].as_u64().unwrap() > 0, "{f}");
    assert_eq!(f["dropped"].as_u64().unwrap(), 0, "{f}");
    let warnings = r["warnings"].as_array().unwrap();
    assert!(warnings.iter().any(|w| w["code"] == "given-up"), "{warnings:?}");
    assert!(!warnings.iter().any(|w| w["code"] == "drops"), "{warnings:?}");
    assert_invariants(&r);
}

/// The report invariants, checked by the library's own checker.
fn assert_invariants(r: &Value) {
    let v = halfwire::report::invariants::violations(r);
    assert!(v.is_empty(), "report invariants violated: {v:#?}");
}
