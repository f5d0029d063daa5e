//! `--vary KEY=SPEC`: one swept scenario key and the values it takes.
//!
//! SPEC is a list (`8,16,32`, `"10 ns","20 ns"` or `polling,token`), a
//! linear range (`10ns..60ns step 5ns`) or a logarithmic range
//! (`1k/s..1M/s log 7`). Range ends and steps carry units, which must all
//! be of one dimension; values are written back in the unit of the start.

use serde::{Deserialize, Serialize};

use crate::units::{self, Dimension};

/// Most values one axis may take.
pub const MAX_VALUES: usize = 100_000;

pub use crate::scenario::edit::Literal;

/// One value of an axis: what goes into the scenario, and its size in SI
/// base units when it is a quantity or a number.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct AxisValue {
    pub value: Literal,
    /// The value in SI base units (or the plain number), when it has one.
    pub si: Option<f64>,
    /// The SI base unit of `si` ("s", "bit/s", "1/s", …); absent for plain numbers.
    pub unit: Option<String>,
}

impl AxisValue {
    /// The value as a user would write it: `10 ns`, `16`, `polling`.
    pub fn text(&self) -> String {
        match &self.value {
            Literal::Bool(b) => b.to_string(),
            Literal::Int(i) => i.to_string(),
            Literal::Float(x) => x.to_string(),
            Literal::Text(s) => s.clone(),
            Literal::Toml { toml } => toml.clone(),
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Axis {
    /// Dotted scenario key path, e.g. `access.turnaround` or `node[0].position`.
    pub key: String,
    pub values: Vec<AxisValue>,
}

/// The SI base unit in which [`units::parse_quantity`] returns a dimension.
pub fn base_unit(dim: Dimension) -> &'static str {
    match dim {
        Dimension::Time => "s",
        Dimension::Length => "m",
        Dimension::Resistance => "ohm",
        Dimension::Current => "A",
        Dimension::Capacitance => "F",
        Dimension::Voltage => "V",
        Dimension::BitRate => "bit/s",
        Dimension::Rate => "1/s",
        Dimension::DataSize => "bit",
        Dimension::DelayPerLength => "s/m",
        Dimension::ResistancePerLength => "ohm/m",
    }
}

/// The dimension a quantity string is written in, and its SI value.
fn quantity(text: &str) -> Option<(Dimension, f64)> {
    Dimension::ALL.into_iter().find_map(|d| units::parse_quantity(text, d).ok().map(|v| (d, v)))
}

/// Split `"10ns"` into `("10", "ns")`.
fn split_unit(text: &str) -> (&str, &str) {
    let t = text.trim();
    let end = t
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E') && t[i + 1..].starts_with(|n: char| n.is_ascii_digit() || n == '-')))
        })
        .map_or(t.len(), |(i, _)| i);
    (t[..end].trim(), t[end..].trim())
}

/// Parse one `KEY=SPEC` argument.
pub fn parse_vary(arg: &str) -> Result<Axis, String> {
    let (key, spec) = arg
        .split_once('=')
        .ok_or_else(|| format!("--vary {arg:?}: write it as KEY=SPEC, e.g. access.turnaround=10ns..60ns step 5ns"))?;
    let key = key.trim();
    if key.is_empty() || key.split('.').any(|s| s.trim().is_empty()) {
        return Err(format!("--vary {arg:?}: the key path is empty or has an empty part"));
    }
    let values = parse_spec(spec.trim()).map_err(|e| format!("--vary {key}={}: {e}", spec.trim()))?;
    Ok(Axis { key: key.to_owned(), values })
}

fn parse_spec(spec: &str) -> Result<Vec<AxisValue>, String> {
    if spec.is_empty() {
        return Err("no values: give a list (8,16,32) or a range (10ns..60ns step 5ns, 1k/s..1M/s log 7)".into());
    }
    match spec.split_once("..") {
        Some((a, rest)) => parse_range(a.trim(), rest.trim()),
        None => spec.split(',').map(|item| list_item(item.trim())).collect(),
    }
}

