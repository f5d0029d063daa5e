//! The command line as a whole: one name, placeholder and value syntax per
//! shared option on every subcommand, completions and the manual page,
//! standard input, `--quiet` and `--color`, exact seconds in JSON and CSV,
//! and the spellings engineers write.

use std::collections::BTreeMap;
use std::io::Write;
use std::process::{Command, Stdio};

use serde_json::Value;

use crate::common::{exe, halfwire};

/// Every subcommand but `help`, from the top-level help.
fn subcommands() -> Vec<String> {
    let out = halfwire(&["--help"]);
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    let list = text.split("Commands:").nth(1).expect("a command list").split("\n\n").next().unwrap().to_owned();
    list.lines().filter_map(|l| l.split_whitespace().next().map(str::to_owned)).filter(|c| c != "help").collect()
}

/// A subcommand's options from its short help: `--name` → `<PLACEHOLDER>` ("" for a flag).
fn options(command: &str) -> BTreeMap<String, String> {
    let out = halfwire(&[command, "-h"]);
    assert_eq!(out.status.code(), Some(0), "{command} -h");
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    let mut map = BTreeMap::new();
    for line in text.lines() {
        let Some(at) = line.find("--") else { continue };
        if !line.trim_start().starts_with('-') {
            continue;
        }
        let mut words = line[at..].split_whitespace();
        let name = words.next().unwrap().trim_end_matches(',').to_owned();
        let placeholder = words.next().filter(|w| w.starts_with('<')).unwrap_or("").to_owned();
        map.insert(name, placeholder);
    }
    map
}

#[test]
fn every_shared_option_has_one_name_placeholder_and_syntax_on_every_subcommand() {
    let commands = subcommands();
    for c in ["run", "budget", "bound", "size", "check", "diff", "sweep", "merge", "cosim", "completions", "man"] {
        assert!(commands.iter().any(|x| x == c), "{c} in {commands:?}");
    }
    let all: BTreeMap<String, BTreeMap<String, String>> = commands.iter().map(|c| (c.clone(), options(c))).collect();
    // One placeholder per option name, wherever it appears.
    let mut seen: BTreeMap<&str, (&str, &str)> = BTreeMap::new();
    for (c, opts) in &all {
        for (name, ph) in opts {
            match seen.get(name.as_str()) {
                Some((other, first)) => {
                    assert_eq!(ph, first, "{name}: <{ph}> on {c} but <{first}> on {other}")
                }
                None => {
                    seen.insert(name, (c, ph));
                }
            }
        }
    }
    let has = |c: &str, o: &str| all[c].contains_key(o);
    // Results on stdout: --format everywhere.
    for c in ["run", "budget", "bound", "size", "check", "diff", "sweep", "merge", "cosim"] {
        assert!(has(c, "--format"), "{c} --format");
    }
    // A scenario runs: --seed, --duration and --set everywhere.
    for c in ["run", "budget", "bound", "size", "check", "sweep", "cosim"] {
        for o in ["--seed", "--duration", "--set"] {
            assert!(has(c, o), "{c} {o}");
        }
    }
    assert_eq!(seen["--seed"].1, "<N>");
    assert_eq!(seen["--duration"].1, "<TIME>");
    // Parallel runs: --jobs N everywhere they happen.
    for c in ["run", "check", "sweep", "size"] {
        assert_eq!(all[c].get("--jobs").map(String::as_str), Some("<N>"), "{c} --jobs");
    }
    // Pictures: every picture option is --plot or --plot-*, and takes FILE.svg.
    for (c, opts) in &all {
        for (name, ph) in opts {
            if ph == "<FILE.svg>" {
                assert!(name.starts_with("--plot"), "{c} {name} draws a picture but is not named --plot…");
            }
            if name.starts_with("--plot") {
                assert_eq!(ph, "<FILE.svg>", "{c} {name}");
            }
        }
        assert!(!opts.contains_key("--svg"), "{c}: --svg is now --plot-timing");
    }
    // Every wall-clock or simulated time option takes a time with a unit.
    for o in ["--connect-timeout", "--answer-timeout", "--float-limit", "--duration"] {
        assert_eq!(seen[o].1, "<TIME>", "{o}");
    }
    assert!(seen.values().all(|(_, ph)| *ph != "<SECONDS>"), "no bare-seconds option");
    // --quiet and --color are global: accepted after any subcommand.
    for c in &commands {
        if c == "completions" {
            continue;
        }
        assert!(has(c, "--quiet") && has(c, "--color"), "{c}: --quiet and --color");
    }
}

