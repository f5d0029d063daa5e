//! End-to-end tests of `halfwire cosim`: external nodes over loopback TCP.
//! Every listener binds 127.0.0.1 with port 0; every wait is bounded.

use crate::common;

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use common::halfwire;
use serde_json::{json, Value};

const DEMO: &str = "scenarios/sluice-gates-cosim.toml";

/// A running `halfwire cosim` and the port it chose.
struct Session {
    child: Child,
    port: u16,
    stderr: std::thread::JoinHandle<String>,
}

fn start(file: &str, extra: &[&str]) -> Session {
    let mut child = Command::new(common::exe())
        .args(["cosim", file, "--listen", "127.0.0.1:0"])
        .args(if extra.contains(&"--format") { &[][..] } else { &["--format", "json"][..] })
        .args(if extra.contains(&"--connect-timeout") { &[][..] } else { &["--connect-timeout", "20 s"][..] })
        .args(extra)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut err = BufReader::new(child.stderr.take().unwrap());
    let mut first = String::new();
    err.read_line(&mut first).unwrap();
    let port = first
        .split("127.0.0.1:")
        .nth(1)
        .and_then(|r| r.split(|c: char| !c.is_ascii_digit()).next())
        .and_then(|p| p.parse().ok())
        .unwrap_or_else(|| panic!("no port in {first:?}"));
    let stderr = std::thread::spawn(move || {
        let mut rest = first;
        let _ = err.read_to_string(&mut rest);
        rest
    });
    Session { child, port, stderr }
}

/// Wait for the session to end: (exit code, report, stderr).
fn end(s: Session) -> (Option<i32>, Value, String) {
    let out = s.child.wait_with_output().unwrap();
    let err = s.stderr.join().unwrap();
    let report: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!("the report is not JSON ({e}): {}\nstderr: {err}", String::from_utf8_lossy(&out.stdout))
    });
    (out.status.code(), report, err)
}

fn without_run(mut v: Value) -> Value {
    v.as_object_mut().unwrap().remove("run");
    v
}

