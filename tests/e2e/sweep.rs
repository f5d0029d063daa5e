//! End-to-end tests of `halfwire sweep` and `halfwire merge` through the built binary.

use crate::common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::halfwire;
use serde_json::Value;

const DEMO: &str = "scenarios/railcar-doors.toml";
const COUNT: &str = "--vary=nodes.count=4,6,8";
const TURN: &str = "--vary=access.turnaround=1us..4us step 1us";

fn ok(out: &std::process::Output) -> String {
    assert!(out.status.success(), "status {:?}, stderr: {}", out.status, String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stderr.clone()).unwrap()
}

/// The complete rows of a file (newline-terminated lines) and whether a
/// partial last line follows them, as SIGKILL can leave in the middle of a write.
fn complete_rows(path: &Path) -> (Vec<Value>, bool) {
    let text = std::fs::read_to_string(path).unwrap_or_default();
    let complete = &text[..text.rfind('\n').map_or(0, |i| i + 1)];
    let rows = complete
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("a complete row does not parse ({e}): {l:.200}")))
        .collect();
    (rows, complete.len() < text.len())
}

fn rows(path: &Path) -> Vec<Value> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("a row does not parse ({e}): {l:.200}")))
        .collect()
}

/// A row without its wall-clock fields, the only machine-dependent ones.
fn without_wall(mut v: Value) -> Value {
    let m = v.as_object_mut().unwrap();
    m.remove("wall_s");
    m["report"].as_object_mut().unwrap().remove("run");
    v
}

fn merged(files: &[&Path], out: &Path) -> Vec<Value> {
    let mut args = vec!["merge".to_owned()];
    args.extend(files.iter().map(|f| f.display().to_string()));
    args.extend(["--out".to_owned(), out.display().to_string()]);
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(&halfwire(&a));
    rows(out).into_iter().map(without_wall).collect()
}

