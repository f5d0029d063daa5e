//! IEEE 1364 Value Change Dump output (timescale 1 ps), through the `vcd` crate.
//!
//! Scope `bus` holds `drivers` (a binary count) and `contention`; one scope
//! per node holds `enable`, `line` (`z` while the driver is off) and `rx`
//! (`x` where the receiver input is undefined).

use std::io::Write;

use vcd::{IdCode, SimulationCommand, TimescaleUnit, Value as V};

use super::{Level, Signal, Value, WaveSink};

/// The largest waveform `run --vcd` writes, judged by [`estimate_bytes`]
/// before the run (256 MiB).
pub const MAX_VCD_BYTES: f64 = 256.0 * 1024.0 * 1024.0;

/// An upper bound on the size of a VCD of `window_s` seconds of a bus of
/// `nodes` nodes at `bit_rate`: at most one driver's symbols change per bit
/// time (contention aside), each change moving the driver's `line` and every
/// receiver's `rx` at its own instant, so up to `nodes + 1` changes of at
/// most 20 bytes each (a timestamp line and a value line) per bit, plus the
/// header. Real files are smaller: idle time and repeated symbols write nothing.
pub fn estimate_bytes(nodes: usize, bit_rate: f64, window_s: f64) -> f64 {
    let header = 400.0 + 80.0 * nodes as f64;
    header + window_s * bit_rate * (nodes as f64 + 1.0) * 20.0
}

pub struct VcdSink<W: Write> {
    w: vcd::Writer<W>,
    ids: Vec<IdCode>,
    width: u32,
    nodes: usize,
    last_t: Option<u64>,
}

/// A VCD identifier made of the characters VCD allows in a reference.
fn reference(name: &str) -> String {
    name.chars().map(|c| if c.is_ascii_graphic() && c != '$' { c } else { '_' }).collect()
}

impl<W: Write> VcdSink<W> {
    /// Write the header: `names` are the node names, in node order.
    pub fn new(out: W, scenario: &str, names: &[String]) -> std::io::Result<Self> {
        let mut w = vcd::Writer::new(out);
        w.comment(&format!("halfwire waveform of scenario \"{scenario}\"; frame contents are a stand-in pattern"))?;
        w.version(concat!("halfwire ", env!("CARGO_PKG_VERSION")))?;
        w.timescale(1, TimescaleUnit::PS)?;
        w.add_module("bus")?;
        let width = (usize::BITS - names.len().leading_zeros()).max(1);
        let drivers = w.add_wire(width, "drivers")?;
        let contention = w.add_wire(1, "contention")?;
        let mut ids = vec![IdCode::FIRST; Signal::count(names.len())];
        ids[Signal::Drivers.index(names.len())] = drivers;
        ids[Signal::Contention.index(names.len())] = contention;
        for (n, name) in names.iter().enumerate() {
            w.add_module(&reference(name))?;
            ids[Signal::Enable(n).index(names.len())] = w.add_wire(1, "enable")?;
            ids[Signal::Line(n).index(names.len())] = w.add_wire(1, "line")?;
            ids[Signal::Rx(n).index(names.len())] = w.add_wire(1, "rx")?;
            w.upscope()?;
        }
        w.upscope()?;
        w.enddefinitions()?;
        Ok(VcdSink { w, ids, width, nodes: names.len(), last_t: None })
    }

    pub fn writer(&mut self) -> &mut W {
        self.w.writer()
    }

    fn put(&mut self, i: usize, v: Value) -> std::io::Result<()> {
        let id = self.ids[i];
        match v {
            Value::Bit(l) => self.w.change_scalar(id, bit(l)),
            Value::Count(c) => {
                let bits: Vec<V> = (0..self.width).rev().map(|k| if c >> k & 1 == 1 { V::V1 } else { V::V0 }).collect();
                self.w.change_vector(id, bits)
            }
        }
    }

    fn at(&mut self, t: u64) -> std::io::Result<()> {
        if self.last_t != Some(t) {
            self.w.timestamp(t)?;
            self.last_t = Some(t);
        }
        Ok(())
    }
}

fn bit(l: Level) -> V {
    match l {
        Level::Low => V::V0,
        Level::High => V::V1,
        Level::Off => V::Z,
        Level::Floating | Level::Contended => V::X,
    }
}

fn err(e: std::io::Error) -> String {
    format!("cannot write the VCD: {e}")
}

impl<W: Write> WaveSink for VcdSink<W> {
    fn begin(&mut self, at: u64, values: &[Value]) -> Result<(), String> {
        self.at(at).map_err(err)?;
        self.w.begin(SimulationCommand::Dumpvars).map_err(err)?;
        for (i, &v) in values.iter().enumerate() {
            self.put(i, v).map_err(err)?;
        }
        self.w.end().map_err(err)
    }

    fn change(&mut self, t: u64, s: Signal, v: Value) -> Result<(), String> {
        self.at(t).map_err(err)?;
        self.put(s.index(self.nodes), v).map_err(err)
    }

    fn end(&mut self, at: u64) -> Result<(), String> {
        self.at(at).map_err(err)?;
        self.w.flush().map_err(err)
    }
}
