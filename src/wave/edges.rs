//! From trace events to value changes: occupancies become edges on every
//! signal (shifted by wire and receiver delay at each receiver), and edges
//! are applied in time order once no earlier one can still appear.

use super::{ContentionSpan, FrameSpan, Level, Occupancy, Signal, Value, WaveSink};
use crate::bus::trace::{BusEvent, BusEventKind};
use crate::line::{IdleState, LineModel};
use crate::spec::{Encoding, FrameFormat, Parity, Spec, Uart};

#[derive(Clone, Copy, Debug)]
enum Kind {
    Enable(usize, bool),
    Line(usize, Level),
    /// Receiver r starts (true) or stops hearing driver n; with n's dominance.
    Cover(usize, usize, bool, bool),
    RxLevel(usize, usize, Level),
    Drivers(bool),
    Contention(bool),
}

#[derive(Clone, Copy, Debug)]
struct Edge {
    t: u64,
    /// At one instant: removals first, then levels, then additions, so that
    /// intervals are half-open [from, to) as in the bus model.
    class: u8,
    seq: u64,
    kind: Kind,
}

/// Turns trace events into a waveform for one window.
pub struct WaveModel<S: WaveSink> {
    sink: S,
    window: (u64, u64),
    nodes: usize,
    /// Wire delay plus receiver delay, driver-major: shift[n * nodes + r].
    shift: Vec<u64>,
    max_shift: u64,
    idle: Vec<Level>,
    bit_rate: f64,
    frame: FrameFormat,
    /// Per node: an auto-direction transceiver.
    auto: Vec<bool>,
    open: Vec<Vec<FrameSpan>>,
    enable_at: Vec<(u64, bool)>,
    release_at: Vec<u64>,
    edges: Vec<Edge>,
    seq: u64,
    values: Vec<Value>,
    shown: Vec<Value>,
    /// Per receiver: the drivers it hears now, with their dominance.
    cover: Vec<Vec<(usize, bool)>>,
    /// Level of driver n at receiver r: level[r * nodes + n].
    level: Vec<Level>,
    drivers: u32,
    contention: u32,
    begun: bool,
    touched: Vec<usize>,
    error: Option<String>,
}

impl<S: WaveSink> WaveModel<S> {
    pub fn new(spec: &Spec, line: &LineModel, window: (u64, u64), sink: S) -> Self {
        let nodes = spec.nodes.len();
        let mut shift = Vec::with_capacity(nodes * nodes);
        for n in 0..nodes {
            for r in 0..nodes {
                shift.push(line.delay_ps(n, r) + spec.nodes[r].transceiver.receiver_delay.0);
            }
        }
        let idle: Vec<Level> = (0..nodes)
            .map(|r| match line.idle_state(spec, r) {
                IdleState::High => Level::High,
                IdleState::Low => Level::Low,
                IdleState::Undefined => Level::Floating,
            })
            .collect();
        let mut values = Vec::with_capacity(Signal::count(nodes));
        for &rx in &idle {
            values.push(Value::Bit(Level::Low));
            values.push(Value::Bit(Level::Off));
            values.push(Value::Bit(rx));
        }
        values.push(Value::Count(0));
        values.push(Value::Bit(Level::Low));
        WaveModel {
            sink,
            window,
            nodes,
            max_shift: shift.iter().copied().max().unwrap_or(0),
            shift,
            idle,
            bit_rate: spec.frame.bit_rate,
            frame: spec.frame.clone(),
            auto: spec.nodes.iter().map(|n| n.transceiver.auto_direction).collect(),
            open: vec![Vec::new(); nodes],
            enable_at: vec![(0, false); nodes],
            release_at: vec![0; nodes],
            edges: Vec::new(),
            seq: 0,
            shown: values.clone(),
            values,
            cover: vec![Vec::new(); nodes],
            level: vec![Level::Off; nodes * nodes],
            drivers: 0,
            contention: 0,
            begun: false,
            touched: Vec::new(),
            error: None,
        }
    }

