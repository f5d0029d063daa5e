//! Physical units for the bus simulator.
//!
//! * [`Picos`] is simulated time: an exact integer count of picoseconds.
//! * [`parse_quantity`], [`parse_time`] and [`parse_bits`] read quantities
//!   written with SI units and prefixes, such as `"35 ns"`, `"2.4 m"`,
//!   `"12 kΩ"`, `"100 Mbit/s"` or `"64 B"`, and explain clearly what was
//!   expected when the text is wrong.
//! * [`format_si`] and [`format_seconds`] print values for reports with an
//!   automatically chosen SI prefix and four significant digits.
//!
//! Parsing works on the decimal digits themselves: a number is split into an
//! integer mantissa and a power of ten, so [`parse_time`] and [`parse_bits`]
//! are exact (`"1.2 us"` is exactly 1 200 000 ps) and [`parse_quantity`]
//! rounds only once, when it builds the final `f64`.

use std::fmt;
use std::ops::{Add, AddAssign, Sub, SubAssign};
use std::str::FromStr;

/// Simulated time as an integer count of picoseconds.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct Picos(pub u64);

impl Picos {
    /// Time zero.
    pub const ZERO: Picos = Picos(0);
    /// The largest representable time (about 213 days).
    pub const MAX: Picos = Picos(u64::MAX);

    /// `ps` picoseconds.
    pub const fn from_ps(ps: u64) -> Picos {
        Picos(ps)
    }
    /// `ns` nanoseconds. Panics if the result does not fit in `u64` ps.
    pub const fn from_ns(ns: u64) -> Picos {
        Picos::scaled(ns, 1_000)
    }
    /// `us` microseconds. Panics if the result does not fit in `u64` ps.
    pub const fn from_us(us: u64) -> Picos {
        Picos::scaled(us, 1_000_000)
    }
    /// `ms` milliseconds. Panics if the result does not fit in `u64` ps.
    pub const fn from_ms(ms: u64) -> Picos {
        Picos::scaled(ms, 1_000_000_000)
    }
    const fn scaled(value: u64, factor: u64) -> Picos {
        match value.checked_mul(factor) {
            Some(ps) => Picos(ps),
            None => panic!("time does not fit in u64 picoseconds"),
        }
    }
    /// The time as a count of picoseconds.
    pub const fn as_ps(self) -> u64 {
        self.0
    }
    /// The time in seconds (rounded to the nearest `f64`).
    pub fn as_secs_f64(self) -> f64 {
        self.0 as f64 / 1e12
    }
    /// Converts seconds to the nearest picosecond; `None` if `s` is
    /// negative, NaN, or too large for `u64` picoseconds.
    pub fn from_secs_f64(s: f64) -> Option<Picos> {
        if s.is_nan() || s < 0.0 {
            return None;
        }
        let ps = (s * 1e12).round();
        // `u64::MAX as f64` is exactly 2^64, the first value that does not fit.
        (ps < u64::MAX as f64).then_some(Picos(ps as u64))
    }
    /// Sum, clamped at [`Picos::MAX`].
    pub const fn saturating_add(self, rhs: Picos) -> Picos {
        Picos(self.0.saturating_add(rhs.0))
    }
    /// Difference, clamped at [`Picos::ZERO`].
    pub const fn saturating_sub(self, rhs: Picos) -> Picos {
        Picos(self.0.saturating_sub(rhs.0))
    }
    /// Sum, or `None` on overflow.
    pub const fn checked_add(self, rhs: Picos) -> Option<Picos> {
        match self.0.checked_add(rhs.0) {
            Some(ps) => Some(Picos(ps)),
            None => None,
        }
    }
    /// Difference, or `None` if `rhs` is later than `self`.
    pub const fn checked_sub(self, rhs: Picos) -> Option<Picos> {
        match self.0.checked_sub(rhs.0) {
            Some(ps) => Some(Picos(ps)),
            None => None,
        }
    }
}

impl Add for Picos {
    type Output = Picos;
    fn add(self, rhs: Picos) -> Picos {
        Picos(self.0 + rhs.0)
    }
}

impl Sub for Picos {
    type Output = Picos;
    fn sub(self, rhs: Picos) -> Picos {
        Picos(self.0 - rhs.0)
    }
}

impl AddAssign for Picos {
    fn add_assign(&mut self, rhs: Picos) {
        self.0 += rhs.0;
    }
}

impl SubAssign for Picos {
    fn sub_assign(&mut self, rhs: Picos) {
        self.0 -= rhs.0;
    }
}

