//! Axis scales and tick placement.

use crate::units;

/// How values map to the axis.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Scale {
    Linear,
    Log10,
    /// A quantile axis: position log10(1 / (1 − q)), so 90 %, 99 %, 99.9 % … are evenly spaced.
    Percentile,
    /// A fraction on a logarithmic axis, labelled "1 in 10", "1 in 100", …
    OneIn,
}

impl Scale {
    pub fn map(self, v: f64) -> f64 {
        match self {
            Scale::Linear => v,
            Scale::Log10 | Scale::OneIn => v.log10(),
            Scale::Percentile => -(1.0 - v).log10(),
        }
    }
}

/// One axis: the value range, the scale and the unit of its labels.
#[derive(Clone, Debug)]
pub struct Axis {
    pub lo: f64,
    pub hi: f64,
    pub scale: Scale,
    /// SI base unit for tick labels ("s", "bit/s"); `None` for plain numbers.
    pub unit: Option<String>,
}

impl Axis {
    /// An axis covering `values`, with a margin on linear axes.
    pub fn fit(values: impl IntoIterator<Item = f64>, scale: Scale, unit: Option<String>, from_zero: bool) -> Axis {
        let (mut lo, mut hi) = values
            .into_iter()
            .filter(|v| v.is_finite() && (scale == Scale::Linear || *v > 0.0))
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        if scale == Scale::Linear {
            if from_zero && lo > 0.0 {
                lo = 0.0;
            }
            if hi <= lo {
                hi = lo + if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
            }
            let step = nice_step(hi - lo, 6);
            lo = (lo / step).floor() * step;
            hi = (hi / step).ceil() * step;
        } else if hi <= lo {
            lo /= 2.0;
            hi *= 2.0;
        }
        Axis { lo, hi, scale, unit }
    }

    /// Fraction 0..1 of the way along the axis.
    pub fn frac(&self, v: f64) -> f64 {
        let (a, b) = (self.scale.map(self.lo), self.scale.map(self.hi));
        (self.scale.map(v) - a) / (b - a)
    }

    /// Tick positions and labels.
    pub fn ticks(&self) -> Vec<(f64, String)> {
        match self.scale {
            Scale::Linear => {
                let step = nice_step(self.hi - self.lo, 6);
                let first = (self.lo / step).ceil() as i64;
                let last = (self.hi / step + 1e-9).floor() as i64;
                (first..=last).map(|k| k as f64 * step).map(|v| (v, self.label(v))).collect()
            }
            Scale::Log10 => {
                let (a, b) = (self.lo.log10().floor() as i32, self.hi.log10().ceil() as i32);
                let decades = (b - a).max(1);
                let mut out = Vec::new();
                for e in a..=b {
                    for m in [1.0, 2.0, 5.0] {
                        if decades > 3 && m != 1.0 {
                            continue;
                        }
                        let v = m * 10f64.powi(e);
                        if v >= self.lo * (1.0 - 1e-9) && v <= self.hi * (1.0 + 1e-9) {
                            out.push((v, self.label(v)));
                        }
                    }
                }
                out
            }
            Scale::OneIn => {
                let (a, b) = (self.lo.log10().round() as i32, self.hi.log10().round() as i32);
                (a..=b).map(|e| (10f64.powi(e), one_in(e))).collect()
            }
            Scale::Percentile => [0.5, 0.9, 0.99, 0.999, 0.9999, 0.99999]
                .into_iter()
                .filter(|&q| q >= self.lo - 1e-12 && q <= self.hi + 1e-12)
                .map(|q| (q, format!("p{}", trim(q * 100.0))))
                .collect(),
        }
    }

    pub fn label(&self, v: f64) -> String {
        match self.unit.as_deref() {
            Some("s") => units::format_seconds(v),
            Some("1/s") => units::format_si(v, "/s"),
            Some(u) if u != "1" => units::format_si(v, u),
            _ => trim(v),
        }
    }
}

/// The label of the fraction 10^e: "every message" at 1, then "1 in 10", "1 in 1 000", …
fn one_in(e: i32) -> String {
    if e >= 0 {
        return "every message".into();
    }
    let digits = format!("{}", 10u64.pow(e.unsigned_abs().min(18)));
    // Thousands grouped with a thin space, as in print.
    let mut grouped = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            grouped.push('\u{2009}');
        }
        grouped.push(c);
    }
    format!("1 in {grouped}")
}

/// A number without trailing zeros: 0.5, 12, 99.99.
pub fn trim(v: f64) -> String {
    let s = format!("{:.6}", v);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_owned()
    }
}

/// A 1-2-5 step giving about `target` intervals over `span`.
pub fn nice_step(span: f64, target: usize) -> f64 {
    let raw = (span / target.max(1) as f64).abs().max(f64::MIN_POSITIVE);
    let mag = 10f64.powf(raw.log10().floor());
    let m = raw / mag;
    mag * if m <= 1.0 {
        1.0
    } else if m <= 2.0 {
        2.0
    } else if m <= 5.0 {
        5.0
    } else {
        10.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_numbers_with_units() {
        assert_eq!(nice_step(47.0, 6), 10.0);
        assert_eq!(nice_step(0.0009, 6), 0.0002);
        let a = Axis::fit([3e-6, 47e-6], Scale::Linear, Some("s".into()), true);
        let t: Vec<String> = a.ticks().into_iter().map(|(_, l)| l).collect();
        assert_eq!(t, ["0 s", "10 µs", "20 µs", "30 µs", "40 µs", "50 µs"]);
        let p = Axis { lo: 0.5, hi: 0.9999, scale: Scale::Percentile, unit: None };
        let t: Vec<String> = p.ticks().into_iter().map(|(_, l)| l).collect();
        assert_eq!(t, ["p50", "p90", "p99", "p99.9", "p99.99"]);
        let l2 = std::f64::consts::LOG10_2;
        assert!((p.frac(0.99) - (2.0 - l2) / (4.0 - l2)).abs() < 1e-12);
        let l = Axis { lo: 1e3, hi: 1e6, scale: Scale::Log10, unit: Some("1/s".into()) };
        assert_eq!(l.ticks().first().unwrap().1, "1 k/s");
        let e = Axis { lo: 1e-4, hi: 1.0, scale: Scale::OneIn, unit: None };
        let t: Vec<String> = e.ticks().into_iter().map(|(_, l)| l).collect();
        assert_eq!(t, ["1 in 10\u{2009}000", "1 in 1\u{2009}000", "1 in 100", "1 in 10", "every message"]);
    }
}
