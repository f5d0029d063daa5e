//! `halfwire budget` through the built binary, against hand calculations
//! from the handbook formulas and common-practice values.

use crate::common;

use common::halfwire;
use serde_json::Value;

fn budget(toml: &str, extra: &[&str]) -> Value {
    common::budget_toml(toml, extra)
}

fn refused(toml: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("b.toml");
    std::fs::write(&path, toml).unwrap();
    let out = halfwire(&["budget", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// A bus: `line` and `transceiver` bodies, nodes at the given positions.
fn bus(line: &str, transceiver: &str, access: &str, positions: &[f64]) -> String {
    let mut nodes = String::new();
    for (i, x) in positions.iter().enumerate() {
        nodes += &format!("[[node]]\nname = \"n{i}\"\nposition = \"{x} m\"\n");
    }
    format!(
        "duration = \"200 us\"\n[line]\n{line}\n[transceiver]\n{transceiver}\n[frame]\nbit_rate = \"100 Mbit/s\"\noverhead_bits = 48\n[access]\n{access}\n{nodes}"
    )
}

const TIMING: &str = "enable_time = \"7 ns\"\ndisable_time = \"9 ns\"\nreceiver_delay = \"5 ns\"";
const POLL: &str = "scheme = \"polling\"\nmaster = \"n0\"\nturnaround = \"20 ns\"\nreply_timeout = \"5 us\"";

/// R's clock 100 ppm fast, beacon delays compensated.
const R_FAST: &str = "compensate = true\nclock_ppm = { r = 100.0 }";

fn close(a: f64, b: f64, rel: f64) -> bool {
    ((a - b) / b).abs() < rel
}

#[test]
fn loaded_line_three_hand_worked_cases() {
    // Johnson & Graham (1993): Z' = Z0/sqrt(1 + C_d·n/C0), tpd' = tpd0·sqrt(1 + C_d·n/C0), C0 = tpd0/Z0.
    let cases = [
        // Z0, tpd0 (ns/m), length, nodes, load (pF) → Z', tpd' (ns/m)
        (100.0, 5.0, 1.0, 40, 5.0, 44.7214, 11.1803), // C_d/(C0·d) = 4 (reference-sheet example)
        (120.0, 5.0, 2.0, 4, 62.5, 60.0, 10.0),       // C_d·n = 3·C0: Z0/2 (heavy load)
        (90.0, 6.0, 3.0, 10, 6.0, 78.9352, 6.8411), // by hand: C0 = 66.67 pF/m, C_d·n = 20 pF/m, ratio 0.3, k = sqrt(1.3) = 1.14018
    ];
    for (z0, tpd, len, n, load, z_exp, t_exp) in cases {
        // Each node in the middle of its own equal stretch: the load is spread evenly, as the formula assumes.
        let positions: Vec<f64> = (0..n).map(|i| len * (i as f64 + 0.5) / n as f64).collect();
        let line = format!("length = \"{len} m\"\nimpedance = \"{z0} ohm\"\ndelay = \"{tpd} ns/m\"");
        let tx = format!("drive_current = \"11.3 mA\"\nload = \"{load} pF\"\nreceiver = \"type2\"\n{TIMING}");
        let b = budget(&bus(&line, &tx, POLL, &positions), &[]);
        let l = &b["line"];
        assert!(close(l["loaded_impedance_ohm"].as_f64().unwrap(), z_exp, 1e-5), "{z0}: {l}");
        assert!(close(l["loaded_impedance_min_ohm"].as_f64().unwrap(), z_exp, 1e-5), "{z0}: {l}");
        assert!(close(l["loaded_delay_s_per_m"].as_f64().unwrap(), t_exp * 1e-9, 1e-5), "{z0}: {l}");
        assert!(close(l["end_to_end_delay_s"].as_f64().unwrap(), t_exp * 1e-9 * len, 1e-4));
    }
}

#[test]
fn amplitudes_against_common_practice() {
    let tx = |drive: &str| format!("{drive}\nload = \"0 pF\"\nreceiver = \"type2\"\n{TIMING}");
    // Point to point, far end terminated, unloaded 50 Ω line: the near-end
    // driver sees 50 Ω. 11.3 mA → 565 mV (multipoint LVDS, common practice).
    let b = budget(
        &bus(
            "length = \"1 m\"\nimpedance = \"50 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"far-end\"",
            &tx("drive_current = \"11.3 mA\""),
            POLL,
            &[0.0, 1.0],
        ),
        &[],
    );
    assert!(close(b["nodes"]["n0"]["amplitude_step_v"].as_f64().unwrap(), 0.565, 1e-9));
    // Both ends 60 Ω on a 60 Ω line: 30 Ω everywhere, 339 mV > 300 mV.
    let b = budget(
        &bus(
            "length = \"1 m\"\nimpedance = \"60 ohm\"\ndelay = \"5 ns/m\"",
            &tx("drive_current = \"11.3 mA\""),
            POLL,
            &[0.0, 0.5, 1.0],
        ),
        &[],
    );
    for n in ["n0", "n1", "n2"] {
        let a = b["nodes"][n]["amplitude_step_v"].as_f64().unwrap();
        assert!(close(a, 0.339, 1e-9) && a > 0.300);
        assert!(close(b["nodes"][n]["amplitude_dc_v"].as_f64().unwrap(), 0.339, 1e-9));
    }
    // LVDS (TIA/EIA-644, from memory): the preset's weakest driver gives 247 mV
    // into 100 Ω (2.47 mA), and its typical one 350 mV (3.5 mA, common practice).
    let lvds = format!("family = \"lvds\"\nload = \"0 pF\"\n{TIMING}");
    let b = budget(
        &bus(
            "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"far-end\"",
            &lvds,
            POLL,
            &[0.0, 1.0],
        ),
        &[],
    );
    assert!(close(b["nodes"]["n0"]["amplitude_step_v"].as_f64().unwrap(), 0.247, 1e-9));
    assert!(close(b["nodes"]["n0"]["amplitude_typical_v"].as_f64().unwrap(), 0.350, 1e-9));
    // A voltage-mode driver (3.3 V behind 50 Ω) into 54 Ω (two 108 Ω ends):
    // 3.3·54/104 = 1.713 V, above TIA-485-A's 1.5 V minimum (from memory).
    let b = budget(
        &bus(
            "length = \"1 m\"\nimpedance = \"120 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"108 ohm\"",
            &tx("output_voltage = \"3.3 V\"\noutput_resistance = \"50 ohm\""),
            POLL,
            &[0.0, 1.0],
        ),
        &[],
    );
    let dc = b["nodes"]["n0"]["amplitude_dc_v"].as_f64().unwrap();
    assert!(close(b["line"]["dc_load_ohm"].as_f64().unwrap(), 54.0, 1e-9));
    assert!(close(dc, 3.3 * 54.0 / 104.0, 1e-9) && dc >= 1.5, "{dc}");
}

#[test]
fn failsafe_bias_sets_the_idle_state() {
    // Common practice for TIA-485 idle biasing: V_AB = V_s·R_p/(2·R_b + R_p).
    // 5 V, R_b = 720 Ω, R_p = 120 ∥ 120 = 60 Ω → exactly 200 mV.
    let line = |rb: u32| {
        format!("length = \"10 m\"\nimpedance = \"120 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"120 ohm\"\n[line.bias]\nsupply = \"5 V\"\npull_up = \"{rb} ohm\"\npull_down = \"{rb} ohm\"")
    };
    let tx = |rx: &str| format!("drive_current = \"11.3 mA\"\nload = \"0 pF\"\nreceiver = \"{rx}\"\n{TIMING}");
    let b = budget(&bus(&line(720), &tx("tia485"), POLL, &[0.0, 10.0]), &[]);
    assert!(close(b["line"]["idle_v"].as_f64().unwrap(), 0.200, 1e-12));
    // The bias adds 1440 Ω across the pair: DC load 60 ∥ 1440 = 57.6 Ω.
    assert!(close(b["line"]["dc_load_ohm"].as_f64().unwrap(), 57.6, 1e-9));
    // A voltage exactly at a threshold meets it: 200 mV reads high at a
    // ±200 mV receiver (the comparison allows for floating-point rounding).
    assert_eq!(b["nodes"]["n1"]["idle_state"], "high");
    // 740 Ω gives 5·60/1540 = 195 mV: undefined, and the budget says the bias is too weak.
    let weak = budget(&bus(&line(740), &tx("tia485"), POLL, &[0.0, 10.0]), &[]);
    assert_eq!(weak["nodes"]["n1"]["idle_state"], "undefined");
    let w = weak["warnings"].as_array().unwrap().iter().find(|w| w["code"] == "idle-undefined").unwrap().clone();
    assert!(w["message"].as_str().unwrap().contains("bias too weak at n0: 194.8 mV against the 200 mV"), "{w}");
    // 680 Ω gives 211 mV.
    let b = budget(&bus(&line(680), &tx("tia485"), POLL, &[0.0, 10.0]), &[]);
    assert!(close(b["line"]["idle_v"].as_f64().unwrap(), 5.0 * 60.0 / 1420.0, 1e-12));
    assert_eq!(b["nodes"]["n1"]["idle_state"], "high");
    // The same 211 mV against type-1 (±50 mV) and type-2 (50/150 mV) thresholds.
    for rx in ["type1", "type2"] {
        let b = budget(&bus(&line(680), &tx(rx), POLL, &[0.0, 10.0]), &[]);
        assert_eq!(b["nodes"]["n1"]["idle_state"], "high", "{rx}");
    }
    // Without the bias a type-1 receiver reads the idle line as undefined, and
    // the run counts a floating window at every gap. With the bias it floats
    // only while the line relaxes after a release: from the far swing
    // (−678 mV: 11.3 mA into 60 Ω at an end) to its +50 mV threshold around
    // the 211 mV idle level, with τ = R·C, R = 60 Ω ∥ 1360 Ω, C = 10 m ×
    // tpd0/Z0 (41.67 pF/m): t = τ·ln((0.2113 + 0.678)/(0.2113 − 0.05)).
    let plain = bus(
        "length = \"10 m\"\nimpedance = \"120 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"120 ohm\"",
        &tx("type1"),
        POLL,
        &[0.0, 10.0],
    );
    assert!(common::run_toml(&plain)["floating"]["windows"].as_u64().unwrap() > 0);
    let biased = common::run_toml(&bus(&line(680), &tx("type1"), POLL, &[0.0, 10.0]));
    let tau = 1.0 / (1.0 / 60.0 + 1.0 / 1360.0) * 10.0 * 5e-9 / 120.0;
    let b0: f64 = 5.0 * 60.0 / 1420.0;
    let settle = tau * ((b0 + 11.3e-3 * 60.0) / (b0 - 0.05)).ln();
    let f = &biased["floating"];
    assert!(f["windows"].as_u64().unwrap() > 0, "{f}");
    assert!((f["longest_s"].as_f64().unwrap() - settle).abs() < 2e-12, "{f} against {settle}");
}

#[test]
fn edges_limit_the_bit_rate() {
    // Common practice: unit interval ≥ 2 × transition time; a 1 ns edge
    // (the multipoint-LVDS minimum) allows 500 Mbit/s.
    let tx = format!("family = \"mlvds\"\nreceiver = \"type2\"\nload = \"5 pF\"\n{TIMING}");
    let b = budget(&bus("length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"", &tx, POLL, &[0.0, 1.0]), &[]);
    assert!(close(b["limits"]["max_bit_rate_bit_s"].as_f64().unwrap(), 500e6, 1e-12));
    // A 2-inch stub at 1 ns edges is within half the transition time at
    // 4.9 ns/m (common practice: 2 inches at 1 ns); a 4-inch one is not.
    let stub = |len: &str| format!("{tx}\nstub_length = \"{len}\"");
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"4.9 ns/m\"";
    let ok = budget(&bus(line, &stub("2 in"), POLL, &[0.0, 1.0]), &[]);
    assert!(ok["warnings"].as_array().unwrap().iter().all(|w| w["code"] != "stub-too-long"));
    let long = budget(&bus(line, &stub("4 in"), POLL, &[0.0, 1.0]), &[]);
    assert!(long["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "stub-too-long"));
}

#[test]
fn turnaround_minima_agree_with_the_run() {
    // Unequal spacing; slaves turn off slowly (25 ns) and the master quickly (9 ns).
    let positions = [0.0, 0.7, 2.9, 3.1, 6.0];
    let line = "length = \"6 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    let tx = "drive_current = \"11.3 mA\"\nload = \"5 pF\"\nreceiver = \"type2\"\nenable_time = \"7 ns\"\ndisable_time = \"25 ns\"\nreceiver_delay = \"5 ns\"";
    let mut text = bus(line, tx, POLL, &positions);
    text = text.replace(
        "[[node]]\nname = \"n0\"\nposition = \"0 m\"\n",
        "[[node]]\nname = \"n0\"\nposition = \"0 m\"\n[node.transceiver]\ndisable_time = \"9 ns\"\n",
    );
    let b = budget(&text, &["--verify"]);
    let h = &b["handovers"][0];
    // Worst: slave → master, disable 25 ns − receiver delay 5 ns.
    assert_eq!(h["to"], "n0");
    assert!(close(h["min_turnaround_s"].as_f64().unwrap(), 20e-9, 1e-12));
    assert_eq!(b["verify"]["at_minimum_contention"], 0);
    assert!(b["verify"]["below_minimum_contention"].as_u64().unwrap() > 0);
    // The same on a token ring.
    let ring = text.replace(POLL, "scheme = \"token\"\ntoken_bits = 24\nturnaround = \"50 ns\"");
    let b = budget(&ring, &["--verify"]);
    assert_eq!(b["verify"]["at_minimum_contention"], 0);
    assert!(b["verify"]["below_minimum_contention"].as_u64().unwrap() > 0);
}

#[test]
fn tdma_guard_minimum_matches_the_derivation() {
    // The pair of tests/tdma.rs: P (2 m) fills its slot, R (9 m) runs 100
    // ppm fast, compensation on: g* = ((dis + d)(1+ε) + ε(e + T))/(1 − ε),
    // which the run confirms to 3 ps there. The budget's guard for P → R
    // takes the worst clocks on both sides, here ε_P = 0, so it must equal
    // (1+ε)(dis + d + O_R(1 − 1/(1+ε))) with O_R = L_P.
    let eps: f64 = 100e-6;
    let b = budget(&common::tdma_pair(50_000, 5_657_000, 8_000_000, R_FAST), &[]);
    let pr = b["handovers"].as_array().unwrap().iter().find(|h| h["from"] == "p" && h["to"] == "r").unwrap().clone();
    let times = common::section_times(5e-9, 100.0, 10.0, &[(0.0, 5e-12), (2.0, 5e-12), (9.0, 5e-12)]);
    let d = common::wire_ps(&times, 1, 2) as f64 * 1e-12;
    let o_r = 5657e-9;
    let expected = (1.0 + eps) * (9e-9 + d + o_r * (1.0 - 1.0 / (1.0 + eps)));
    assert!((pr["min_turnaround_s"].as_f64().unwrap() - expected).abs() < 2e-12, "{pr} vs {expected}");
}

#[test]
fn bad_budget_inputs() {
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    // A preset without timing: the standard does not give it.
    let err = refused(&bus(line, "family = \"mlvds\"\nload = \"5 pF\"", POLL, &[0.0, 1.0]));
    assert!(err.contains("enable_time") && err.contains("mlvds family leaves timing to the part"), "{err}");
    // Negative resistance.
    let tx = format!("drive_current = \"11.3 mA\"\nload = \"5 pF\"\nreceiver = \"type2\"\n{TIMING}");
    let err = refused(&bus(&format!("{line}\ntermination = \"-100 ohm\""), &tx, POLL, &[0.0, 1.0]));
    assert!(err.contains("line.termination") && err.contains("negative resistance"), "{err}");
    // A bias on a line without terminations.
    let err = refused(&bus(
        &format!("{line}\ntermination = \"none\"\n[line.bias]\nsupply = \"5 V\"\npull_up = \"680 ohm\"\npull_down = \"680 ohm\""),
        &tx,
        POLL,
        &[0.0, 1.0],
    ));
    assert!(err.contains("line.bias") && err.contains("terminations"), "{err}");
    // An unknown family, with a hint.
    let err = refused(&bus(line, &format!("{tx}\nfamily = \"mlvd\""), POLL, &[0.0, 1.0]));
    assert!(err.contains("did you mean \"mlvds\"?"), "{err}");
}

#[test]
fn time_ranges_take_the_worst_case() {
    // Disable 5–12 ns, receiver delay 3–6 ns: the minimum turnaround is the
    // slowest turn-off against the fastest receiver, 12 − 3 = 9 ns, and the
    // run at that corner confirms it to the picosecond.
    let line = "length = \"4 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    let tx = "drive_current = \"11.3 mA\"\nload = \"5 pF\"\nreceiver = \"type2\"\nenable_time = [\"5 ns\", \"8 ns\"]\ndisable_time = [\"5 ns\", \"12 ns\"]\nreceiver_delay = [\"3 ns\", \"6 ns\"]";
    let b = budget(&bus(line, tx, POLL, &[0.0, 1.5, 4.0]), &["--verify"]);
    assert!(close(b["handovers"][0]["min_turnaround_s"].as_f64().unwrap(), 9e-9, 1e-12));
    assert_eq!(b["verify"]["at_minimum_contention"], 0);
    assert!(b["verify"]["below_minimum_contention"].as_u64().unwrap() > 0);
    // `timing` picks the run's values: worst-case, typical or random.
    let run = |mode: &str| {
        common::run_toml(&format!(
            "timing = \"{mode}\"\n{}",
            bus(line, tx, POLL, &[0.0, 1.5, 4.0]).replace("turnaround = \"20 ns\"", "turnaround = \"7 ns\"")
        ))
    };
    // A 7 ns turnaround: at the worst corner (12 ns off, 3 ns receiver) it
    // overlaps; at the typical values (8.5 ns off, 4.5 ns receiver) it does not.
    assert!(run("worst")["contention"]["events"].as_u64().unwrap() > 0);
    assert_eq!(run("typical")["contention"]["events"], 0);
    let a = run("random");
    let b2 = run("random");
    assert_eq!(a["contention"], b2["contention"], "random draws are reproducible");
    // A range whose min exceeds its max is refused.
    let err = refused(&bus(line, &tx.replace("[\"5 ns\", \"12 ns\"]", "[\"12 ns\", \"5 ns\"]"), POLL, &[0.0, 4.0]));
    assert!(err.contains("transceiver.disable_time") && err.contains("exceeds its max"), "{err}");
}

#[test]
fn limits_on_the_command_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("b.toml");
    let tx = format!("family = \"mlvds\"\nreceiver = \"type2\"\nload = \"5 pF\"\n{TIMING}");
    std::fs::write(&path, bus("length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"", &tx, POLL, &[0.0, 1.0]))
        .unwrap();
    let out = halfwire(&["budget", path.to_str().unwrap(), "--max-rate"]);
    assert!(String::from_utf8_lossy(&out.stdout).starts_with("500000000 bit/s"));
    let out = halfwire(&["budget", path.to_str().unwrap(), "--max-nodes"]);
    let n: usize = String::from_utf8_lossy(&out.stdout).trim().parse().unwrap();
    assert!(n > 2);
}

#[test]
fn floating_window_bound_agrees_with_the_run() {
    // Type-1 receivers (idle undefined), unequal spacing. With every
    // turnaround at its floating-window bound for a 60 ns limit, the run's
    // longest window is the limit; 1 ns longer turnarounds exceed it.
    let positions = [0.0, 0.6, 2.5, 3.1];
    let line = "length = \"4 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    let tx = "drive_current = \"11.3 mA\"\nload = \"5 pF\"\nreceiver = \"type1\"\nenable_time = \"7 ns\"\ndisable_time = \"9 ns\"\nreceiver_delay = \"5 ns\"";
    let text = bus(line, tx, POLL, &positions);
    let b = budget(&text, &["--float-limit", "60 ns"]);
    // Each responder's turnaround: the smallest bound over the hand-overs it answers.
    let mut bound = std::collections::BTreeMap::<String, f64>::new();
    for h in b["handovers"].as_array().unwrap() {
        let max = h["max_turnaround_for_float_s"].as_f64().unwrap();
        let e = bound.entry(h["to"].as_str().unwrap().to_owned()).or_insert(f64::INFINITY);
        *e = e.min(max);
    }
    let with = |extra_ps: i64| {
        let mut t = text.replace("turnaround = \"20 ns\"", "turnaround = \"1 s\"");
        for (name, max) in &bound {
            let ps = (max * 1e12).round() as i64 + extra_ps;
            t = t.replace(&format!("name = \"{name}\"\n"), &format!("name = \"{name}\"\nturnaround = \"{ps} ps\"\n"));
        }
        common::run_toml(&t.replace("turnaround = \"1 s\"", "turnaround = \"20 ns\""))
    };
    let at = with(0);
    let longest = at["floating"]["longest_s"].as_f64().unwrap();
    assert!((longest - 60e-9).abs() < 2e-12, "longest window {longest}");
    assert_eq!(at["contention"]["events"], 0);
    let over = with(1000);
    assert!(over["floating"]["longest_s"].as_f64().unwrap() > 60.5e-9);
}

#[test]
fn run_and_budget_agree_on_every_shared_figure() {
    for entry in std::fs::read_dir("scenarios").unwrap() {
        let path = entry.unwrap().path();
        if path.extension().and_then(|e| e.to_str()) != Some("toml") {
            continue;
        }
        let p = path.to_str().unwrap();
        let run: Value = serde_json::from_slice(&halfwire(&["run", p, "--format", "json"]).stdout).unwrap();
        let b: Value = serde_json::from_slice(&halfwire(&["budget", p, "--format", "json"]).stdout).unwrap();
        assert_eq!(run["line"], b["line"], "{p}");
    }
}

#[test]
fn termination_per_end_and_current_ranges() {
    // Near end open, far end 100 Ω on a 100 Ω line: the near-end driver sees
    // Z' = 100 Ω, Γ_near = +1 (open), Γ_far = 0. A drive-current range counts
    // with its weakest value: 3.0 mA → 300 mV.
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"\ntermination = { far = \"100 ohm\" }";
    let tx = format!("drive_current = [\"3.0 mA\", \"4.5 mA\"]\nload = \"0 pF\"\nreceiver = \"lvds\"\n{TIMING}");
    let b = budget(&bus(line, &tx, POLL, &[0.0, 1.0]), &[]);
    assert_eq!(b["line"]["reflection_near"], 1.0);
    assert_eq!(b["line"]["reflection_far"], 0.0);
    assert!(close(b["nodes"]["n0"]["amplitude_step_v"].as_f64().unwrap(), 0.300, 1e-9));
    // 120 Ω at both ends of a 100 Ω line: Γ = 20/220 = +0.0909 at each.
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"\ntermination = { near = \"120 ohm\", far = \"120 ohm\" }";
    let b = budget(&bus(line, &tx, POLL, &[0.0, 1.0]), &[]);
    assert!(close(b["line"]["reflection_near"].as_f64().unwrap(), 20.0 / 220.0, 1e-12));
    assert!(b["limits"]["max_bit_rate_bit_s"].is_null(), "no transition time given");
}

#[test]
fn tdma_guard_minimum_holds_in_the_run() {
    // P fills its slot (L_P = g + e + T), R's clock runs 100 ppm fast: at the
    // budget's minimum guard the run shows no contention, a little below it does.
    let scenario = |g_ps: u64| common::tdma_pair(g_ps, g_ps + 7_000 + 5_600_000, 8_000_000, R_FAST);
    // The budget's P → R minimum depends on the guard (through O_R = L_P):
    // iterate to the fixed point g = min(g).
    let mut g = 45_000u64;
    for _ in 0..5 {
        let b = budget(&scenario(g), &[]);
        let h = b["handovers"].as_array().unwrap().iter().find(|h| h["from"] == "p" && h["to"] == "r").unwrap().clone();
        g = (h["min_turnaround_s"].as_f64().unwrap() * 1e12).round() as u64;
    }
    let at = common::run_toml(&scenario(g + 2));
    let below = common::run_toml(&scenario(g - 3));
    assert_eq!(at["contention"]["events"], 0, "at the minimum guard {g} ps (+2 ps rounding)");
    assert!(below["contention"]["events"].as_u64().unwrap() > 0, "below the minimum guard");
}

#[test]
fn uncompensated_tdma_guard_covers_receiver_delay_ranges() {
    // Receiver delays anywhere in 2–20 ns, drawn per node: without
    // compensation the releasing owner's longest lag and the next owner's
    // shortest set the guard. At the budget's guard no seed shows contention.
    let toml = |guard_ps: u64, seed: u64| {
        format!(
            r#"
seed = {seed}
timing = "random"
duration = "5 ms"
[line]
length = "10 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "7 ns"
disable_time = "9 ns"
receiver_delay = ["2 ns", "20 ns"]
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
[access]
scheme = "tdma"
timekeeper = "tk"
guard = "{guard_ps} ps"
slot_length = "6 us"
order = ["p", "r"]
[[node]]
name = "tk"
position = "0 m"
[[node]]
name = "p"
position = "9 m"
traffic = {{ pattern = "poisson", rate = "1000000/s", payload = "64 B", queue_limit = 10 }}
[[node]]
name = "r"
position = "1 m"
traffic = {{ pattern = "poisson", rate = "1000000/s", payload = "64 B", queue_limit = 10 }}
"#
        )
    };
    let b = budget(&toml(50_000, 1), &[]);
    let guard =
        b["handovers"].as_array().unwrap().iter().map(|h| h["min_turnaround_s"].as_f64().unwrap()).fold(0.0, f64::max);
    let g_ps = (guard * 1e12).ceil() as u64 + 2;
    for seed in 1..=6 {
        let j = common::run_toml(&toml(g_ps, seed));
        assert_eq!(j["contention"]["events"], 0, "seed {seed} at guard {g_ps} ps");
    }
}

#[test]
fn arbitration_accepts_a_biased_line() {
    // TIA-485 receivers read 0 V as undefined, but 5 V through 390 Ω each
    // way across 60 Ω holds the idle line at 357 mV: recessive reads high.
    let line = "length = \"10 m\"\nimpedance = \"120 ohm\"\ndelay = \"5 ns/m\"\ntermination = \"120 ohm\"\n[line.bias]\nsupply = \"5 V\"\npull_up = \"390 ohm\"\npull_down = \"390 ohm\"";
    let tx = format!("family = \"tia485\"\nload = \"10 pF\"\n{TIMING}");
    let text = bus(line, &tx, "scheme = \"arbitration\"", &[0.0, 10.0]).replace(
        "name = \"n1\"\nposition = \"10 m\"\n",
        "name = \"n1\"\nposition = \"10 m\"\ntraffic = { pattern = \"periodic\", period = \"1 ms\", payload = \"4 B\", id = 7 }\n",
    );
    let b = budget(&text, &[]);
    assert_eq!(b["nodes"]["n0"]["idle_state"], "high");
    let unbiased = text.replace("[line.bias]\nsupply = \"5 V\"\npull_up = \"390 ohm\"\npull_down = \"390 ohm\"", "");
    assert!(refused(&unbiased).contains("recessive"));
}
