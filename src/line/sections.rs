//! Local loading: the line as sections, each loaded by the nodes in it.
//!
//! The loaded-line formula (Johnson & Graham, *High-Speed Digital Design*,
//! 1993) holds for capacitance spread evenly along a line. A real line is
//! often loaded unevenly (twenty cards crowded at one end of a backplane), so
//! each node's load is spread over its own pitch: from the midpoint to its
//! neighbour on one side to the midpoint to its neighbour on the other. The
//! first and last node reach as far outward as inward (half the gap to their
//! only neighbour), clipped to the line (the part of a pitch beyond an end is
//! capacitance lumped at the end, which changes edges, not the loaded
//! impedance or delay); stretches no node reaches are unloaded, and nodes at
//! one position share a pitch. So evenly spaced nodes load the line evenly
//! wherever they sit, a node at the very end included.
//! Each section then has its own loaded impedance and delay:
//!
//! ```text
//! Z'_k   = Z0   / sqrt(1 + C_k / (C0·Δx_k))
//! tpd'_k = tpd0 · sqrt(1 + C_k / (C0·Δx_k))
//! ```
//!
//! and the wire delay between two points sums the sections between them.
//! On an evenly loaded line every section has the average density, and the
//! result is the classic formula's. The formula assumes the loads are close
//! together against the signal's edge: each section's delay should be small
//! against the transition time (the budget warns when it is not).

use super::loaded::LoadedLine;

/// One stretch of line with the load spread over it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Section {
    pub from_m: f64,
    pub to_m: f64,
    /// Capacitance of the loads in it (F).
    pub load_f: f64,
    pub line: LoadedLine,
}

impl Section {
    /// Time for a signal to cross the whole section (s).
    pub fn delay_s(&self) -> f64 {
        (self.to_m - self.from_m) * self.line.delay_s_per_m
    }
}

/// The line's sections, in position order, covering 0 to the length.
#[derive(Clone, Debug, PartialEq)]
pub struct Sections {
    pub list: Vec<Section>,
    /// Signal time from position 0 to the start of each section (s).
    starts: Vec<f64>,
}

impl Sections {
    /// Sections for loads `loads` (position m, capacitance F) on a line of
    /// `length_m` with unloaded impedance `z0_ohm` and delay `tpd0_s_per_m`.
    pub fn new(z0_ohm: f64, tpd0_s_per_m: f64, length_m: f64, loads: &[(f64, f64)]) -> Sections {
        // Loads at one position share a section.
        let mut points: Vec<(f64, f64)> = Vec::with_capacity(loads.len());
        let mut sorted: Vec<(f64, f64)> = loads.to_vec();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        for (x, c) in sorted {
            match points.last_mut() {
                Some(p) if (p.0 - x).abs() <= 1e-12 * length_m.max(1.0) => p.1 += c,
                _ => points.push((x.clamp(0.0, length_m), c)),
            }
        }
        let mut list = Vec::with_capacity(points.len().max(1));
        if points.is_empty() {
            list.push(Section {
                from_m: 0.0,
                to_m: length_m,
                load_f: 0.0,
                line: LoadedLine::new(z0_ohm, tpd0_s_per_m, length_m, 0.0),
            });
            return Sections::with_starts(list);
        }
        let unloaded = |from: f64, to: f64| Section {
            from_m: from,
            to_m: to,
            load_f: 0.0,
            line: LoadedLine::new(z0_ohm, tpd0_s_per_m, to - from, 0.0),
        };
        let m = points.len();
        let edge = |k: usize, inward: usize| (points[inward].0 - points[k].0).abs() / 2.0;
        for (k, &(x, c)) in points.iter().enumerate() {
            let (from, to, c) = if m == 1 {
                (0.0, length_m, c)
            } else {
                let from = if k == 0 { x - edge(0, 1) } else { (points[k - 1].0 + x) / 2.0 };
                let to = if k + 1 == m { x + edge(m - 1, m - 2) } else { (x + points[k + 1].0) / 2.0 };
                // A pitch that reaches past an end keeps its density: the part
                // beyond is capacitance lumped at the end, left out here.
                let (a, b) = (from.max(0.0), to.min(length_m));
                (a, b, c * (b - a) / (to - from))
            };
            if k == 0 && from > 0.0 {
                list.push(unloaded(0.0, from));
            }
            list.push(Section {
                from_m: from,
                to_m: to,
                load_f: c,
                line: LoadedLine::new(z0_ohm, tpd0_s_per_m, to - from, c),
            });
            if k + 1 == m && to < length_m {
                list.push(unloaded(to, length_m));
            }
        }
        Sections::with_starts(list)
    }

