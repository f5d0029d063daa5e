//! Line figures in the run report, through the built binary, against the
//! loaded-line formula (Johnson & Graham, High-Speed Digital Design, 1993)
//! and common-practice multipoint-LVDS amplitudes.

use crate::common;

use common::run_toml;

/// Three or two nodes, evenly spaced from end to end of a 1 m line, whose
/// loads add exactly 3·C0 per metre of each node's pitch (the spacing), so
/// the loaded impedance is Z0/2 and the delay 2·tpd0 all along the line.
fn line(z0: f64, termination: &str, drive: &str, nodes: &str) -> String {
    let c0_pf = 5e-9 / z0 * 1e12; // C0 = tpd0 / Z0 in pF/m, tpd0 = 5 ns/m
    let count = nodes.matches("[[node]]").count() as f64;
    let load = 3.0 * c0_pf / (count - 1.0); // pitch 1/(count − 1) m
    format!(
        r#"
duration = "200 us"
[line]
length = "1 m"
impedance = "{z0} ohm"
delay = "5 ns/m"
termination = "{termination}"
[transceiver]
drive_current = "{drive}"
enable_time = "7 ns"
disable_time = "9 ns"
receiver_delay = "5 ns"
load = "{load} pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
[access]
scheme = "polling"
master = "a"
turnaround = "20 ns"
reply_timeout = "5 us"
{nodes}
"#
    )
}

#[test]
fn heavy_load_halves_the_impedance_and_doubles_the_delay() {
    let j = run_toml(&line(
        120.0,
        "both-ends",
        "11.3 mA",
        "[[node]]\nname = \"a\"\nposition = \"0 m\"\n[[node]]\nname = \"b\"\nposition = \"0.5 m\"\n[[node]]\nname = \"c\"\nposition = \"1 m\"\n",
    ));
    let l = &j["line"];
    // C_d/pitch = 3·C0: Z' = Z0/sqrt(4) = 60 Ω, tpd' = 2·5 ns/m, end to end 10 ns.
    assert!((l["loaded_impedance_min_ohm"].as_f64().unwrap() - 60.0).abs() < 1e-9);
    assert!((l["end_to_end_delay_s"].as_f64().unwrap() - 10e-9).abs() < 1e-18);
    // The averaged figure spreads the same 4.5·C0 of load over the metre instead.
    assert!((l["load_ratio"].as_f64().unwrap() - 4.5).abs() < 1e-9);
    assert!((l["loaded_impedance_ohm"].as_f64().unwrap() - 120.0 / 5.5f64.sqrt()).abs() < 1e-9);
    // Every driver sees 30 Ω (Z'/2 mid-line, Z' ∥ matched R_T at the ends):
    // 11.3 mA into 30 Ω is 339 mV, above 300 mV (common practice).
    let a = l["worst_amplitude_v"].as_f64().unwrap();
    assert!((a - 0.339).abs() < 1e-12, "amplitude {a}");
    // Type-2 margin: 339 − 150 mV.
    assert!((l["worst_margin_v"].as_f64().unwrap() - 0.189).abs() < 1e-12);
    assert!(j["warnings"].as_array().unwrap().iter().all(|w| w["code"] != "amplitude-below-threshold"));
}

#[test]
fn unterminated_end_driver_sees_the_loaded_impedance() {
    // Far-end termination only: the near-end driver sees Z' = 50 Ω (Z0 = 100
    // Ω halved by the load): 11.3 mA gives 565 mV (common practice). The far
    // node, seeing Z' ∥ R_T = 25 Ω, is given twice the current, also 565 mV.
    let j = run_toml(&line(
        100.0,
        "far-end",
        "11.3 mA",
        "[[node]]\nname = \"a\"\nposition = \"0 m\"\n[[node]]\nname = \"b\"\nposition = \"1 m\"\n[node.transceiver]\ndrive_current = \"22.6 mA\"\n",
    ));
    let a = j["line"]["worst_amplitude_v"].as_f64().unwrap();
    assert!((j["line"]["loaded_impedance_min_ohm"].as_f64().unwrap() - 50.0).abs() < 1e-9);
    assert!((a - 0.565).abs() < 1e-12, "amplitude {a}");
}

#[test]
fn a_weak_driver_is_flagged_with_its_shortfall() {
    let j = run_toml(&line(
        120.0,
        "both-ends",
        "1 mA",
        "[[node]]\nname = \"a\"\nposition = \"0 m\"\n[[node]]\nname = \"b\"\nposition = \"0.5 m\"\n[[node]]\nname = \"c\"\nposition = \"1 m\"\n",
    ));
    // 1 mA into 30 Ω = 30 mV against the type-2 high threshold of 150 mV: −120 mV.
    assert!((j["line"]["worst_margin_v"].as_f64().unwrap() + 0.120).abs() < 1e-12);
    let flagged: Vec<&str> = j["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|w| w["code"] == "amplitude-below-threshold")
        .map(|w| w["node"].as_str().unwrap())
        .collect();
    assert_eq!(flagged, vec!["a", "b", "c"]);
    let msg = j["warnings"][0]["message"].as_str().unwrap();
    assert!(msg.contains("30 mV") && msg.contains("120 mV"), "{msg}");
}
