//! Scenario mutation: the demo scenarios, mutated at random (keys deleted,
//! duplicated and swapped, units swapped, extreme and tiny numbers, huge
//! counts, long strings, other choices), each driven through parse → budget
//! → a short run → both renderers in this process, where the test profile
//! checks every integer operation for overflow. No mutant may panic, and
//! every report must obey the report invariants
//! (`halfwire::report::invariants`). The same invariants hold on every demo.
//!
//! Seeded and deterministic. `HALFWIRE_MUTANTS=N` sets the number of cases
//! (default 5000) and `HALFWIRE_MUTATION_SEED=S` the seed: for millions,
//! `HALFWIRE_MUTANTS=1000000 cargo test --release --test e2e mutation -- --nocapture`.
//! A failing mutant is written to `target/tmp/mutants/` to be replayed with `halfwire run`.

use std::panic::{catch_unwind, AssertUnwindSafe};

use halfwire::robustness::{exercise, Limits, Outcome};
use rand::seq::IndexedRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use toml_edit::{DocumentMut, Item, Value};

fn demos() -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = std::fs::read_dir("scenarios")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .map(|p| (p.file_name().unwrap().to_string_lossy().into_owned(), std::fs::read_to_string(&p).unwrap()))
        .collect();
    out.sort();
    out
}

/// A value's place in the document: a path of keys and array indices.
#[derive(Clone, Debug)]
enum Step {
    Key(String),
    Index(usize),
}

/// Every leaf value's path.
fn leaves(doc: &DocumentMut) -> Vec<Vec<Step>> {
    fn item(i: &Item, path: &mut Vec<Step>, out: &mut Vec<Vec<Step>>) {
        match i {
            Item::Table(t) => {
                for (k, x) in t.iter() {
                    path.push(Step::Key(k.to_owned()));
                    item(x, path, out);
                    path.pop();
                }
            }
            Item::ArrayOfTables(a) => {
                for (n, t) in a.iter().enumerate() {
                    path.push(Step::Index(n));
                    for (k, x) in t.iter() {
                        path.push(Step::Key(k.to_owned()));
                        item(x, path, out);
                        path.pop();
                    }
                    path.pop();
                }
            }
            Item::Value(v) => value(v, path, out),
            Item::None => {}
        }
    }
    fn value(v: &Value, path: &mut Vec<Step>, out: &mut Vec<Vec<Step>>) {
        match v {
            Value::InlineTable(t) => {
                for (k, x) in t.iter() {
                    path.push(Step::Key(k.to_owned()));
                    value(x, path, out);
                    path.pop();
                }
            }
            Value::Array(a) => {
                for (n, x) in a.iter().enumerate() {
                    path.push(Step::Index(n));
                    value(x, path, out);
                    path.pop();
                }
            }
            _ => out.push(path.clone()),
        }
    }
    let mut out = Vec::new();
    item(doc.as_item(), &mut Vec::new(), &mut out);
    out
}

/// The value at `path`, if it is still there.
fn get_mut<'a>(doc: &'a mut DocumentMut, path: &[Step]) -> Option<&'a mut Value> {
    fn in_item<'a>(i: &'a mut Item, path: &[Step]) -> Option<&'a mut Value> {
        let (first, rest) = path.split_first()?;
        match (i, first) {
            (Item::Table(t), Step::Key(k)) => in_item(t.get_mut(k)?, rest),
            (Item::ArrayOfTables(a), Step::Index(n)) => {
                let t = a.get_mut(*n)?;
                let (Step::Key(k), rest) = rest.split_first()? else { return None };
                in_item(t.get_mut(k)?, rest)
            }
            (Item::Value(v), _) => in_value(v, path),
            _ => None,
        }
    }
    fn in_value<'a>(v: &'a mut Value, path: &[Step]) -> Option<&'a mut Value> {
        let Some((first, rest)) = path.split_first() else { return Some(v) };
        match (v, first) {
            (Value::InlineTable(t), Step::Key(k)) => in_value(t.get_mut(k)?, rest),
            (Value::Array(a), Step::Index(n)) => in_value(a.get_mut(*n)?, rest),
            _ => None,
        }
    }
    in_item(doc.as_item_mut(), path)
}

