//! The regression workflow through the built binary: `check` with
//! expectations and JUnit XML, and `diff` with tolerances.

use crate::common;

use common::halfwire;
use serde_json::Value;

fn write(dir: &std::path::Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_owned()
}

fn fruit_with(expect: &str) -> String {
    let base = std::fs::read_to_string("scenarios/fruit-grader.toml").unwrap();
    let head = base.split("\n# Requirements").next().unwrap().to_owned();
    format!("{head}\n{expect}")
}

#[test]
fn check_passes_and_fails_on_a_tightened_bound() {
    let dir = tempfile::tempdir().unwrap();
    // The demo's p99 latency is about 66 µs: a 150 µs bound holds, 64 µs does not.
    let ok = write(
        dir.path(),
        "ok.toml",
        &fruit_with("[[expect]]\nmetric = \"latency_s.all.p99\"\nop = \"<=\"\nvalue = \"150 us\"\n"),
    );
    let out = halfwire(&["check", &ok]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stdout));
    let tight = write(
        dir.path(),
        "tight.toml",
        &fruit_with("[[expect]]\nmetric = \"latency_s.all.p99\"\nop = \"<=\"\nvalue = \"64 us\"\nmessage = \"grading deadline\"\n"),
    );
    let out = halfwire(&["check", &tight]);
    assert_eq!(out.status.code(), Some(1));
    let text = String::from_utf8_lossy(&out.stdout);
    let run: serde_json::Value =
        serde_json::from_slice(&halfwire(&["run", "scenarios/fruit-grader.toml", "--format", "json"]).stdout).unwrap();
    let p99 = halfwire::check::show("latency_s.all.p99", run["latency_s"]["all"]["p99"].as_f64().unwrap());
    assert!(
        text.contains(&format!("FAIL  latency_s.all.p99 = {p99}  (required <= 64 µs)  grading deadline")),
        "{text}"
    );
    assert!(text.contains("1 failed"));
}

#[test]
fn junit_xml_has_the_right_counts() {
    let dir = tempfile::tempdir().unwrap();
    let a = write(
        dir.path(),
        "a.toml",
        &fruit_with("[[expect]]\nmetric = \"contention.events\"\nop = \"==\"\nvalue = 0\n[[expect]]\nmetric = \"latency_s.all.p99\"\nop = \"<\"\nvalue = \"1 us\"\n"),
    );
    let junit = dir.path().join("out.xml");
    let out = halfwire(&["check", &a, "scenarios/railcar-doors.toml", "--junit", junit.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1));
    // Parsed by an independent XML parser (roxmltree), not by string search.
    let text = std::fs::read_to_string(&junit).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "testsuites");
    assert_eq!(root.attribute("tests"), Some("5"));
    assert_eq!(root.attribute("failures"), Some("1"));
    let suites: Vec<_> = root.children().filter(|n| n.has_tag_name("testsuite")).collect();
    assert_eq!(suites.len(), 2);
    assert_eq!(suites[0].attribute("tests"), Some("2"));
    assert_eq!(suites[0].attribute("failures"), Some("1"));
    let failures = doc.descendants().filter(|n| n.has_tag_name("failure")).count();
    assert_eq!(failures, 1);
    let cases = doc.descendants().filter(|n| n.has_tag_name("testcase")).count();
    assert_eq!(cases, 5);
}

#[test]
fn check_is_the_same_on_one_or_two_jobs() {
    let strip = |out: std::process::Output| {
        let mut v: Value = serde_json::from_slice(&out.stdout).unwrap();
        for s in v["scenarios"].as_array_mut().unwrap() {
            s.as_object_mut().unwrap().remove("wall_s");
        }
        v
    };
    let one = strip(halfwire(&["check", "scenarios", "--format", "json", "--jobs", "1"]));
    let two = strip(halfwire(&["check", "scenarios", "--format", "json", "--jobs", "2"]));
    assert_eq!(one, two);
    assert_eq!(one["failed"], 0);
}

