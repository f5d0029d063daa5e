//! Polling timing against closed-form results derived from the documented
//! timing model (README, "Timing model").

use crate::common;

use common::{section_times, wire_ps, Bus};
use serde_json::Value;

fn ps(x: &Value) -> u64 {
    (x.as_f64().expect("a number") * 1e12).round() as u64
}

#[test]
fn zero_load_cycle_is_the_sum_of_the_timing_terms() {
    let bus = Bus { slaves: 5, duration: "200 us", ..Bus::default() };
    let j = bus.run();
    // Independent computation of the documented cycle:
    // Σ_i [e_M + Lp·tb + d(M,i) + r_i + T_i + e_i + Le·tb + d(i,M) + r_M + T_M]
    // Wire delays from the loaded-line formula, section by section (the master at 0 m).
    let mut nodes = vec![(0.0, 5e-12)];
    nodes.extend((0..bus.slaves).map(|i| (bus.first_m + bus.spacing_m * i as f64, 5e-12)));
    let times = section_times(5e-9, 100.0, bus.length_m, &nodes);
    let (e, r, t_s, t_m, tb) = (7_000u64, 5_000u64, 20_000u64, 30_000u64, 10_000u64);
    let (lp, le) = (32u64, 16u64);
    let mut cycle = 0u64;
    for i in 0..bus.slaves {
        let d = wire_ps(&times, 0, i + 1);
        cycle += e + lp * tb + d + r + t_s + e + le * tb + d + r + t_m;
    }
    let s = &j["scheme"];
    assert!(s["cycles"].as_u64().unwrap() > 10);
    assert_eq!(ps(&s["cycle_mean_s"]), cycle, "mean cycle");
    assert_eq!(ps(&s["cycle_max_s"]), cycle, "max cycle");
    assert_eq!(j["contention"]["events"], 0);
    assert_eq!(s["timeouts"], 0);
}

/// Contention on a hand-over appears exactly when the responder's turnaround
/// plus its receiver delay falls below the previous driver's disable time
/// (derivation in the README: the wire delay cancels).
#[test]
fn slave_turnaround_threshold_to_the_picosecond() {
    // disable 9 ns, receiver delay 5 ns: the boundary is a 4 ns turnaround.
    let at = Bus { turnaround: "4 ns", duration: "50 us", ..Bus::default() };
    let below = Bus { turnaround: "3.999 ns", ..at.clone() };
    let ja = at.run();
    let jb = below.run();
    assert_eq!(ja["contention"]["events"], 0, "at the boundary: no overlap");
    let c = &jb["contention"];
    assert!(c["events"].as_u64().unwrap() > 0, "1 ps below: contention");
    assert_eq!(ps(&c["overlap_max_s"]), 1, "the overlap is exactly the 1 ps shortfall");
    let first = &c["first"][0];
    assert_eq!(first["nodes"][0], "m");
    assert!(first["nodes"][1].as_str().unwrap().starts_with('s'));
    // Worst at the new driver's position (the slave), where the master's tail is latest.
    let slave_x = 0.3;
    assert!((first["position_m"].as_f64().unwrap() - slave_x).abs() < 1e-9, "{first}");
}

#[test]
fn master_turnaround_threshold_to_the_picosecond() {
    let at = Bus { master_turnaround: "4 ns", duration: "50 us", ..Bus::default() };
    let below = Bus { master_turnaround: "3.999 ns", ..at.clone() };
    let ja = at.run();
    let jb = below.run();
    assert_eq!(ja["contention"]["events"], 0);
    assert!(jb["contention"]["events"].as_u64().unwrap() > 0);
    assert_eq!(ps(&jb["contention"]["overlap_max_s"]), 1);
    assert_eq!(jb["contention"]["first"][0]["nodes"][1], "m");
}

#[test]
fn threshold_follows_the_previous_drivers_disable_time() {
    // Slaves that turn off slowly (25 ns) need a master turnaround of 20 ns
    // (25 − 5 ns receiver delay); 19.999 ns overlaps by 1 ps.
    let at = Bus { slave_disable: Some("25 ns"), master_turnaround: "20 ns", duration: "50 us", ..Bus::default() };
    let below = Bus { master_turnaround: "19.999 ns", ..at.clone() };
    assert_eq!(at.run()["contention"]["events"], 0);
    let jb = below.run();
    assert_eq!(ps(&jb["contention"]["overlap_max_s"]), 1);
}

#[test]
fn type1_receivers_see_every_hand_over_gap() {
    // With type-1 receivers (idle undefined) each poll/reply gap is a floating
    // window at every receiver; type-2 receivers read an idle line low.
    let t1 = Bus { receiver: "type1", duration: "20 us", ..Bus::default() };
    let t2 = Bus { receiver: "type2", ..t1.clone() };
    let j1 = t1.run();
    let j2 = t2.run();
    assert!(j1["floating"]["windows"].as_u64().unwrap() > 0);
    assert_eq!(j2["floating"]["windows"], 0);
    // A 20 ns slave turnaround + 5 ns receiver delay − 9 ns disable leaves the
    // line undriven for 16 ns at the slave itself (the shortest window there).
    let longest = ps(&j1["floating"]["longest_s"]);
    assert!(longest >= 16_000, "longest {longest}");
}

#[test]
fn utilization_partitions_the_window() {
    let bus = Bus { rate_per_s: 20_000.0, duration: "5 ms", warmup: "1 ms", ..Bus::default() };
    let j = bus.run();
    let u = &j["utilization"];
    let sum: f64 = ["payload", "overhead", "gaps", "idle", "wasted"].iter().map(|k| u[k].as_f64().unwrap()).sum();
    assert!((sum - 1.0).abs() < 1e-12, "sum {sum}");
    assert!(u["payload"].as_f64().unwrap() > 0.0);
    // Without contention or corruption nothing is wasted.
    assert_eq!(u["wasted"].as_f64().unwrap(), 0.0);
    let f = &j["frames"];
    assert_eq!(f["attempts"].as_u64(), Some(f["delivered"].as_u64().unwrap() + f["corrupted"].as_u64().unwrap()));
}
