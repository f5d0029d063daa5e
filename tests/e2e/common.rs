//! Shared helpers for the integration tests: a small scenario builder and the
//! published reference formulas the tests check against.
#![allow(dead_code)]

use serde_json::Value;

/// Parameters of a polling bus used across tests.
#[derive(Clone, Debug)]
pub struct Bus {
    pub length_m: f64,
    pub slaves: usize,
    pub first_m: f64,
    pub spacing_m: f64,
    pub rate_per_s: f64,
    pub payload: &'static str,
    pub turnaround: &'static str,
    pub master_turnaround: &'static str,
    pub enable: &'static str,
    pub disable: &'static str,
    pub rx_delay: &'static str,
    pub load: &'static str,
    pub receiver: &'static str,
    pub duration: &'static str,
    pub warmup: &'static str,
    pub seed: u64,
    pub max_per_poll: u32,
    pub slave_disable: Option<&'static str>,
}

impl Default for Bus {
    fn default() -> Self {
        Bus {
            length_m: 2.0,
            slaves: 4,
            first_m: 0.3,
            spacing_m: 0.4,
            rate_per_s: 0.0,
            payload: "64 B",
            turnaround: "20 ns",
            master_turnaround: "30 ns",
            enable: "7 ns",
            disable: "9 ns",
            rx_delay: "5 ns",
            load: "5 pF",
            receiver: "type2",
            duration: "1 ms",
            warmup: "0 s",
            seed: 1,
            max_per_poll: 1,
            slave_disable: None,
        }
    }
}

