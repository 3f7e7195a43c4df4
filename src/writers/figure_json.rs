//! Figures and verdicts in JSON, the one vocabulary of `summary.json`, `check --json`,
//! case files and study tables: a figure is `{"name", "value", "unit"}` with the value
//! a number, `true`/`false` for a flag, a string for a choice, or `null` with a
//! `"reason"` beside it; a verdict is `{"limit", "figure", "value", "bound", "kind",
//! "pass"}`. Read back, each name finds its declaration in the catalogue again.

use std::borrow::Cow;

use serde::de::Error as _;
use serde::ser::SerializeSeq;
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use stepflux_models::job::verdict::{find_limit, Verdict};
use stepflux_models::measure::{catalogue, Figure, Value};

#[derive(Serialize, Deserialize)]
#[serde(untagged)]
enum JsonValue<'a> {
    Number(f64),
    Flag(bool),
    Choice(Cow<'a, str>),
}

#[derive(Serialize, Deserialize)]
struct FigureJson<'a> {
    name: Cow<'a, str>,
    value: Option<JsonValue<'a>>,
    unit: Cow<'a, str>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    reason: Option<Cow<'a, str>>,
}

impl<'a> From<&'a Figure> for FigureJson<'a> {
    fn from(f: &'a Figure) -> Self {
        let value = match &f.value {
            Value::Number(v) => v.is_finite().then_some(JsonValue::Number(*v)),
            Value::Flag(b) => Some(JsonValue::Flag(*b)),
            Value::Choice(c) => Some(JsonValue::Choice(Cow::Borrowed(c))),
        };
        FigureJson {
            name: Cow::Borrowed(&f.key),
            value,
            unit: Cow::Borrowed(f.unit),
            reason: f.reason.as_deref().map(Cow::Borrowed),
        }
    }
}

/// A figure list as JSON.
pub fn serialize_figures<S: Serializer>(figures: &[Figure], s: S) -> Result<S::Ok, S::Error> {
    let mut seq = s.serialize_seq(Some(figures.len()))?;
    for f in figures {
        seq.serialize_element(&FigureJson::from(f))?;
    }
    seq.end()
}

/// A figure list read back; a name the catalogue does not declare is an error (the
/// file is from another version and its case is run again).
pub fn deserialize_figures<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<Figure>, D::Error> {
    let raw: Vec<FigureJson<'de>> = Vec::deserialize(d)?;
    raw.into_iter()
        .map(|j| {
            let def = catalogue::find(&j.name)
                .ok_or_else(|| D::Error::custom(format!("unknown figure {:?}", j.name)))?;
            let value = match j.value {
                None => Value::Number(f64::NAN),
                Some(JsonValue::Number(v)) => Value::Number(v),
                Some(JsonValue::Flag(b)) => Value::Flag(b),
                Some(JsonValue::Choice(c)) => Value::Choice(Cow::Owned(c.into_owned())),
            };
            let unit = match def.unit {
                "*" => leak_unit(&j.unit),
                u => u,
            };
            Ok(Figure {
                def,
                key: j.name.into_owned(),
                value,
                unit,
                reason: j.reason.map(Cow::into_owned),
            })
        })
        .collect()
}

/// Units of probe-dependent figures read back: one of the probes' unit symbols.
fn leak_unit(unit: &str) -> &'static str {
    stepflux_models::template::PROBE_UNITS
        .into_iter()
        .find(|u| *u == unit)
        .unwrap_or("1")
}

#[derive(Serialize, Deserialize)]
struct VerdictJson<'a> {
    limit: Cow<'a, str>,
    value: Option<f64>,
    bound: f64,
    kind: Cow<'a, str>,
    pass: bool,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    reason: Option<Cow<'a, str>>,
}

/// A verdict list as JSON.
pub fn serialize_verdicts<S: Serializer>(verdicts: &[Verdict], s: S) -> Result<S::Ok, S::Error> {
    let mut seq = s.serialize_seq(Some(verdicts.len()))?;
    for v in verdicts {
        seq.serialize_element(&VerdictJson {
            limit: Cow::Borrowed(v.limit.field),
            value: v.value.filter(|x| x.is_finite()),
            bound: v.bound,
            kind: Cow::Borrowed(v.limit.bound.as_str()),
            pass: v.pass,
            reason: v.reason.as_deref().map(Cow::Borrowed),
        })?;
    }
    seq.end()
}

/// A verdict list read back.
pub fn deserialize_verdicts<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<Verdict>, D::Error> {
    let raw: Vec<VerdictJson<'de>> = Vec::deserialize(d)?;
    raw.into_iter()
        .map(|j| {
            let limit = find_limit(&j.limit)
                .ok_or_else(|| D::Error::custom(format!("unknown limit {:?}", j.limit)))?;
            Ok(Verdict {
                limit,
                value: j.value,
                bound: j.bound,
                pass: j.pass,
                reason: j.reason.map(Cow::into_owned),
            })
        })
        .collect()
}

/// A verdict list to put into a larger JSON document.
pub struct Verdicts<'a>(pub &'a [Verdict]);

impl Serialize for Verdicts<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        serialize_verdicts(self.0, s)
    }
}

/// A figure list to put into a larger JSON document.
pub struct Figures<'a>(pub &'a [Figure]);

impl Serialize for Figures<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        serialize_figures(self.0, s)
    }
}
