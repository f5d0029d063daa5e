//! Checking single values: quantities with units, choices from a list,
//! node references. Every failure is a positioned [`ScenarioError`].

use std::ops::Range;

use toml::Spanned;

use super::error::{did_you_mean, ScenarioError};
use super::raw::{RawLatency, S};
use crate::spec::Latency;
use crate::units::{self, Dimension, Picos};

pub(crate) type R<T> = Result<T, ScenarioError>;

/// The longest time any key may hold (10⁶ s, about 11.6 days): sums of a few
/// such times stay far inside the u64 picosecond range.
pub const MAX_TIME: Picos = Picos(1_000_000_000_000_000_000);

/// The line's clock, once the frame is known: for times written in bit or
/// character times (`"10 bit"`, `"3.5 char"`).
#[derive(Clone, Copy, Debug)]
pub(crate) struct Clock {
    pub bit_rate: f64,
    /// A UART character's length in half bits (`None` without a UART encoding).
    pub char_halves: Option<u64>,
}

/// The value checker: knows the file and its text, so errors can point into it.
pub(crate) struct V<'a> {
    pub file: &'a str,
    pub src: &'a str,
    pub clock: std::cell::Cell<Option<Clock>>,
}

impl<'a> V<'a> {
    pub fn err(&self, span: Range<usize>, key: &str, msg: impl Into<String>) -> ScenarioError {
        ScenarioError::at(self.file, self.src, span.start, key, msg)
    }

    pub fn qty(&self, v: &S, dim: Dimension, key: &str) -> R<f64> {
        units::parse_quantity(v.get_ref(), dim).map_err(|e| self.err(v.span(), key, e.message))
    }

    pub fn positive(&self, v: &S, dim: Dimension, key: &str) -> R<f64> {
        let x = self.qty(v, dim, key)?;
        if x < 0.0 {
            return Err(self.err(v.span(), key, format!("negative {}: \"{}\"", noun(dim), v.get_ref())));
        }
        if x == 0.0 {
            return Err(self.err(v.span(), key, format!("{} must be greater than zero", noun(dim))));
        }
        Ok(x)
    }

    pub fn non_negative(&self, v: &S, dim: Dimension, key: &str) -> R<f64> {
        let x = self.qty(v, dim, key)?;
        if x < 0.0 {
            return Err(self.err(v.span(), key, format!("negative {}: \"{}\"", noun(dim), v.get_ref())));
        }
        Ok(x)
    }

    pub fn time(&self, v: &S, key: &str) -> R<Picos> {
        let t = match self.clocked(v, key)? {
            Some(t) => t,
            None => units::parse_time(v.get_ref()).map_err(|e| self.err(v.span(), key, e.message))?,
        };
        if t > MAX_TIME {
            return Err(self.err(
                v.span(),
                key,
                format!(
                    "\"{}\" is longer than the longest supported time, 10^6 s (about 11.6 days)",
                    v.get_ref().trim()
                ),
            ));
        }
        Ok(t)
    }

    /// A time that may be negative (`"-0.5 bit"`), in signed picoseconds.
    pub fn signed_time(&self, v: &S, key: &str) -> R<i64> {
        let text = v.get_ref().trim();
        let (negative, rest) = match text.strip_prefix('-') {
            Some(r) => (true, r.trim_start()),
            None => (false, text),
        };
        let t = self.time(&Spanned::new(v.span(), rest.to_owned()), key)?;
        let ps = i64::try_from(t.0).expect("times are bounded far below 2^63 ps");
        Ok(if negative { -ps } else { ps })
    }

    /// A time written in bit or character times, converted with the line's
    /// clock; `None` when the unit is another (an SI time, or a mistake).
    fn clocked(&self, v: &S, key: &str) -> R<Option<Picos>> {
        let text = v.get_ref().trim();
        let split = text.find(|c: char| c.is_alphabetic()).unwrap_or(text.len());
        let (number, unit) = (text[..split].trim(), text[split..].trim());
        let halves = |c: Clock| -> Option<Option<u64>> {
            match unit {
                "bit" | "bits" => Some(Some(2)),
                "char" | "chars" => Some(c.char_halves),
                _ => None,
            }
        };
        if !matches!(unit, "bit" | "bits" | "char" | "chars") {
            return Ok(None);
        }
        let Some(clock) = self.clock.get() else {
            return Err(self.err(
                v.span(),
                key,
                format!("\"{text}\": a time in bit or character times needs the bit rate, which is not known here; write it in seconds"),
            ));
        };
        let Some(per) = halves(clock).expect("the unit was matched above") else {
            return Err(self
                .err(v.span(), key, format!("\"{text}\": a time in characters needs a UART encoding"))
                .with_hint(
                    "set frame.encoding = \"uart-8n1\" (or 8e1, 8n2, …), or write the time in bits or seconds",
                ));
        };
        let x: f64 = number.parse().ok().filter(|x: &f64| x.is_finite() && *x >= 0.0).ok_or_else(|| {
            self.err(
                v.span(),
                key,
                format!("\"{text}\": write a number of {unit} of zero or more, e.g. \"3.5 {unit}\""),
            )
        })?;
        let ps = (x * per as f64 * 1e12 / (2.0 * clock.bit_rate)).round();
        if ps.is_nan() || ps > MAX_TIME.0 as f64 {
            return Err(self.err(
                v.span(),
                key,
                format!("\"{text}\" is longer than the longest supported time, 10^6 s (about 11.6 days)"),
            ));
        }
        Ok(Some(Picos(ps as u64)))
    }