/// Remove the leaf at `path` (a table key or an array element).
fn remove(doc: &mut DocumentMut, path: &[Step]) {
    let Some((last, parent)) = path.split_last() else { return };
    if parent.is_empty() {
        if let Step::Key(k) = last {
            doc.remove(k);
        }
        return;
    }
    // The parent is a table (`[x]`), an inline table or an array.
    let mut probe = doc.clone();
    if let Some(v) = get_mut(doc, parent) {
        match (v, last) {
            (Value::InlineTable(t), Step::Key(k)) => {
                t.remove(k);
            }
            (Value::Array(a), Step::Index(n)) if *n < a.len() => {
                a.remove(*n);
            }
            _ => {}
        }
        return;
    }
    // A plain table: walk the items.
    let mut item = probe.as_item_mut();
    for s in parent {
        item = match (item, s) {
            (Item::Table(t), Step::Key(k)) => match t.get_mut(k) {
                Some(x) => x,
                None => return,
            },
            (Item::ArrayOfTables(a), Step::Index(n)) => match a.get_mut(*n) {
                Some(t) => {
                    if let Step::Key(k) = last {
                        t.remove(k);
                    }
                    *doc = probe;
                    return;
                }
                None => return,
            },
            _ => return,
        };
    }
    if let (Item::Table(t), Step::Key(k)) = (item, last) {
        t.remove(k);
        *doc = probe;
    }
}

const UNITS: &[&str] = &[
    "ps", "ns", "us", "ms", "s", "ks", "m", "mm", "in", "ohm", "kΩ", "V", "mV", "mA", "A", "pF", "uF", "Mbit/s",
    "bit/s", "/s", "Hz", "B", "bit", "KiB", "ns/m", "", "furlong", "char", "chars", "bits",
];
const NUMBERS: &[&str] = &[
    "0",
    "-0",
    "-1",
    "1",
    "0.5",
    "1e-300",
    "1e-12",
    "0.000001",
    "1e300",
    "1e30",
    "1e18",
    "18446744073709551615",
    "9223372036854775807",
    "999999999999999999",
    "4096",
    "1e6",
    "3.5",
    "NaN",
    "inf",
    "12345678901234567890123",
];
const COUNTS: &[i64] =
    &[0, 1, 2, 31, 32, 33, 1000, 4096, 4097, 65535, 65536, 1 << 31, 1 << 40, 1 << 41, i64::MAX, -1, i64::MIN];
const WORDS: &[&str] = &[
    "polling",
    "token",
    "tdma",
    "aloha",
    "csma",
    "arbitration",
    "type1",
    "type2",
    "lvds",
    "tia485",
    "mlvds",
    "nrz",
    "8b10b",
    "uart-8n1",
    "uart-8e1",
    "uart-9o1.5",
    "uart-5s2",
    "uart-4n1",
    "uart-8x1",
    "manchester",
    "auto-direction",
    "stop-sample",
    "frame-end",
    "both-ends",
    "far-end",
    "none",
    "poisson",
    "periodic",
    "worst",
    "random",
    "typical",
    "lose-token",
    "node-down",
    "node-up",
    "non",
    "current",
    "voltage",
    "",
];
const KEYS: &[(&str, &str)] = &[
    ("access.max_per_poll", "0"),
    ("access.max_per_token", "0"),
    ("access.retries", "3"),
    ("access.slotted", "true"),
    ("access.collision_detect", "true"),
    ("access.jam_bits", "99999999999"),
    ("access.token_timeout", "\"1 ns\""),
    ("access.guard", "\"0 s\""),
    ("access.response_latency", "{ mean = \"1000000 s\" }"),
    ("access.backoff", "{ mean = \"999999 s\", sd = \"999999 s\" }"),
    ("frame.interframe_gap", "\"1000000 s\""),
    ("frame.encoding", "\"manchester\""),
    ("line.termination", "\"none\""),
    ("line.bias", "{ supply = \"5 V\", pull_up = \"1 ohm\", pull_down = \"1 ohm\" }"),
    ("timing", "\"random\""),
    ("warmup", "\"999999 s\""),
    ("transceiver.disable_time", "[\"0 s\", \"1 s\"]"),
    ("transceiver.receiver_delay", "\"1 s\""),
    ("nodes.count", "4096"),
    ("frame.encoding", "\"uart-8e1\""),
    ("frame.char_gap", "{ mean = \"1 char\" }"),
    ("frame.char_gap", "\"1000000 s\""),
    ("frame.char_timeout", "\"1.5 char\""),
    ("frame.silence", "\"3.5 char\""),
    ("frame.interframe_gap", "\"3.5 char\""),
    ("transceiver.release_after_stop", "\"-0.5 bit\""),
    ("transceiver.release_after_stop", "\"-1 s\""),
    ("transceiver.enable_lead", "\"0 s\""),
    ("transceiver.react_at", "\"stop-sample\""),
    ("transceiver.driver", "\"auto-direction\""),
    ("access.turnaround", "\"1 char\""),
    ("line.bit_error_rate", "0.5"),
    ("line.bit_error_rate", "1e-5"),
    ("line.noise", "\"10 V\""),
    ("line.noise", "\"1 nV\""),
    ("access.retries", "1000"),
    ("access.dead_after", "1"),
    ("access.probe_every", "1000000"),
    ("access.faults", "[ { at = \"1 us\", kind = \"node-down\", node = \"s01\" } ]"),
    ("access.faults", "[ { at = \"1 ms\", kind = \"node-down\", node = \"controller\" } ]"),
    ("access.faults", "[ { at = \"2 ms\", kind = \"node-down\", node = \"console\" } ]"),
    ("access.backup_master", "\"pit\""),
    ("access.takeover_after", "\"1 s\""),
    ("access.successor_timeout", "\"1 us\""),
    ("access.successor_timeout", "\"1000000 s\""),
    ("access.solicit_every", "1"),
    ("access.holdover", "1000000"),
    ("access.faults", "[ { at = \"0 s\", kind = \"node-down\", node = \"s02\" }, { at = \"0 s\", kind = \"node-up\", node = \"s02\" } ]"),
];

