//! The study tables: `results.csv` and `results.json` (a row per case, sorted by case
//! id) and `worst.json` (for each measurement, the case where it is worst). Nothing in
//! them depends on the clock or on thread count, so two runs of one study compare
//! byte for byte; run times stay in the case files. `report.html` beside them is the
//! same for people (see `study_report`).

use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::path::Path;

use anyhow::Result;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value as Value2};

use stepflux_models::measure::{catalogue, Figure, Kind, Value, Worse};

use super::record::{write_atomic, write_json, CaseRecord, Status};

/// `study.json`: what merge needs to know about a study without its file.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
pub struct StudyMeta {
    /// Study name.
    pub study: String,
    /// Its description.
    pub description: String,
    /// Fingerprint of the whole plan; shards of one study share it.
    pub plan: String,
    /// Number of cases in the whole study.
    pub cases: usize,
    /// Parameter names and their paths.
    pub parameters: BTreeMap<String, String>,
}

/// The worst direction of a figure by key, from its declaration; `None` for figures
/// that are not a quality (operating points, instants, settings echoed back) and for
/// choices.
pub fn worst_of(key: &str) -> Option<Worse> {
    let def = catalogue::find(key)?;
    match (def.worse, def.kind) {
        (_, Kind::Choice) | (Worse::Neither, _) => None,
        (w, _) => Some(w),
    }
}

/// Counts by status.
pub fn counts(records: &[CaseRecord]) -> BTreeMap<&'static str, usize> {
    let mut c = BTreeMap::from([("passed", 0), ("failed", 0), ("errored", 0)]);
    for r in records {
        *c.entry(r.status.as_str()).or_default() += 1;
    }
    c
}

/// Writes the three tables into `dir`. `records` must be sorted by index.
pub fn write_tables(
    dir: &Path,
    meta: &StudyMeta,
    records: &[CaseRecord],
    missing: &[String],
) -> Result<()> {
    let units = units(records);
    write_atomic(
        &dir.join("results.csv"),
        csv(meta, records, &units).as_bytes(),
    )?;
    write_json(
        &dir.join("results.json"),
        &results_json(meta, records, &units, missing),
    )?;
    write_json(&dir.join("worst.json"), &worst_json(meta, records, &units))?;
    super::study_report::write(dir, meta, records)
}

/// Every measurement name with its unit, sorted by name.
fn units(records: &[CaseRecord]) -> BTreeMap<String, String> {
    records
        .iter()
        .flat_map(|r| &r.measurements)
        .map(|m| (m.key.clone(), m.unit.to_string()))
        .collect()
}

fn limits(records: &[CaseRecord]) -> BTreeSet<String> {
    records
        .iter()
        .flat_map(|r| &r.verdicts)
        .map(|v| v.limit.field.to_string())
        .collect()
}

fn csv(meta: &StudyMeta, records: &[CaseRecord], units: &BTreeMap<String, String>) -> String {
    let limits = limits(records);
    let mut header: Vec<String> = vec!["id".into(), "status".into()];
    header.extend(meta.parameters.keys().cloned());
    header.extend(units.iter().map(|(n, u)| format!("{n} [{u}]")));
    header.extend(limits.iter().map(|l| format!("limit {l}")));
    header.push("error".into());
    let mut out = row(&header);
    for r in records {
        let mut cells = vec![r.id.clone(), r.status.as_str().to_string()];
        cells.extend(meta.parameters.keys().map(|p| number(r.parameters.get(p))));
        cells.extend(
            units
                .keys()
                .map(|n| cell(r.measurements.iter().find(|m| &m.key == n))),
        );
        cells.extend(
            limits
                .iter()
                .map(|l| match r.verdicts.iter().find(|v| v.limit.field == l) {
                    Some(v) if v.pass => "pass".to_string(),
                    Some(_) => "FAIL".to_string(),
                    None => String::new(),
                }),
        );
        cells.push(r.error.clone().unwrap_or_default());
        out.push_str(&row(&cells));
    }
    out
}

/// Shortest text that reads back to the same f64 (Rust's `Display`).
fn number(x: Option<&f64>) -> String {
    x.map(|x| x.to_string()).unwrap_or_default()
}

/// A figure's cell: a number as [`number`] writes it, a flag as `true`/`false`, a
/// choice by its name, nothing where there is no value.
fn cell(f: Option<&Figure>) -> String {
    match f.map(|f| &f.value) {
        Some(Value::Number(v)) if v.is_finite() => v.to_string(),
        Some(Value::Flag(b)) => b.to_string(),
        Some(Value::Choice(c)) => c.to_string(),
        _ => String::new(),
    }
}

/// A figure's value in the JSON tables.
fn json_value(f: &Figure) -> Value2 {
    match &f.value {
        Value::Number(v) => json!(v.is_finite().then_some(*v)),
        Value::Flag(b) => json!(b),
        Value::Choice(c) => json!(c),
    }
}