    pub fn sink(&self) -> &S {
        &self.sink
    }

    /// Take trace events, in the order the engine recorded them.
    pub fn feed(&mut self, events: &[BusEvent]) {
        for ev in events {
            let n = ev.node;
            match ev.kind {
                BusEventKind::FrameStart { frame, to, gap_seed } => {
                    self.open[n].push(FrameSpan { s: ev.t, e: u64::MAX, kind: frame, to, corrupted: false, gap_seed })
                }
                BusEventKind::FrameEnd { corrupted, .. } => {
                    // A broadcast ends once per receiver: the same frame, the same end.
                    if let Some(f) =
                        self.open[n].iter_mut().rev().find(|f| f.s <= ev.t && (f.e == u64::MAX || f.e == ev.t))
                    {
                        f.e = ev.t;
                        f.corrupted |= corrupted;
                    }
                }
                BusEventKind::DriverEnable { dominant } => self.enable_at[n] = (ev.t, dominant),
                BusEventKind::DriverRelease => self.release_at[n] = ev.t,
                BusEventKind::DriverOff => {
                    let (a, dominant) = self.enable_at[n];
                    let b = ev.t;
                    let mut frames: Vec<FrameSpan> = Vec::new();
                    self.open[n].retain(|f| {
                        let mine = f.s >= a && f.s <= b;
                        if mine {
                            frames.push(f.clone());
                        }
                        !mine
                    });
                    for f in &mut frames {
                        if f.e == u64::MAX {
                            f.e = self.release_at[n];
                        }
                    }
                    frames.sort_by_key(|f| f.s);
                    let o =
                        Occupancy { node: n, a, release: self.release_at[n], b, dominant, auto: self.auto[n], frames };
                    self.add_occupancy(&o);
                }
                BusEventKind::Contention { other, position_m, overlap_ps } => {
                    let c = ContentionSpan { t: ev.t, overlap: overlap_ps, first: n, second: other, position_m };
                    if c.t + c.overlap >= self.window.0 && c.t <= self.window.1 {
                        self.sink.contention(&c);
                        self.push(c.t, 2, Kind::Contention(true));
                        self.push(c.t + c.overlap, 0, Kind::Contention(false));
                    }
                }
            }
        }
    }

    fn push(&mut self, t: u64, class: u8, kind: Kind) {
        self.seq += 1;
        self.edges.push(Edge { t, class, seq: self.seq, kind });
    }

    fn add_occupancy(&mut self, o: &Occupancy) {
        let (from, to) = self.window;
        if o.b + self.max_shift < from || o.a > to {
            return;
        }
        if o.b >= from {
            self.sink.occupancy(o);
        }
        let n = o.node;
        let timeline = self.timeline(o);
        self.push(o.a, 2, Kind::Enable(n, true));
        self.push(o.release, 0, Kind::Enable(n, false));
        self.push(o.a, 2, Kind::Drivers(true));
        self.push(o.b, 0, Kind::Drivers(false));
        for &(t, l) in &timeline {
            self.push(t, 1, Kind::Line(n, l));
        }
        for r in 0..self.nodes {
            let sh = self.shift[n * self.nodes + r];
            if o.b + sh < from || o.a + sh > to {
                continue;
            }
            self.push(o.a + sh, 2, Kind::Cover(r, n, true, o.dominant));
            for &(t, l) in &timeline {
                match l {
                    // An auto-direction driver's recessive bits: the idle line.
                    Level::Off if o.auto && t < o.b => self.push(t + sh, 1, Kind::RxLevel(r, n, self.idle[r])),
                    Level::Off => {}
                    _ => self.push(t + sh, 1, Kind::RxLevel(r, n, l)),
                }
            }
            self.push(o.b + sh, 0, Kind::Cover(r, n, false, o.dominant));
        }
    }