/// Apply one random mutation to `text`.
fn mutate(text: &str, rng: &mut ChaCha8Rng) -> String {
    let op = rng.random_range(0..10);
    if op == 0 {
        // Duplicate or drop a whole line (duplicate keys, broken tables).
        let mut lines: Vec<&str> = text.lines().collect();
        if lines.is_empty() {
            return text.to_owned();
        }
        let i = rng.random_range(0..lines.len());
        if rng.random_bool(0.5) {
            lines.insert(i, lines[i]);
        } else {
            lines.remove(i);
        }
        return lines.join("\n") + "\n";
    }
    let Ok(mut doc) = text.parse::<DocumentMut>() else { return text.to_owned() };
    if op == 1 {
        // Add (or overwrite) a key from a list of risky settings.
        let (k, v) = KEYS.choose(rng).unwrap();
        let line = format!("{} = {v}", k.rsplit('.').next().unwrap());
        let section = k.rsplit_once('.').map(|(s, _)| s);
        let mut out = String::new();
        let mut placed = false;
        for l in text.lines() {
            out.push_str(l);
            out.push('\n');
            if !placed && section.is_some_and(|s| l.trim() == format!("[{s}]")) {
                out.push_str(&line);
                out.push('\n');
                placed = true;
            }
        }
        if !placed && section.is_none() {
            return format!("{line}\n{out}");
        }
        return out;
    }
    let all = leaves(&doc);
    if all.is_empty() {
        return text.to_owned();
    }
    let path = all.choose(rng).unwrap().clone();
    match op {
        2 => remove(&mut doc, &path),
        3 => {
            // Swap two values.
            let other = all.choose(rng).unwrap().clone();
            let a = get_mut(&mut doc, &path).cloned();
            let b = get_mut(&mut doc, &other).cloned();
            if let (Some(a), Some(b)) = (a, b) {
                if let Some(x) = get_mut(&mut doc, &path) {
                    *x = b;
                }
                if let Some(x) = get_mut(&mut doc, &other) {
                    *x = a;
                }
            }
        }
        _ => {
            let Some(v) = get_mut(&mut doc, &path) else { return doc.to_string() };
            let new: Value = match (v.clone(), op) {
                (Value::String(s), 4) => {
                    // Swap the unit.
                    let s = s.value().to_owned();
                    let digits: String =
                        s.chars().take_while(|c| c.is_ascii_digit() || ".-+eE ".contains(*c)).collect();
                    format!("{}{}", digits, UNITS.choose(rng).unwrap()).into()
                }
                (Value::String(s), 5) => {
                    // Replace the number.
                    let s = s.value().to_owned();
                    let unit: String = s.chars().skip_while(|c| c.is_ascii_digit() || ".-+eE ".contains(*c)).collect();
                    format!("{} {}", NUMBERS.choose(rng).unwrap(), unit).into()
                }
                (Value::String(_), 6) => "x".repeat(rng.random_range(1..20_000)).into(),
                (Value::String(_), _) => WORDS.choose(rng).unwrap().to_string().into(),
                (Value::Integer(_), _) => (*COUNTS.choose(rng).unwrap()).into(),
                (Value::Float(_), _) => {
                    [0.0, -1.0, 1e-300, 1e300, 0.5, 2.0, f64::NAN, f64::INFINITY].choose(rng).unwrap().to_owned().into()
                }
                (Value::Boolean(b), _) => (!b.value()).into(),
                (other, _) => other,
            };
            *v = new;
        }
    }
    doc.to_string()
}