fn reference(file: &str) -> Value {
    let out = halfwire(&["run", file, "--format", "json"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    without_run(serde_json::from_slice(&out.stdout).unwrap())
}

/// The example client, built by `cargo test` beside the test binaries.
fn example_client() -> PathBuf {
    let exe = std::env::current_exe().unwrap();
    let dir = exe.parent().unwrap().parent().unwrap();
    let p = dir.join("examples").join("cosim_slave");
    assert!(p.exists(), "{} is missing: `cargo test` builds the examples", p.display());
    p
}

fn run_example(port: u16, node: &str, extra: &[&str]) -> std::process::ExitStatus {
    Command::new(example_client()).arg(format!("127.0.0.1:{port}")).arg(node).args(extra).status().unwrap()
}

#[test]
fn an_external_slave_driven_by_the_example_client_matches_the_built_in_slave() {
    let s = start(DEMO, &[]);
    assert!(run_example(s.port, "gate02", &[]).success());
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    assert!(report["run"]["cosim_exchanges"].as_u64().unwrap() > 100);
    assert_eq!(without_run(report), reference(DEMO), "cosim and run differ");
}

#[test]
fn with_several_frames_per_poll_run_ignores_the_external_mark_and_cosim_still_matches() {
    // Two 12-byte replies per poll are still on the wire when the master's 300 µs reply timeout expires.
    let text = std::fs::read_to_string(DEMO).unwrap().replace("max_per_poll = 1", "max_per_poll = 2");
    let dir = tempfile::tempdir().unwrap();
    let marked = dir.path().join("marked.toml");
    std::fs::write(&marked, &text).unwrap();
    let plain = dir.path().join("plain.toml");
    std::fs::write(&plain, text.replace("external = true\n", "")).unwrap();
    let want = reference(plain.to_str().unwrap());
    assert_eq!(reference(marked.to_str().unwrap()), want, "run treats an external node as built in");
    let s = start(marked.to_str().unwrap(), &[]);
    assert!(run_example(s.port, "gate02", &[]).success());
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    assert_eq!(without_run(report), want);
}

#[test]
fn a_python_client_that_sleeps_at_random_gives_the_same_report_every_time() {
    let mut reports = Vec::new();
    for seed in ["1", "2"] {
        let s = start(DEMO, &[]);
        let client = Command::new("python3")
            .args(["tests/cosim/polling_slave.py", &format!("127.0.0.1:{}", s.port), "gate02"])
            .args(["--jitter-ms", "0.3", "--seed", seed])
            .status()
            .unwrap();
        assert!(client.success());
        let (code, report, err) = end(s);
        assert_eq!(code, Some(0), "{err}");
        reports.push(without_run(report));
    }
    assert_eq!(reports[0], reports[1]);
    assert_eq!(reports[0], reference(DEMO));
}

#[test]
fn a_client_that_enables_too_early_causes_the_same_contention_as_run() {
    // The client answers 100 ns after the poll ends at its receiver, inside the
    // master's 500 ns disable time; `run` gets the same rule from a per-node turnaround.
    let text =
        std::fs::read_to_string(DEMO).unwrap().replace("response_latency = \"15 us\"", "response_latency = \"0 us\"");
    let dir = tempfile::tempdir().unwrap();
    let cosim_file = dir.path().join("early.toml");
    std::fs::write(&cosim_file, &text).unwrap();
    let run_file = dir.path().join("early-run.toml");
    std::fs::write(&run_file, text.replace("external = true", "external = true\nturnaround = \"100 ns\"")).unwrap();
    let s = start(cosim_file.to_str().unwrap(), &[]);
    assert!(run_example(s.port, "gate02", &["--turnaround-ps", "100000"]).success());
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    let want = reference(run_file.to_str().unwrap());
    assert!(want["contention"]["events"].as_u64().unwrap() > 0, "the reference has contention");
    assert_eq!(report["contention"], want["contention"]);
    assert_eq!(without_run(report), want);
}

#[test]
fn a_client_that_releases_the_enable_early_cuts_its_frames_as_run_does() {
    // The demo runs at 1 Mbit/s (8N1): releasing 600 ns before the last stop
    // bit ends cuts more than half a bit; 400 ns is less than half a bit.
    let dir = tempfile::tempdir().unwrap();
    let run_file = dir.path().join("early-run.toml");
    let text = std::fs::read_to_string(DEMO).unwrap();
    for (release_ps, lost) in [("-600000", true), ("-400000", false)] {
        let ns = release_ps.parse::<i64>().unwrap() / 1000;
        std::fs::write(
            &run_file,
            text.replace(
                "payload = \"12 B\" }\n\n[[node]]\nname = \"gate03\"",
                &format!("payload = \"12 B\" }}\n[node.transceiver]\nrelease_after_stop = \"{ns} ns\"\n\n[[node]]\nname = \"gate03\""),
            ),
        )
        .unwrap();
        let s = start(DEMO, &[]);
        assert!(run_example(s.port, "gate02", &["--release-after-stop-ps", release_ps]).success());
        let (code, report, err) = end(s);
        assert_eq!(code, Some(0), "{err}");
        let want = reference(run_file.to_str().unwrap());
        assert_eq!(report["uart"]["cut_frames"].as_u64().unwrap() > 0, lost, "{}", report["uart"]);
        assert_eq!(without_run(report), want, "release {release_ps} ps");
    }
}

/// A raw test client: connect, hello, welcome.
struct Raw {
    r: BufReader<TcpStream>,
    w: TcpStream,
}

impl Raw {
    fn connect(port: u16, node: &str) -> (Raw, Value) {
        let s = TcpStream::connect(("127.0.0.1", port)).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(20))).unwrap();
        s.set_nodelay(true).unwrap();
        let mut raw = Raw { r: BufReader::new(s.try_clone().unwrap()), w: s };
        raw.send(&json!({ "type": "hello", "protocol": "halfwire-cosim/1", "node": node }).to_string());
        let welcome = raw.recv();
        (raw, welcome)
    }

    fn send(&mut self, line: &str) {
        let _ = writeln!(self.w, "{line}");
    }

    fn recv(&mut self) -> Value {
        let mut l = String::new();
        self.r.read_line(&mut l).unwrap();
        serde_json::from_str(&l).unwrap_or_else(|e| panic!("not JSON ({e}): {l:?}"))
    }

    /// Answer batches with `wait` until one holds a frame; return it.
    fn until_frame(&mut self) -> Value {
        for _ in 0..1000 {
            let b = self.recv();
            assert_eq!(b["type"], "events", "{b}");
            if b["events"].as_array().unwrap().iter().any(|e| e["event"] == "frame") {
                return b;
            }
            self.send(r#"{"type":"wait"}"#);
        }
        panic!("no frame in 1000 batches");
    }
}

/// The error message a client receives, and the session's outcome.
fn fault_case(extra: &[&str], act: impl FnOnce(&mut Raw)) -> (Value, Option<i32>, Value, String) {
    let s = start(DEMO, extra);
    let (mut c, welcome) = Raw::connect(s.port, "gate02");
    assert_eq!(welcome["type"], "welcome");
    act(&mut c);
    let error = c.recv();
    let (code, report, err) = end(s);
    (error, code, report, err)
}

fn has_fault(report: &Value, needle: &str) -> bool {
    report["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .any(|w| w["code"] == "cosim-client-fault" && w["message"].as_str().unwrap().contains(needle))
}

#[test]
fn a_malformed_line_aborts_the_run_with_a_partial_report() {
    let (error, code, report, err) = fault_case(&[], |c| {
        c.until_frame();
        c.send("this is not json");
    });
    assert_eq!(error["type"], "error");
    assert!(error["message"].as_str().unwrap().contains("malformed line"), "{error}");
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("a client fault ended the run"), "{err}");
    assert!(report["aborted_at_s"].as_f64().unwrap() > 0.0);
    assert!(has_fault(&report, "malformed line"), "{report}");
}

#[test]
fn unknown_messages_and_times_in_the_past_are_protocol_errors() {
    let (error, code, report, _) = fault_case(&[], |c| {
        c.until_frame();
        c.send(r#"{"type":"dance"}"#);
    });
    assert!(error["message"].as_str().unwrap().contains("unknown message type \"dance\""), "{error}");
    assert_eq!(code, Some(1));
    assert!(has_fault(&report, "unknown message type"));
    let (error, code, report, _) = fault_case(&[], |c| {
        let b = c.until_frame();
        let t = b["t_ps"].as_u64().unwrap();
        c.send(&json!({ "type": "timer", "at_ps": t - 1, "tag": 1 }).to_string());
        c.send(r#"{"type":"wait"}"#);
    });
    assert!(error["message"].as_str().unwrap().contains("is in the past"), "{error}");
    assert_eq!(code, Some(1));
    assert!(has_fault(&report, "is in the past"));
    // Two transmissions at once from one driver.
    let (error, code, _, _) = fault_case(&[], |c| {
        let b = c.until_frame();
        let t = b["t_ps"].as_u64().unwrap() + 40_000_000;
        let tx =
            json!({ "type": "transmit", "at_ps": t, "frames": [{ "kind": "empty-reply", "bits": 16 }] }).to_string();
        c.send(&tx);
        c.send(&tx);
        c.send(r#"{"type":"wait"}"#);
    });
    assert!(error["message"].as_str().unwrap().contains("keeps its enable until"), "{error}");
    assert_eq!(code, Some(1));
}

#[test]
fn a_client_that_disconnects_goes_quiet_under_silence_and_the_master_times_out() {
    let s = start(DEMO, &["--on-client-fault", "silence"]);
    let (mut c, _) = Raw::connect(s.port, "gate02");
    c.until_frame();
    drop(c);
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("went quiet"), "{err}");
    assert!(has_fault(&report, "closed the connection"), "{report}");
    assert!(report.get("aborted_at_s").is_none());
    assert!(report["scheme"]["timeouts"].as_u64().unwrap() > 100, "the master times out on gate02");
}

#[test]
fn a_client_that_never_answers_times_out() {
    let (error, code, report, _) = fault_case(&["--answer-timeout", "300 ms"], |c| {
        c.recv(); // the start batch, never answered
    });
    assert!(error["message"].as_str().unwrap().contains("no answer within 0.3 s"), "{error}");
    assert_eq!(code, Some(1));
    assert!(has_fault(&report, "no answer within"));
}

#[test]
fn bad_hellos_are_refused_and_reported() {
    // Two external nodes, under silence: the listener stays open until both have said hello.
    let text = std::fs::read_to_string(DEMO)
        .unwrap()
        .replace("name = \"gate03\"\nposition = \"45 m\"", "name = \"gate03\"\nposition = \"45 m\"\nexternal = true");
    let dir = tempfile::tempdir().unwrap();
    let two = dir.path().join("two.toml");
    std::fs::write(&two, text).unwrap();
    let s = start(two.to_str().unwrap(), &["--on-client-fault", "silence"]);
    let (_, unknown) = Raw::connect(s.port, "gate99");
    assert_eq!(unknown["type"], "error");
    assert!(unknown["message"].as_str().unwrap().contains("no node named \"gate99\""), "{unknown}");
    let (first, welcome) = Raw::connect(s.port, "gate02");
    assert_eq!(welcome["type"], "welcome");
    let (_, duplicate) = Raw::connect(s.port, "gate02");
    assert!(duplicate["message"].as_str().unwrap().contains("already connected"), "{duplicate}");
    drop(first); // gate02 then goes quiet at the start
    assert!(run_example(s.port, "gate03", &[]).success());
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    for needle in ["no node named \"gate99\"", "already connected", "closed the connection"] {
        assert!(has_fault(&report, needle), "{needle}: {report}");
    }
    // A hello naming a node that is not external, under abort: exit 1 with a report.
    let s = start(DEMO, &[]);
    let (_, refused) = Raw::connect(s.port, "gate01");
    assert!(refused["message"].as_str().unwrap().contains("is not external"), "{refused}");
    let (code, report, _) = end(s);
    assert_eq!(code, Some(1));
    assert!(has_fault(&report, "is not external"));
}

#[test]
fn a_non_loopback_listen_address_needs_allow_remote() {
    let out = halfwire(&["cosim", DEMO, "--listen", "0.0.0.0:0"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("refusing a non-loopback address") && err.contains("--allow-remote"), "{err}");
    let out = halfwire(&["cosim", "scenarios/fruit-grader.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no external nodes"));
}

#[test]
fn ctrl_c_writes_the_partial_report_and_says_bye() {
    let s = start(DEMO, &[]);
    let (mut c, _) = Raw::connect(s.port, "gate02");
    c.until_frame();
    // SIGINT, as Ctrl-C at a terminal sends.
    assert!(Command::new("kill").args(["-INT", &s.child.id().to_string()]).status().unwrap().success());
    let mut bye = None;
    for _ in 0..100_000 {
        c.send(r#"{"type":"wait"}"#);
        let m = c.recv();
        if m["type"] == "bye" {
            bye = Some(m);
            break;
        }
    }
    let bye = bye.expect("a bye after Ctrl-C");
    assert_eq!(bye["reason"], "interrupted");
    let (code, report, err) = end(s);
    assert_eq!(code, Some(130), "{err}");
    assert!(report["aborted_at_s"].as_f64().is_some(), "{report}");
}

#[test]
fn every_message_of_a_session_is_valid_against_the_protocol_schema() {
    let schema: Value =
        serde_json::from_str(&std::fs::read_to_string("schemas/halfwire-cosim-1.schema.json").unwrap()).unwrap();
    let validator = jsonschema::validator_for(&schema).unwrap();
    let valid = |m: &Value| {
        let errors: Vec<String> = validator.iter_errors(m).map(|e| e.to_string()).collect();
        assert!(errors.is_empty(), "{m}: {errors:?}");
    };
    let s = start(DEMO, &[]);
    let hello = json!({ "type": "hello", "protocol": "halfwire-cosim/1", "node": "gate02" });
    valid(&hello);
    let (mut c, welcome) = Raw::connect(s.port, "gate02");
    valid(&welcome);
    let watch = json!({ "type": "watch_line", "on": true });
    valid(&watch);
    c.send(&watch.to_string());
    let mut seen = std::collections::BTreeSet::new();
    loop {
        let m = c.recv();
        valid(&m);
        if m["type"] == "bye" {
            break;
        }
        for e in m["events"].as_array().unwrap() {
            seen.insert(e["event"].as_str().unwrap().to_owned());
        }
        // Answer polls with an empty reply, 30 µs later (the scenario's own turnaround and latency add to 35 µs).
        let t = m["t_ps"].as_u64().unwrap();
        if m["events"].as_array().unwrap().iter().any(|e| e["kind"] == "poll")
            && t >= m["busy_until_ps"].as_u64().unwrap()
        {
            let tx = json!({ "type": "transmit", "at_ps": t + 30_000_000, "frames": [{ "kind": "empty-reply", "bits": 16, "payload_hex": "beef" }] });
            valid(&tx);
            c.send(&tx.to_string());
            let timer = json!({ "type": "timer", "at_ps": t + 1, "tag": 7 });
            valid(&timer);
            c.send(&timer.to_string());
        }
        c.send(r#"{"type":"wait"}"#);
    }
    for kind in ["start", "frame", "timer", "message", "line"] {
        assert!(seen.contains(kind), "no {kind} event in the session: {seen:?}");
    }
    let (code, _, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
}

#[test]
fn a_line_longer_than_the_limit_is_a_client_fault_not_unbounded_memory() {
    // 1.06 MiB without a newline: the line limit is 1 MiB.
    let (error, code, report, err) = fault_case(&[], |c| {
        c.until_frame();
        let chunk = vec![b'x'; 64 << 10];
        for _ in 0..17 {
            if c.w.write_all(&chunk).is_err() {
                break;
            }
        }
    });
    assert!(error["message"].as_str().unwrap().contains("longer than 1 MiB"), "{error}");
    assert_eq!(code, Some(1), "{err}");
    assert!(has_fault(&report, "longer than 1 MiB"), "{report}");
}

#[test]
fn a_session_that_stalls_exits_2_and_says_so_like_run() {
    // The client answers every batch with a timer at the same instant: time never moves on.
    let s = start(DEMO, &[]);
    let (mut c, _) = Raw::connect(s.port, "gate02");
    loop {
        let mut l = String::new();
        if c.r.read_line(&mut l).unwrap_or(0) == 0 {
            break;
        }
        let m: Value = serde_json::from_str(&l).unwrap();
        if m["type"] != "events" {
            break;
        }
        let t = m["t_ps"].as_u64().unwrap();
        c.send(&json!({ "type": "timer", "at_ps": t, "tag": 1 }).to_string());
        c.send(r#"{"type":"wait"}"#);
    }
    let (code, report, err) = end(s);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("stopped advancing"), "{err}");
    assert!(report["stalled_at_s"].as_f64().is_some(), "{report}");
}

#[test]
fn a_session_without_its_client_reports_a_consistent_partial_run() {
    let s = start(DEMO, &["--on-client-fault", "silence", "--connect-timeout", "1 s", "--format", "text"]);
    let out = s.child.wait_with_output().unwrap();
    let err = s.stderr.join().unwrap();
    assert_eq!(out.status.code(), Some(0), "{err}");
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.starts_with("halfwire cosim:"), "{text}");
    let s = start(DEMO, &["--on-client-fault", "silence", "--connect-timeout", "1 s"]);
    let (code, report, err) = end(s);
    assert_eq!(code, Some(0), "{err}");
    let u = &report["utilization"];
    let sum: f64 = ["payload", "overhead", "gaps", "idle", "wasted"].iter().map(|k| u[k].as_f64().unwrap()).sum();
    assert!((sum - 1.0).abs() < 1e-9, "utilization sums to {sum}: {u}");
    for w in report["warnings"].as_array().unwrap() {
        assert!(!w["code"].as_str().unwrap().contains('_'), "warning codes use hyphens: {w}");
    }
    let v = halfwire::report::invariants::violations(&report);
    assert!(v.is_empty(), "{v:#?}");
    // Under abort (the default) the run ends before it starts: an empty window, still consistent.
    let s = start(DEMO, &["--connect-timeout", "1 s"]);
    let (code, report, err) = end(s);
    assert_eq!(code, Some(1), "{err}");
    assert_eq!(report["simulated_s"].as_f64(), Some(0.0), "{report}");
    let v = halfwire::report::invariants::violations(&report);
    assert!(v.is_empty(), "{v:#?}");
    for k in ["payload", "overhead", "gaps", "idle", "wasted"] {
        assert_eq!(report["utilization"][k].as_f64(), Some(0.0), "{report}");
    }
}