    /// The level this occupancy's driver puts on the line, as (time, level)
    /// changes; nothing after its output turns off.
    fn timeline(&self, o: &Occupancy) -> Vec<(u64, Level)> {
        // Between frames: the dominant level, the idle (high) level, or off
        // for an auto-direction driver.
        let idle = match (o.dominant, o.auto) {
            (true, _) => Level::Low,
            (_, true) => Level::Off,
            _ => Level::High,
        };
        let mut out = vec![(o.a, idle)];
        let put = |t: u64, l: Level, out: &mut Vec<(u64, Level)>| {
            if t >= o.b || out.last().is_some_and(|&(_, last)| last == l) {
                return;
            }
            if out.last().is_some_and(|&(lt, _)| lt == t) {
                out.pop();
            }
            out.push((t, l));
        };
        // An auto-direction driver lets the bias make its recessive (high) bits.
        let drive = |l: Level| if o.auto && l == Level::High { Level::Off } else { l };
        for f in &o.frames {
            match self.frame.encoding.uart() {
                Some(u) => {
                    let per = u.char_halves();
                    let mut gaps = crate::engine::chars::Gaps::new(&self.frame.char_gap, f.gap_seed, u64::MAX);
                    let mut gap_sum = 0;
                    for k in 0.. {
                        let start = f.s + self.frame.time_of_halves(k * per).0 + gap_sum;
                        if start >= f.e {
                            break;
                        }
                        for j in 0..(per / 2) {
                            let t = start + self.frame.time_of_halves(2 * j).0;
                            put(t, drive(uart_level(u, f.s, o.node, k, j)), &mut out);
                        }
                        put(start + self.frame.time_of_halves(per).0, idle, &mut out);
                        gap_sum += gaps.next().unwrap_or(0);
                    }
                }
                None => {
                    let symbols = ((f.e.saturating_sub(f.s)) as f64 * self.bit_rate / 1e12).round() as u64;
                    for k in 0..symbols {
                        let t = f.s + (k as f64 * 1e12 / self.bit_rate).round() as u64;
                        put(t, symbol_level(self.frame.encoding, f.s, o.node, k), &mut out);
                    }
                }
            }
            put(f.e, idle, &mut out);
        }
        if out.last().is_some_and(|&(t, _)| t == o.b) {
            out.pop();
        }
        out.push((o.b, Level::Off));
        out
    }

    /// Apply every edge before `settled`: no edge earlier than it can appear any more.
    pub fn advance(&mut self, settled: u64) -> Result<(), String> {
        self.edges.sort_unstable_by_key(|e| (e.t, e.class, e.seq));
        let cut = self.edges.partition_point(|e| e.t < settled);
        let ready: Vec<Edge> = self.edges.drain(..cut).collect();
        self.apply(&ready);
        self.error.take().map_or(Ok(()), Err)
    }

    /// Apply everything left and close the window.
    pub fn finish(mut self) -> Result<S, String> {
        self.advance(u64::MAX)?;
        if !self.begun {
            // Nothing changed inside the window: it shows the state at its start.
            self.begun = true;
            self.sink.begin(self.window.0, &self.shown)?;
        }
        self.sink.end(self.window.1)?;
        Ok(self.sink)
    }

    fn apply(&mut self, edges: &[Edge]) {
        let mut i = 0;
        while i < edges.len() {
            let t = edges[i].t;
            let mut j = i;
            while j < edges.len() && edges[j].t == t {
                self.apply_one(edges[j].kind);
                j += 1;
            }
            self.publish(t);
            i = j;
        }
    }