fn list_item(item: &str) -> Result<AxisValue, String> {
    let item = item.trim_matches('"');
    if item.is_empty() {
        return Err("the list has an empty item".into());
    }
    if let Ok(i) = item.parse::<i64>() {
        return Ok(AxisValue { value: Literal::Int(i), si: Some(i as f64), unit: None });
    }
    if let Ok(x) = item.parse::<f64>() {
        if x.is_finite() {
            return Ok(AxisValue { value: Literal::Float(x), si: Some(x), unit: None });
        }
    }
    if let Ok(b) = item.parse::<bool>() {
        return Ok(AxisValue { value: Literal::Bool(b), si: None, unit: None });
    }
    let (si, unit) = match quantity(item) {
        Some((d, v)) => (Some(v), Some(base_unit(d).to_owned())),
        None => (None, None),
    };
    Ok(AxisValue { value: Literal::Text(item.to_owned()), si, unit })
}

enum Kind {
    Step(String),
    Log(String),
}

fn parse_range(a: &str, rest: &str) -> Result<Vec<AxisValue>, String> {
    let (b, kind) = if let Some((b, s)) = rest.split_once(" step ") {
        (b.trim(), Kind::Step(s.trim().to_owned()))
    } else if let Some((b, n)) = rest.split_once(" log ") {
        (b.trim(), Kind::Log(n.trim().to_owned()))
    } else {
        return Err("a range needs `step S` (linear) or `log N` (N points, evenly spaced in logarithm)".into());
    };
    if a.is_empty() || b.is_empty() {
        return Err("a range needs a start and an end, as A..B".into());
    }
    // Dimension and unit from the start; the end and step must match it.
    let (number, unit) = split_unit(a);
    let dim = if unit.is_empty() {
        None
    } else {
        Some(quantity(a).ok_or_else(|| format!("the start {a:?} is not a quantity with a known unit"))?.0)
    };
    let read = |what: &str, text: &str| -> Result<f64, String> {
        match dim {
            Some(d) => units::parse_quantity(text, d).map_err(|e| format!("the {what}: {}", e.message)),
            None => match text.trim().parse::<f64>() {
                Ok(x) if x.is_finite() => Ok(x),
                _ if quantity(text).is_some() => {
                    Err(format!("the {what} {text:?} has a unit, but the start {a:?} has none"))
                }
                _ => Err(format!("the {what} {text:?} is not a number")),
            },
        }
    };
    let start = read("start", a)?;
    let end = read("end", b)?;
    if start > end {
        return Err(format!("the range is empty: the start {a} is after the end {b}"));
    }
    let integers = dim.is_none() && number.parse::<i64>().is_ok() && b.trim().parse::<i64>().is_ok();
    let scale = match dim {
        Some(d) => units::parse_quantity(&format!("1 {unit}"), d).map_err(|e| e.message)?,
        None => 1.0,
    };
    let mut xs: Vec<f64> = match kind {
        Kind::Step(s) => {
            let step = read("step", &s)?;
            if step <= 0.0 {
                return Err(format!("the step {s} must be greater than zero"));
            }
            if end > start && step > (end - start) * (1.0 + 1e-12) {
                return Err(format!(
                    "the step {s} is larger than the range {a}..{b}, which would leave only its start: \
                     give a step no larger than the range, or list the value alone"
                ));
            }
            let n = ((end - start) / step * (1.0 + 1e-12) + 1e-9).floor() + 1.0;
            if n > MAX_VALUES as f64 {
                return Err(format!("the range has {n} values; at most {MAX_VALUES} are allowed"));
            }
            let integers = integers && s.trim().parse::<i64>().is_ok();
            let xs = (0..n as u64).map(|k| start + k as f64 * step);
            if integers {
                xs.map(f64::round).collect()
            } else {
                xs.map(|x| round_sig(x / scale, 12)).collect()
            }
        }
        Kind::Log(n) => {
            let n: usize = n.parse().map_err(|_| format!("`log {n}`: the point count must be a whole number"))?;
            if !(2..=MAX_VALUES).contains(&n) {
                return Err(format!("`log {n}`: give 2 to {MAX_VALUES} points"));
            }
            if start <= 0.0 {
                return Err("a log range needs a start greater than zero".into());
            }
            let ratio = (end / start).ln();
            let xs = (0..n).map(|k| start * (ratio * k as f64 / (n - 1) as f64).exp());
            if integers {
                xs.map(f64::round).collect()
            } else {
                xs.map(|x| round_sig(x / scale, 6)).collect()
            }
        }
    };
    xs.dedup();
    xs.into_iter()
        .map(|x| match dim {
            None if integers => Ok(AxisValue { value: Literal::Int(x as i64), si: Some(x), unit: None }),
            None => Ok(AxisValue { value: Literal::Float(x), si: Some(x), unit: None }),
            Some(d) => {
                let text = format!("{x} {unit}");
                let si = units::parse_quantity(&text, d).map_err(|e| e.message)?;
                Ok(AxisValue { value: Literal::Text(text), si: Some(si), unit: Some(base_unit(d).to_owned()) })
            }
        })
        .collect()
}