#[test]
fn the_value_syntax_is_shared_too() {
    // --jobs 0 means one per core on every command (it used to be refused by sweep).
    let dir = tempfile::tempdir().unwrap();
    let rows = dir.path().join("rows.jsonl");
    let sweep = halfwire(&[
        "sweep",
        "scenarios/fruit-grader.toml",
        "--vary",
        "access.turnaround=20ns",
        "--duration",
        "5 ms",
        "--jobs",
        "0",
        "--out",
        rows.to_str().unwrap(),
    ]);
    assert_eq!(sweep.status.code(), Some(0), "{}", String::from_utf8_lossy(&sweep.stderr));
    let check = halfwire(&["check", "scenarios/greenhouse-csma.toml", "--jobs", "0", "--duration", "1 s"]);
    assert!(matches!(check.status.code(), Some(0 | 1)), "{}", String::from_utf8_lossy(&check.stderr));
    // Time options take units; a bare number is refused with the usual message.
    let cosim = halfwire(&["cosim", "scenarios/sluice-gates-cosim.toml", "--connect-timeout", "2"]);
    assert_eq!(cosim.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&cosim.stderr).contains("missing unit"),
        "{}",
        String::from_utf8_lossy(&cosim.stderr)
    );
    // run --replications 1 is a plain run.
    let one = halfwire(&["run", "scenarios/greenhouse-csma.toml", "--replications", "1", "--format", "json"]);
    assert_eq!(one.status.code(), Some(0), "{}", String::from_utf8_lossy(&one.stderr));
    let plain = halfwire(&["run", "scenarios/greenhouse-csma.toml", "--format", "json"]);
    let strip = |b: &[u8]| {
        let mut v: Value = serde_json::from_slice(b).unwrap();
        v.as_object_mut().unwrap().remove("run");
        v
    };
    assert_eq!(strip(&one.stdout), strip(&plain.stdout));
}

#[test]
fn completions_load_and_the_manual_page_renders() {
    let dir = tempfile::tempdir().unwrap();
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let out = halfwire(&["completions", shell]);
        assert_eq!(out.status.code(), Some(0), "{shell}");
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("halfwire") && text.contains("sweep") && text.contains("--plot-timing"), "{shell}");
        std::fs::write(dir.path().join(format!("halfwire.{shell}")), &out.stdout).unwrap();
    }
    // bash: the script parses, and sourcing it registers the completion.
    let bash = dir.path().join("halfwire.bash");
    let syntax = Command::new("bash").arg("-n").arg(&bash).status().unwrap();
    assert!(syntax.success());
    let loaded = Command::new("bash")
        .arg("-c")
        .arg(format!("source {} && complete -p halfwire", bash.display()))
        .output()
        .unwrap();
    assert!(loaded.status.success(), "{}", String::from_utf8_lossy(&loaded.stderr));
    assert!(String::from_utf8_lossy(&loaded.stdout).contains("halfwire"));
    // zsh and fish check their own syntax where they are installed.
    for (shell, flag) in [("zsh", "-n"), ("fish", "--no-execute")] {
        if let Ok(s) = Command::new(shell).arg(flag).arg(dir.path().join(format!("halfwire.{shell}"))).status() {
            assert!(s.success(), "{shell} {flag}");
        }
    }
    // The manual page renders with man -l.
    let page = dir.path().join("halfwire.1");
    std::fs::write(&page, halfwire(&["man"]).stdout).unwrap();
    let man = Command::new("man").arg("-l").arg(&page).env("MANPAGER", "cat").env("MANWIDTH", "80").output();
    if let Ok(man) = man {
        assert!(man.status.success(), "{}", String::from_utf8_lossy(&man.stderr));
        let text = String::from_utf8_lossy(&man.stdout);
        assert!(text.contains("halfwire") && text.contains("SUBCOMMANDS"), "{text}");
    }
    // --version names the commit and the target.
    let v = String::from_utf8_lossy(&halfwire(&["--version"]).stdout).into_owned();
    assert!(v.starts_with("halfwire ") && v.contains("commit ") && v.contains("linux"), "{v}");
}

fn with_stdin(args: &[&str], input: &[u8]) -> std::process::Output {
    let mut child = Command::new(exe())
        .args(args)
        .env("NO_COLOR", "1")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child.stdin.take().unwrap().write_all(input).unwrap();
    child.wait_with_output().unwrap()
}