    /// A quantity that must lie in `lo..=hi` (SI base units), with the range in the message.
    pub fn within(&self, v: &S, dim: Dimension, key: &str, lo: f64, hi: f64, unit: &str) -> R<f64> {
        let x = self.positive(v, dim, key)?;
        if x < lo || x > hi {
            return Err(self.err(
                v.span(),
                key,
                format!(
                    "\"{}\" is outside the supported range {} to {}",
                    v.get_ref(),
                    units::format_si(lo, unit),
                    units::format_si(hi, unit)
                ),
            ));
        }
        Ok(x)
    }

    pub fn opt_time(&self, v: &Option<S>, key: &str, default: Picos) -> R<Picos> {
        v.as_ref().map_or(Ok(default), |v| self.time(v, key))
    }

    pub fn choice<'c>(&self, v: &S, key: &str, allowed: &[&'c str]) -> R<&'c str> {
        let s = v.get_ref().as_str();
        if let Some(c) = allowed.iter().find(|c| **c == s) {
            return Ok(c);
        }
        let list = allowed.iter().map(|c| format!("\"{c}\"")).collect::<Vec<_>>().join(", ");
        let mut e = self.err(v.span(), key, format!("unknown value \"{s}\"; expected one of {list}"));
        // The spellings engineers write: case, dashes and the standard's older names.
        let plain = |t: &str| t.chars().filter(|c| c.is_ascii_alphanumeric()).collect::<String>().to_ascii_lowercase();
        let wanted = match plain(s).as_str() {
            "rs485" | "eia485" | "eiatia485" | "ansitia485" => "tia485".to_owned(),
            p => p.to_owned(),
        };
        if let Some(m) = allowed.iter().find(|c| plain(c) == wanted) {
            e = e.with_hint(format!("did you mean \"{m}\"?"));
        } else if let Some(m) = did_you_mean(s, allowed.iter().copied()) {
            e = e.with_hint(format!("did you mean \"{m}\"?"));
        }
        Err(e)
    }
}

fn noun(dim: Dimension) -> &'static str {
    match dim {
        Dimension::Time => "time",
        Dimension::Length => "length",
        Dimension::Resistance => "resistance",
        Dimension::Current => "current",
        Dimension::Capacitance => "capacitance",
        Dimension::Voltage => "voltage",
        Dimension::BitRate => "bit rate",
        Dimension::Rate => "rate",
        Dimension::DataSize => "size",
        Dimension::DelayPerLength => "delay per length",
        Dimension::ResistancePerLength => "resistance per length",
    }
}

pub fn unknown_node(v: &V, name: &S, key: &str, names: &[String]) -> ScenarioError {
    let mut e = v.err(name.span(), key, format!("no node is called \"{}\"", name.get_ref()));
    if let Some(m) = did_you_mean(name.get_ref(), names.iter().map(String::as_str)) {
        e = e.with_hint(format!("did you mean \"{m}\"?"));
    }
    e
}

/// A firmware latency: a time, `{ min, max }` (uniform) or `{ mean, sd }` (normal).
pub fn latency(v: &V, l: &Spanned<RawLatency>, key: &str) -> R<Latency> {
    match l.get_ref() {
        RawLatency::Fixed(s) => Ok(Latency::Fixed(v.time(&Spanned::new(l.span(), s.clone()), key)?)),
        RawLatency::Table(t) => match (&t.min, &t.max, &t.mean, &t.sd) {
            (Some(a), Some(b), None, None) => {
                let (min, max) = (v.time(a, &format!("{key}.min"))?, v.time(b, &format!("{key}.max"))?);
                if min > max {
                    return Err(v.err(l.span(), key, format!("min ({min}) exceeds max ({max})")));
                }
                Ok(Latency::Uniform { min, max })
            }
            (None, None, Some(m), Some(s)) => Ok(Latency::Normal {
                mean: v.time(m, &format!("{key}.mean"))?,
                sd: v.time(s, &format!("{key}.sd"))?,
            }),
            (None, None, Some(m), None) => {
                let mean = v.time(m, &format!("{key}.mean"))?;
                if mean == Picos::ZERO {
                    return Err(v.err(m.span(), &format!("{key}.mean"), "an exponential mean must be greater than zero"));
                }
                Ok(Latency::Exponential { mean })
            }
            _ => Err(v.err(
                l.span(),
                key,
                "a random time is a time (\"20 ns\"), { min, max } for uniform, { mean, sd } for normal, or { mean } for exponential",
            )),
        },
    }
}
