//! The budget at the standards' worst case, through the built binary, against
//! hand-worked cases: each check value names its source (the standards are
//! quoted from memory, as the family presets are; see `src/line/family.rs`).

use crate::common;

use common::{halfwire, run_toml};
use serde_json::Value;

fn budget(toml: &str) -> Value {
    common::budget_toml(toml, &[])
}

fn refused(toml: &str, needles: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("b.toml");
    std::fs::write(&path, toml).unwrap();
    let out = halfwire(&["budget", path.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    // file:line:column, then the key.
    assert!(err.contains(&format!("{}:", path.display())), "{err}");
    for n in needles {
        assert!(err.contains(n), "{n:?} not in {err}");
    }
}

const TIMING: &str = "enable_time = \"10 ns\"\ndisable_time = \"20 ns\"\nreceiver_delay = \"15 ns\"";
const POLL: &str = "scheme = \"polling\"\nmaster = \"n00\"\nturnaround = \"2 us\"\nreply_timeout = \"50 us\"";

/// A bus: `line` and `transceiver` bodies, nodes at `positions`.
fn bus(line: &str, transceiver: &str, bit_rate: &str, positions: &[f64]) -> String {
    let mut nodes = String::new();
    for (i, x) in positions.iter().enumerate() {
        nodes += &format!("[[node]]\nname = \"n{i:02}\"\nposition = \"{x} m\"\n");
    }
    format!(
        "duration = \"2 ms\"\n[line]\n{line}\n[transceiver]\n{transceiver}\n{TIMING}\n[frame]\nbit_rate = \"{bit_rate}\"\noverhead_bits = 48\n[access]\n{POLL}\n{nodes}"
    )
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    ((a - b) / b).abs() < rel
}

#[test]
fn a_multipoint_lvds_preset_drives_at_the_standards_minimum() {
    // TIA/EIA-899 (from memory): at least 480 mV into a 50 Ω test load, so a
    // 9.6 mA current-mode driver. A driver mid-line on an unloaded 100 Ω line
    // matched at both ends sees 50 Ω: its step is exactly the standard's
    // minimum, and 11.3 mA (565 mV, common practice) is only its typical value.
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    let b =
        budget(&bus(line, "family = \"mlvds\"\nload = \"0 pF\"\nreceiver = \"type2\"", "100 Mbit/s", &[0.0, 0.5, 1.0]));
    let n = &b["nodes"]["n01"];
    assert!(close(n["drive_load_ohm"].as_f64().unwrap(), 50.0, 1e-12), "{n}");
    assert!(close(n["amplitude_step_v"].as_f64().unwrap(), 0.480, 1e-12), "{n}");
    assert!(close(n["amplitude_typical_v"].as_f64().unwrap(), 0.565, 1e-12), "{n}");
    // Margins use the minimum: 480 mV against a type-2 receiver's 150 mV.
    assert!(close(b["line"]["worst_margin_v"].as_f64().unwrap(), 0.480 - 0.150, 1e-9), "{}", b["line"]);
}

#[test]
fn thirty_two_unit_loads_are_750_ohm_across_the_pair() {
    // TIA-485-A (from memory): a unit load is 12 kΩ from each input to the
    // common-mode node, 24 kΩ across the pair; 32 of them are 750 Ω, and with
    // two 120 Ω terminations the pair's DC load is 120 ∥ 120 ∥ 750 = 55.56 Ω.
    let line = "length = \"100 m\"\nimpedance = \"120 ohm\"\nvelocity_factor = 0.66\ntermination = \"120 ohm\"";
    let positions: Vec<f64> = (0..32).map(|i| 100.0 * i as f64 / 31.0).collect();
    let b = budget(&bus(line, "family = \"tia485\"\nload = \"50 pF\"", "100 kbit/s", &positions));
    assert!(close(b["limits"]["unit_loads"].as_f64().unwrap(), 32.0, 1e-12));
    assert!(
        close(b["line"]["dc_load_ohm"].as_f64().unwrap(), 1.0 / (2.0 / 120.0 + 1.0 / 750.0), 1e-9),
        "{}",
        b["line"]
    );
    assert!(close(b["line"]["dc_load_ohm"].as_f64().unwrap(), 55.556, 1e-4));
    // 33 of them exceed the 32 the standard allows.
    let positions: Vec<f64> = (0..33).map(|i| 100.0 * i as f64 / 32.0).collect();
    let b = budget(&bus(line, "family = \"tia485\"\nload = \"50 pF\"", "100 kbit/s", &positions));
    assert!(b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "unit-loads"));
}

#[test]
fn the_tia485_preset_is_a_thevenin_envelope_below_54_ohm() {
    // TIA-485-A (from memory): at least 1.5 V into 54 Ω, at most 6 V open
    // circuit. Into the 30 Ω a mid-line driver sees on a 60 Ω line matched at
    // both ends, the weakest compliant driver (6 V behind 162 Ω) gives
    // 6·30/192 = 0.9375 V, well below 1.5 V.
    let line = "length = \"10 m\"\nimpedance = \"60 ohm\"\nvelocity_factor = 0.66";
    let b = budget(&bus(line, "family = \"tia485\"\nload = \"0 pF\"", "100 kbit/s", &[0.0, 5.0, 10.0]));
    let n = &b["nodes"]["n01"];
    assert!(close(n["drive_load_ohm"].as_f64().unwrap(), 30.0, 1e-12));
    assert!(close(n["amplitude_step_v"].as_f64().unwrap(), 6.0 * 30.0 / 192.0, 1e-12), "{n}");
}

#[test]
fn a_long_biased_cable_is_failsafe_near_the_bias_only() {
    // 1200 m of cable, 0.084 Ω/m per conductor (24 AWG, from memory), 32
    // nodes of one unit load evenly from end to end, 120 Ω at each end, and
    // 560 Ω pull-up and pull-down to 5 V at the near end. The idle voltage is
    // solved here independently, by Gaussian elimination on the nodal
    // equations: the loop resistance between neighbours is 2·r·Δx.
    let n = 32;
    let xs: Vec<f64> = (0..n).map(|i| 1200.0 * i as f64 / (n - 1) as f64).collect();
    let mut g = vec![vec![0.0; n + 1]; n];
    let mut add = |i: usize, j: usize, c: f64| {
        g[i][i] += c;
        g[j][j] += c;
        g[i][j] -= c;
        g[j][i] -= c;
    };
    for i in 0..n - 1 {
        add(i, i + 1, 1.0 / (2.0 * 0.084 * (xs[i + 1] - xs[i])));
    }
    for (i, row) in g.iter_mut().enumerate() {
        row[i] += 1.0 / 24_000.0;
    }
    g[0][0] += 1.0 / 120.0 + 1.0 / 1120.0;
    g[n - 1][n - 1] += 1.0 / 120.0;
    g[0][n] = 5.0 / 1120.0;
    for c in 0..n {
        let pivot = g[c].clone();
        for row in g.iter_mut().skip(c + 1) {
            let f = row[c] / pivot[c];
            for (x, p) in row.iter_mut().zip(&pivot).skip(c) {
                *x -= f * p;
            }
        }
    }
    let mut v = vec![0.0; n];
    for c in (0..n).rev() {
        v[c] = (g[c][n] - (c + 1..n).map(|j| g[c][j] * v[j]).sum::<f64>()) / g[c][c];
    }
    // About 344 mV at the biased end and 119 mV at the far end.
    assert!((v[0] - 0.344).abs() < 1e-3 && (v[n - 1] - 0.119).abs() < 1e-3, "{v:?}");
    let line = "length = \"1200 m\"\nimpedance = \"120 ohm\"\nvelocity_factor = 0.66\ntermination = \"120 ohm\"\nconductor_resistance = \"0.084 ohm/m\"\n[line.bias]\nsupply = \"5 V\"\npull_up = \"560 ohm\"\npull_down = \"560 ohm\"\nposition = \"0 m\"";
    let b = budget(&bus(line, "family = \"tia485\"\nload = \"50 pF\"", "9600 bit/s", &xs));
    for (i, x) in v.iter().enumerate() {
        let node = &b["nodes"][&format!("n{i:02}")];
        assert!((node["idle_v"].as_f64().unwrap() - x).abs() < 1e-9, "n{i:02}: {node} against {x}");
        // ±200 mV TIA-485 receivers: failsafe near the bias, not at the far end.
        let want = if *x >= 0.2 { "high" } else { "undefined" };
        assert_eq!(node["idle_state"], want, "n{i:02} at {x} V");
    }
    let far = b["warnings"].as_array().unwrap().iter().find(|w| w["node"] == "n31").unwrap().clone();
    assert_eq!(far["code"], "idle-undefined");
    assert!(far["message"].as_str().unwrap().contains("bias too weak at n31: 118.9 mV against the 200 mV"), "{far}");
    // The run agrees: the far receivers float in every gap; the near ones only while the line settles.
    let r = run_toml(
        &bus(line, "family = \"tia485\"\nload = \"50 pF\"", "9600 bit/s", &xs)
            .replace("duration = \"2 ms\"", "duration = \"100 ms\""),
    );
    let hazards: Vec<&str> =
        r["floating"]["hazard_receivers"].as_array().unwrap().iter().map(|x| x.as_str().unwrap()).collect();
    assert!(hazards.contains(&"n31") && hazards.contains(&"n00"), "{hazards:?}");
    assert!(r["floating"]["windows"].as_u64().unwrap() > 0);
}

#[test]
fn a_crowded_section_is_loaded_locally() {
    // Twenty cards at 0.75 in pitch on the first 15 in of a 1 m backplane
    // (Z0 = 100 Ω, tpd0 = 6 ns/m, so C0 = 60 pF/m), 4.32 pF each: averaged
    // over the metre they would give 100/sqrt(1 + 86.4/60) = 64.0 Ω, but in
    // their own pitch they give 100/sqrt(1 + 4.32/(60·0.01905)) = 45.7 Ω
    // (Johnson & Graham's formula, by hand).
    let pitch = 0.75 * 0.0254;
    let positions: Vec<f64> = (0..20).map(|i| pitch / 2.0 + pitch * i as f64).collect();
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"6 ns/m\"";
    let b = budget(&bus(
        line,
        "drive_current = \"11.3 mA\"\nload = \"4.32 pF\"\nreceiver = \"type2\"",
        "50 Mbit/s",
        &positions,
    ));
    assert!((b["line"]["loaded_impedance_ohm"].as_f64().unwrap() - 64.0).abs() < 0.05, "{}", b["line"]);
    let local = 100.0 / (1.0f64 + 4.32 / (60.0 * pitch)).sqrt();
    assert!((local - 45.7).abs() < 0.05);
    assert!(close(b["line"]["loaded_impedance_min_ohm"].as_f64().unwrap(), local, 1e-9));
    for p in b["profile"].as_array().unwrap() {
        assert!(close(p["impedance_ohm"].as_f64().unwrap(), local, 1e-9), "{p}");
    }
    // A mid-section driver sees half of it.
    assert!(close(b["nodes"]["n10"]["drive_load_ohm"].as_f64().unwrap(), local / 2.0, 1e-9));
}

#[test]
fn a_3_us_tia485_edge_allows_100_kbit_s() {
    // TIA-485 (from memory): the rise time at most 0.3 of the unit interval,
    // so a 3 µs edge allows 0.3/3 µs = 100 kbit/s.
    let line = "length = \"100 m\"\nimpedance = \"120 ohm\"\nvelocity_factor = 0.66";
    let tx = "family = \"tia485\"\nload = \"50 pF\"\ntransition_time = \"3 us\"";
    let b = budget(&bus(line, tx, "100 kbit/s", &[0.0, 100.0]));
    assert!(close(b["limits"]["max_bit_rate_bit_s"].as_f64().unwrap(), 100e3, 1e-12));
    assert!(b["warnings"].as_array().unwrap().iter().all(|w| w["code"] != "bit-rate-above-edges"));
    let b = budget(&bus(line, tx, "120 kbit/s", &[0.0, 100.0]));
    assert!(b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "bit-rate-above-edges"));
    // A transceiver may set its own edge rule.
    let b = budget(&bus(line, &format!("{tx}\nedge_fraction = 0.5"), "100 kbit/s", &[0.0, 100.0]));
    assert!(close(b["limits"]["max_bit_rate_bit_s"].as_f64().unwrap(), 0.5 / 3e-6, 1e-12));
}