#[test]
fn a_dash_reads_a_scenario_or_a_report_from_standard_input() {
    let scenario = std::fs::read("scenarios/fruit-grader.toml").unwrap();
    let from_file = halfwire(&["run", "scenarios/fruit-grader.toml"]);
    let from_stdin = with_stdin(&["run", "-"], &scenario);
    assert_eq!(from_stdin.status.code(), Some(0), "{}", String::from_utf8_lossy(&from_stdin.stderr));
    // The same report, apart from the wall-clock line at the end.
    let body = |o: &std::process::Output| {
        let t = String::from_utf8_lossy(&o.stdout).into_owned();
        t.lines().filter(|l| !l.contains(" wall")).collect::<Vec<_>>().join("\n")
    };
    assert_eq!(body(&from_stdin), body(&from_file));
    for c in [&["budget", "-"][..], &["bound", "-"], &["check", "-", "--duration", "5 ms"]] {
        let o = with_stdin(c, &scenario);
        assert!(matches!(o.status.code(), Some(0 | 1)), "{c:?}: {}", String::from_utf8_lossy(&o.stderr));
    }
    // Errors name standard input.
    let bad = with_stdin(&["run", "-"], b"duration = 5\n");
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("<stdin>:1:"), "{}", String::from_utf8_lossy(&bad.stderr));
    // A report for diff.
    let dir = tempfile::tempdir().unwrap();
    let base = dir.path().join("base.json");
    let report = halfwire(&["run", "scenarios/greenhouse-csma.toml", "--format", "json"]).stdout;
    std::fs::write(&base, &report).unwrap();
    let d = with_stdin(&["diff", base.to_str().unwrap(), "-"], &report);
    assert_eq!(d.status.code(), Some(0), "{}", String::from_utf8_lossy(&d.stderr));
}

#[test]
fn quiet_and_color_do_what_they_say() {
    let dir = tempfile::tempdir().unwrap();
    let rows = dir.path().join("rows.jsonl");
    let args = [
        "sweep",
        "scenarios/fruit-grader.toml",
        "--vary",
        "nodes.traffic.rate=1000/s,2000/s",
        "--duration",
        "5 ms",
        "--out",
        rows.to_str().unwrap(),
    ];
    let loud = halfwire(&args);
    assert!(String::from_utf8_lossy(&loud.stderr).contains("2 points × 1 replication"));
    std::fs::remove_file(&rows).unwrap();
    let quiet = halfwire(&[&args[..], &["--quiet"]].concat());
    assert_eq!(quiet.status.code(), Some(0));
    assert!(quiet.stderr.is_empty(), "{}", String::from_utf8_lossy(&quiet.stderr));
    // Colour: never on a pipe by default, and with NO_COLOR; always when asked.
    let plain = halfwire(&["run", "scenarios/greenhouse-csma.toml"]);
    assert!(!plain.stdout.contains(&0x1b));
    let always = halfwire(&["run", "scenarios/greenhouse-csma.toml", "--color", "always"]);
    assert!(always.stdout.contains(&0x1b), "--color always styles the text");
}

/// `ps / 10¹²` as the f64 nearest to that decimal: what every seconds field must hold.
fn exact(ps: u64) -> f64 {
    format!("{ps}e-12").parse().unwrap()
}

