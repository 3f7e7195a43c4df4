//! Unit parsing against the published conventions it implements.
//!
//! Sources: BIPM, *The International System of Units (SI)*, 9th ed. (2019), §3 and
//! Table 7 (prefix symbols and factors; a prefix attached to a unit symbol forms a new
//! symbol, so mm² = (10⁻³ m)²); IEC 60062:2016 *Marking codes for resistors and
//! capacitors*, the letter-and-digit code, where the multiplier letter stands for the
//! decimal point and R for a multiplier of one (section recalled from memory).
//!
//! Values are compared exactly: the parser turns the text into one decimal and rounds
//! it once, as the compiler rounds the literal it is compared with.

use super::*;

fn ok(text: &str, unit: Unit, want: f64) {
    match parse(text, unit) {
        Ok(v) => assert_eq!(v, want, "{text:?} as {unit:?}"),
        Err(e) => panic!("{text:?} as {unit:?}: {e}"),
    }
}

fn err(text: &str, unit: Unit) -> String {
    match parse(text, unit) {
        Ok(v) => panic!("{text:?} as {unit:?} should fail, gave {v}"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn plain_numbers_and_exponents_are_si() {
    ok("0.00022", Unit::Farad, 2.2e-4);
    ok("1.5e-3 s", Unit::Second, 1.5e-3);
    ok("  -2.5 V ", Unit::Volt, -2.5);
    ok(".5", Unit::Ratio, 0.5);
    ok("5.", Unit::Ratio, 5.0);
    ok("2E3", Unit::Hertz, 2e3);
}

#[test]
fn si_prefixes_scale_by_their_table_factors() {
    // BIPM SI Brochure, Table 7.
    ok("220u", Unit::Farad, 220e-6);
    ok("220 uF", Unit::Farad, 220e-6);
    ok("220µF", Unit::Farad, 220e-6);
    ok("220 μF", Unit::Farad, 220e-6);
    ok("100 kHz", Unit::Hertz, 100e3);
    ok("50 m", Unit::Second, 50e-3);
    ok("50 ms", Unit::Second, 50e-3);
    ok("1 MHz", Unit::Hertz, 1e6);
    ok("3 pF", Unit::Farad, 3e-12);
    ok("10 nH", Unit::Henry, 10e-9);
    ok("1 GΩ", Unit::Ohm, 1e9);
    ok("300 mT", Unit::Tesla, 0.3);
    ok("150 mW", Unit::Watt, 0.15);
    ok("10k", Unit::Ratio, 1e4);
}

#[test]
fn m_is_milli_and_capital_m_is_mega() {
    // BIPM SI Brochure, Table 7: symbols are case-sensitive.
    ok("1 mΩ", Unit::Ohm, 1e-3);
    ok("1 MΩ", Unit::Ohm, 1e6);
}

#[test]
fn ohm_spellings() {
    ok("10 ohm", Unit::Ohm, 10.0);
    ok("10 kohm", Unit::Ohm, 10e3);
    ok("10 \u{2126}", Unit::Ohm, 10.0);
    ok("10 \u{03A9}", Unit::Ohm, 10.0);
    ok("0.1 V/A", Unit::Ohm, 0.1);
}

#[test]
fn iec_60062_letter_and_digit_code() {
    // IEC 60062: the multiplier letter stands in for the decimal point.
    ok("4k7", Unit::Ohm, 4700.0);
    ok("2R2", Unit::Ohm, 2.2);
    ok("1M5", Unit::Ohm, 1.5e6);
    ok("R47", Unit::Ohm, 0.47);
    ok("4k7 Ω", Unit::Ohm, 4700.0);
    ok("2u2F", Unit::Farad, 2.2e-6);
    ok("4n7", Unit::Farad, 4.7e-9);
    ok("6m8", Unit::Henry, 6.8e-3);
}

#[test]
fn area_prefix_is_squared_with_the_metre() {
    // BIPM SI Brochure §3: a prefixed symbol raised to a power raises the prefix too.
    ok("40 mm2", Unit::SquareMetre, 40e-6);
    ok("40 mm²", Unit::SquareMetre, 40e-6);
    ok("4e-5 m2", Unit::SquareMetre, 4e-5);
    ok("0.4 m2", Unit::SquareMetre, 0.4);
    // Core areas are quoted in cm² (common practice): 1 cm² = 1e-4 m².
    ok("0.4 cm2", Unit::SquareMetre, 40e-6);
    ok("0.4 cm²", Unit::SquareMetre, 40e-6);
    // No unit symbol: the prefix is a plain multiplier.
    ok("40 u", Unit::SquareMetre, 40e-6);
}

#[test]
fn slew_rates_take_prefixes_on_either_side() {
    ok("1 A/us", Unit::AmperePerSecond, 1e6);
    ok("1 A/µs", Unit::AmperePerSecond, 1e6);
    ok("2 kA/s", Unit::AmperePerSecond, 2e3);
    ok("10 V/ms", Unit::VoltPerSecond, 1e4);
    ok("5e6", Unit::VoltPerSecond, 5e6);
}

#[test]
fn a_unit_of_another_quantity_is_named_in_the_error() {
    let e = err("220 uH", Unit::Farad);
    assert!(e.contains("\"uH\" measures inductance"), "{e}");
    assert!(e.contains("farads (F)"), "{e}");
    assert!(e.contains("e.g. \"220 uF\""), "{e}");
    let e = err("1 A/us", Unit::Ampere);
    assert!(e.contains("current slew rate"), "{e}");
    let e = err("0.4 V", Unit::Ratio);
    assert!(e.contains("expected a plain number"), "{e}");
}

#[test]
fn malformed_values_are_refused() {
    for (text, unit, key) in [
        ("", Unit::Volt, "empty"),
        ("abc", Unit::Volt, "does not start with a number"),
        ("inf", Unit::Volt, "does not start with a number"),
        ("NaN V", Unit::Volt, "does not start with a number"),
        ("1e999 V", Unit::Volt, "too large"),
        ("220 UF", Unit::Farad, "case-sensitive"),
        ("220 uf", Unit::Farad, "case-sensitive"),
        ("1 u", Unit::AmperePerSecond, "not a known prefix and unit"),
        ("100 k Hz", Unit::Hertz, "not a known prefix and unit"),
        ("1.2.3", Unit::Ratio, "not a known prefix and unit"),
        ("4k7k", Unit::Ohm, "cannot follow it"),
        ("4k7 mΩ", Unit::Ohm, "cannot follow it"),
    ] {
        let e = err(text, unit);
        assert!(e.contains(key), "{text:?}: {e}");
    }
}

#[test]
fn wrappers_read_numbers_and_strings_from_json() {
    let v: Vec<Farads> = serde_json::from_str(r#"[2.2e-4, 220, "220 uF"]"#).unwrap();
    assert_eq!(v[0].si(), 2.2e-4);
    assert_eq!(v[1].si(), 220.0);
    assert_eq!(v[2].si(), 220e-6);
    let e = serde_json::from_str::<Farads>(r#""1 H""#).unwrap_err();
    assert!(e.to_string().contains("measures inductance"), "{e}");
    let e = serde_json::from_str::<Farads>("true").unwrap_err();
    assert!(e.to_string().contains("a capacitance in farads"), "{e}");
}

#[test]
fn schema_offers_number_or_patterned_string() {
    let schema = schemars::schema_for!(Henries);
    let text = serde_json::to_string(&schema).unwrap();
    assert!(text.contains("\"type\":\"number\""), "{text}");
    assert!(text.contains("\"pattern\""), "{text}");
    assert!(text.contains("inductance in henries"), "{text}");
}