#[test]
fn the_swing_pushes_a_pin_out_of_the_common_mode_range_the_offset_alone_passes() {
    // LVDS (TIA/EIA-644, from memory): receiver input 0 to 2.4 V, driver
    // offset 1.125–1.375 V, strongest driver 454 mV into 100 Ω (4.54 mA). A
    // driver whose ground sits 1 V above the receiver's: its offset lands at
    // 2.125–2.375 V, inside the range, but one pin swings 4.54 mA × 50 Ω / 2 =
    // 113.5 mV higher, to 2.4885 V: outside (reference: V_pin = V_offset ±
    // V_AB/2 + ground difference).
    let line = "length = \"1 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    let mut text = bus(line, "family = \"lvds\"\nload = \"0 pF\"", "100 Mbit/s", &[0.0, 0.5, 1.0]);
    text = text.replace(
        "name = \"n01\"\nposition = \"0.5 m\"\n",
        "name = \"n01\"\nposition = \"0.5 m\"\n[node.transceiver]\nground_offset = \"1 V\"\n",
    );
    let b = budget(&text);
    let cm: Vec<&Value> = b["warnings"].as_array().unwrap().iter().filter(|w| w["code"] == "common-mode").collect();
    assert!(!cm.is_empty(), "{}", b["warnings"]);
    let m = cm[0]["message"].as_str().unwrap();
    assert!(m.contains("2.489 V") && m.contains("the offset alone would pass"), "{m}");
    // With a 0.8 V ground difference both pins stay inside (2.2885 V at most).
    let b = budget(&text.replace("ground_offset = \"1 V\"", "ground_offset = \"0.8 V\""));
    assert!(b["warnings"].as_array().unwrap().iter().all(|w| w["code"] != "common-mode"), "{}", b["warnings"]);
}

