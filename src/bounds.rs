//! The magnitudes a value of each unit may have: many decades wider than any forward
//! converter uses, and narrow enough that every product and quotient the engine forms
//! (time constants, energies, the time grid) stays a finite, meaningful double. A value
//! outside is a typing slip (a missing prefix, a stray exponent), refused where it is
//! read, with the range shown. Zero is not judged here: whether a field may be zero is
//! the field's own rule, checked when the scenario is validated.

use crate::units::Unit;

/// Smallest and largest magnitude allowed for `unit`, in SI units, and how to say it.
pub fn band(unit: Unit) -> (f64, f64, &'static str) {
    match unit {
        Unit::Farad => (1e-15, 1e4, "1 fF to 10 kF"),
        Unit::Henry => (1e-12, 100.0, "1 pH to 100 H"),
        Unit::Volt => (1e-6, 1e6, "1 µV to 1 MV"),
        Unit::Ampere => (1e-9, 1e6, "1 nA to 1 MA"),
        Unit::Second => (1e-15, 1e6, "1 fs to 1e6 s"),
        Unit::Hertz => (1e-3, 1e9, "1 mHz to 1 GHz"),
        Unit::Ohm => (1e-9, 1e15, "1 nΩ to 1e15 Ω"),
        Unit::Tesla => (1e-6, 100.0, "1 µT to 100 T"),
        Unit::SquareMetre => (1e-12, 1.0, "1 µm² to 1 m²"),
        Unit::Watt => (1e-9, 1e9, "1 nW to 1 GW"),
        Unit::Joule => (1e-15, 1e6, "1 fJ to 1 MJ"),
        Unit::Coulomb => (1e-15, 1.0, "1 fC to 1 C"),
        Unit::CubicMetre => (1e-15, 1.0, "1e-6 mm³ to 1 m³"),
        Unit::AmperePerSecond => (1e-3, 1e15, "1 mA/s to 1e15 A/s"),
        Unit::VoltPerSecond => (1e-3, 1e15, "1 mV/s to 1e15 V/s"),
        // Gains, turns, duties and percentages share this type; each has its own rule.
        Unit::Ratio => (1e-12, 1e12, "1e-12 to 1e12"),
    }
}

/// Why `value` (SI units) is outside what `unit` allows, if it is.
pub fn refuse(value: f64, unit: Unit) -> Option<String> {
    let (lo, hi, words) = band(unit);
    let m = value.abs();
    (m != 0.0 && !(lo..=hi).contains(&m)).then(|| {
        format!(
            "{value:e} is outside the {} stepflux can compute with: magnitudes {words} \
             (or 0 where the field allows it)",
            unit.quantity()
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::ALL;

    #[test]
    fn every_band_is_ordered_and_keeps_practice_inside() {
        // A practical value of each unit (its documented example) must pass.
        for u in ALL {
            let (lo, hi, _) = band(u);
            assert!(lo > 0.0 && lo < hi, "{u:?}");
            let example = crate::units::parse(u.example(), u).expect("example parses");
            assert!(refuse(example, u).is_none(), "{u:?}: {}", u.example());
        }
    }

    #[test]
    fn the_smallest_double_and_a_huge_voltage_are_refused() {
        assert!(refuse(5e-324, Unit::Farad).is_some_and(|m| m.contains("1 fF to 10 kF")));
        assert!(refuse(1e308, Unit::Volt).is_some_and(|m| m.contains("1 µV to 1 MV")));
        assert!(refuse(1e-30, Unit::Hertz).is_some());
        assert!(refuse(0.0, Unit::Ohm).is_none());
    }
}
