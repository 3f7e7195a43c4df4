//! Physical values as a scenario file gives them: a plain SI number, or a string with
//! an optional SI prefix and the unit, checked against the unit the field expects.
//!
//! Accepted forms, for a field in farads:
//! - `0.00022`, `2.2e-4` — a JSON number, already in SI units;
//! - `"220u"`, `"220 uF"`, `"220µF"`, `"2.2e-4 F"` — number, optional prefix, optional
//!   unit symbol (the unit must be the field's own);
//! - `"2u2"`, `"2u2F"` — the letter-and-digit code of IEC 60062, where the multiplier
//!   letter stands in for the decimal point (`4k7` = 4700, `2R2` = 2.2, `R47` = 0.47,
//!   `1M5` = 1.5e6).
//!
//! Prefixes are case-sensitive: p n u µ m k M G (`m` milli, `M` mega). Rates take a
//! prefix on either side: `"1 A/us"` = 1e6 A/s. An area prefix applies to the metre
//! before squaring, as the symbol reads: `"40 mm2"` = 40e-6 m²; areas also take c
//! (centi), as core data quote them: `"0.4 cm2"` = `"0.4 cm²"` = 40e-6 m².

use std::fmt;

/// The unit a field is measured in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Unit {
    /// Capacitance.
    Farad,
    /// Inductance.
    Henry,
    /// Voltage.
    Volt,
    /// Current.
    Ampere,
    /// Time.
    Second,
    /// Frequency.
    Hertz,
    /// Resistance (also volts per ampere).
    Ohm,
    /// Flux density.
    Tesla,
    /// Area.
    SquareMetre,
    /// Power.
    Watt,
    /// Energy.
    Joule,
    /// Charge.
    Coulomb,
    /// Volume.
    CubicMetre,
    /// Current slew rate.
    AmperePerSecond,
    /// Voltage slew rate.
    VoltPerSecond,
    /// A pure number: a prefix is allowed, a unit is not.
    Ratio,
}

/// Every unit: for matching a wrong symbol to what it measures, and for reading a
/// value in whatever unit it carries.
pub const ALL: [Unit; 16] = [
    Unit::Farad,
    Unit::Henry,
    Unit::Volt,
    Unit::Ampere,
    Unit::Second,
    Unit::Hertz,
    Unit::Ohm,
    Unit::Tesla,
    Unit::SquareMetre,
    Unit::Watt,
    Unit::Joule,
    Unit::Coulomb,
    Unit::CubicMetre,
    Unit::AmperePerSecond,
    Unit::VoltPerSecond,
    Unit::Ratio,
];

impl Unit {
    /// What the unit measures, for messages.
    pub fn quantity(self) -> &'static str {
        match self {
            Unit::Farad => "capacitance",
            Unit::Henry => "inductance",
            Unit::Volt => "voltage",
            Unit::Ampere => "current",
            Unit::Second => "time",
            Unit::Hertz => "frequency",
            Unit::Ohm => "resistance",
            Unit::Tesla => "flux density",
            Unit::SquareMetre => "area",
            Unit::Watt => "power",
            Unit::Joule => "energy",
            Unit::Coulomb => "charge",
            Unit::CubicMetre => "volume",
            Unit::AmperePerSecond => "current slew rate",
            Unit::VoltPerSecond => "voltage slew rate",
            Unit::Ratio => "plain number",
        }
    }

    /// The unit's name and symbol, for messages.
    pub fn name(self) -> &'static str {
        match self {
            Unit::Farad => "farads (F)",
            Unit::Henry => "henries (H)",
            Unit::Volt => "volts (V)",
            Unit::Ampere => "amperes (A)",
            Unit::Second => "seconds (s)",
            Unit::Hertz => "hertz (Hz)",
            Unit::Ohm => "ohms (Ω or ohm)",
            Unit::Tesla => "tesla (T)",
            Unit::SquareMetre => "square metres (m2 or m²)",
            Unit::Watt => "watts (W)",
            Unit::Joule => "joules (J)",
            Unit::Coulomb => "coulombs (C)",
            Unit::CubicMetre => "cubic metres (m3 or m³)",
            Unit::AmperePerSecond => "amperes per second (A/s)",
            Unit::VoltPerSecond => "volts per second (V/s)",
            Unit::Ratio => "no unit",
        }
    }

    /// A typical value written as a string.
    pub fn example(self) -> &'static str {
        match self {
            Unit::Farad => "220 uF",
            Unit::Henry => "15 uH",
            Unit::Volt => "24 V",
            Unit::Ampere => "4 A",
            Unit::Second => "2 ms",
            Unit::Hertz => "150 kHz",
            Unit::Ohm => "4k7",
            Unit::Tesla => "300 mT",
            Unit::SquareMetre => "40 mm2",
            Unit::Watt => "150 mW",
            Unit::Joule => "2 uJ",
            Unit::Coulomb => "15 nC",
            Unit::CubicMetre => "1600 mm3",
            Unit::AmperePerSecond => "1 A/us",
            Unit::VoltPerSecond => "10 V/ms",
            Unit::Ratio => "10k",
        }
    }

    /// Symbols of the unit without a prefix. Several spellings of the ohm are common
    /// (the Greek capital omega and the separate ohm sign look alike).
    fn symbols(self) -> &'static [&'static str] {
        match self {
            Unit::Farad => &["F"],
            Unit::Henry => &["H"],
            Unit::Volt => &["V"],
            Unit::Ampere => &["A"],
            Unit::Second => &["s"],
            Unit::Hertz => &["Hz"],
            Unit::Ohm => &["\u{2126}", "\u{03A9}", "ohm", "ohms", "V/A"],
            Unit::Tesla => &["T"],
            Unit::SquareMetre => &["m2", "m²"],
            Unit::Watt => &["W"],
            Unit::Joule => &["J"],
            Unit::Coulomb => &["C"],
            Unit::CubicMetre => &["m3", "m³"],
            Unit::AmperePerSecond | Unit::VoltPerSecond | Unit::Ratio => &[],
        }
    }

    /// Power of the metre in an area or volume unit, whose prefix is raised to it
    /// (mm² = 1e-6 m², mm³ = 1e-9 m³).
    fn metre_power(self) -> Option<i32> {
        match self {
            Unit::SquareMetre => Some(2),
            Unit::CubicMetre => Some(3),
            _ => None,
        }
    }

    /// Numerator symbol of a rate unit.
    fn rate_of(self) -> Option<&'static str> {
        match self {
            Unit::AmperePerSecond => Some("A"),
            Unit::VoltPerSecond => Some("V"),
            _ => None,
        }
    }
}

