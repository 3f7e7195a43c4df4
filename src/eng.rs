//! Engineering notation for what a person reads (terminal, plots, reports): three
//! significant digits and an SI prefix from p to G, so "1.02e-4 s" reads "102 µs".
//! Files for programs (JSON, CSV, HDF5) keep plain SI numbers; nothing here is used
//! to write them.

/// SI prefixes from pico to giga, with their powers of ten (SI Brochure, 9th ed.,
/// table 7). Only multiples of three: a designer reads "µs" and "ms", not "cs".
const PREFIXES: [(i32, &str); 8] = [
    (-12, "p"),
    (-9, "n"),
    (-6, "µ"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
];

/// Shown for a value that is not a number or infinite (not measured).
pub const NOT_AVAILABLE: &str = "n/a";

/// `value` in `unit` to three significant digits with an SI prefix: "102 µs",
/// "33.3 mV", "-1.50 A", "0 V". Units "%" and "1" (a pure number) take no prefix
/// ("11.7 %", "0.306"); non-finite values read "n/a".
pub fn eng(value: f64, unit: &str) -> String {
    if !value.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    match unit {
        "%" => format!("{} %", sig3(value)),
        "1" | "" => plain(value),
        _ => {
            let (mantissa, prefix) = scaled(value);
            format!("{mantissa} {prefix}{unit}")
        }
    }
}

/// A value with an SI prefix but no unit, for a number whose unit is not known (a
/// study parameter in SI units): 1.91e-4 → "191 µ".
pub fn prefixed(value: f64) -> String {
    if !value.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    let (mantissa, prefix) = scaled(value);
    format!("{mantissa} {prefix}").trim_end().to_string()
}

/// A fraction (unit "1") as a percentage: 0.117 → "11.7 %".
pub fn percent(fraction: f64) -> String {
    eng(100.0 * fraction, "%")
}

/// A flag as "pass" / "FAIL" (upper case so a failure stands out in a column).
pub fn pass_fail(pass: bool) -> &'static str {
    if pass {
        "pass"
    } else {
        "FAIL"
    }
}

/// A flag as "yes" / "no".
pub fn yes_no(flag: bool) -> &'static str {
    if flag {
        "yes"
    } else {
        "no"
    }
}

/// A count (cycles, a cycle number) as an integer; non-finite reads "n/a".
pub fn count(value: f64) -> String {
    if value.is_finite() {
        format!("{value:.0}")
    } else {
        NOT_AVAILABLE.to_string()
    }
}

/// The prefix (and its scale factor) that suits an axis whose largest magnitude is
/// `extent`: 0.0031 s → (1e3, "m"), so ticks read 0 … 3.1 in "ms".
pub fn axis_prefix(extent: f64) -> (f64, &'static str) {
    if !extent.is_finite() || extent == 0.0 {
        return (1.0, "");
    }
    let (exp, prefix) = prefix_for(extent.abs());
    (10f64.powi(-exp), prefix)
}

/// The prefix whose mantissa falls in [1, 1000), clamped to p…G.
fn prefix_for(magnitude: f64) -> (i32, &'static str) {
    let exp = magnitude.log10().floor() as i32;
    let k = (exp.div_euclid(3) * 3).clamp(-12, 9);
    PREFIXES
        .iter()
        .copied()
        .find(|(e, _)| *e == k)
        .unwrap_or((0, ""))
}

/// Mantissa text and prefix. Rounding to three digits may carry into the next
/// prefix (999.95 → 1.00 k), so the prefix is chosen after rounding.
fn scaled(value: f64) -> (String, &'static str) {
    if value == 0.0 {
        return ("0".into(), "");
    }
    let rounded = round3(value);
    let (exp, prefix) = prefix_for(rounded.abs());
    let mantissa = rounded / 10f64.powi(exp);
    if mantissa.abs() >= 1000.0 || mantissa.abs() < 1.0 {
        // Beyond giga or below pico: scientific rather than a misleading prefix.
        return (format!("{rounded:.2e}"), "");
    }
    (sig3(mantissa), prefix)
}