impl fmt::Display for Picos {
    /// Auto-scaled (ps, ns, µs, ms, s), four significant digits, e.g.
    /// `"1.2 µs"`. Honours width and alignment flags.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.0 == 0 {
            return f.pad("0 s");
        }
        let value = u128::from(self.0);
        let dropped = (value.ilog10() + 1).saturating_sub(4);
        let div = 10u128.pow(dropped);
        let digits = (value + div / 2) / div; // round half up to 4 digits
        let scaled = scaled(digits, dropped as i32, 0, &PREFIX_NAMES[..5]);
        f.pad(&format!("{scaled}s"))
    }
}

impl FromStr for Picos {
    type Err = UnitError;
    /// Same as [`parse_time`].
    fn from_str(s: &str) -> Result<Picos, UnitError> {
        parse_time(s)
    }
}

/// Prefix names three decades apart, from pico to giga.
const PREFIX_NAMES: [&str; 8] = ["p", "n", "µ", "m", "", "k", "M", "G"];

/// Writes `digits × 10^exp` as a mantissa, a space and the prefix from
/// `names` (three decades apart, the first meaning `10^lowest`) that puts
/// the mantissa in [1, 1000), or the nearest one at either end of the list.
fn scaled(digits: u128, exp: i32, lowest: i32, names: &[&str]) -> String {
    let lead = exp + digits.ilog10() as i32;
    let index = ((lead - lowest).div_euclid(3)).clamp(0, names.len() as i32 - 1);
    let (p, name) = (lowest + 3 * index, names[index as usize]);
    let mut s = digits.to_string();
    let shift = exp - p;
    if shift >= 0 {
        s.push_str(&"0".repeat(shift as usize));
    } else {
        let frac = shift.unsigned_abs() as usize;
        if s.len() <= frac {
            s.insert_str(0, &"0".repeat(frac + 1 - s.len()));
        }
        s.insert(s.len() - frac, '.');
        s.truncate(s.trim_end_matches('0').trim_end_matches('.').len());
    }
    format!("{s} {name}")
}

fn format_with(value: f64, unit: &str, names: &[&str]) -> String {
    if !value.is_finite() {
        return format!("{value} {unit}");
    }
    if value == 0.0 {
        return format!("0 {unit}");
    }
    // Rust's `{:e}` rounds the exact binary value correctly: "d.ddde<exp>".
    let sci = format!("{:.3e}", value.abs());
    let (mantissa, exp) = sci.split_once('e').unwrap_or((&sci, "0"));
    let digits: u128 = mantissa.replace('.', "").parse().unwrap_or(0);
    let exp: i32 = exp.parse().unwrap_or(0);
    let sign = if value < 0.0 { "-" } else { "" };
    format!("{sign}{}{unit}", scaled(digits.max(1), exp - 3, -12, names))
}

/// `value` auto-scaled with an SI prefix (p n µ m, none, k M G; µ is
/// U+00B5 MICRO SIGN), four significant digits, trailing zeros trimmed:
/// `format_si(0.565, "V")` is `"565 mV"`. Values beyond the prefix range keep
/// the extreme prefix (`"0.001 pF"`, `"2000 GHz"`).
pub fn format_si(value: f64, unit: &str) -> String {
    format_with(value, unit, &PREFIX_NAMES)
}

/// Seconds auto-scaled like [`format_si`], but never above plain seconds
/// (`"5000 s"`) and never below picoseconds (`"0.1 ps"`).
pub fn format_seconds(s: f64) -> String {
    format_with(s, "s", &PREFIX_NAMES[..5])
}

/// The kind of physical quantity a string is expected to hold.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dimension {
    Time,
    Length,
    Resistance,
    Current,
    Capacitance,
    Voltage,
    BitRate,
    Rate,
    DataSize,
    DelayPerLength,
    ResistancePerLength,
}

impl Dimension {
    /// Every dimension, in declaration order.
    pub const ALL: [Dimension; 11] = [
        Dimension::Time,
        Dimension::Length,
        Dimension::Resistance,
        Dimension::Current,
        Dimension::Capacitance,
        Dimension::Voltage,
        Dimension::BitRate,
        Dimension::Rate,
        Dimension::DataSize,
        Dimension::DelayPerLength,
        Dimension::ResistancePerLength,
    ];
}

/// Example value and description (with article) of each dimension.
fn info(dim: Dimension) -> (&'static str, &'static str) {
    match dim {
        Dimension::Time => ("35 ns", "a time"),
        Dimension::Length => ("2.4 m", "a length"),
        Dimension::Resistance => ("100 ohm", "a resistance"),
        Dimension::Current => ("11.3 mA", "a current"),
        Dimension::Capacitance => ("6 pF", "a capacitance"),
        Dimension::Voltage => ("200 mV", "a voltage"),
        Dimension::BitRate => ("100 Mbit/s", "a bit rate"),
        Dimension::Rate => ("2000/s", "a rate"),
        Dimension::DataSize => ("64 B", "a data size"),
        Dimension::DelayPerLength => ("5 ns/m", "a delay per length"),
        Dimension::ResistancePerLength => ("0.084 ohm/m", "a resistance per length"),
    }
}

