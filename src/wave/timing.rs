//! A window's waveform kept in memory, for drawing a timing diagram.

use super::{ContentionSpan, Level, Occupancy, Signal, Value, WaveSink};

/// Most occupancies a recording keeps; a timing diagram of more is unreadable.
pub const MAX_OCCUPANCIES: usize = 4000;
/// Most value changes a recording keeps.
pub const MAX_CHANGES: usize = 2_000_000;

/// Everything a timing diagram shows, for one window.
#[derive(Debug, Default)]
pub struct Recording {
    pub window: (u64, u64),
    pub nodes: usize,
    pub occupancies: Vec<Occupancy>,
    pub contentions: Vec<ContentionSpan>,
    /// Per node: the `line` level at the window start, then its changes.
    pub line: Vec<Vec<(u64, Level)>>,
    /// Per node: the `rx` level at the window start, then its changes.
    pub rx: Vec<Vec<(u64, Level)>>,
    /// Set when the window held more than the limits above.
    pub overflow: bool,
    changes: usize,
}

impl Recording {
    pub fn new(nodes: usize, window: (u64, u64)) -> Self {
        Recording { window, nodes, line: vec![Vec::new(); nodes], rx: vec![Vec::new(); nodes], ..Default::default() }
    }

    /// The intervals of `levels` (a start value and changes) clipped to the window.
    pub fn spans(&self, levels: &[(u64, Level)]) -> Vec<(u64, u64, Level)> {
        let mut out = Vec::new();
        for (i, &(t, l)) in levels.iter().enumerate() {
            let end = levels.get(i + 1).map_or(self.window.1, |&(n, _)| n);
            if end > t {
                out.push((t, end, l));
            }
        }
        out
    }
}

impl WaveSink for Recording {
    fn begin(&mut self, at: u64, values: &[Value]) -> Result<(), String> {
        for n in 0..self.nodes {
            if let Value::Bit(l) = values[Signal::Line(n).index(self.nodes)] {
                self.line[n].push((at, l));
            }
            if let Value::Bit(l) = values[Signal::Rx(n).index(self.nodes)] {
                self.rx[n].push((at, l));
            }
        }
        Ok(())
    }

    fn change(&mut self, t: u64, s: Signal, v: Value) -> Result<(), String> {
        if self.changes >= MAX_CHANGES {
            self.overflow = true;
            return Ok(());
        }
        self.changes += 1;
        match (s, v) {
            (Signal::Line(n), Value::Bit(l)) => self.line[n].push((t, l)),
            (Signal::Rx(n), Value::Bit(l)) => self.rx[n].push((t, l)),
            _ => {}
        }
        Ok(())
    }

    fn end(&mut self, _at: u64) -> Result<(), String> {
        Ok(())
    }

    fn occupancy(&mut self, o: &Occupancy) {
        if self.occupancies.len() >= MAX_OCCUPANCIES {
            self.overflow = true;
            return;
        }
        self.occupancies.push(o.clone());
    }

    fn contention(&mut self, c: &ContentionSpan) {
        if c.t >= self.window.0 && self.contentions.len() < MAX_OCCUPANCIES {
            self.contentions.push(*c);
        }
    }
}

/// Feed both sinks from one model.
pub struct Both<A: WaveSink, B: WaveSink>(pub Option<A>, pub Option<B>);

impl<A: WaveSink, B: WaveSink> WaveSink for Both<A, B> {
    fn begin(&mut self, at: u64, values: &[Value]) -> Result<(), String> {
        if let Some(a) = &mut self.0 {
            a.begin(at, values)?;
        }
        if let Some(b) = &mut self.1 {
            b.begin(at, values)?;
        }
        Ok(())
    }

    fn change(&mut self, t: u64, s: Signal, v: Value) -> Result<(), String> {
        if let Some(a) = &mut self.0 {
            a.change(t, s, v)?;
        }
        if let Some(b) = &mut self.1 {
            b.change(t, s, v)?;
        }
        Ok(())
    }

    fn end(&mut self, at: u64) -> Result<(), String> {
        if let Some(a) = &mut self.0 {
            a.end(at)?;
        }
        if let Some(b) = &mut self.1 {
            b.end(at)?;
        }
        Ok(())
    }

    fn occupancy(&mut self, o: &Occupancy) {
        if let Some(a) = &mut self.0 {
            a.occupancy(o);
        }
        if let Some(b) = &mut self.1 {
            b.occupancy(o);
        }
    }

    fn contention(&mut self, c: &ContentionSpan) {
        if let Some(a) = &mut self.0 {
            a.contention(c);
        }
        if let Some(b) = &mut self.1 {
            b.contention(c);
        }
    }
}