fn verdicts_json(v: &[crate::summary::Verdict]) -> Value2 {
    json!(crate::writers::figure_json::Verdicts(v))
}

/// One CSV line (RFC 4180 quoting).
fn row(cells: &[String]) -> String {
    let mut line = String::new();
    for (k, c) in cells.iter().enumerate() {
        if k > 0 {
            line.push(',');
        }
        if c.contains([',', '"', '\n', '\r']) {
            let _ = write!(line, "\"{}\"", c.replace('"', "\"\""));
        } else {
            line.push_str(c);
        }
    }
    line.push('\n');
    line
}

fn results_json(
    meta: &StudyMeta,
    records: &[CaseRecord],
    units: &BTreeMap<String, String>,
    missing: &[String],
) -> Value2 {
    let cases: Vec<Value2> = records
        .iter()
        .map(|r| {
            let measurements: BTreeMap<&str, Value2> = r
                .measurements
                .iter()
                .map(|m| (m.key.as_str(), json_value(m)))
                .collect();
            json!({
                "id": r.id,
                "status": r.status,
                "parameters": r.parameters,
                "measurements": measurements,
                "verdicts": verdicts_json(&r.verdicts),
                "error": r.error,
            })
        })
        .collect();
    json!({
        "study": meta.study,
        "description": meta.description,
        "cases_in_study": meta.cases,
        "parameters": meta.parameters,
        "counts": counts(records),
        "missing": missing,
        "units": units,
        "cases": cases,
    })
}

fn worst_json(
    meta: &StudyMeta,
    records: &[CaseRecord],
    units: &BTreeMap<String, String>,
) -> Value2 {
    let ran: Vec<&CaseRecord> = records
        .iter()
        .filter(|r| r.status != Status::Errored)
        .collect();
    let mut worst = serde_json::Map::new();
    for (name, unit) in units {
        let Some(rule) = worst_of(name) else {
            continue;
        };
        if let Some((r, value)) = worst_case(&ran, name, rule) {
            let entry = json!({
                "worst": match rule {
                    Worse::Higher => "max",
                    Worse::Lower => "min",
                    _ => "largest magnitude",
                },
                "value": value,
                "unit": unit,
                "case": r.id,
                "status": r.status,
                "parameters": r.parameters,
            });
            worst.insert(name.clone(), entry);
        }
    }
    json!({ "study": meta.study, "measurements": worst })
}

/// The case with the worst value of `name` (the first by id on a tie) and that value.
pub(super) fn worst_case<'a>(
    ran: &[&'a CaseRecord],
    name: &str,
    rule: Worse,
) -> Option<(&'a CaseRecord, f64)> {
    let mut worst: Option<(&CaseRecord, f64, f64)> = None;
    for r in ran {
        let Some(value) = r
            .measurements
            .iter()
            .find(|m| m.key == name)
            .and_then(Figure::number)
        else {
            continue;
        };
        let score = match rule {
            Worse::Higher => value,
            Worse::Lower => -value,
            Worse::Magnitude | Worse::Neither => value.abs(),
        };
        if worst.is_none_or(|(_, _, s)| score > s) {
            worst = Some((r, value, score));
        }
    }
    worst.map(|(r, v, _)| (r, v))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn worst_directions() {
        // Read from the catalogue's declarations: max for overshoot, ripple and deviation; min for
        // margins and efficiency.
        assert_eq!(worst_of("out.v.ripple_pp"), Some(Worse::Higher));
        assert_eq!(worst_of("startup.overshoot_pct"), Some(Worse::Higher));
        assert_eq!(worst_of("load_step1.undershoot_pct"), Some(Worse::Higher));
        assert_eq!(worst_of("startup.t90"), Some(Worse::Higher));
        assert_eq!(worst_of("loss.switch"), Some(Worse::Higher));
        assert_eq!(
            worst_of("reset_check.worst.flux_margin_pct"),
            Some(Worse::Lower)
        );
        assert_eq!(worst_of("efficiency.stage"), Some(Worse::Lower));
        assert_eq!(worst_of("reset_check.pass"), Some(Worse::Lower));
        assert_eq!(worst_of("power.balance_error"), Some(Worse::Magnitude));
        assert_eq!(worst_of("startup.peak_time"), None);
        assert_eq!(worst_of("out.v.mean"), None);
        assert_eq!(worst_of("reset_check.worst.rect.v.rating"), None);
        assert_eq!(worst_of("reset_check.worst.criterion"), None);
        assert_eq!(worst_of("load_step1.min_time"), None);
    }

    #[test]
    fn csv_quotes_what_needs_it() {
        // Source: RFC 4180, section 2, rules 6 and 7.
        let line = row(&["a".into(), "b,c".into(), "say \"hi\"".into()]);
        assert_eq!(line, "a,\"b,c\",\"say \"\"hi\"\"\"\n");
    }
}