/// `value` rounded to three significant digits (as a number).
fn round3(value: f64) -> f64 {
    if value == 0.0 || !value.is_finite() {
        return value;
    }
    let text = format!("{value:.2e}");
    text.parse().unwrap_or(value)
}

/// Three significant digits in fixed notation for magnitudes 1e-3 … 1e6, with the
/// decimals that takes ("11.7", "0.306", "1500"); scientific beyond.
fn sig3(value: f64) -> String {
    if value == 0.0 {
        return "0".into();
    }
    let rounded = round3(value);
    let exp = rounded.abs().log10().floor() as i32;
    if !(-3..6).contains(&exp) {
        return format!("{rounded:.2e}");
    }
    let decimals = (2 - exp).max(0) as usize;
    format!("{rounded:.decimals$}")
}

/// A pure number: three significant digits, no prefix (a duty of 0.306 is not
/// "306 m").
fn plain(value: f64) -> String {
    sig3(value)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Expected texts: three significant digits and the SI prefixes of the SI
    /// Brochure (9th ed., table 7), p to G in steps of 10³; the rounding carry
    /// (999.95 → 1.00 k) is common practice for engineering notation. Exact string
    /// equality: the text is what a person reads, so there is no tolerance.
    #[test]
    fn values_with_units_read_in_engineering_notation() {
        let table: [(f64, &str, &str); 24] = [
            (1.02e-4, "s", "102 µs"),
            (2.719782278998075e-05, "s", "27.2 µs"),
            (0.033301719283955755, "V", "33.3 mV"),
            (48.73566318414212, "V", "48.7 V"),
            (808.0, "V", "808 V"),
            (999.95, "V", "1.00 kV"),
            (999.4, "V", "999 V"),
            (1.0, "A", "1.00 A"),
            (1.5e-12, "F", "1.50 pF"),
            (4.7e-9, "F", "4.70 nF"),
            (220e-6, "F", "220 µF"),
            (150e3, "Hz", "150 kHz"),
            (2.2e6, "Hz", "2.20 MHz"),
            (3.3e9, "Hz", "3.30 GHz"),
            (-1.5, "A", "-1.50 A"),
            (-0.00055, "A", "-550 µA"),
            (0.0, "V", "0 V"),
            (f64::NAN, "V", "n/a"),
            (f64::INFINITY, "s", "n/a"),
            (f64::NEG_INFINITY, "%", "n/a"),
            (11.716067790986523, "%", "11.7 %"),
            (0.3109093790726192, "%", "0.311 %"),
            (0.3064659833908103, "1", "0.306"),
            (1499.0, "1", "1500"),
        ];
        for (value, unit, expected) in table {
            assert_eq!(eng(value, unit), expected, "eng({value:e}, {unit:?})");
        }
    }

    /// Outside p…G a prefix would mislead (no "1000 G"), so scientific notation.
    #[test]
    fn beyond_the_prefix_range_is_scientific() {
        assert_eq!(eng(1.5e-15, "s"), "1.50e-15 s");
        assert_eq!(eng(2.0e12, "Hz"), "2.00e12 Hz");
    }

    #[test]
    fn flags_counts_and_percentages() {
        assert_eq!(pass_fail(true), "pass");
        assert_eq!(pass_fail(false), "FAIL");
        assert_eq!(yes_no(true), "yes");
        assert_eq!(yes_no(false), "no");
        assert_eq!(count(1499.0), "1499");
        assert_eq!(count(f64::NAN), "n/a");
        assert_eq!(percent(0.9046097646113198), "90.5 %");
        assert_eq!(prefixed(1.91e-4), "191 µ");
        assert_eq!(prefixed(24.0), "24.0");
    }

    /// The axis prefix puts the largest tick in [1, 1000): 3.1 ms, not 0.0031 s.
    #[test]
    fn axis_prefix_suits_the_extent() {
        assert_eq!(axis_prefix(0.0031), (1e3, "m"));
        assert_eq!(axis_prefix(10e-3), (1e3, "m"));
        assert_eq!(axis_prefix(80e-6), (1e6, "µ"));
        assert_eq!(axis_prefix(5.0), (1.0, ""));
        assert_eq!(axis_prefix(0.0), (1.0, ""));
    }
}
