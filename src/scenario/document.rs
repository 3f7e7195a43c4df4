//! Reading a JSON document of this project's formats (a scenario, a study) into its
//! serde types, with messages in the format's own words.
//!
//! The text is parsed twice: first as plain JSON, so a syntax error is told apart from
//! a shape error; then into the typed structure, whose errors carry the field path.
//! A shape error is then explained from the format's JSON Schema (what is allowed at
//! that path) and from the value actually found there, instead of the deserializer's
//! vocabulary ("newtype variant", "struct X with 10 elements").

use serde::de::DeserializeOwned;
use serde_json::Value;
use serde_path_to_error::Segment;

use super::error::ScenarioError;
use crate::text::shorten;

/// The byte-order mark some editors put at the start of UTF-8 files.
const BOM: char = '\u{feff}';

/// Decodes a file's bytes as UTF-8, dropping a leading byte-order mark; invalid UTF-8
/// is reported with its byte offset and line:column.
pub fn decode(bytes: Vec<u8>, file: &str) -> Result<String, ScenarioError> {
    match String::from_utf8(bytes) {
        Ok(text) => Ok(match text.strip_prefix(BOM) {
            Some(rest) => rest.to_string(),
            None => text,
        }),
        Err(e) => {
            let offset = e.utf8_error().valid_up_to();
            let bytes = e.as_bytes();
            let good = String::from_utf8_lossy(&bytes[..offset]);
            let line = good.matches('\n').count() + 1;
            let column = good.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
            Err(ScenarioError::Encoding {
                file: file.to_string(),
                line,
                column,
                offset,
                byte: bytes[offset],
            })
        }
    }
}

/// Parses `text` into `T`; `schema` gives `T`'s JSON Schema, used to explain shape
/// errors (made only then: a batch parses a scenario per case, and generating the
/// schema costs more than parsing). `what` names the top-level object in messages
/// ("scenario", "study").
pub fn parse<T: DeserializeOwned>(
    text: &str,
    file: &str,
    what: &str,
    schema: impl FnOnce() -> Value,
) -> Result<T, ScenarioError> {
    let text = text.strip_prefix(BOM).unwrap_or(text);
    let value: Value = serde_json::from_str(text).map_err(|e| syntax(file, what, &e))?;
    let mut de = serde_json::Deserializer::from_str(text);
    serde_path_to_error::deserialize(&mut de).map_err(|e| {
        let segments: Vec<Segment> = e.path().iter().cloned().collect();
        let inner = e.into_inner();
        let message = explain(&inner, &segments, &value, &schema());
        ScenarioError::Field {
            file: file.to_string(),
            line: inner.line(),
            column: inner.column().max(1),
            field: message.0,
            message: message.1,
        }
    })
}

fn syntax(file: &str, what: &str, e: &serde_json::Error) -> ScenarioError {
    let raw = e.to_string();
    let tail = format!(" at line {} column {}", e.line(), e.column());
    let message = match raw.strip_suffix(&tail).unwrap_or(&raw) {
        "trailing characters" => format!("text after the end of the {what} object"),
        m => m.to_string(),
    };
    ScenarioError::Syntax {
        file: file.to_string(),
        line: e.line(),
        // serde_json counts column 0 before a line's first character; editors from 1.
        column: e.column().max(1),
        message: shorten(&message),
    }
}

/// The field path to report and the message, in the format's words.
fn explain(
    e: &serde_json::Error,
    segments: &[Segment],
    value: &Value,
    schema: &Value,
) -> (String, String) {
    // A choice object that is not exactly one known key: reported at the choice,
    // whatever the deserializer stumbled on inside it.
    for depth in 0..=segments.len() {
        let here = &segments[..depth];
        let (Some(node), Some(found)) = (node_at(schema, here), value_at(value, here)) else {
            break;
        };
        let choices = choices(schema, node);
        if !choices.is_empty() && !is_one_of(found, &choices) {
            let allowed = choice_list(&choices);
            return (
                path_text(here),
                format!("expected one choice: {allowed}; found {}", describe(found)),
            );
        }
    }
    let field = path_text(segments);
    let message = strip_position(e);
    let jargon = [
        "invalid type",
        "invalid length",
        "expected value",
        "expected `",
    ];
    if !jargon.iter().any(|j| message.starts_with(j)) {
        return (field, shorten(&reword(&message)));
    }
    let expected = node_at(schema, segments)
        .map(|n| expectation(schema, n))
        .unwrap_or_else(|| "a value of another kind".into());
    let found = value_at(value, segments).map_or("nothing".into(), describe);
    (field, format!("expected {expected}; found {found}"))
}

