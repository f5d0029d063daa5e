//! Token passing against closed-form results from the documented timing model
//! and against Takagi's symmetric polling results (the token pass is the walk time).

use crate::common;

use common::{mean_ci, par_map, takagi};
use serde_json::Value;

struct Ring {
    nodes: usize,
    length_m: f64,
    spacing_m: f64,
    rate_per_s: f64,
    extra: &'static str,
    duration: &'static str,
    warmup: &'static str,
    seed: u64,
}

impl Default for Ring {
    fn default() -> Self {
        Ring {
            nodes: 5,
            length_m: 2.0,
            spacing_m: 0.4,
            rate_per_s: 0.0,
            extra: "",
            duration: "500 us",
            warmup: "0 s",
            seed: 1,
        }
    }
}

impl Ring {
    fn toml(&self) -> String {
        let traffic = if self.rate_per_s > 0.0 {
            format!("traffic = {{ pattern = \"poisson\", rate = \"{}/s\", payload = \"64 B\" }}", self.rate_per_s)
        } else {
            String::new()
        };
        format!(
            r#"
seed = {seed}
duration = "{duration}"
warmup = "{warmup}"
[line]
length = "{length} m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "7 ns"
disable_time = "9 ns"
receiver_delay = "5 ns"
load = "5 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
interframe_gap = "40 ns"
[access]
scheme = "token"
token_bits = 24
max_per_token = 1
turnaround = "20 ns"
{extra}
[nodes]
count = {n}
first = "0 m"
spacing = "{spacing} m"
prefix = "n"
{traffic}
"#,
            seed = self.seed,
            duration = self.duration,
            warmup = self.warmup,
            length = self.length_m,
            extra = self.extra,
            n = self.nodes,
            spacing = self.spacing_m,
            traffic = traffic
        )
    }

    fn run(&self) -> Value {
        common::run_toml(&self.toml())
    }
}

/// Run a scenario that must be refused: exit 2; the error text.
fn run_bad(toml: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ring.toml");
    std::fs::write(&path, toml).unwrap();
    let out = common::halfwire(&["run", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn ps(v: &Value) -> u64 {
    (v.as_f64().unwrap() * 1e12).round() as u64
}

#[test]
fn zero_load_rotation_is_the_sum_of_the_hops() {
    let ring = Ring::default();
    let j = ring.run();
    // rotation = Σ_i [T_i + e_i + Lt·tb + d(i, i+1) + r_(i+1)], with wire delays
    // from the loaded-line formula (Johnson & Graham 1993) section by section:
    // 5 nodes × 5 pF at 0, 0.4, … 1.6 m of a 2 m line.
    let nodes: Vec<(f64, f64)> = (0..5).map(|i| (0.4 * i as f64, 5e-12)).collect();
    let times = common::section_times(5e-9, 100.0, 2.0, &nodes);
    let mut rotation = 0u64;
    for i in 0..5 {
        let next = (i + 1) % 5;
        let d = common::wire_ps(&times, i, next);
        rotation += 20_000 + 7_000 + 24 * 10_000 + d + 5_000;
    }
    let s = &j["scheme"];
    assert_eq!(s["name"], "token");
    assert!(s["rotations"].as_u64().unwrap() > 100);
    assert_eq!(ps(&s["rotation_mean_s"]), rotation);
    assert_eq!(ps(&s["rotation_max_s"]), rotation);
    assert_eq!(j["contention"]["events"], 0);
}

#[test]
fn symmetric_poisson_load_matches_one_limited_polling() {
    // Takagi (1986), symmetric 1-limited, deterministic walk r = one token hop,
    // service b = one data frame + interframe gap; 1 cm line (delays ≤ 50 ps, neglected).
    let n = 8.0;
    let tb = 10e-9;
    let b = 560.0 * tb + 40e-9;
    let r = 20e-9 + 7e-9 + 24.0 * tb + 5e-9;
    let rho = 0.5;
    let lambda = rho / (n * b);
    let expected = takagi::one_limited(n, lambda, b, b * b, r);
    let seeds: Vec<u64> = (1..=30).collect();
    let waits: Vec<f64> = par_map(&seeds, |&seed| {
        let ring = Ring {
            nodes: 8,
            length_m: 0.01,
            spacing_m: 0.001,
            rate_per_s: lambda,
            duration: "300 ms",
            warmup: "10 ms",
            seed,
            ..Ring::default()
        };
        let j = ring.run();
        // latency = W + (T + e + Ld·tb + d + r)
        let tail = 20e-9 + 7e-9 + 560.0 * tb + 5e-9;
        j["latency_s"]["all"]["mean"].as_f64().unwrap() - tail
    });
    let (mean, half) = mean_ci(&waits);
    eprintln!("token W sim {mean:.4e} ± {half:.2e}, Takagi {expected:.4e}");
    assert!((mean - expected).abs() <= half + 1e-10, "W {mean} ± {half}, expected {expected}");
}

#[test]
fn a_lost_token_is_regenerated_after_the_timeout() {
    // All nodes at one point (no wire delay): recovery comes exactly
    // disable + receiver delay + token_timeout after the lost frame's end.
    let ring = Ring {
        nodes: 3,
        spacing_m: 0.0,
        extra: "token_timeout = \"2 us\"\nfaults = [{ at = \"100 us\", kind = \"lose-token\" }]",
        ..Ring::default()
    };
    let j = ring.run();
    let s = &j["scheme"];
    assert_eq!(s["tokens_lost"], 1);
    assert_eq!(s["recoveries"], 1);
    assert_eq!(ps(&s["recovery_mean_s"]), 9_000 + 5_000 + 2_000_000);
    assert_eq!(j["contention"]["events"], 0);
    // Without a timeout a fault is refused at load time.
    let bad = Ring { extra: "faults = [{ at = \"1 us\", kind = \"lose-token\" }]", ..Ring::default() };
    let err = halfwire::scenario::parse_str(&bad.toml(), "ring.toml").unwrap_err();
    assert!(err.to_string().contains("token_timeout"), "{err}");
    let out = run_bad(&bad.toml());
    assert!(out.contains("token_timeout"), "{out}");
}

#[test]
fn a_watchdog_shorter_than_a_hand_over_duplicates_the_token() {
    // Normal silence at the recovery node is about T + r − disable = 16 ns; a
    // 10 ns watchdog fires while the token is alive, and two tokens then collide.
    let ring = Ring { extra: "token_timeout = \"10 ns\"", duration: "100 us", ..Ring::default() };
    let j = ring.run();
    assert!(j["scheme"]["spurious_regenerations"].as_u64().unwrap() > 0);
    assert_eq!(j["scheme"]["recoveries"], 0, "no token was lost, so no recovery time is recorded");
    assert!(j["contention"]["events"].as_u64().unwrap() > 0);
}

#[test]
fn keys_of_other_schemes_are_refused() {
    let bad = Ring { extra: "master = \"n01\"", ..Ring::default() };
    let err = halfwire::scenario::parse_str(&bad.toml(), "ring.toml").unwrap_err().to_string();
    assert!(err.contains("access.master") && err.contains("does not apply to scheme \"token\""), "{err}");
}