/// A valid example value of the dimension, used in error messages: `"35 ns"`.
pub fn example(dim: Dimension) -> &'static str {
    info(dim).0
}

/// The dimension with an article, as used in messages: `"a time"`.
pub fn describe(dim: Dimension) -> &'static str {
    info(dim).1
}

/// Why a quantity could not be parsed; `message` is meant for the user.
#[derive(Clone, Debug, PartialEq)]
pub struct UnitError {
    pub message: String,
}

impl fmt::Display for UnitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for UnitError {}

/// Returns a [`UnitError`] with a `format!` message from the function.
macro_rules! bail {
    ($($arg:tt)*) => {
        return Err(UnitError { message: format!($($arg)*) })
    };
}

/// Which prefixes a unit symbol accepts.
#[derive(Clone, Copy)]
enum Prefixes {
    Bare,
    Si,
    SiCenti,
    Data,
}

/// A prefix: name, integer multiplier, power of ten.
type Prefix = (&'static str, u64, i32);

const SI: &[Prefix] = &[
    ("f", 1, -15),
    ("p", 1, -12),
    ("n", 1, -9),
    ("u", 1, -6),
    ("\u{b5}", 1, -6),
    ("\u{3bc}", 1, -6),
    ("m", 1, -3),
    ("k", 1, 3),
    ("M", 1, 6),
    ("G", 1, 9),
    ("T", 1, 12),
];
const CENTI: &[Prefix] = &[("c", 1, -2)];
const DATA: &[Prefix] =
    &[("k", 1, 3), ("M", 1, 6), ("G", 1, 9), ("Ki", 1 << 10, 0), ("Mi", 1 << 20, 0), ("Gi", 1 << 30, 0)];

fn prefix_lists(p: Prefixes) -> &'static [&'static [Prefix]] {
    match p {
        Prefixes::Bare => &[],
        Prefixes::Si => &[SI],
        Prefixes::SiCenti => &[SI, CENTI],
        Prefixes::Data => &[DATA],
    }
}