    fn apply_one(&mut self, kind: Kind) {
        let nodes = self.nodes;
        match kind {
            Kind::Enable(n, on) => self.set(Signal::Enable(n), Value::Bit(if on { Level::High } else { Level::Low })),
            Kind::Line(n, l) => self.set(Signal::Line(n), Value::Bit(l)),
            Kind::Drivers(up) => {
                self.drivers = if up { self.drivers + 1 } else { self.drivers.saturating_sub(1) };
                self.set(Signal::Drivers, Value::Count(self.drivers));
            }
            Kind::Contention(up) => {
                self.contention = if up { self.contention + 1 } else { self.contention.saturating_sub(1) };
                let v = if self.contention > 0 { Level::High } else { Level::Low };
                self.set(Signal::Contention, Value::Bit(v));
            }
            Kind::Cover(r, n, on, dominant) => {
                if on {
                    self.cover[r].push((n, dominant));
                } else if let Some(k) = self.cover[r].iter().position(|&(d, _)| d == n) {
                    self.cover[r].swap_remove(k);
                }
                self.update_rx(r);
            }
            Kind::RxLevel(r, n, l) => {
                self.level[r * nodes + n] = l;
                self.update_rx(r);
            }
        }
    }

    fn update_rx(&mut self, r: usize) {
        let c = &self.cover[r];
        let l = match c.len() {
            0 => self.idle[r],
            1 => self.level[r * self.nodes + c[0].0],
            _ if c.iter().all(|&(_, dominant)| dominant) => Level::Low,
            _ => Level::Contended,
        };
        self.set(Signal::Rx(r), Value::Bit(l));
    }

    fn set(&mut self, s: Signal, v: Value) {
        let i = s.index(self.nodes);
        if self.values[i] != v {
            self.values[i] = v;
            self.touched.push(i);
        }
    }

    /// Hand the changes at `t` to the sink, if `t` lies in the window.
    fn publish(&mut self, t: u64) {
        let (from, to) = self.window;
        if t > from && t <= to && !self.begun {
            self.begun = true;
            if let Err(e) = self.sink.begin(from, &self.shown) {
                self.error.get_or_insert(e);
            }
        }
        let mut touched = std::mem::take(&mut self.touched);
        touched.sort_unstable();
        touched.dedup();
        if self.begun && t <= to {
            for &i in &touched {
                if self.shown[i] != self.values[i] {
                    self.shown[i] = self.values[i];
                    if let Err(e) = self.sink.change(t, Signal::from_index(i, self.nodes), self.values[i]) {
                        self.error.get_or_insert(e);
                    }
                }
            }
        } else if t <= from {
            for &i in &touched {
                self.shown[i] = self.values[i];
            }
        }
        touched.clear();
        self.touched = touched;
    }
}

/// A deterministic stand-in for frame contents: symbol `k` of the frame that
/// starts at `s` on `node`.
fn symbol_level(encoding: Encoding, s: u64, node: usize, k: u64) -> Level {
    let bit = |j: u64| pattern(s, node, j) & 1 == 1;
    let level = |b: bool| if b { Level::High } else { Level::Low };
    match encoding {
        // IEEE 802.3 convention: a 1 is low then high, a 0 high then low.
        Encoding::Manchester => level(bit(k / 2) == (k % 2 == 1)),
        // UART frames are laid out character by character (see `uart_level`).
        Encoding::Nrz | Encoding::B8b10b | Encoding::Uart(_) => level(bit(k)),
    }
}

/// Bit `j` of UART character `k` of the frame that starts at `s` on `node`:
/// start bit low, data bits least significant first, parity, stop bits high.
fn uart_level(u: Uart, s: u64, node: usize, k: u64, j: u64) -> Level {
    let data = u64::from(u.data);
    let byte = pattern(s, node, k) & ((1 << data) - 1);
    let high = match j {
        0 => false,
        j if j <= data => byte >> (j - 1) & 1 == 1,
        j if j == data + 1 && u.parity != Parity::None => match u.parity {
            Parity::Even => byte.count_ones() % 2 == 1,
            Parity::Odd => byte.count_ones().is_multiple_of(2),
            Parity::Mark => true,
            _ => false,
        },
        _ => true,
    };
    if high {
        Level::High
    } else {
        Level::Low
    }
}