/// Why a value could not be read.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct UnitError {
    /// The text as given.
    pub text: String,
    /// The unit the field expects.
    pub expected: Unit,
    /// What was wrong.
    pub problem: String,
}

impl fmt::Display for UnitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let u = self.expected;
        write!(
            f,
            "{} is not a valid {}: {}; ",
            crate::text::shorten(&format!("{:?}", self.text)),
            u.quantity(),
            self.problem
        )?;
        match u {
            Unit::Ratio => write!(
                f,
                "expected a plain number, optionally with an SI prefix, e.g. \"{}\"",
                u.example()
            ),
            _ => write!(
                f,
                "expected {} with an optional prefix p n u µ m k M G, e.g. \"{}\", or a \
                 plain number in SI units",
                u.name(),
                u.example()
            ),
        }
    }
}

impl std::error::Error for UnitError {}

/// Power of ten of an SI prefix character.
fn prefix(c: char) -> Option<i32> {
    Some(match c {
        'p' => -12,
        'n' => -9,
        'u' | 'µ' | 'μ' => -6,
        'm' => -3,
        'k' => 3,
        'M' => 6,
        'G' => 9,
        _ => return None,
    })
}

/// Parses `text` as a value in `unit`, returning SI units.
///
/// The prefix is applied as a decimal exponent and the whole decimal converted once,
/// so `"15 uH"` gives the double nearest 1.5e-5, not 15 × (nearest 1e-6).
pub fn parse(text: &str, unit: Unit) -> Result<f64, UnitError> {
    let fail = |problem: String| UnitError {
        text: text.to_string(),
        expected: unit,
        problem,
    };
    let s = text.trim();
    if s.is_empty() {
        return Err(fail("it is empty".into()));
    }
    let (mantissa, exponent, suffix) = match code_form(s, unit) {
        Some((_, _, rest)) if rest.starts_with(|c| prefix(c).is_some()) => {
            return Err(fail(format!(
                "a letter-and-digit code already carries its multiplier, so \"{rest}\" \
                 cannot follow it"
            )))
        }
        Some(parts) => parts,
        None => {
            let end = number_end(s);
            if end == 0 {
                return Err(fail("it does not start with a number".into()));
            }
            let (mantissa, exponent) = match s[..end].split_once(['e', 'E']) {
                Some((m, e)) => (m.to_string(), e.parse::<i64>().unwrap_or(i64::MAX)),
                None => (s[..end].to_string(), 0),
            };
            (mantissa, exponent, s[end..].trim_start())
        }
    };
    let scale = suffix_exponent(suffix, unit).map_err(fail)?;
    let total = exponent.saturating_add(i64::from(scale));
    let si: f64 = format!("{mantissa}e{total}")
        .parse()
        .map_err(|_| fail("the number cannot be read".into()))?;
    if si.is_finite() {
        Ok(si)
    } else {
        Err(fail("it is too large".into()))
    }
}