#[test]
fn seconds_in_json_and_csv_are_the_picosecond_tallies_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let (rows, csv, events) = (dir.path().join("r.jsonl"), dir.path().join("r.csv"), dir.path().join("e.jsonl"));
    // The vineyard demo has contention and floating windows: odd picosecond counts.
    let o = halfwire(&[
        "sweep",
        "scenarios/vineyard-probes.toml",
        "--vary",
        "seed=5,6",
        "--out",
        rows.to_str().unwrap(),
        "--csv",
        csv.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(&rows).unwrap();
    let mut checked = 0;
    let mut rows_json = Vec::new();
    for line in text.lines() {
        let r: Value = serde_json::from_str(line).unwrap();
        let t = &r["tallies"];
        let rep = &r["report"];
        for (tally, field) in [
            ("overlap_max_ps", "/contention/overlap_max_s"),
            ("overlap_total_ps", "/contention/overlap_total_s"),
            ("floating_longest_ps", "/floating/longest_s"),
            ("floating_total_ps", "/floating/total_s"),
            ("measured_ps", "/simulated_s"),
        ] {
            let ps = t[tally].as_u64().unwrap_or_else(|| panic!("{tally}: {t}"));
            let s = rep.pointer(field).unwrap().as_f64().unwrap();
            assert_eq!(s, exact(ps), "{field}: {s} from {ps} ps");
            // And as JSON text it is the shortest decimal of that value.
            let shown = serde_json::to_string(rep.pointer(field).unwrap()).unwrap();
            assert_eq!(shown.parse::<f64>().unwrap(), exact(ps));
            assert!(shown.len() <= format!("{ps}e-12").len() + 3, "{field}: {shown} is not short");
            checked += 1;
        }
        assert!(t["overlap_max_ps"].as_u64().unwrap() > 0 && t["floating_longest_ps"].as_u64().unwrap() > 0);
        rows_json.push(r);
    }
    assert_eq!(checked, 10);
    // The CSV holds the same numbers, with units as words and the replication index.
    let mut reader = csv::Reader::from_path(&csv).unwrap();
    let head: Vec<String> = reader.headers().unwrap().iter().map(str::to_owned).collect();
    assert_eq!(head[..2], ["point".to_owned(), "replication".to_owned()]);
    let col = |name: &str| head.iter().position(|h| h == name).unwrap_or_else(|| panic!("{name} in {head:?}"));
    let (overlap, longest) = (col("contention.overlap_max_s (s)"), col("floating.longest_s (s)"));
    for (rec, r) in reader.records().map(Result::unwrap).zip(&rows_json) {
        assert_eq!(&rec[1], "0");
        assert_eq!(rec[overlap].parse::<f64>().unwrap(), exact(r["tallies"]["overlap_max_ps"].as_u64().unwrap()));
        assert_eq!(rec[longest].parse::<f64>().unwrap(), exact(r["tallies"]["floating_longest_ps"].as_u64().unwrap()));
    }
    // Event lines begin with t_ps and event, and t_s is t_ps exactly.
    let run = halfwire(&[
        "run",
        "scenarios/vineyard-probes.toml",
        "--events",
        events.to_str().unwrap(),
        "--window",
        "2.0088s..2.0094s",
    ]);
    assert_eq!(run.status.code(), Some(0));
    let lines = std::fs::read_to_string(&events).unwrap();
    assert!(lines.lines().count() > 5);
    for l in lines.lines() {
        assert!(l.starts_with("{\"t_ps\":") && l.contains(",\"event\":\""), "{l}");
        let e: Value = serde_json::from_str(l).unwrap();
        assert_eq!(e["t_s"].as_f64().unwrap(), exact(e["t_ps"].as_u64().unwrap()), "{l}");
    }
}

#[test]
fn engineers_spellings_are_understood() {
    let base = std::fs::read_to_string("scenarios/greenhouse-csma.toml").unwrap();
    // Units as written on datasheets and in firmware.
    let spelled =
        base.replace("\"120 ohm\"", "\"120 Ohm\"").replace("bit_rate = \"1 Mbit/s\"", "bit_rate = \"1 Mb/s\"");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("spelled.toml");
    std::fs::write(&path, &spelled).unwrap();
    let o = halfwire(&[
        "run",
        path.to_str().unwrap(),
        "--set",
        "duration=\"200000 usec\"",
        "--set",
        "line.length=\"100 ft\"",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let o =
        halfwire(&["run", path.to_str().unwrap(), "--set", "nodes.traffic.payload=\"16 bytes\"", "--duration", "1 s"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    // The standard's older names point at its preset.
    for name in ["rs485", "RS-485", "EIA-485"] {
        let o =
            halfwire(&["budget", "scenarios/greenhouse-csma.toml", "--set", &format!("transceiver.family=\"{name}\"")]);
        assert_eq!(o.status.code(), Some(2));
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains("did you mean \"tia485\""), "{name}: {err}");
    }
}

#[test]
fn counts_read_as_words() {
    let o = halfwire(&["check", "scenarios/greenhouse-csma.toml", "--duration", "1 s"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("1 scenario,"), "{text}");
    assert!(!text.contains("(s)"), "{text}");
    let run = String::from_utf8_lossy(&halfwire(&["run", "scenarios/greenhouse-csma.toml"]).stdout).into_owned();
    assert!(!run.contains("M events/s)") || !run.contains("(0.0"), "{run}");
    assert!(run.contains("1-persistent"), "{run}");
    assert!(run.contains("collision detection") && !run.contains("collision_detect"), "{run}");
    let aloha = String::from_utf8_lossy(&halfwire(&["run", "scenarios/vineyard-probes.toml"]).stdout).into_owned();
    assert!(!aloha.contains("slot time"), "pure ALOHA has no slot time: {aloha}");
}

#[test]
fn a_csv_keeps_its_columns_when_a_key_takes_values_with_and_without_units() {
    // `line.termination` takes a word or a resistance: whichever row comes
    // first, every line has the header's columns.
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("t.csv");
    let o = halfwire(&[
        "sweep",
        "scenarios/greenhouse-csma.toml",
        "--vary",
        "line.termination=both-ends,120 ohm",
        "--duration",
        "200 ms",
        "--csv",
        csv.to_str().unwrap(),
        "--jobs",
        "1",
        "--quiet",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let mut reader = csv::Reader::from_path(&csv).unwrap();
    let head = reader.headers().unwrap().clone();
    assert!(head.iter().any(|h| h == "line.termination (ohm)"), "{head:?}");
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 2);
    for r in &rows {
        assert_eq!(r.len(), head.len(), "{r:?}");
    }
    let si = head.iter().position(|h| h == "line.termination (ohm)").unwrap();
    assert_eq!((&rows[0][si], &rows[1][si]), ("", "120"));
}