    fn with_starts(list: Vec<Section>) -> Sections {
        let mut starts = Vec::with_capacity(list.len());
        let mut t = 0.0;
        for s in &list {
            starts.push(t);
            t += s.delay_s();
        }
        Sections { list, starts }
    }

    /// Signal time from position 0 to `x` (s): the sections crossed, summed.
    pub fn time_to(&self, x: f64) -> f64 {
        let k = self.list.partition_point(|s| s.to_m <= x).min(self.list.len() - 1);
        let s = &self.list[k];
        self.starts[k] + (x.clamp(s.from_m, s.to_m) - s.from_m) * s.line.delay_s_per_m
    }

    /// The section holding position `x` (the later one at a boundary).
    pub fn at(&self, x: f64) -> &Section {
        let k = self.list.partition_point(|s| s.to_m <= x).min(self.list.len() - 1);
        &self.list[k]
    }

    /// The lowest section impedance (the most heavily loaded stretch).
    pub fn min_impedance_ohm(&self) -> f64 {
        self.list.iter().map(|s| s.line.impedance_ohm).fold(f64::INFINITY, f64::min)
    }

    /// Total signal time end to end (s).
    pub fn end_to_end_s(&self) -> f64 {
        self.list.iter().map(Section::delay_s).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn evenly_spread_loads_give_the_classic_formula() {
        // Johnson & Graham (1993): Z0 = 100 Ω, tpd0 = 5 ns/m, 5 pF every 2.5 cm
        // gives C_d/(C0·d) = 4: Z' = 44.72 Ω, tpd' = 11.18 ns/m. Nodes at the
        // middle of their 2.5 cm stretches load every section alike.
        let loads: Vec<(f64, f64)> = (0..40).map(|i| (0.0125 + 0.025 * i as f64, 5e-12)).collect();
        let s = Sections::new(100.0, 5e-9, 1.0, &loads);
        for sec in &s.list {
            assert!((sec.line.impedance_ohm - 44.7214).abs() < 1e-3, "{sec:?}");
        }
        assert!((s.end_to_end_s() - 11.1803e-9).abs() < 1e-13);
    }

    #[test]
    fn evenly_spaced_nodes_from_end_to_end_load_evenly() {
        // 0, 0.5 and 1 m: each reaches half a gap both ways (clipped at the
        // ends), so 7.5 pF each is 15 pF/m everywhere.
        let s = Sections::new(100.0, 5e-9, 1.0, &[(0.0, 7.5e-12), (0.5, 7.5e-12), (1.0, 7.5e-12)]);
        assert_eq!(s.list.len(), 3);
        let z = 100.0 / (1.0f64 + 15e-12 / 50e-12).sqrt();
        assert!(s.list.iter().all(|x| (x.line.impedance_ohm - z).abs() < 1e-9), "{s:?}");
    }

    #[test]
    fn a_crowded_stretch_is_loaded_more_than_the_average() {
        // Twenty cards at 0.75 in pitch on the first 15 in of a 1 m line
        // (Z0 = 100 Ω, tpd0 = 6 ns/m, C0 = 60 pF/m), 4.32 pF each: spread over
        // the whole metre they would give 100/sqrt(1 + 86.4/60) = 64.0 Ω; in
        // their own 0.75 in stretches, 100/sqrt(1 + 4.32/(60·0.01905)) = 45.7 Ω
        // (Johnson & Graham's formula, by hand).
        let pitch = 0.75 * 0.0254;
        let loads: Vec<(f64, f64)> = (0..20).map(|i| (pitch / 2.0 + pitch * i as f64, 4.32e-12)).collect();
        let s = Sections::new(100.0, 6e-9, 1.0, &loads);
        let crowded = s.at(0.1).line.impedance_ohm;
        assert!((crowded - 100.0 / (1.0 + 4.32 / (60.0 * pitch)).sqrt()).abs() < 1e-9, "{crowded}");
        assert!((crowded - 45.7).abs() < 0.1, "{crowded}");
        let average = LoadedLine::new(100.0, 6e-9, 1.0, 20.0 * 4.32e-12).impedance_ohm;
        assert!((average - 64.0).abs() < 0.1, "{average}");
        // The rest of the line carries no card: unloaded.
        assert_eq!(s.at(0.9).line.impedance_ohm, 100.0);
        // Delays sum the sections crossed.
        let inside = s.time_to(0.1);
        assert!((inside - 0.1 * 6e-9 * (1.0 + 4.32 / (60.0 * pitch)).sqrt()).abs() < 1e-15);
    }
}