fn fails(args: &[&str], needle: &str) {
    let out = halfwire(args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{args:?} should exit 2; stderr: {err}");
    assert!(err.contains(needle), "{args:?}: stderr lacks {needle:?}: {err}");
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn a_twelve_point_grid_gives_twelve_rows_with_their_parameters() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("rows.jsonl");
    let csv = dir.path().join("rows.csv");
    let o = out.to_str().unwrap();
    ok(&halfwire(&["sweep", DEMO, COUNT, TURN, "--out", o, "--csv", csv.to_str().unwrap()]));
    let mut rows = rows(&out);
    assert_eq!(rows.len(), 12);
    rows.sort_by_key(|r| r["point"].as_u64());
    for (i, r) in rows.iter().enumerate() {
        assert_eq!(r["schema"], "halfwire-sweep/1");
        assert_eq!(r["point"], i as u64);
        assert_eq!(r["points"], 12);
        let count = [4, 6, 8][i / 4];
        let turn_us = (i % 4 + 1) as f64;
        let p = &r["params"];
        assert_eq!(p[0]["key"], "nodes.count");
        assert_eq!(p[0]["value"], count);
        assert!(p[0].get("unit").is_none(), "a count has no unit");
        assert_eq!(p[1]["key"], "access.turnaround");
        assert_eq!(p[1]["value"], format!("{turn_us} us"));
        assert_eq!(p[1]["unit"], "s");
        assert!((p[1]["si"].as_f64().unwrap() - turn_us * 1e-6).abs() < 1e-18);
        // The point really ran with its values: one latency entry per door,
        assert_eq!(r["report"]["latency_s"]["nodes"].as_object().unwrap().len(), count);
        // and the pooled metrics of one run are exactly its report's figures.
        for (metric, pointer) in [
            ("latency_s.all.p99", "/latency_s/all/p99"),
            ("latency_s.all.mean", "/latency_s/all/mean"),
            ("throughput.carried", "/throughput/carried"),
            ("throughput.payload_bit_s", "/throughput/payload_bit_s"),
            ("frames.delivered", "/frames/delivered"),
            ("utilization.idle", "/utilization/idle"),
        ] {
            assert_eq!(r["metrics"][metric].as_f64(), r["report"].pointer(pointer).unwrap().as_f64(), "{metric}");
        }
    }
    // A token passes through every node: each extra microsecond of turnaround
    // per hop lengthens the rotation, so the mean latency rises along the axis.
    for c in 0..3 {
        let means: Vec<f64> =
            (0..4).map(|k| rows[c * 4 + k]["metrics"]["latency_s.all.mean"].as_f64().unwrap()).collect();
        assert!(means.windows(2).all(|w| w[0] < w[1]), "{means:?}");
    }
    let csv = std::fs::read_to_string(csv).unwrap();
    assert_eq!(csv.lines().count(), 13, "a header and 12 lines");
    let head = csv.lines().next().unwrap();
    assert!(head.starts_with("point,replication,"), "{head}");
    assert!(head.contains("access.turnaround (s)"), "{head}");
    assert!(head.contains("latency_s.all.p99 (s)"), "{head}");
    assert!(!head.contains("[1]") && !head.contains("(1)"), "no unit for plain counts: {head}");
}

#[test]
fn three_shards_merged_equal_the_single_process_sweep_whatever_jobs() {
    let dir = tempfile::tempdir().unwrap();
    let path = |n: &str| dir.path().join(n);
    let reps = ["--replications", "2"];
    let whole = path("whole.jsonl");
    ok(&halfwire(
        &[&["sweep", DEMO, COUNT, TURN, "--jobs", "1", "--out", whole.to_str().unwrap()], &reps[..]].concat(),
    ));
    let two = path("two.jsonl");
    ok(&halfwire(&[&["sweep", DEMO, COUNT, TURN, "--jobs", "2", "--out", two.to_str().unwrap()], &reps[..]].concat()));
    let mut shards = Vec::new();
    for i in 0..3 {
        let f = path(&format!("shard{i}.jsonl"));
        let s = format!("{i}/3");
        let err = ok(&halfwire(
            &[&["sweep", DEMO, COUNT, TURN, "--shard", &s, "--out", f.to_str().unwrap()], &reps[..]].concat(),
        ));
        assert!(err.contains(&format!("shard {i}/3 (from --shard)")), "{err}");
        assert_eq!(rows(&f).len(), 8, "24 runs in 3 shards");
        shards.push(f);
    }
    let a = merged(&[&whole], &path("m-whole.jsonl"));
    let b = merged(&shards.iter().map(|p| p.as_path()).collect::<Vec<_>>(), &path("m-shards.jsonl"));
    let c = merged(&[&two], &path("m-two.jsonl"));
    assert_eq!(a.len(), 12);
    assert_eq!(a, b, "sharded and merged = single process, field by field");
    assert_eq!(a, c, "--jobs 2 = --jobs 1");
    for r in &a {
        assert_eq!(r["replications"], serde_json::json!([0, 1]));
        // Counters sum exactly across replications.
        let per: f64 = r["per_replication"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["metrics"]["frames.delivered"].as_f64().unwrap())
            .sum();
        assert_eq!(r["metrics"]["frames.delivered"].as_f64().unwrap(), per);
        assert!(
            r["ci95"]["latency_s.all.mean"]["ci95_low"].as_f64().unwrap()
                <= r["ci95"]["latency_s.all.mean"]["ci95_high"].as_f64().unwrap()
        );
    }
    // Merging in stages gives the same result as merging at once.
    let staged = path("staged.jsonl");
    ok(&halfwire(&[
        "merge",
        shards[0].to_str().unwrap(),
        shards[1].to_str().unwrap(),
        "--out",
        staged.to_str().unwrap(),
    ]));
    assert_eq!(merged(&[&staged, &shards[2]], &path("m-staged.jsonl")), a);
}

#[test]
fn the_shard_comes_from_a_slurm_array_or_an_indexed_job() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("task.jsonl");
    let cmd = |envs: &[(&str, &str)], extra: &[&str]| {
        let mut c = Command::new(common::exe());
        c.args(["sweep", DEMO, COUNT, TURN, "--out", f.to_str().unwrap()]).args(extra);
        for (k, v) in envs {
            c.env(k, v);
        }
        c.output().unwrap()
    };
    // `sbatch --array=1-3` sets these (sbatch manual, OUTPUT ENVIRONMENT VARIABLES).
    let out = cmd(&[("SLURM_ARRAY_TASK_ID", "2"), ("SLURM_ARRAY_TASK_MIN", "1"), ("SLURM_ARRAY_TASK_MAX", "3")], &[]);
    let err = ok(&out);
    assert!(err.contains("shard 1/3 (from the Slurm job array"), "{err}");
    let points: Vec<u64> = rows(&f).iter().map(|r| r["point"].as_u64().unwrap()).collect();
    let mut sorted = points.clone();
    sorted.sort();
    assert_eq!(sorted, [1, 4, 7, 10]);
    std::fs::remove_file(&f).unwrap();
    let out = cmd(&[("JOB_COMPLETION_INDEX", "0")], &["--shard-count", "4"]);
    assert!(ok(&out).contains("Kubernetes Indexed Job"));
    assert_eq!(rows(&f).len(), 3);
    let out = cmd(&[("JOB_COMPLETION_INDEX", "0")], &[]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--shard-count"));
}

#[test]
fn a_sweep_killed_mid_way_keeps_its_rows_and_resumes_to_the_same_result() {
    let dir = tempfile::tempdir().unwrap();
    let rows_file = dir.path().join("rows.jsonl");
    // Long enough runs (about 0.15 s each) that the kill lands mid-sweep.
    let args = ["sweep", DEMO, "--vary=nodes.count=4,5,6,7,8", "--duration", "4 s", "--jobs", "1"];
    let mut child = Command::new(common::exe())
        .args(args)
        .args(["--out", rows_file.to_str().unwrap()])
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    while complete_rows(&rows_file).0.len() < 2 && Instant::now() < deadline {
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    // Every completed row is intact; a row being written at the kill may be cut short.
    let (kept, _partial) = complete_rows(&rows_file);
    assert!((2..5).contains(&kept.len()), "killed mid-way: {} rows", kept.len());
    // A crash in the middle of writing leaves a partial last line: resume drops it.
    let mut text = std::fs::read_to_string(&rows_file).unwrap();
    text.push_str("{\"schema\":\"halfwire-sweep/1\",\"sweep\":\"");
    std::fs::write(&rows_file, text).unwrap();
    let err = ok(&halfwire(&[&args[..], &["--resume", rows_file.to_str().unwrap()]].concat()));
    assert!(err.contains("partial last line"), "{err}");
    assert!(err.contains(&format!("({} already done)", kept.len())), "{err}");
    let resumed = rows(&rows_file);
    assert_eq!(resumed.len(), 5);
    let straight = dir.path().join("straight.jsonl");
    ok(&halfwire(&[&args[..], &["--out", straight.to_str().unwrap()]].concat()));
    let a = merged(&[&rows_file], &dir.path().join("a.jsonl"));
    let b = merged(&[&straight], &dir.path().join("b.jsonl"));
    assert_eq!(a, b);
    // Resuming a finished sweep runs nothing.
    let err = ok(&halfwire(&[&args[..], &["--resume", rows_file.to_str().unwrap()]].concat()));
    assert!(err.contains("0 runs in this share (5 already done)"), "{err}");
}

#[test]
fn bad_input_is_an_error_with_exit_status_2() {
    fails(&["sweep", DEMO, "--vary=access.turnarround=1us,2us"], "--vary access.turnarround: not a scenario key");
    fails(&["sweep", DEMO, "--vary=access.turnaround=10ns..60ns step 5V"], "is a voltage, but a time is expected");
    fails(&["sweep", DEMO, "--vary=access.turnaround=60ns..10ns step 5ns"], "the range is empty");
    fails(&["sweep", DEMO, COUNT, "--shard", "3/3"], "out of range: shards are numbered 0 to 2");
    fails(&["sweep", DEMO, "--vary=nodes.count=4,9"], "sweep point 1 (nodes.count=9)");
    fails(&["sweep", DEMO, COUNT, TURN, "--zip"], "--zip pairs values one to one");
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a.jsonl");
    let b = dir.path().join("b.jsonl");
    ok(&halfwire(&["sweep", DEMO, COUNT, "--out", a.to_str().unwrap()]));
    ok(&halfwire(&["sweep", DEMO, "--vary=nodes.count=4,5", "--out", b.to_str().unwrap()]));
    fails(&["merge", a.to_str().unwrap(), b.to_str().unwrap()], "are from different sweeps");
    fails(&["sweep", DEMO, "--vary=nodes.count=4,5", "--resume", a.to_str().unwrap()], "holds rows of another sweep");
    fails(
        &["sweep", DEMO, COUNT, "--out", a.to_str().unwrap()],
        "already holds rows; continue that sweep with --resume",
    );
    std::fs::write(&b, "not json\n").unwrap();
    fails(&["merge", b.to_str().unwrap()], "b.jsonl:1:");
}

#[test]
fn ctrl_c_stops_launching_and_leaves_complete_rows() {
    let dir = tempfile::tempdir().unwrap();
    let rows_file = dir.path().join("rows.jsonl");
    let args = ["sweep", DEMO, "--vary=nodes.count=4,5,6,7,8", "--duration", "4 s", "--jobs", "1"];
    let child = Command::new(common::exe())
        .args(args)
        .args(["--out", rows_file.to_str().unwrap()])
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    while complete_rows(&rows_file).0.is_empty() && Instant::now() < deadline {
        std::thread::sleep(Duration::from_millis(5));
    }
    // SIGINT, as Ctrl-C at a terminal sends.
    let status = Command::new("kill").args(["-INT", &child.id().to_string()]).status().unwrap();
    assert!(status.success());
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{err}");
    assert!(err.contains("interrupted: no new runs"), "{err}");
    assert!(err.contains("continue with --resume"), "{err}");
    let kept = rows(&rows_file);
    assert!((1..5).contains(&kept.len()), "{} rows", kept.len());
    let err = ok(&halfwire(&[&args[..], &["--resume", rows_file.to_str().unwrap()]].concat()));
    assert!(err.contains(&format!("({} already done)", kept.len())), "{err}");
    assert_eq!(rows(&rows_file).len(), 5);
}