#[test]
fn cable_loss_scales_with_the_root_of_frequency() {
    // 2 dB per 100 m at 1 MHz; at 4 Mbit/s the signalling frequency is 2 MHz,
    // so the loss is 2·sqrt(2) dB per 100 m (skin effect), 28.28 dB over 1 km:
    // the far receiver gets 10^(−28.28/20) = 3.85 % of the step.
    let line = "length = \"1000 m\"\nimpedance = \"120 ohm\"\nvelocity_factor = 0.66\nattenuation = { db = 2.0, per = \"100 m\", at = \"1 MHz\" }";
    let b = budget(&bus(
        line,
        "drive_current = \"60 mA\"\nload = \"0 pF\"\nreceiver = \"tia485\"",
        "4 Mbit/s",
        &[0.0, 1000.0],
    ));
    let step = b["nodes"]["n00"]["amplitude_step_v"].as_f64().unwrap();
    let got = b["nodes"]["n00"]["weakest_received_v"].as_f64().unwrap();
    let expected = step * 10f64.powf(-2.0 * 2f64.sqrt() * 10.0 / 20.0);
    assert!(close(got, expected, 1e-9), "{got} against {expected}");
    assert!(b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "eye-below-threshold"), "{}", b["warnings"]);
    // Common practice for TIA-485 cable: length × rate ≤ 10^8 m·bit/s (from memory).
    assert!(b["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "length-rate"), "{}", b["warnings"]);
}

#[test]
fn new_keys_refuse_bad_input_with_place_and_key() {
    let tx = "drive_current = \"11.3 mA\"\nload = \"5 pF\"\nreceiver = \"type2\"";
    let base = "length = \"10 m\"\nimpedance = \"100 ohm\"\ndelay = \"5 ns/m\"";
    refused(
        &bus(&format!("{base}\nconductor_resistance = \"-0.1 ohm/m\""), tx, "1 Mbit/s", &[0.0, 10.0]),
        &["line.conductor_resistance", "negative"],
    );
    refused(
        &bus(&format!("{base}\nconductor_resistance = \"0.1 ohm\""), tx, "1 Mbit/s", &[0.0, 10.0]),
        &["line.conductor_resistance", "resistance per length"],
    );
    refused(
        &bus(&format!("{base}\n[line.bias]\nsupply = \"5 V\"\npull_up = \"560 ohm\"\npull_down = \"560 ohm\"\nposition = \"12 m\""), tx, "1 Mbit/s", &[0.0, 10.0]),
        &["line.bias.position", "outside the line"],
    );
    refused(
        &bus(&format!("{base}\nattenuation = {{ db = 2.0, per = \"100 m\" }}"), tx, "1 Mbit/s", &[0.0, 10.0]),
        &["line.attenuation.at", "frequency"],
    );
    refused(
        &bus(
            &format!("{base}\nattenuation = {{ db = -2.0, per = \"100 m\", at = \"1 MHz\" }}"),
            tx,
            "1 Mbit/s",
            &[0.0, 10.0],
        ),
        &["line.attenuation.db"],
    );
    refused(
        &bus(base, &format!("{tx}\nedge_fraction = 1.5"), "1 Mbit/s", &[0.0, 10.0]),
        &["transceiver.edge_fraction"],
    );
}

#[test]
fn run_and_budget_agree_on_every_demo() {
    for entry in std::fs::read_dir("scenarios").unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_none_or(|x| x != "toml") {
            continue;
        }
        let p = path.to_str().unwrap();
        let run: Value = serde_json::from_slice(&halfwire(&["run", p, "--format", "json"]).stdout).unwrap();
        let b: Value = serde_json::from_slice(&halfwire(&["budget", p, "--format", "json"]).stdout).unwrap();
        // The same line figures, from one implementation.
        assert_eq!(run["line"], b["line"], "{p}");
        // The run counts floating windows exactly at the receivers the budget finds undefined or settling.
        let mut from_budget: Vec<String> = b["nodes"]
            .as_object()
            .unwrap()
            .iter()
            .filter(|(_, n)| n["idle_state"] == "undefined" || n["settle_s"].as_f64().is_some_and(|t| t > 0.0))
            .map(|(k, _)| k.clone())
            .collect();
        from_budget.sort();
        let mut from_run: Vec<String> = run["floating"]["hazard_receivers"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap().to_owned())
            .collect();
        from_run.sort();
        assert_eq!(from_run, from_budget, "{p}");
    }
}