#[test]
fn diff_with_directions_and_tolerances() {
    let dir = tempfile::tempdir().unwrap();
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--format", "json"]);
    let base: Value = serde_json::from_slice(&out.stdout).unwrap();
    let b = write(dir.path(), "base.json", &serde_json::to_string(&base).unwrap());
    // Identical: exit 0, nothing changed.
    let same = halfwire(&["diff", &b, &b]);
    assert_eq!(same.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&same.stdout).contains("no metric changed"));
    // p99 10 % worse: a regression at 2 %, fine at 20 %.
    let mut worse = base.clone();
    let p99 = worse["latency_s"]["all"]["p99"].as_f64().unwrap();
    worse["latency_s"]["all"]["p99"] = (p99 * 1.1).into();
    let w = write(dir.path(), "worse.json", &serde_json::to_string(&worse).unwrap());
    assert_eq!(halfwire(&["diff", &b, &w, "--tolerance", "2%"]).status.code(), Some(1));
    assert_eq!(halfwire(&["diff", &b, &w, "--tolerance", "20%"]).status.code(), Some(0));
    assert_eq!(
        halfwire(&["diff", &b, &w, "--tolerance", "2%", "--tolerance", "latency_s.all.p99=15%"]).status.code(),
        Some(0)
    );
    // Throughput 10 % higher is an improvement, 10 % lower a regression.
    let mut more = base.clone();
    let pay = more["throughput"]["payload_bit_s"].as_f64().unwrap();
    more["throughput"]["payload_bit_s"] = (pay * 1.1).into();
    let m = write(dir.path(), "more.json", &serde_json::to_string(&more).unwrap());
    let out = halfwire(&["diff", &b, &m, "--tolerance", "2%"]);
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stdout).contains("improvement"));
    let out = halfwire(&["diff", &m, &b, "--tolerance", "2%"]);
    assert_eq!(out.status.code(), Some(1));
}