#[test]
fn mutated_demo_scenarios_never_panic_and_their_reports_keep_every_invariant() {
    let cases: usize = std::env::var("HALFWIRE_MUTANTS").ok().and_then(|s| s.parse().ok()).unwrap_or(5000);
    let seed: u64 = std::env::var("HALFWIRE_MUTATION_SEED").ok().and_then(|s| s.parse().ok()).unwrap_or(1);
    let demos = demos();
    let started = std::time::Instant::now();
    // Panics are expected to be caught here: keep their messages off the test output.
    let hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    let results = crate::common::par_map(&[0usize, 1], |&half| {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(half as u64);
        let (mut refused, mut checked, mut failures) = (0usize, 0usize, Vec::new());
        for case in 0..cases.div_ceil(2) {
            if half * cases.div_ceil(2) + case >= cases {
                break;
            }
            let (name, text) = demos.choose(&mut rng).unwrap();
            let mut mutant = text.clone();
            for _ in 0..rng.random_range(1..=3) {
                mutant = mutate(&mutant, &mut rng);
            }
            match catch_unwind(AssertUnwindSafe(|| exercise(&mutant, Limits::default()))) {
                Ok(Ok(Outcome::Refused(msg))) => {
                    assert!(msg.contains("mutant.toml"), "an error that does not name the file: {msg}");
                    refused += 1;
                }
                Ok(Ok(Outcome::Checked { .. })) => checked += 1,
                Ok(Err(broken)) => failures.push((name.clone(), mutant, format!("{broken:#?}"))),
                Err(p) => {
                    let msg = p
                        .downcast_ref::<String>()
                        .cloned()
                        .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                        .unwrap_or_default();
                    failures.push((name.clone(), mutant, format!("panic: {msg}")));
                }
            }
        }
        (refused, checked, failures)
    });
    std::panic::set_hook(hook);
    let (refused, checked): (usize, usize) = results.iter().fold((0, 0), |a, r| (a.0 + r.0, a.1 + r.1));
    let failures: Vec<_> = results.into_iter().flat_map(|r| r.2).collect();
    eprintln!(
        "mutation: {} cases ({refused} refused by validation, {checked} run and checked), {} failures, {:.1} s",
        refused + checked + failures.len(),
        failures.len(),
        started.elapsed().as_secs_f64()
    );
    if !failures.is_empty() {
        let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("mutants");
        let _ = std::fs::create_dir_all(&dir);
        for (i, (name, text, why)) in failures.iter().enumerate().take(20) {
            let _ = std::fs::write(dir.join(format!("{i}-{name}")), text);
            eprintln!("mutant {i} of {name} ({}): {why}", dir.join(format!("{i}-{name}")).display());
        }
        panic!("{} of {cases} mutants failed", failures.len());
    }
    assert!(checked > cases / 10, "only {checked} mutants ran: the mutations are too destructive to test much");
}

#[test]
fn every_demo_report_keeps_every_invariant() {
    for (name, text) in demos() {
        let spec = halfwire::scenario::parse_str(&text, &name).unwrap();
        let report = serde_json::to_value(halfwire::simulate(&spec)).unwrap();
        let broken = halfwire::report::invariants::violations(&report);
        assert!(broken.is_empty(), "{name}: {broken:#?}");
    }
}