impl Bus {
    pub fn toml(&self) -> String {
        let traffic = if self.rate_per_s > 0.0 {
            format!(
                "traffic = {{ pattern = \"poisson\", rate = \"{}/s\", payload = \"{}\" }}",
                self.rate_per_s, self.payload
            )
        } else {
            String::new()
        };
        let slave_tx = match self.slave_disable {
            Some(d) => format!("[nodes.transceiver]\ndisable_time = \"{d}\"\n"),
            None => String::new(),
        };
        format!(
            r#"
name = "test bus"
seed = {seed}
duration = "{duration}"
warmup = "{warmup}"

[line]
length = "{length} m"
impedance = "100 ohm"
delay = "5 ns/m"

[transceiver]
drive_current = "11.3 mA"
enable_time = "{enable}"
disable_time = "{disable}"
receiver_delay = "{rx}"
load = "{load}"
receiver = "{receiver}"

[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
interframe_gap = "40 ns"

[access]
scheme = "polling"
master = "m"
max_per_poll = {mpp}
request_bits = 32
empty_reply_bits = 16
turnaround = "{turn}"
reply_timeout = "5 us"

[[node]]
name = "m"
position = "0 m"
turnaround = "{mturn}"

[nodes]
count = {n}
first = "{first} m"
spacing = "{spacing} m"
prefix = "s"
{traffic}
{slave_tx}
"#,
            seed = self.seed,
            duration = self.duration,
            warmup = self.warmup,
            length = self.length_m,
            enable = self.enable,
            disable = self.disable,
            rx = self.rx_delay,
            load = self.load,
            receiver = self.receiver,
            mpp = self.max_per_poll,
            turn = self.turnaround,
            mturn = self.master_turnaround,
            n = self.slaves,
            first = self.first_m,
            spacing = self.spacing_m,
            traffic = traffic,
            slave_tx = slave_tx,
        )
    }

    /// Run through the built binary; the JSON report.
    pub fn run(&self) -> Value {
        run_toml(&self.toml())
    }
}

/// Write `toml` to a temporary scenario file, run `halfwire run FILE --format
/// json` with the built binary, and parse the report.
pub fn run_toml(toml: &str) -> Value {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("scenario.toml");
    std::fs::write(&path, toml).expect("scenario written");
    let out = halfwire(&["run", path.to_str().unwrap(), "--format", "json"]);
    assert!(
        out.status.success(),
        "halfwire failed ({:?}): {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("one JSON report on stdout")
}

/// Write `toml` to a temporary scenario file, run `halfwire budget FILE
/// --format json` (with `extra` arguments) and parse the budget.
pub fn budget_toml(toml: &str, extra: &[&str]) -> Value {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("budget.toml");
    std::fs::write(&path, toml).expect("scenario written");
    let mut args = vec!["budget", path.to_str().unwrap(), "--format", "json"];
    args.extend(extra);
    let out = halfwire(&args);
    assert!(out.status.success(), "halfwire budget failed: {}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("one JSON budget on stdout")
}

/// Run `f` for every item on two threads (this machine has two cores), in order.
pub fn par_map<T: Sync, R: Send>(items: &[T], f: impl Fn(&T) -> R + Sync) -> Vec<R> {
    let mid = items.len().div_ceil(2);
    let (a, b) = items.split_at(mid);
    std::thread::scope(|s| {
        let h = s.spawn(|| a.iter().map(&f).collect::<Vec<R>>());
        let mut rest: Vec<R> = b.iter().map(&f).collect();
        let mut first = h.join().expect("worker thread");
        first.append(&mut rest);
        first
    })
}

/// Loaded delay per metre from the handbook formula (Johnson & Graham,
/// High-Speed Digital Design, 1993): tpd' = tpd0·sqrt(1 + C_d·n / C0), C0 = tpd0 / Z0.
pub fn loaded_tpd(tpd0: f64, z0: f64, total_load_f: f64, length_m: f64) -> f64 {
    let c0 = tpd0 / z0;
    tpd0 * (1.0 + total_load_f / length_m / c0).sqrt()
}

/// Signal time (s) from the near end to each node on a line loaded section by
/// section: each node's load spread over its pitch (to the midpoints with its
/// neighbours; the first and last node as far outward as inward, clipped to
/// the line; the rest unloaded), each stretch with the handbook formula
/// (Johnson & Graham 1993), tpd' = tpd0·sqrt(1 + C/(C0·Δx)); written out here
/// apart from the library, as a check on it. `nodes`: (position m, load F),
/// in position order, at distinct positions, at least two.
pub fn section_times(tpd0: f64, z0: f64, length_m: f64, nodes: &[(f64, f64)]) -> Vec<f64> {
    let c0 = tpd0 / z0;
    let m = nodes.len();
    let bounds: Vec<(f64, f64)> = (0..m)
        .map(|k| {
            let from =
                if k == 0 { nodes[0].0 - (nodes[1].0 - nodes[0].0) / 2.0 } else { (nodes[k - 1].0 + nodes[k].0) / 2.0 };
            let to = if k + 1 == m {
                nodes[m - 1].0 + (nodes[m - 1].0 - nodes[m - 2].0) / 2.0
            } else {
                (nodes[k].0 + nodes[k + 1].0) / 2.0
            };
            (from.max(0.0), to.min(length_m))
        })
        .collect();
    // Each node's load per metre of its pitch (the part of a pitch past an end is left out).
    let pitch = |k: usize| {
        let lo =
            if k == 0 { nodes[0].0 - (nodes[1].0 - nodes[0].0) / 2.0 } else { (nodes[k - 1].0 + nodes[k].0) / 2.0 };
        let hi = if k + 1 == m {
            nodes[m - 1].0 + (nodes[m - 1].0 - nodes[m - 2].0) / 2.0
        } else {
            (nodes[k].0 + nodes[k + 1].0) / 2.0
        };
        hi - lo
    };
    let tpd = |k: usize| tpd0 * (1.0 + nodes[k].1 / (c0 * pitch(k))).sqrt();
    nodes
        .iter()
        .map(|&(x, _)| {
            // The unloaded stretch before the first node's pitch, then the pitches crossed.
            let lead = bounds[0].0.min(x) * tpd0;
            lead + (0..m).map(|k| (x.min(bounds[k].1) - bounds[k].0).max(0.0) * tpd(k)).sum::<f64>()
        })
        .collect()
}

/// Wire delay (ps) between two nodes of [`section_times`], rounded as the engine rounds.
pub fn wire_ps(times: &[f64], i: usize, j: usize) -> u64 {
    ((times[i] - times[j]).abs() * 1e12).round() as u64
}

/// Mean waiting time (arrival to start of service) in a symmetric polling
/// system with N queues, Poisson arrivals λ per queue, service time b with
/// second moment b2, and deterministic switchover r per queue:
/// Takagi, *Analysis of Polling Systems*, MIT Press 1986; Bertsekas &
/// Gallager, *Data Networks*, §3.5.2.
pub mod takagi {
    pub fn exhaustive(n: f64, lambda: f64, b: f64, b2: f64, r: f64) -> f64 {
        let rho = n * lambda * b;
        (n * lambda * b2 + r * (n - rho)) / (2.0 * (1.0 - rho))
    }
    pub fn gated(n: f64, lambda: f64, b: f64, b2: f64, r: f64) -> f64 {
        let rho = n * lambda * b;
        (n * lambda * b2 + r * (n + rho)) / (2.0 * (1.0 - rho))
    }
    pub fn one_limited(n: f64, lambda: f64, b: f64, b2: f64, r: f64) -> f64 {
        let rho = n * lambda * b;
        (n * lambda * b2 + r * (n + rho)) / (2.0 * (1.0 - rho - n * lambda * r))
    }
}

/// Pollaczek–Khinchine mean wait of M/G/1: W = λ·E[S²] / (2(1 − ρ)).
pub fn pollaczek_khinchine(lambda: f64, es2: f64, rho: f64) -> f64 {
    lambda * es2 / (2.0 * (1.0 - rho))
}

/// Two-sided 95 % Student t quantile t(0.975; df), from a statistics table.
pub fn t975(df: usize) -> f64 {
    match df {
        4 => 2.776,
        9 => 2.262,
        29 => 2.045,
        _ => panic!("add t(0.975; {df}) from a table"),
    }
}

/// Mean and 95 % confidence half-width of independent replications.
pub fn mean_ci(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let mean = xs.iter().sum::<f64>() / n;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, t975(xs.len() - 1) * (var / n).sqrt())
}

/// The binary under test: the one `cargo test` built, or `HALFWIRE_BIN` when
/// set (to run these tests against another build, e.g. an older release).
pub fn exe() -> String {
    std::env::var("HALFWIRE_BIN").unwrap_or_else(|_| env!("CARGO_BIN_EXE_halfwire").to_owned())
}

/// Run the built binary.
pub fn halfwire(args: &[&str]) -> std::process::Output {
    std::process::Command::new(exe()).args(args).env("NO_COLOR", "1").output().expect("the halfwire binary runs")
}

/// A TDMA pair for the guard tests: timekeeper at 0 m, P at 2 m and R at 9 m (unequal spacing); P owns the
/// first slot, R the second; both always have a 64-byte message ready.
pub fn tdma_pair(guard_ps: u64, slot_p_ps: u64, slot_r_ps: u64, extra: &str) -> String {
    format!(
        r#"
duration = "20 ms"
warmup = "1 ms"
[line]
length = "10 m"
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
scheme = "tdma"
timekeeper = "tk"
beacon_bits = 32
guard = "{guard_ps} ps"
slots = [{{ node = "p", length = "{slot_p_ps} ps" }}, {{ node = "r", length = "{slot_r_ps} ps" }}]
{extra}
[[node]]
name = "tk"
position = "0 m"
[[node]]
name = "p"
position = "2 m"
traffic = {{ pattern = "poisson", rate = "1000000/s", payload = "64 B", queue_limit = 100 }}
[[node]]
name = "r"
position = "9 m"
traffic = {{ pattern = "poisson", rate = "1000000/s", payload = "64 B", queue_limit = 100 }}
"#
    )
}