#[test]
fn bad_regression_inputs() {
    let dir = tempfile::tempdir().unwrap();
    // An unknown metric path, with a hint.
    let f = write(
        dir.path(),
        "u.toml",
        &fruit_with("[[expect]]\nmetric = \"latency_s.all.p98\"\nop = \"<=\"\nvalue = \"1 ms\"\n"),
    );
    let out = halfwire(&["check", &f]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        err.contains("u.toml:")
            && err.contains("expect[0].metric")
            && err.contains("did you mean \"latency_s.all.p99\"?"),
        "{err}"
    );
    // A unit that does not fit the metric.
    let f = write(
        dir.path(),
        "m.toml",
        &fruit_with("[[expect]]\nmetric = \"latency_s.all.p99\"\nop = \"<=\"\nvalue = \"40 Mbit/s\"\n"),
    );
    let out = halfwire(&["check", &f]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(err.contains("expect[0].value") && err.contains("a time"), "{err}");
    // An empty folder.
    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    let out = halfwire(&["check", empty.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no scenario files"));
    // A report of another schema version.
    let out = halfwire(&["run", "scenarios/buoy-link.toml", "--format", "json", "--duration", "60 ms"]);
    let mut v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let good = write(dir.path(), "good.json", &serde_json::to_string(&v).unwrap());
    v["schema"] = "halfwire-report/99".into();
    let other = write(dir.path(), "other.json", &serde_json::to_string(&v).unwrap());
    let out = halfwire(&["diff", &good, &other]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("halfwire-report/99"));
    // Different scenarios need --force.
    let out = halfwire(&["run", "scenarios/fruit-grader.toml", "--format", "json", "--duration", "5 ms"]);
    let fruit = write(dir.path(), "fruit.json", &String::from_utf8_lossy(&out.stdout));
    assert_eq!(halfwire(&["diff", &good, &fruit]).status.code(), Some(2));
    assert_ne!(halfwire(&["diff", &good, &fruit, "--force"]).status.code(), Some(2));
}

#[test]
fn replications_give_intervals_that_shrink_with_n() {
    let run = |n: &str| {
        let out = halfwire(&[
            "run",
            "scenarios/fruit-grader.toml",
            "--format",
            "json",
            "--duration",
            "10 ms",
            "--replications",
            n,
        ]);
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        let v: Value = serde_json::from_slice(&out.stdout).unwrap();
        let m = v["replications"]["metrics"]["latency_s.all.mean"].clone();
        (m["ci95_high"].as_f64().unwrap() - m["mean"].as_f64().unwrap(), v)
    };
    let (h5, v5) = run("5");
    let (h20, _) = run("20");
    // Expected ratio ≈ (t(0.975;19)/√20)/(t(0.975;4)/√5) = 0.38 (Student t tables).
    let ratio = h20 / h5;
    assert!(ratio > 0.15 && ratio < 0.7, "half-width ratio {ratio}");
    assert_eq!(v5["replications"]["count"], 5);
    // Reproducible: the same replications give the same intervals.
    let (again, _) = run("5");
    assert_eq!(h5, again);
}

#[test]
fn confidence_expectations_hold_at_the_interval_limit() {
    let dir = tempfile::tempdir().unwrap();
    // The mean latency over 10 replications of 10 ms is about 23 µs with a
    // half-width near 0.7 µs: a 23.5 µs bound holds on the mean; at the
    // upper confidence limit it does not.
    let body = |confidence: bool| {
        fruit_with(&format!(
            "[[expect]]\nmetric = \"latency_s.all.mean\"\nop = \"<=\"\nvalue = \"23.5 us\"\nconfidence = {confidence}\n"
        ))
        .replace("duration = \"50 ms\"", "duration = \"10 ms\"")
    };
    let plain = write(dir.path(), "plain.toml", &body(false));
    let strict = write(dir.path(), "strict.toml", &body(true));
    let a = halfwire(&["check", &plain, "--replications", "10", "--format", "json"]);
    let b = halfwire(&["check", &strict, "--replications", "10", "--format", "json"]);
    let va: Value = serde_json::from_slice(&a.stdout).unwrap();
    let vb: Value = serde_json::from_slice(&b.stdout).unwrap();
    let mean = va["scenarios"][0]["outcomes"][0]["measured"].as_f64().unwrap();
    let limit = vb["scenarios"][0]["outcomes"][0]["limit"].as_f64().unwrap();
    assert!(mean <= 23.5e-6 && limit > 23.5e-6, "mean {mean}, upper limit {limit}");
    assert_eq!(a.status.code(), Some(0));
    assert_eq!(b.status.code(), Some(1));
    // Without replications there is no interval: the expectation is refused, not judged on one run.
    let c = halfwire(&["check", &strict]);
    assert_eq!(c.status.code(), Some(2));
    let err = String::from_utf8_lossy(&c.stderr);
    assert!(
        err.contains("strict.toml:") && err.contains("confidence = true") && err.contains("--replications"),
        "{err}"
    );
}

#[test]
fn reports_validate_against_the_versioned_schema() {
    // Validated with an independent JSON Schema implementation (the jsonschema crate).
    let schema: Value =
        serde_json::from_str(&std::fs::read_to_string("schemas/halfwire-report-1.schema.json").unwrap()).unwrap();
    let validator = jsonschema::validator_for(&schema).expect("the schema itself is valid");
    let mut checked = 0;
    for entry in std::fs::read_dir("scenarios").unwrap() {
        let path = entry.unwrap().path();
        if path.extension().and_then(|e| e.to_str()) != Some("toml") {
            continue;
        }
        let out = halfwire(&["run", path.to_str().unwrap(), "--format", "json"]);
        let report: Value = serde_json::from_slice(&out.stdout).unwrap();
        let errors: Vec<String> =
            validator.iter_errors(&report).map(|e| format!("{} at {}", e, e.instance_path)).collect();
        assert!(errors.is_empty(), "{}: {errors:?}", path.display());
        checked += 1;
    }
    assert!(checked >= 8);
    // Replicated reports too; and a report that breaks the contract fails.
    let out = halfwire(&[
        "run",
        "scenarios/buoy-link.toml",
        "--format",
        "json",
        "--duration",
        "60 ms",
        "--replications",
        "3",
    ]);
    let mut report: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(validator.is_valid(&report));
    report["utilization"]["idle"] = 1.5.into();
    assert!(!validator.is_valid(&report));
    // A bus of more than 256 nodes: per-node percentiles to 2 digits, said
    // in the JSON (valid against the schema) and in the text.
    let big = [
        "run",
        "benches/reference-polling.toml",
        "--set",
        "nodes.count=300",
        "--set",
        "line.length=\"31 m\"",
        "--set",
        "nodes.traffic.rate=\"20/s\"",
        "--duration",
        "5 ms",
    ];
    let out = halfwire(&[&big[..], &["--format", "json"]].concat());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let report: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(report["latency_s"]["per_source_digits"], 2);
    assert!(validator.is_valid(&report));
    let text = String::from_utf8(halfwire(&big).stdout).unwrap();
    assert!(text.contains("per-node percentiles to 2 significant digits on a bus of more than 256 nodes"), "{text}");
}
