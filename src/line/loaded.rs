//! The loaded transmission line.
//!
//! Lumped node capacitance spread along a line lowers its impedance and slows
//! it down. With C0 = tpd0 / Z0 the line's own capacitance per metre and
//! C_d·n the added capacitance per metre (node load times node density),
//!
//! ```text
//! Z'   = Z0   / sqrt(1 + C_d·n / C0)
//! tpd' = tpd0 · sqrt(1 + C_d·n / C0)
//! ```
//!
//! (Johnson & Graham, *High-Speed Digital Design*, Prentice Hall 1993, the
//! section on capacitive loading of a transmission line; the same result is
//! in any transmission-line text.) Unequal node loads are averaged along the
//! line: C_d·n is the total added capacitance divided by the line length.

/// Loaded-line figures derived from the unloaded line and its node loads.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LoadedLine {
    /// Unloaded capacitance per metre, C0 = tpd0 / Z0 (F/m).
    pub c0_f_per_m: f64,
    /// Added capacitance per metre from the node loads (F/m).
    pub added_f_per_m: f64,
    /// Loaded impedance Z' (Ω).
    pub impedance_ohm: f64,
    /// Loaded delay per metre tpd' (s/m).
    pub delay_s_per_m: f64,
}

impl LoadedLine {
    /// `total_load_f` is the sum of every node's load capacitance.
    pub fn new(z0_ohm: f64, tpd0_s_per_m: f64, length_m: f64, total_load_f: f64) -> Self {
        let c0 = tpd0_s_per_m / z0_ohm;
        let added = if length_m > 0.0 { total_load_f / length_m } else { 0.0 };
        let k = (1.0 + added / c0).sqrt();
        LoadedLine { c0_f_per_m: c0, added_f_per_m: added, impedance_ohm: z0_ohm / k, delay_s_per_m: tpd0_s_per_m * k }
    }

    /// The loading ratio C_d·n / C0.
    pub fn load_ratio(&self) -> f64 {
        self.added_f_per_m / self.c0_f_per_m
    }

    /// Unloaded inductance per metre, L0 = tpd0 · Z0 (H/m).
    pub fn l0_h_per_m(&self, z0_ohm: f64, tpd0_s_per_m: f64) -> f64 {
        tpd0_s_per_m * z0_ohm
    }
}

/// Reflection coefficient Γ = (Z_L − Z0) / (Z_L + Z0) of a load on a line.
/// An open end (infinite load) gives +1.
pub fn reflection(load_ohm: f64, line_ohm: f64) -> f64 {
    if load_ohm.is_infinite() {
        1.0
    } else {
        (load_ohm - line_ohm) / (load_ohm + line_ohm)
    }
}

/// Parallel combination of resistances; an infinite value is an open circuit.
pub fn parallel(a: f64, b: f64) -> f64 {
    if a.is_infinite() {
        b
    } else if b.is_infinite() {
        a
    } else {
        a * b / (a + b)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, rel: f64) -> bool {
        ((a - b) / b).abs() < rel
    }

    #[test]
    fn worked_example_from_handbook_formula() {
        // Johnson & Graham (1993) loaded-line formula, evaluated by hand:
        // Z0 = 100 Ω, tpd0 = 5 ns/m, C_d = 5 pF every 2.5 cm.
        // C0 = 5e-9/100 = 50 pF/m; C_d/(C0·d) = 5e-12/(50e-12·0.025) = 4;
        // Z' = 100/sqrt(5) = 44.72 Ω, tpd' = 5·sqrt(5) = 11.18 ns/m.
        let l = LoadedLine::new(100.0, 5e-9, 1.0, 40.0 * 5e-12);
        assert!(close(l.load_ratio(), 4.0, 1e-12));
        assert!(close(l.impedance_ohm, 44.7214, 1e-5));
        assert!(close(l.delay_s_per_m, 11.1803e-9, 1e-5));
        assert!(close(l.c0_f_per_m, 50e-12, 1e-12));
        assert!(close(l.l0_h_per_m(100.0, 5e-9), 500e-9, 1e-12));
    }

    #[test]
    fn heavy_load_halves_impedance() {
        // C_d·n = 3·C0 gives sqrt(1 + 3) = 2: Z' = Z0/2 exactly, tpd' = 2·tpd0
        // (the halving common practice quotes for heavily loaded backplanes).
        let c0 = 6e-9 / 120.0;
        let l = LoadedLine::new(120.0, 6e-9, 2.0, 3.0 * c0 * 2.0);
        assert!(close(l.impedance_ohm, 60.0, 1e-12));
        assert!(close(l.delay_s_per_m, 12e-9, 1e-12));
    }

    #[test]
    fn unloaded_line_is_unchanged() {
        let l = LoadedLine::new(100.0, 5e-9, 3.0, 0.0);
        assert_eq!(l.impedance_ohm, 100.0);
        assert_eq!(l.delay_s_per_m, 5e-9);
    }

    #[test]
    fn reflection_and_parallel() {
        // Γ = (Z_L − Z0)/(Z_L + Z0): matched 0, open +1, short −1, 50 on 100 = −1/3.
        assert_eq!(reflection(100.0, 100.0), 0.0);
        assert_eq!(reflection(f64::INFINITY, 100.0), 1.0);
        assert_eq!(reflection(0.0, 100.0), -1.0);
        assert!(close(reflection(50.0, 100.0), -1.0 / 3.0, 1e-12));
        assert_eq!(parallel(100.0, 100.0), 50.0);
        assert_eq!(parallel(f64::INFINITY, 75.0), 75.0);
        // 120 ∥ 120 ∥ 750 Ω = 55.56 Ω, by hand: 60·750/810. (The reference sheet
        // quotes this network as "≈ 54 Ω", the TIA-485-A test load from memory;
        // the exact combination is 3 % above it.)
        assert!(close(parallel(parallel(120.0, 120.0), 750.0), 55.5556, 1e-5));
    }
}
