//! Driver amplitude on a terminated, loaded line.
//!
//! A current-mode driver produces V_AB = I · R_eff, where R_eff is the
//! impedance its output sees when it switches. A driver part-way along the
//! line launches a wave in both directions, so it sees the two halves in
//! parallel: Z'/2. A driver at an end sees the termination at that end in
//! parallel with the line, R_T ∥ Z'; with an unterminated end that is Z'
//! alone. These are initial-step (transient) amplitudes on a lossless line.

use super::loaded::parallel;
use crate::spec::Termination;

/// Positions closer than this to an end count as "at the end" (1 µm).
pub const END_TOLERANCE_M: f64 = 1e-6;

/// Resolved termination resistances at the two ends; infinite means open.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Ends {
    pub near_ohm: f64,
    pub far_ohm: f64,
}

impl Ends {
    /// Resolve a termination: a matched end takes the loaded impedance of
    /// the section it terminates (`near_ohm`, `far_ohm`).
    pub fn resolve(termination: &Termination, near_section_ohm: f64, far_section_ohm: f64) -> Self {
        match *termination {
            Termination::BothEnds { near_ohm, far_ohm } => {
                Ends { near_ohm: near_ohm.unwrap_or(near_section_ohm), far_ohm: far_ohm.unwrap_or(far_section_ohm) }
            }
            Termination::FarEnd { far_ohm } => {
                Ends { near_ohm: f64::INFINITY, far_ohm: far_ohm.unwrap_or(far_section_ohm) }
            }
            Termination::Unterminated => Ends { near_ohm: f64::INFINITY, far_ohm: f64::INFINITY },
        }
    }

    /// The impedance a driver at `position_m` sees when it switches.
    pub fn step_load_ohm(&self, position_m: f64, length_m: f64, loaded_ohm: f64) -> f64 {
        if position_m <= END_TOLERANCE_M {
            parallel(self.near_ohm, loaded_ohm)
        } else if position_m >= length_m - END_TOLERANCE_M {
            parallel(self.far_ohm, loaded_ohm)
        } else {
            loaded_ohm / 2.0
        }
    }

    /// The settled (DC) load of the terminations alone.
    pub fn dc_load_ohm(&self) -> f64 {
        parallel(self.near_ohm, self.far_ohm)
    }
}

/// Differential amplitude of a current-mode driver: V = I · R.
pub fn current_mode_v(current_a: f64, load_ohm: f64) -> f64 {
    crate::spec::Driver::Current { amps: current_a }.amplitude_v(load_ohm)
}

/// Differential amplitude of a voltage-mode driver: V = V_oc · R / (R + R_out).
pub fn voltage_mode_v(open_circuit_v: f64, output_ohm: f64, load_ohm: f64) -> f64 {
    crate::spec::Driver::thevenin(open_circuit_v, output_ohm).amplitude_v(load_ohm)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn common_practice_amplitudes() {
        // Multipoint LVDS, common practice: 11.3 mA into 50 Ω gives 565 mV,
        // and into a heavily loaded 30 Ω bus about 339 mV (> 300 mV).
        assert!((current_mode_v(11.3e-3, 50.0) - 0.565).abs() < 1e-12);
        let v = current_mode_v(11.3e-3, 30.0);
        assert!((v - 0.339).abs() < 1e-12 && v > 0.300);
        // LVDS, common practice: 3.5 mA into 100 Ω gives 350 mV.
        assert!((current_mode_v(3.5e-3, 100.0) - 0.350).abs() < 1e-12);
    }

    #[test]
    fn voltage_mode_divider() {
        // Thevenin source into a load: V = V_oc·R/(R + R_out). A 3.3 V source
        // behind 50 Ω into 54 Ω (the TIA-485-A test load, from memory) gives
        // 1.713 V, above the 1.5 V minimum; a stiff source gives V_oc.
        let v = voltage_mode_v(3.3, 50.0, 54.0);
        assert!((v - 3.3 * 54.0 / 104.0).abs() < 1e-12 && v > 1.5);
        assert_eq!(voltage_mode_v(1.5, 0.0, 54.0), 1.5);
    }

    #[test]
    fn driver_position_sets_the_load() {
        let both = Ends::resolve(&Termination::BothEnds { near_ohm: None, far_ohm: None }, 60.0, 60.0);
        // Mid-line: Z'/2. At a matched end: R_T ∥ Z' = Z'/2 as well.
        assert_eq!(both.step_load_ohm(1.0, 2.0, 60.0), 30.0);
        assert_eq!(both.step_load_ohm(0.0, 2.0, 60.0), 30.0);
        assert_eq!(both.step_load_ohm(2.0, 2.0, 60.0), 30.0);
        assert_eq!(both.dc_load_ohm(), 30.0);
        // Multidrop: the near end is open, so a near-end driver sees Z'.
        let far = Ends::resolve(&Termination::FarEnd { far_ohm: None }, 60.0, 60.0);
        assert_eq!(far.step_load_ohm(0.0, 2.0, 60.0), 60.0);
        let open = Ends::resolve(&Termination::Unterminated, 60.0, 60.0);
        assert!(open.dc_load_ohm().is_infinite());
    }
}