/// serde's words for a choice, in the format's.
fn reword(message: &str) -> String {
    message
        .replace("unknown variant", "unknown choice")
        .replace(", expected one of", "; allowed:")
}

fn strip_position(e: &serde_json::Error) -> String {
    let raw = e.to_string();
    let tail = format!(" at line {} column {}", e.line(), e.column());
    raw.strip_suffix(&tail).unwrap_or(&raw).to_string()
}

/// Dotted path as the format's documentation writes it; "(top level)" for the root.
fn path_text(segments: &[Segment]) -> String {
    let mut out = String::new();
    for s in segments {
        match s {
            Segment::Seq { index } => out.push_str(&format!("[{index}]")),
            Segment::Map { key } => push_key(&mut out, key),
            Segment::Enum { variant } => push_key(&mut out, variant),
            Segment::Unknown => push_key(&mut out, "?"),
        }
    }
    if out.is_empty() {
        "(top level)".into()
    } else {
        shorten(&out)
    }
}

fn push_key(out: &mut String, key: &str) {
    if !out.is_empty() {
        out.push('.');
    }
    out.push_str(key);
}

/// The value at `segments` in the parsed document.
fn value_at<'v>(value: &'v Value, segments: &[Segment]) -> Option<&'v Value> {
    segments.iter().try_fold(value, |v, s| match s {
        Segment::Seq { index } => v.get(index),
        Segment::Map { key } => v.get(key.as_str()),
        Segment::Enum { variant } => v.get(variant.as_str()),
        Segment::Unknown => None,
    })
}

/// The schema node at `segments`, `$ref`s and optional (`anyOf` with null) resolved.
fn node_at<'s>(schema: &'s Value, segments: &[Segment]) -> Option<&'s Value> {
    let mut node = resolve(schema, schema);
    for s in segments {
        node = match s {
            Segment::Seq { .. } => node.get("items")?,
            Segment::Map { key } => child(schema, node, key)?,
            Segment::Enum { variant } => child(schema, node, variant)?,
            Segment::Unknown => return None,
        };
        node = resolve(schema, node);
    }
    Some(node)
}

/// The member `key` of an object node, or of the choice it names in a `oneOf`.
fn child<'s>(schema: &'s Value, node: &'s Value, key: &str) -> Option<&'s Value> {
    if let Some(p) = node.get("properties").and_then(|p| p.get(key)) {
        return Some(p);
    }
    let alternatives = node.get("oneOf")?.as_array()?;
    alternatives
        .iter()
        .map(|a| resolve(schema, a))
        .find_map(|a| a.get("properties").and_then(|p| p.get(key)))
}

/// Follows `$ref` and unwraps an `anyOf` of one schema and null (an optional field).
fn resolve<'s>(schema: &'s Value, mut node: &'s Value) -> &'s Value {
    for _ in 0..16 {
        if let Some(r) = node.get("$ref").and_then(Value::as_str) {
            let name = r.trim_start_matches("#/$defs/");
            match schema.get("$defs").and_then(|d| d.get(name)) {
                Some(n) => node = n,
                None => return node,
            }
            continue;
        }
        let any: Vec<&Value> = node
            .get("anyOf")
            .and_then(Value::as_array)
            .map(|a| {
                a.iter()
                    .filter(|s| s.get("type").and_then(Value::as_str) != Some("null"))
                    .collect()
            })
            .unwrap_or_default();
        match any.as_slice() {
            [only] if node["anyOf"].as_array().is_some_and(|a| a.len() == 2) => node = only,
            _ => return node,
        }
    }
    node
}

/// A choice's allowed names: the key of each one-key object, or a plain name.
#[derive(Debug)]
enum Choice {
    Key(String),
    Name(String),
}

