//! The scenario's value types (`Farads`, `Volts`, …): each parses with [`super::parse`]
//! against its own unit and describes itself in the JSON Schema.

use std::borrow::Cow;
use std::fmt;

use schemars::{json_schema, JsonSchema, Schema, SchemaGenerator};
use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;

use super::{parse, Unit};

/// JSON Schema of a value in `unit`: a number, or a string matching `pattern_for`.
fn schema_for(unit: Unit) -> Schema {
    let description = match unit {
        Unit::Ratio => format!(
            "A plain number, or a string with an optional SI prefix, e.g. \"{}\".",
            unit.example()
        ),
        _ => format!(
            "A {} in {}: a number in SI units, or a string with an optional SI prefix \
             (p n u µ m k M G) and the unit, e.g. \"{}\"; the IEC 60062 code \"4k7\" is \
             accepted too.",
            unit.quantity(),
            unit.name(),
            unit.example()
        ),
    };
    json_schema!({
        "description": description,
        "anyOf": [
            { "type": "number" },
            { "type": "string", "pattern": pattern_for(unit) }
        ]
    })
}

/// A regular expression for the string forms of `unit` (the loader is the authority;
/// this helps editors flag typos early).
fn pattern_for(unit: Unit) -> String {
    let escape = |s: &str| s.replace('/', "\\/");
    let units = match unit.rate_of() {
        Some(top) => format!("[pnuµμmkMG]?{top}\\/[pnuµμm]?s"),
        None if unit == Unit::SquareMetre => "([pnuµμmkMG]|[pnuµμmkMGc](m2|m²))?".to_string(),
        None if unit == Unit::CubicMetre => "([pnuµμmkMG]|[pnuµμmkMGc](m3|m³))?".to_string(),
        None => {
            let list: Vec<String> = unit.symbols().iter().map(|s| escape(s)).collect();
            format!("[pnuµμmkMG]?({})?", list.join("|"))
        }
    };
    let number = r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?";
    let code = format!(r"\d*[pnuµμmkMGR]\d+\s*({units})?");
    match unit {
        Unit::SquareMetre | Unit::CubicMetre => format!(r"^\s*{number}\s*{units}\s*$"),
        Unit::Ratio => format!(r"^\s*({number}\s*[pnuµμmkMG]?|\d*[pnuµμmkMGR]\d+)\s*$"),
        _ => format!(r"^\s*({number}\s*{units}|{code})\s*$"),
    }
}

/// A value in SI units read from a number or a string (see the module docs).
struct ValueVisitor(Unit);

impl Visitor<'_> for ValueVisitor {
    type Value = f64;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "a {} in {}: a number, or a string such as \"{}\"",
            self.0.quantity(),
            self.0.name(),
            self.0.example()
        )
    }

    fn visit_f64<E: de::Error>(self, v: f64) -> Result<f64, E> {
        if !v.is_finite() {
            return Err(E::custom(format!("{v} is not a finite number")));
        }
        match crate::bounds::refuse(v, self.0) {
            Some(why) => Err(E::custom(why)),
            None => Ok(v),
        }
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> Result<f64, E> {
        // Integers in a scenario are far below 2^53, where the conversion is exact.
        self.visit_f64(v as f64)
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> Result<f64, E> {
        self.visit_f64(v as f64)
    }

    fn visit_str<E: de::Error>(self, v: &str) -> Result<f64, E> {
        let si = parse(v, self.0).map_err(E::custom)?;
        self.visit_f64(si)
    }
}

/// Declares a unit-checked wrapper around an SI value.
macro_rules! quantity {
    ($(#[$doc:meta])* $name:ident, $unit:expr) => {
        $(#[$doc])*
        #[derive(Clone, Copy, Debug, PartialEq)]
        pub struct $name(pub f64);

        impl $name {
            /// The value in SI units.
            pub fn si(self) -> f64 {
                self.0
            }
        }

        impl<'de> Deserialize<'de> for $name {
            fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                d.deserialize_any(ValueVisitor($unit)).map($name)
            }
        }

        impl JsonSchema for $name {
            fn schema_name() -> Cow<'static, str> {
                stringify!($name).into()
            }

            fn json_schema(_: &mut SchemaGenerator) -> Schema {
                schema_for($unit)
            }
        }
    };
}

quantity!(
    /// Capacitance, farads.
    Farads,
    Unit::Farad
);
quantity!(
    /// Inductance, henries.
    Henries,
    Unit::Henry
);
quantity!(
    /// Resistance, ohms (also a transresistance in volts per ampere).
    Ohms,
    Unit::Ohm
);
quantity!(
    /// Voltage, volts.
    Volts,
    Unit::Volt
);
quantity!(
    /// Current, amperes.
    Amperes,
    Unit::Ampere
);
quantity!(
    /// Time, seconds.
    Seconds,
    Unit::Second
);
quantity!(
    /// Frequency, hertz.
    Hertz,
    Unit::Hertz
);
quantity!(
    /// Flux density, tesla.
    Tesla,
    Unit::Tesla
);
quantity!(
    /// Area, square metres.
    SquareMetres,
    Unit::SquareMetre
);
quantity!(
    /// Power, watts.
    Watts,
    Unit::Watt
);
quantity!(
    /// Energy, joules.
    Joules,
    Unit::Joule
);
quantity!(
    /// Charge, coulombs.
    Coulombs,
    Unit::Coulomb
);
quantity!(
    /// Volume, cubic metres.
    CubicMetres,
    Unit::CubicMetre
);
quantity!(
    /// Current slew rate, amperes per second.
    AmperesPerSecond,
    Unit::AmperePerSecond
);
quantity!(
    /// Voltage slew rate, volts per second.
    VoltsPerSecond,
    Unit::VoltPerSecond
);
quantity!(
    /// A dimensionless number (turns, duty, gain, percent).
    Ratio,
    Unit::Ratio
);