/// The IEC 60062 letter-and-digit code (`4k7`, `R47`, `2u2F`): digits, a multiplier
/// letter in place of the decimal point, digits, then an optional unit. Returns the
/// decimal mantissa, the letter's power of ten and the rest. Not tried for areas and
/// volumes, where `50m2` would read as a code.
fn code_form(s: &str, unit: Unit) -> Option<(String, i64, &str)> {
    if unit.metre_power().is_some() {
        return None;
    }
    let lead = s.find(|c: char| !c.is_ascii_digit()).unwrap_or(s.len());
    let mut chars = s[lead..].chars();
    let letter = chars.next()?;
    let exponent = if letter == 'R' { 0 } else { prefix(letter)? };
    let rest = chars.as_str();
    let digits = rest
        .find(|c: char| !c.is_ascii_digit())
        .unwrap_or(rest.len());
    if digits == 0 {
        return None;
    }
    let mantissa = format!("0{}.{}", &s[..lead], &rest[..digits]);
    Some((mantissa, i64::from(exponent), rest[digits..].trim_start()))
}

/// Length of the decimal number at the start of `s` (sign, digits, point, exponent);
/// 0 when there is none. Written out rather than using `f64::from_str` on prefixes so
/// that "inf", "NaN" and hex never count as numbers.
fn number_end(s: &str) -> usize {
    let b = s.as_bytes();
    let mut i = 0;
    if matches!(b.first(), Some(b'+' | b'-')) {
        i += 1;
    }
    let digits = |i: &mut usize| {
        let start = *i;
        while *i < b.len() && b[*i].is_ascii_digit() {
            *i += 1;
        }
        *i - start
    };
    let mut mantissa = digits(&mut i);
    if i < b.len() && b[i] == b'.' {
        i += 1;
        mantissa += digits(&mut i);
    }
    if mantissa == 0 {
        return 0;
    }
    if i < b.len() && matches!(b[i], b'e' | b'E') {
        let mut j = i + 1;
        if j < b.len() && matches!(b[j], b'+' | b'-') {
            j += 1;
        }
        if digits(&mut j) > 0 {
            i = j;
        }
    }
    i
}

/// Power of ten of a prefix-and-unit suffix for `unit`, or why it does not fit.
fn suffix_exponent(suffix: &str, unit: Unit) -> Result<i32, String> {
    if suffix.is_empty() {
        return Ok(0);
    }
    if let Some(scale) = own_exponent(suffix, unit) {
        return Ok(scale);
    }
    // A lone prefix fits every unit, so it says nothing about which one was meant.
    let lone_prefix = suffix.chars().count() == 1 && suffix.chars().all(|c| prefix(c).is_some());
    if let Some(other) = ALL
        .into_iter()
        .filter(|_| !lone_prefix)
        .find(|&u| u != Unit::Ratio && own_exponent(suffix, u).is_some())
    {
        return Err(format!(
            "\"{suffix}\" measures {} in {}, not {}",
            other.quantity(),
            other.name(),
            unit.quantity()
        ));
    }
    Err(format!(
        "\"{suffix}\" is not a known prefix and unit (they are case-sensitive)"
    ))
}

/// Power of ten of `suffix` read as an optional prefix then one of `unit`'s own symbols.
fn own_exponent(suffix: &str, unit: Unit) -> Option<i32> {
    if let Some(numerator) = unit.rate_of() {
        let (top, bottom) = suffix.split_once('/')?;
        let top = prefixed(top.trim(), &[numerator])?;
        let bottom = prefixed(bottom.trim(), &["s"])?;
        return Some(top - bottom);
    }
    if unit == Unit::Ratio {
        let mut chars = suffix.chars();
        let p = prefix(chars.next()?)?;
        return chars.as_str().is_empty().then_some(p);
    }
    if unit.symbols().contains(&suffix) {
        return Some(0);
    }
    let mut chars = suffix.chars();
    let first = chars.next()?;
    let rest = chars.as_str();
    // Centi is used with areas and volumes only (core areas are quoted in cm², volumes
    // in cm³), and only with the symbol: a lone "c" is no prefix anywhere else.
    let p = match first {
        'c' if unit.metre_power().is_some() && !rest.is_empty() => -2,
        _ => prefix(first)?,
    };
    if rest.is_empty() {
        // A lone prefix, the unit left implicit as in "220u".
        Some(p)
    } else if unit.symbols().contains(&rest) {
        // An area prefix scales the metre, and the metre is squared: mm² = 1e-6 m².
        Some(unit.metre_power().map_or(p, |k| k * p))
    } else {
        None
    }
}

/// Power of ten of `text` read as an optional prefix followed by one of `symbols`.
fn prefixed(text: &str, symbols: &[&str]) -> Option<i32> {
    if symbols.contains(&text) {
        return Some(0);
    }
    let mut chars = text.chars();
    let p = prefix(chars.next()?)?;
    symbols.contains(&chars.as_str()).then_some(p)
}

mod quantity;
pub use quantity::*;

#[cfg(test)]
mod tests;