fn choices(schema: &Value, node: &Value) -> Vec<Choice> {
    if let Some(names) = node.get("enum").and_then(Value::as_array) {
        return names
            .iter()
            .filter_map(|n| n.as_str().map(|n| Choice::Name(n.to_string())))
            .collect();
    }
    let Some(alternatives) = node.get("oneOf").and_then(Value::as_array) else {
        return Vec::new();
    };
    alternatives
        .iter()
        .map(|a| resolve(schema, a))
        .filter_map(|a| {
            if let Some(name) = a.get("const").and_then(Value::as_str) {
                return Some(Choice::Name(name.to_string()));
            }
            match a.get("required").and_then(Value::as_array)?.as_slice() {
                [key] => key.as_str().map(|k| Choice::Key(k.to_string())),
                _ => None,
            }
        })
        .collect()
}

fn is_one_of(found: &Value, choices: &[Choice]) -> bool {
    match found {
        Value::String(s) => choices
            .iter()
            .any(|c| matches!(c, Choice::Name(n) if n == s)),
        Value::Object(map) if map.len() == 1 => map.keys().all(|k| {
            choices
                .iter()
                .any(|c| matches!(c, Choice::Key(n) if n == k))
        }),
        _ => false,
    }
}

/// The allowed choices in words: texts in quotes, keys in backticks.
fn choice_list(choices: &[Choice]) -> String {
    let keys: Vec<String> = choices
        .iter()
        .filter_map(|c| match c {
            Choice::Key(k) => Some(format!("`{k}`")),
            Choice::Name(_) => None,
        })
        .collect();
    let names: Vec<String> = choices
        .iter()
        .filter_map(|c| match c {
            Choice::Name(n) => Some(format!("\"{n}\"")),
            Choice::Key(_) => None,
        })
        .collect();
    let object = format!("an object with exactly one key, one of {}", keys.join(", "));
    match (keys.is_empty(), names.is_empty()) {
        (false, true) => object,
        (true, _) => format!("one of the texts {}", names.join(", ")),
        (false, false) => format!("the text {}, or {object}", names.join(", ")),
    }
}

/// What the schema allows at a node, in words.
fn expectation(schema: &Value, node: &Value) -> String {
    let choices = choices(schema, node);
    if !choices.is_empty() {
        return format!("one choice: {}", choice_list(&choices));
    }
    let kind = node.get("type").and_then(Value::as_str);
    match kind {
        Some("object") => {
            let fields: Vec<String> = node
                .get("properties")
                .and_then(Value::as_object)
                .map(|p| p.keys().filter(|k| !k.starts_with('$')).cloned().collect())
                .unwrap_or_default();
            match fields.is_empty() {
                true => "an object".into(),
                false => format!("an object with the fields {}", fields.join(", ")),
            }
        }
        Some("array") => "a list [ … ]".into(),
        Some("string") => "text in quotes".into(),
        Some("number") | Some("integer") => "a number".into(),
        Some("boolean") => "true or false".into(),
        _ => node
            .get("description")
            .and_then(Value::as_str)
            .map(|d| {
                // Unit types describe themselves as "A voltage in volts (V): a number…";
                // the ratio type as one sentence.
                let (head, unit) = match d.split_once(':') {
                    Some((head, _)) => (head, true),
                    None => (d.trim_end_matches('.'), false),
                };
                let mut s = head.trim().to_string();
                if let Some(c) = s.get(..1) {
                    s = c.to_lowercase() + &s[1..];
                }
                match unit {
                    true => format!("{s}, as a number in SI units or text with a unit"),
                    false => s,
                }
            })
            .unwrap_or_else(|| "a value of another kind".into()),
    }
}

/// The found value, in words (long text shortened).
fn describe(v: &Value) -> String {
    match v {
        Value::Null => "null".into(),
        Value::Bool(b) => format!("{b}"),
        Value::Number(n) => format!("the number {n}"),
        Value::String(s) => shorten(&format!("the text {s:?}")),
        Value::Array(a) if a.is_empty() => "an empty list []".into(),
        Value::Array(a) => format!("a list of {} item(s)", a.len()),
        Value::Object(m) if m.is_empty() => "an empty object {}".into(),
        Value::Object(m) if m.len() == 1 => {
            let key = m.keys().next().map_or("", String::as_str);
            shorten(&format!("an object with the one key `{key}`"))
        }
        Value::Object(m) => {
            let keys: Vec<String> = m.keys().take(5).map(|k| format!("`{k}`")).collect();
            let more = if m.len() > 5 { ", …" } else { "" };
            shorten(&format!(
                "an object with {} key(s): {}{more}",
                m.len(),
                keys.join(", ")
            ))
        }
    }
}
