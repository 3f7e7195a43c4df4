//! Values in a study: a JSON number in SI units, or a string in the scenario's unit
//! notation. The unit is read by trying each unit of [`crate::units`] in turn.

use anyhow::{anyhow, Result};
use schemars::JsonSchema;
use serde::Deserialize;
use serde_json::Value;

use crate::units::{self, Unit};

/// A number in SI units, or a string such as "220 uF", "4k7", "18 V".
#[derive(Clone, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(untagged)]
pub enum StudyValue {
    /// Already in SI units.
    Number(f64),
    /// Number with optional prefix and unit.
    Text(String),
}

impl StudyValue {
    /// From a JSON value found in a scenario.
    pub fn from_json(v: &Value) -> Result<Self> {
        match v {
            Value::Number(n) => n
                .as_f64()
                .map(StudyValue::Number)
                .ok_or_else(|| anyhow!("{n} is out of range")),
            Value::String(s) => Ok(StudyValue::Text(s.clone())),
            other => Err(anyhow!("{other} is neither a number nor a value string")),
        }
    }

    /// The value in SI units.
    pub fn si(&self) -> Result<f64> {
        let x = match self {
            StudyValue::Number(x) => *x,
            StudyValue::Text(t) => parse_any(t)?,
        };
        if x.is_finite() {
            Ok(x)
        } else {
            Err(anyhow!("{x} is not a finite value"))
        }
    }
}

/// Reads `text` in whichever unit it carries.
fn parse_any(text: &str) -> Result<f64> {
    units::ALL
        .iter()
        .find_map(|&u| units::parse(text, u).ok())
        .ok_or_else(|| anyhow!("{text:?} is not a number with an optional SI prefix and unit"))
}

/// The units a string can be read in ("220u" fits all, "220 uF" only farads).
fn units_of(text: &str) -> impl Iterator<Item = Unit> + '_ {
    units::ALL
        .into_iter()
        .filter(move |&u| units::parse(text, u).is_ok())
}

/// Whether two value strings can be in the same unit.
pub fn compatible_units(a: &str, b: &str) -> bool {
    let b_units: Vec<Unit> = units_of(b).collect();
    b_units.is_empty() || units_of(a).any(|u| b_units.contains(&u))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_any_unit_and_checks_compatibility() {
        // Values chosen so the expected SI value is exact in binary after scaling.
        assert_eq!(StudyValue::Text("18 V".into()).si().unwrap(), 18.0);
        assert_eq!(StudyValue::Text("4k7".into()).si().unwrap(), 4700.0);
        assert_eq!(StudyValue::Number(0.5).si().unwrap(), 0.5);
        assert!(StudyValue::Text("fast".into()).si().is_err());
        assert!(compatible_units("100 uF", "220 uF"));
        assert!(compatible_units("100u", "220 uF"));
        assert!(!compatible_units("100 uH", "220 uF"));
    }
}