/// Unit symbols: dimension, symbol, multiplier, power of ten, prefixes.
/// The multiplier and power of ten give the unit in SI base units.
const UNITS: &[(Dimension, &str, u64, i32, Prefixes)] = &[
    (Dimension::Time, "s", 1, 0, Prefixes::Si),
    (Dimension::Time, "sec", 1, 0, Prefixes::Si),
    (Dimension::Length, "m", 1, 0, Prefixes::SiCenti),
    (Dimension::Length, "in", 254, -4, Prefixes::Bare),
    (Dimension::Length, "ft", 3048, -4, Prefixes::Bare),
    (Dimension::Resistance, "ohm", 1, 0, Prefixes::Si),
    (Dimension::Resistance, "ohms", 1, 0, Prefixes::Si),
    (Dimension::Resistance, "Ohm", 1, 0, Prefixes::Si),
    (Dimension::Resistance, "Ohms", 1, 0, Prefixes::Si),
    (Dimension::Resistance, "\u{2126}", 1, 0, Prefixes::Si),
    (Dimension::Resistance, "\u{3a9}", 1, 0, Prefixes::Si),
    (Dimension::Current, "A", 1, 0, Prefixes::Si),
    (Dimension::Capacitance, "F", 1, 0, Prefixes::Si),
    (Dimension::Voltage, "V", 1, 0, Prefixes::Si),
    (Dimension::BitRate, "bit/s", 1, 0, Prefixes::Si),
    (Dimension::BitRate, "bps", 1, 0, Prefixes::Si),
    (Dimension::BitRate, "b/s", 1, 0, Prefixes::Si),
    (Dimension::Rate, "/s", 1, 0, Prefixes::Si),
    (Dimension::Rate, "Hz", 1, 0, Prefixes::Si),
    (Dimension::DataSize, "bit", 1, 0, Prefixes::Data),
    (Dimension::DataSize, "bits", 1, 0, Prefixes::Data),
    (Dimension::DataSize, "B", 8, 0, Prefixes::Data),
    (Dimension::DataSize, "byte", 8, 0, Prefixes::Data),
    (Dimension::DataSize, "bytes", 8, 0, Prefixes::Data),
    (Dimension::DelayPerLength, "s/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "ohm/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "ohms/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "\u{2126}/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "\u{3a9}/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "ohm/km", 1, -3, Prefixes::Si),
    (Dimension::ResistancePerLength, "Ohm/m", 1, 0, Prefixes::Si),
    (Dimension::ResistancePerLength, "Ohm/km", 1, -3, Prefixes::Si),
    (Dimension::ResistancePerLength, "\u{2126}/km", 1, -3, Prefixes::Si),
    (Dimension::ResistancePerLength, "\u{3a9}/km", 1, -3, Prefixes::Si),
];

/// Result of matching unit text against one dimension.
enum UnitMatch {
    /// Multiplier and power of ten of prefix × unit, in SI base units.
    Found(u64, i32),
    NoUnit,
    UnknownPrefix(String),
    PrefixNotAllowed(String, &'static str),
}

/// Matches the longest unit symbol of `dim` that ends `text`; what precedes
/// the symbol must be empty or a prefix that the symbol accepts.
fn match_unit(text: &str, dim: Dimension) -> UnitMatch {
    let best = UNITS.iter().filter(|u| u.0 == dim && text.ends_with(u.1)).max_by_key(|u| u.1.len());
    let Some(&(_, symbol, mult, exp10, prefixes)) = best else {
        return UnitMatch::NoUnit;
    };
    let prefix = &text[..text.len() - symbol.len()];
    if prefix.is_empty() {
        return UnitMatch::Found(mult, exp10);
    }
    let lists = prefix_lists(prefixes).iter();
    if let Some(&(_, pm, pe)) = lists.flat_map(|l| l.iter()).find(|p| p.0 == prefix) {
        return UnitMatch::Found(mult * pm, exp10 + pe);
    }
    let known = [SI, CENTI, DATA].into_iter().flatten().any(|p| p.0 == prefix);
    if known {
        UnitMatch::PrefixNotAllowed(prefix.to_string(), symbol)
    } else {
        UnitMatch::UnknownPrefix(prefix.to_string())
    }
}

/// A decimal number: `(-1)^negative × mantissa × 10^exp10`.
struct Decimal {
    negative: bool,
    mantissa: u128,
    exp10: i32,
}

/// Splits a number off the start of `t`; returns it and the rest of `t`.
fn split_number<'a>(t: &'a str, want: &str) -> Result<(Decimal, &'a str), UnitError> {
    let b = t.as_bytes();
    let negative = b.first() == Some(&b'-');
    let mut i = usize::from(matches!(b.first(), Some(b'-' | b'+')));
    let (mut mantissa, mut exp10, mut digits, mut dot) = (0u128, 0i32, 0, false);
    while i < b.len() {
        if b[i].is_ascii_digit() {
            digits += 1;
            let d = u128::from(b[i] - b'0');
            match mantissa.checked_mul(10).and_then(|m| m.checked_add(d)) {
                Some(m) => (mantissa, exp10) = (m, exp10 - i32::from(dot)),
                // Past 38 digits only zeros can be kept exactly.
                None if d == 0 => exp10 += i32::from(!dot),
                None => bail!("\"{t}\" has too many significant digits"),
            }
        } else if b[i] == b'.' && !dot {
            dot = true;
        } else {
            break;
        }
        i += 1;
    }
    if digits == 0 {
        bail!("\"{t}\" does not start with a number: expected {want}");
    }
    if matches!(b.get(i), Some(b'_' | b',')) && b.get(i + 1).is_some_and(u8::is_ascii_digit) {
        bail!("\"{t}\": write the number without separators, with a decimal point (e.g. \"1000 ns\", \"1.5 ns\")");
    }
    if matches!(b.get(i), Some(b'e' | b'E')) {
        let exp_negative = b.get(i + 1) == Some(&b'-');
        let start = i + 1 + usize::from(matches!(b.get(i + 1), Some(b'-' | b'+')));
        let mut end = start;
        while b.get(end).is_some_and(u8::is_ascii_digit) {
            end += 1;
        }
        if end > start {
            let Some(e) = t[start..end].parse::<i32>().ok().filter(|e| *e <= 100_000) else {
                bail!("exponent out of range in \"{t}\"");
            };
            exp10 += if exp_negative { -e } else { e };
            i = end;
        }
    }
    let number = Decimal { negative, mantissa, exp10 };
    Ok((number, &t[i..]))
}

/// Parses `text` as a number with a unit of dimension `dim`; returns the
/// number, the trimmed text, and the multiplier and power of ten of the unit.
fn parse_parts(text: &str, dim: Dimension) -> Result<(Decimal, &str, u64, i32), UnitError> {
    let t = text.trim();
    let (example, description) = info(dim);
    let want = format!("{description} such as \"{example}\"");
    if t.is_empty() {
        bail!("empty value: expected {want}");
    }
    let (number, rest) = split_number(t, &want)?;
    let unit = rest.trim_start();
    if unit.is_empty() {
        bail!("missing unit in \"{t}\": write {want}");
    }
    let failure = match match_unit(unit, dim) {
        UnitMatch::Found(mult, exp10) => return Ok((number, t, mult, exp10)),
        failure => failure,
    };
    for other in Dimension::ALL.into_iter().filter(|d| *d != dim) {
        if let UnitMatch::Found(..) = match_unit(unit, other) {
            let other = describe(other);
            bail!("\"{t}\" is {other}, but {description} is expected here (e.g. \"{example}\")");
        }
    }
    match failure {
        UnitMatch::UnknownPrefix(p) => bail!("unknown prefix \"{p}\" in \"{t}\": expected {want}"),
        UnitMatch::PrefixNotAllowed(p, symbol) => {
            bail!("prefix \"{p}\" cannot be used with \"{symbol}\" in \"{t}\": expected {want}")
        }
        _ => bail!("unknown unit \"{unit}\" in \"{t}\": expected {want}"),
    }
}

/// Parses a quantity of dimension `dim` and returns it in SI base units:
/// s, m, ohm, A, F, V, bit/s, 1/s, bits, or s/m.
pub fn parse_quantity(text: &str, dim: Dimension) -> Result<f64, UnitError> {
    let (number, t, mult, exp10) = parse_parts(text, dim)?;
    // Rust parses decimal strings with correct rounding.
    let decimal = format!("{}e{}", number.mantissa, number.exp10 + exp10);
    let value = decimal.parse::<f64>().unwrap_or(f64::NAN) * mult as f64;
    if !value.is_finite() {
        bail!("\"{t}\" is out of range");
    }
    Ok(if number.negative { -value } else { value })
}

enum Inexact {
    Fraction,
    Overflow,
}

/// `number × mult × 10^exp10` as an exact non-negative integer.
fn exact_integer(number: &Decimal, mult: u64, exp10: i32) -> Result<u128, Inexact> {
    let exp10 = exp10 + number.exp10;
    let n = number.mantissa.checked_mul(u128::from(mult));
    let n = n.ok_or(Inexact::Overflow)?;
    let scale = 10u128.checked_pow(exp10.unsigned_abs());
    if n == 0 {
        Ok(0)
    } else if exp10 >= 0 {
        scale.and_then(|s| n.checked_mul(s)).ok_or(Inexact::Overflow)
    } else {
        match scale {
            Some(s) if n % s == 0 => Ok(n / s),
            _ => Err(Inexact::Fraction),
        }
    }
}

/// Parses a time exactly, using decimal arithmetic on the digits.
/// Negative times, times that are not a whole number of picoseconds and
/// times beyond [`Picos::MAX`] are errors.
pub fn parse_time(text: &str) -> Result<Picos, UnitError> {
    let (number, t, mult, exp10) = parse_parts(text, Dimension::Time)?;
    if number.negative && number.mantissa != 0 {
        bail!("negative time \"{t}\": a time must be zero or more");
    }
    match exact_integer(&number, mult, exp10 + 12).map(u64::try_from) {
        Ok(Ok(ps)) => Ok(Picos(ps)),
        Err(Inexact::Fraction) => {
            bail!("\"{t}\" is not a whole number of picoseconds: the time resolution is 1 ps")
        }
        _ => bail!("\"{t}\" is too large: times are limited to about 213 days (2^64 ps)"),
    }
}

/// Parses a data size exactly and returns it in bits (`"64 B"` is 512).
/// Fractional bit counts, negative sizes and sizes beyond `u64` are errors.
pub fn parse_bits(text: &str) -> Result<u64, UnitError> {
    let (number, t, mult, exp10) = parse_parts(text, Dimension::DataSize)?;
    if number.negative && number.mantissa != 0 {
        bail!("negative data size \"{t}\": a size must be zero or more");
    }
    match exact_integer(&number, mult, exp10).map(u64::try_from) {
        Ok(Ok(bits)) => Ok(bits),
        Err(Inexact::Fraction) => bail!("\"{t}\" is not a whole number of bits"),
        _ => bail!("\"{t}\" is too large for a data size (2^64 bits at most)"),
    }
}

/// A count with its noun: "1 scenario", "2 scenarios", "3 entries" (regular plurals only).
pub fn count(n: u64, singular: &str) -> String {
    match (n, singular.strip_suffix('y')) {
        (1, _) => format!("1 {singular}"),
        (_, Some(stem)) if !stem.ends_with(['a', 'e', 'o', 'u']) => format!("{n} {stem}ies"),
        _ => format!("{n} {singular}s"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use Dimension::*;

    /// `Dimension: text=value|text=value|...`, values in SI base units.
    const GOOD: &str = "
        Time: 35 ns=35e-9|1.2 us=1.2e-6|1.2 µs=1.2e-6|1.2 μs=1.2e-6|3 ms=3e-3|2 s=2|1 Ms=1e6
        Time: 35ns=35e-9|1.2µs=1.2e-6|1e3 s=1e3|1.5e3ms=1.5|+2 ps=2e-12|2 Ts=2e12|2 Gs=2e9
        Time: 2.5 fs=2.5e-15|2.5 ps=2.5e-12|2.5 ns=2.5e-9|2.5 us=2.5e-6|2.5 µs=2.5e-6
        Time: 2.5 μs=2.5e-6|2.5 ms=2.5e-3|2.5 s=2.5|2.5 ks=2.5e3|2.5 Ms=2.5e6|2.5 Ts=2.5e12
        Length: 2.4 m=2.4|25 mm=0.025|2.5 cm=0.025|3 km=3e3|40 um=40e-6|40 µm=40e-6
        Length: 40 μm=40e-6|7 nm=7e-9|2 in=0.0508|2in=0.0508|1e-3 Mm=1e3|10 ft=3.048|1ft=0.3048
        Resistance: 100 ohm=100|100 ohms=100|100 Ω=100|100 Ω=100|12 kohm=12e3
        Resistance: 12 kohms=12e3|12 kΩ=12e3|12 kΩ=12e3|1 MΩ=1e6|50 mohm=0.05|1e+3 ohm=1e3
        Resistance: 120 Ohm=120|120 Ohms=120|4.7 kOhm=4.7e3
        Current: 11.3 mA=11.3e-3|3.5 mA=3.5e-3|2 A=2|5 µA=5e-6|-1.5e-3 A=-1.5e-3|7 nA=7e-9
        Capacitance: 6 pF=6e-12|10 nF=10e-9|4.7 uF=4.7e-6|100 fF=100e-15|1 F=1
        Voltage: -200 mV=-0.2|1.5 V=1.5|+1.5V=1.5|2 kV=2e3|2.5E-3 V=2.5e-3|.5 V=0.5|5. V=5
        Voltage: 000001.50000 V=1.5|0.1 V=0.1|1 GV=1e9|1 TV=1e12|-0 V=0
        BitRate: 100 Mbit/s=1e8|115.2 kbit/s=115200|10 Mbps=1e7|1 Gbps=1e9|9600 bps=9600
        BitRate: 9600bit/s=9600|1 Tbit/s=1e12|10 Mb/s=1e7|115.2 kb/s=115200|9600 b/s=9600
        Rate: 2000/s=2000|2 k/s=2000|1k/s=1000|1M/s=1e6|50 Hz=50|1 kHz=1e3|2.5 MHz=2.5e6
        Rate: 2 /s=2|1 mHz=1e-3|3 G/s=3e9
        DataSize: 64 B=512|1 kB=8000|1 KiB=8192|2 MiB=16777216|1 GiB=8589934592|1 MB=8e6
        DataSize: 1 GB=8e9|1 bit=1|3 bits=3|12 kbit=12000|1 Mbit=1e6|1 Gbits=1e9|1 Kibit=1024
        DataSize: 0.125 B=1|1.5 kbit=1500|0 B=0|11bits=11|1 Gibit=1073741824|2 Mibits=2097152
        DataSize: 32 bytes=256|1 byte=8|2 kbytes=16000
        Time: 10 usec=10e-6|3 msec=3e-3|2 sec=2|50 nsec=50e-9
        DelayPerLength: 5 ns/m=5e-9|5.5 ns/m=5.5e-9|4800 ps/m=4.8e-9|0.005 us/m=5e-9
        ResistancePerLength: 0.084 ohm/m=0.084|84 mohm/m=0.084|84 ohm/km=0.084|0.2 Ω/m=0.2|84 Ω/km=0.084
        ResistancePerLength: 0.084 Ohm/m=0.084|84 Ohm/km=0.084";

    /// `Dimension | input | part of the error message`.
    const BAD: &str = r#"
        Time | 35 | missing unit in "35": write a time such as "35 ns"
        Length | 2.4 | missing unit in "2.4": write a length such as "2.4 m"
        DataSize | 64 | write a data size such as "64 B"
        Time | 35 nz | unknown unit "nz" in "35 nz": expected a time such as "35 ns"
        Time | 35 n | unknown unit "n"
        DataSize | 3 b | unknown unit "b"
        Voltage | 1 E | unknown unit "E"
        Time | 2.4 m | "2.4 m" is a length, but a time is expected here (e.g. "35 ns")
        Length | 3 ms | "3 ms" is a time, but a length is expected here (e.g. "2.4 m")
        Time | 5 ns/m | is a delay per length, but a time
        Length | 5 ns/m | is a delay per length, but a length
        Rate | 100 Mbit/s | is a bit rate, but a rate
        BitRate | 2 k/s | is a rate, but a bit rate
        Time | 64 B | is a data size, but a time
        Time | 2 bits | is a data size, but a time
        Voltage | 12 kΩ | is a resistance, but a voltage
        Current | 6 pF | is a capacitance, but a current
        Capacitance | 3 mA | is a current, but a capacitance
        Time | 1 kHz | is a rate, but a time
        Time | abc ns | "abc ns" does not start with a number
        Time | - 5 ns | does not start with a number
        Time | . ns | does not start with a number
        Time | NaN ns | does not start with a number
        Voltage | inf V | "inf V" does not start with a number
        Time | 3 xs | unknown prefix "x" in "3 xs"
        Resistance | 3 Kohm | unknown prefix "K"
        Time | 2 cs | prefix "c" cannot be used with "s"
        Length | 2 kin | prefix "k" cannot be used with "in"
        DataSize | 3 mB | prefix "m" cannot be used with "B"
        DataSize | 3 ubit | prefix "u" cannot be used with "bit"
        Voltage | 3 KiV | prefix "Ki" cannot be used with "V"
        Voltage | 1e400 V | "1e400 V" is out of range
        Voltage | 1e99999999999 V | exponent out of range
        Voltage | 99999999999999999999999999999999999999999 V | too many significant digits"#;

    fn dimension(name: &str) -> Dimension {
        let found = Dimension::ALL.into_iter().find(|d| format!("{d:?}") == name);
        found.unwrap_or_else(|| panic!("no dimension {name:?}"))
    }

    fn close(got: f64, want: f64) -> bool {
        (got - want).abs() <= 1e-12 * want.abs()
    }

    #[test]
    fn parses_every_unit() {
        for line in GOOD.trim().lines() {
            let (dim, cases) = line.trim().split_once(": ").unwrap();
            for (text, value) in cases.split('|').map(|c| c.split_once('=').unwrap()) {
                let got = parse_quantity(text, dimension(dim));
                let got = got.unwrap_or_else(|e| panic!("{text:?}: {e}"));
                assert!(close(got, value.parse().unwrap()), "{text:?}: {got}");
            }
        }
        assert_eq!(parse_quantity(" \t35 ns \n", Time), Ok(35e-9));
        assert_eq!(parse_quantity("0.1 V", Voltage), Ok(0.1));
        assert_eq!(parse_quantity("1.2 us", Time), Ok(1.2e-6));
    }

    #[test]
    fn reports_errors() {
        let lines = BAD.trim().lines().map(|line| {
            let parts: Vec<&str> = line.trim().split(" | ").collect();
            (parts[1], dimension(parts[0]), parts[2])
        });
        let empty = [("", Time, "empty value: expected a time such as \"35 ns\"")];
        let blank = [(" \t ", Rate, "empty value: expected a rate such as \"2000/s\"")];
        for (text, dim, part) in lines.chain(empty).chain(blank) {
            let message = parse_quantity(text, dim).unwrap_err().message;
            assert!(message.contains(part), "{text:?}: {message:?}");
        }
        let e = parse_quantity("35", Time).unwrap_err();
        assert_eq!(e.to_string(), e.message);
        for dim in Dimension::ALL {
            assert!(parse_quantity(example(dim), dim).is_ok(), "{dim:?}");
            assert!(describe(dim).starts_with('a'));
        }
    }

    #[test]
    fn parse_time_is_exact() {
        let cases = "1.2 us=1200000|1.2 µs=1200000|0.1 ns=100|35ns=35000|35 ns=35000|1 ps=1|\
            1000 fs=1|3 ms=3000000000|2 s=2000000000000|1e-12 s=1|2.5E3 ns=2500000|\
            0.000001 us=1|1.00000000000000000000000000000000000000000000 ns=1000|0 s=0|-0 ns=0|\
            18446744.073709551615 s=18446744073709551615";
        for (text, ps) in cases.split('|').map(|c| c.split_once('=').unwrap()) {
            assert_eq!(parse_time(text), Ok(Picos(ps.parse().unwrap())), "{text}");
        }
        assert_eq!("35 ns".parse::<Picos>(), Ok(Picos(35_000)));
        let message = |t: &str| parse_time(t).unwrap_err().message;
        assert!(message("-5 ns").contains("negative time"));
        assert!(message("0.5 ps").contains("resolution is 1 ps"));
        assert!(message("1.0000005 ns").contains("resolution is 1 ps"));
        assert!(message("1 fs").contains("resolution is 1 ps"));
        assert!(message("1e30 s").contains("too large"));
        assert!(message("18446744.073709551616 s").contains("too large"));
        assert!(message("2.4 m").contains("is a length, but a time is expected"));
        assert!(message("35").contains("missing unit"));
    }

    #[test]
    fn parse_bits_is_exact() {
        let cases = "64 B=512|1 kB=8000|1 KiB=8192|2 MiB=16777216|1 GiB=8589934592|3 bits=3|\
            0.125 B=1|1.5 kbit=1500|-0 B=0|1 Gbit=1000000000";
        for (text, bits) in cases.split('|').map(|c| c.split_once('=').unwrap()) {
            assert_eq!(parse_bits(text), Ok(bits.parse().unwrap()), "{text}");
        }
        let message = |t: &str| parse_bits(t).unwrap_err().message;
        assert!(message("1.5 bit").contains("not a whole number of bits"));
        assert!(message("0.1 B").contains("not a whole number of bits"));
        assert!(message("-8 B").contains("negative data size"));
        assert!(message("1e30 GiB").contains("too large"));
        assert!(message("3 mB").contains("cannot be used"));
    }

    #[test]
    fn picos_arithmetic() {
        assert_eq!(Picos::from_ns(35), Picos(35_000));
        assert_eq!(Picos::from_us(2), Picos(2_000_000));
        assert_eq!(Picos::from_ms(3), Picos(3_000_000_000));
        assert_eq!(Picos::from_ps(7).as_ps(), 7);
        assert_eq!(Picos::default(), Picos::ZERO);
        assert_eq!(Picos(5) + Picos(3), Picos(8));
        assert_eq!(Picos(5) - Picos(3), Picos(2));
        let mut t = Picos(1);
        t += Picos(2);
        t -= Picos(1);
        assert_eq!(t, Picos(2));
        assert_eq!(Picos::MAX.saturating_add(Picos(1)), Picos::MAX);
        assert_eq!(Picos(1).saturating_sub(Picos(2)), Picos::ZERO);
        assert_eq!(Picos::MAX.checked_add(Picos(1)), None);
        assert_eq!(Picos(1).checked_add(Picos(2)), Some(Picos(3)));
        assert_eq!(Picos(1).checked_sub(Picos(2)), None);
        assert_eq!(Picos::from_ms(1500).as_secs_f64(), 1.5);
        assert_eq!(Picos::from_secs_f64(1.2e-6), Some(Picos(1_200_000)));
        assert_eq!(Picos::from_secs_f64(0.4e-12), Some(Picos(0)));
        assert_eq!(Picos::from_secs_f64(0.6e-12), Some(Picos(1)));
        for bad in [-1e-9, f64::NAN, f64::INFINITY, 1e8] {
            assert_eq!(Picos::from_secs_f64(bad), None, "{bad}");
        }
    }

    #[test]
    fn picos_display() {
        let cases = "0=0 s|1=1 ps|999=999 ps|35000=35 ns|10500=10.5 ns|1200000=1.2 µs|\
            123456789=123.5 µs|999999=1 µs|3000000000=3 ms|2000000000000=2 s|\
            5000000000000000=5000 s|18446744073709551615=18450000 s";
        for (ps, text) in cases.split('|').map(|c| c.split_once('=').unwrap()) {
            assert_eq!(Picos(ps.parse().unwrap()).to_string(), text, "{ps}");
        }
        assert_eq!(format!("[{:>7}]", Picos(35_000)), "[  35 ns]");
    }

    #[test]
    fn formatting() {
        let cases = "0.565 V=565 mV|44.72136 Ω=44.72 Ω|1e8 bit/s=100 Mbit/s|0 V=0 V|-0.05 V=-50 mV|\
            1.5 V=1.5 V|115200 bit/s=115.2 kbit/s|12e-6 A=12 µA|6e-12 F=6 pF|9.99996 V=10 V|\
            999.96 V=1 kV|1e-15 F=0.001 pF|2e12 Hz=2000 GHz|inf V=inf V|-1234.5 V=-1.234 kV";
        for (input, text) in cases.split('|').map(|c| c.split_once('=').unwrap()) {
            let (value, unit) = input.split_once(' ').unwrap();
            assert_eq!(format_si(value.parse().unwrap(), unit), text, "{input}");
        }
        assert_eq!(format_seconds(35e-9), "35 ns");
        assert_eq!(format_seconds(1e-13), "0.1 ps");
        assert_eq!(format_seconds(5000.0), "5000 s");
        assert_eq!(format_seconds(1.2e-6), "1.2 µs");
        assert_eq!(format_seconds(0.0), "0 s");
    }
}