/// SplitMix64 of (start, node, index).
fn pattern(s: u64, node: usize, k: u64) -> u64 {
    crate::engine::rng::mix64(s ^ (node as u64).rotate_left(40) ^ k.wrapping_mul(0x9e37_79b9_7f4a_7c15))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bus::trace::BusEventKind as K;
    use crate::wave::timing::Recording;

    #[test]
    fn symbols_sit_on_the_bit_grid_and_receivers_see_them_shifted() {
        let spec = crate::scenario::parse_str(include_str!("../../scenarios/fruit-grader.toml"), "fruit").unwrap();
        let line = LineModel::new(&spec);
        let n = spec.nodes.len();
        let (a, s, e, release, b) = (1_000_000, 1_007_000, 1_107_000, 1_107_000, 1_114_000);
        let ev = |t, kind| BusEvent { t, node: 0, kind };
        let mut m = WaveModel::new(&spec, &line, (0, 2_000_000), Recording::new(n, (0, 2_000_000)));
        m.feed(&[
            ev(s, K::FrameStart { frame: "poll", to: 1, gap_seed: 0 }),
            ev(e, K::FrameEnd { frame: "poll", to: 1, corrupted: false }),
            ev(a, K::DriverEnable { dominant: false }),
            ev(release, K::DriverRelease),
            ev(b, K::DriverOff),
        ]);
        let rec = m.finish().unwrap();
        // 100 Mbit/s: 10 symbols of 10 ns each between s and e; every change on the grid.
        let changes = &rec.line[0];
        assert_eq!(changes.first(), Some(&(0, Level::Off)));
        assert_eq!(changes[1], (a, Level::High), "driving the idle level from the enable");
        assert_eq!(changes.last(), Some(&(b, Level::Off)));
        for &(t, _) in &changes[2..changes.len() - 1] {
            assert!(t == e || (t >= s && t < e && (t - s) % 10_000 == 0), "change at {t} is off the bit grid");
        }
        // Node 1's receiver sees the same levels, wire delay plus receiver delay later.
        let shift = line.delay_ps(0, 1) + spec.nodes[1].transceiver.receiver_delay.0;
        let driven: Vec<(u64, Level)> = changes[1..changes.len() - 1].to_vec();
        let heard: Vec<(u64, Level)> = rec.rx[1][1..rec.rx[1].len() - 1].to_vec();
        assert_eq!(heard, driven.iter().map(|&(t, l)| (t + shift, l)).collect::<Vec<_>>());
        // Type-2 receivers read the idle line as low (a failsafe threshold): never x.
        assert_eq!(rec.rx[1].first(), Some(&(0, Level::Low)));
        assert_eq!(rec.rx[1].last(), Some(&(b + shift, Level::Low)));
    }

    #[test]
    fn a_window_without_changes_shows_the_state_at_its_start() {
        let spec = crate::scenario::parse_str(include_str!("../../scenarios/fruit-grader.toml"), "fruit").unwrap();
        let line = LineModel::new(&spec);
        let n = spec.nodes.len();
        let ev = |t, kind| BusEvent { t, node: 0, kind };
        // Inside the disable time: the enable is released, the output still drives the idle level.
        let window = (1_108_000, 1_110_000);
        let mut m = WaveModel::new(&spec, &line, window, Recording::new(n, window));
        m.feed(&[
            ev(1_007_000, K::FrameStart { frame: "poll", to: 1, gap_seed: 0 }),
            ev(1_107_000, K::FrameEnd { frame: "poll", to: 1, corrupted: false }),
            ev(1_000_000, K::DriverEnable { dominant: false }),
            ev(1_107_000, K::DriverRelease),
            ev(1_114_000, K::DriverOff),
        ]);
        let rec = m.finish().unwrap();
        assert_eq!(rec.line[0], [(window.0, Level::High)], "not the state after the run (off)");
    }
}