/// `x` rounded to `digits` significant decimal digits.
fn round_sig(x: f64, digits: usize) -> f64 {
    format!("{x:.*e}", digits - 1).parse().unwrap_or(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(arg: &str) -> Vec<String> {
        parse_vary(arg).unwrap().values.iter().map(AxisValue::text).collect()
    }

    #[test]
    fn lists_and_linear_ranges() {
        assert_eq!(texts("nodes.count=8,16,32"), ["8", "16", "32"]);
        assert_eq!(texts("access.scheme=polling,token"), ["polling", "token"]);
        assert_eq!(
            texts("access.turnaround=10ns..60ns step 5ns"),
            ["10 ns", "15 ns", "20 ns", "25 ns", "30 ns", "35 ns", "40 ns", "45 ns", "50 ns", "55 ns", "60 ns"]
        );
        assert_eq!(texts("access.turnaround=1us..2us step 250ns"), ["1 us", "1.25 us", "1.5 us", "1.75 us", "2 us"]);
        assert_eq!(texts("nodes.count=4..16 step 4"), ["4", "8", "12", "16"]);
        assert_eq!(texts("line.velocity_factor=0.6..0.8 step 0.1"), ["0.6", "0.7", "0.8"]);
        let v = &parse_vary("access.turnaround=10ns..20ns step 10ns").unwrap().values[1];
        assert_eq!(v.si, Some(20e-9));
        assert_eq!(v.unit.as_deref(), Some("s"));
    }

    #[test]
    fn log_ranges() {
        // 1k..1M in 7 points: 10^(3 + k/2).
        assert_eq!(
            texts("nodes.traffic.rate=1k/s..1M/s log 7"),
            ["1 k/s", "3.16228 k/s", "10 k/s", "31.6228 k/s", "100 k/s", "316.228 k/s", "1000 k/s"]
        );
        assert_eq!(texts("nodes.count=2..64 log 6"), ["2", "4", "8", "16", "32", "64"]);
    }

    #[test]
    fn bad_specs() {
        let err = |a: &str| parse_vary(a).unwrap_err();
        assert!(
            err("access.turnaround=10ns..60ns step 5V").contains("is a voltage"),
            "{}",
            err("a=10ns..60ns step 5V")
        );
        assert!(err("access.turnaround=60ns..10ns step 5ns").contains("empty"));
        assert!(err("access.turnaround=").contains("no values"));
        assert!(err("access.turnaround=10ns..60ns").contains("step"));
        assert!(err("access.turnaround=10ns..60ns step 0ns").contains("greater than zero"));
        assert!(err("access.turnaround").contains("KEY=SPEC"));
        assert!(err("nodes.count=1..10 step 1ns").contains("has a unit"));
        assert!(err("a=1,,2").contains("empty item"));
        assert!(err("a=0ns..1us log 3").contains("greater than zero"));
    }
}
