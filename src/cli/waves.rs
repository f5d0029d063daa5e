//! `run --vcd`, `--plot-timing` and `--plot-latency`: the pictures of one run.

use std::fs::File;
use std::io::BufWriter;
use std::path::PathBuf;

use halfwire::bus::trace::BusEvent;
use halfwire::engine::Simulation;
use halfwire::line::LineModel;
use halfwire::report::Report;
use halfwire::spec::Spec;
use halfwire::wave::timing::{Both, Recording, MAX_OCCUPANCIES};
use halfwire::wave::vcd::VcdSink;
use halfwire::wave::WaveModel;

use super::output::AtomicFile;
use super::Failure;

type Sinks = Both<VcdSink<BufWriter<File>>, Recording>;

/// The waveform outputs of a run, fed as the run goes.
pub struct Waves {
    model: WaveModel<Sinks>,
    vcd: Option<AtomicFile>,
    svg: Option<PathBuf>,
    hide_idle: Option<bool>,
}

fn failure(e: String) -> Failure {
    Failure::input(e)
}

impl Waves {
    pub fn new(
        spec: &Spec,
        window: (u64, u64),
        vcd: Option<&PathBuf>,
        svg: Option<&PathBuf>,
        hide_idle: Option<bool>,
    ) -> Result<Waves, Failure> {
        let names: Vec<String> = spec.nodes.iter().map(|n| n.name.clone()).collect();
        let (vcd_file, vcd_sink) = match vcd {
            Some(path) => {
                let file = AtomicFile::create(path)?;
                let sink = VcdSink::new(BufWriter::new(file.handle()?), &spec.name, &names)
                    .map_err(|e| Failure::input(format!("{}: cannot write: {e}", path.display())))?;
                (Some(file), Some(sink))
            }
            None => (None, None),
        };
        let recording = svg.map(|_| Recording::new(names.len(), window));
        let line = LineModel::new(spec);
        let model = WaveModel::new(spec, &line, window, Both(vcd_sink, recording));
        Ok(Waves { model, vcd: vcd_file, svg: svg.cloned(), hide_idle })
    }

    /// Take the events of one slice; everything before `settled` is final.
    pub fn take(&mut self, events: &[BusEvent], settled: u64) -> Result<(), Failure> {
        self.model.feed(events);
        self.model.advance(settled).map_err(failure)
    }

    /// Close the window and write the files.
    pub fn finish(self, spec: &Spec, tail: &[BusEvent]) -> Result<(), Failure> {
        let mut model = self.model;
        model.feed(tail);
        let Both(vcd, recording) = model.finish().map_err(failure)?;
        if let (Some(mut sink), Some(file)) = (vcd, self.vcd) {
            use std::io::Write;
            sink.writer().flush().map_err(|e| failure(format!("cannot write the VCD: {e}")))?;
            drop(sink);
            file.commit()?;
        }
        if let (Some(rec), Some(path)) = (recording, self.svg) {
            if rec.overflow {
                return Err(Failure::input(format!(
                    "--plot-timing: the window holds more than {MAX_OCCUPANCIES} driver occupancies, too many for a legible \
                     timing diagram: narrow it with --window A..B (e.g. a few hand-overs: --window 0us..50us)"
                )));
            }
            let names: Vec<String> = spec.nodes.iter().map(|n| n.name.clone()).collect();
            let line = LineModel::new(spec);
            let delay = |a: usize, b: usize| line.delay_ps(a, b);
            let diagram = halfwire::plot::timing::Diagram {
                names: &names,
                scenario: &spec.name,
                bit_rate: spec.frame.bit_rate,
                delay_ps: &delay,
                hide_idle: self.hide_idle,
            };
            let text = halfwire::plot::timing::render(&rec, &diagram);
            write_text(&path, &text)?;
        }
        Ok(())
    }
}

/// Write a whole text file atomically.
pub fn write_text(path: &std::path::Path, text: &str) -> Result<(), Failure> {
    let mut f = AtomicFile::create(path)?;
    f.write(text.as_bytes())?;
    f.commit()
}

/// `--plot-latency`: how often each node's messages are slower than each
/// latency, with the scenario's latency requirements.
pub fn plot_latency(report: &Report, spec: &Spec, path: &std::path::Path) -> Result<(), Failure> {
    use halfwire::check;
    // The expectations' values in SI units, as `check` reads them; one that
    // does not resolve against this report is simply not drawn.
    let metrics = check::flatten(&serde_json::to_value(report).expect("a report serializes"));
    let requirements: Vec<_> = check::resolve(&spec.name, &spec.expect, &metrics)
        .unwrap_or_default()
        .iter()
        .filter_map(|r| {
            halfwire::plot::latency::Requirement::from_expectation(
                &r.expectation.metric,
                r.expectation.op.symbol(),
                r.required,
            )
        })
        .collect();
    let chart = halfwire::plot::latency::chart(report, &requirements).map_err(failure)?.ok_or_else(|| Failure {
        code: super::status::NOTHING_TO_PLOT,
        message: format!(
            "--plot-latency {}: no message was delivered in the measured window, so there is no latency to plot",
            path.display()
        ),
    })?;
    write_text(path, &chart.render())
}

/// The simulation with a trace wide enough for waveforms: from the start
/// (the state at the window's start depends on what came before) to the end.
pub fn simulation(
    spec: &Spec,
    events_window: Option<(halfwire::units::Picos, halfwire::units::Picos)>,
    waves: bool,
) -> Simulation {
    use halfwire::units::Picos;
    let window = if waves { Some((Picos::ZERO, Picos(u64::MAX))) } else { events_window };
    Simulation::with_trace(spec, halfwire::scheme::build(spec), window)
}
