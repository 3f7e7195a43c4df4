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
use serde_json::{json, Value};

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

/// Which end of a measurement is worst.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Worst {
    /// Largest value: losses, peaks, ripple, overshoot, undershoot, dips, start-up and
    /// recovery times, counts of failed cycles.
    Max,
    /// Smallest value: margins, efficiency, pass flags (1 pass, 0 fail).
    Min,
    /// Largest magnitude: errors that may have either sign (energy balance).
    AbsMax,
}

/// Name endings of figures that are not a quality, so have no worst case: when
/// something happened, where a window lies, means, ratings and settings echoed back.
const NEUTRAL_ENDINGS: [&str; 17] = [
    "_at",
    "_time",
    ".time",
    ".cycle",
    "_cycle",
    ".cycles",
    "window_start",
    "window_end",
    ".rating",
    "allowance",
    ".mean",
    ".min",
    "bias_power",
    ".set_point",
    "band_pct",
    "duty_max_after",
    "duty_min_after",
];

/// The worst direction of a measurement, or `None` for figures that are not a quality
/// (see [`NEUTRAL_ENDINGS`]; also power in and out and the stored-energy change, which
/// follow the operating point).
pub fn worst_of(name: &str) -> Option<Worst> {
    let neutral = NEUTRAL_ENDINGS.iter().any(|e| name.ends_with(e))
        || name.contains("criterion")
        || matches!(name, "power.in" | "power.out" | "power.stored_change");
    if neutral {
        None
    } else if name.contains("margin")
        || name.contains("efficiency")
        || name.ends_with(".pass")
        || name.ends_with(".monotonic")
    {
        Some(Worst::Min)
    } else if name.contains("error") {
        Some(Worst::AbsMax)
    } else {
        Some(Worst::Max)
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
        .map(|m| (m.name.clone(), m.unit.clone()))
        .collect()
}

fn limits(records: &[CaseRecord]) -> BTreeSet<String> {
    records
        .iter()
        .flat_map(|r| &r.verdicts)
        .map(|v| v.limit.clone())
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
        cells.extend(units.keys().map(|n| {
            number(
                r.measurements
                    .iter()
                    .find(|m| &m.name == n)
                    .map(|m| &m.value),
            )
        }));
        cells.extend(
            limits
                .iter()
                .map(|l| match r.verdicts.iter().find(|v| &v.limit == l) {
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
) -> Value {
    let cases: Vec<Value> = records
        .iter()
        .map(|r| {
            let measurements: BTreeMap<&str, f64> = r
                .measurements
                .iter()
                .map(|m| (m.name.as_str(), m.value))
                .collect();
            json!({
                "id": r.id,
                "status": r.status,
                "parameters": r.parameters,
                "measurements": measurements,
                "verdicts": r.verdicts,
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

fn worst_json(meta: &StudyMeta, records: &[CaseRecord], units: &BTreeMap<String, String>) -> Value {
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
                    Worst::Max => "max",
                    Worst::Min => "min",
                    Worst::AbsMax => "largest magnitude",
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
    rule: Worst,
) -> Option<(&'a CaseRecord, f64)> {
    let mut worst: Option<(&CaseRecord, f64, f64)> = None;
    for r in ran {
        let Some(value) = r
            .measurements
            .iter()
            .find(|m| m.name == name)
            .map(|m| m.value)
        else {
            continue;
        };
        let score = match rule {
            Worst::Max => value,
            Worst::Min => -value,
            Worst::AbsMax => value.abs(),
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
        // The definition: max for overshoot, ripple and deviation; min for
        // margins and efficiency.
        assert_eq!(worst_of("out.v.ripple_pp"), Some(Worst::Max));
        assert_eq!(worst_of("startup.overshoot_pct"), Some(Worst::Max));
        assert_eq!(worst_of("load_step1.undershoot_pct"), Some(Worst::Max));
        assert_eq!(worst_of("startup.t90"), Some(Worst::Max));
        assert_eq!(worst_of("loss.switch"), Some(Worst::Max));
        assert_eq!(
            worst_of("reset_check.worst.flux_margin_pct"),
            Some(Worst::Min)
        );
        assert_eq!(worst_of("efficiency.stage"), Some(Worst::Min));
        assert_eq!(worst_of("reset_check.pass"), Some(Worst::Min));
        assert_eq!(worst_of("power.balance_error"), Some(Worst::AbsMax));
        assert_eq!(worst_of("startup.peak_time"), None);
        assert_eq!(worst_of("out.v.mean"), None);
        assert_eq!(worst_of("reset_check.worst.rect.v.rating"), None);
    }

    #[test]
    fn csv_quotes_what_needs_it() {
        // Source: RFC 4180, section 2, rules 6 and 7.
        let line = row(&["a".into(), "b,c".into(), "say \"hi\"".into()]);
        assert_eq!(line, "a,\"b,c\",\"say \"\"hi\"\"\"\n");
    }
}
