//! `stepflux compare A B`: two runs (their `summary.json`) or two studies (their
//! `results.json`), figure by figure — both values in engineering notation, the
//! difference and the relative difference, changed figures marked — on the terminal
//! and, with `--html`, as one self-contained page.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use serde_json::Value;

use crate::eng::{eng, NOT_AVAILABLE};
use crate::exit::{Exit, ExitWith, Failure};
use crate::writers::html::{caution, escape, page};

/// Relative change below which two figures count as equal: a figure is printed to
/// three significant digits, so anything smaller does not show anyway.
const SAME: f64 = 1e-9;

/// One side: a run or a study, its name and its figures by key, each with its unit.
struct Side {
    name: String,
    kind: &'static str,
    figures: BTreeMap<String, (f64, String)>,
}

/// One compared figure.
struct Row {
    key: String,
    unit: String,
    a: Option<f64>,
    b: Option<f64>,
}

impl Row {
    fn changed(&self) -> bool {
        match (self.a, self.b) {
            (Some(a), Some(b)) => (a - b).abs() > SAME * a.abs().max(b.abs()),
            (Some(a), None) | (None, Some(a)) => a.is_finite(),
            (None, None) => false,
        }
    }
    fn delta(&self) -> String {
        match (self.a, self.b) {
            (Some(a), Some(b)) if self.changed() => {
                let rel = if a != 0.0 {
                    format!(" ({:+.3} %)", 100.0 * (b - a) / a.abs())
                } else {
                    String::new()
                };
                format!("{}{rel}", eng(b - a, &self.unit))
            }
            (Some(_), Some(_)) => "same".into(),
            (None, Some(_)) => "only in B".into(),
            (Some(_), None) => "only in A".into(),
            (None, None) => String::new(),
        }
    }
}

fn shown(v: Option<f64>, unit: &str) -> String {
    v.map_or(NOT_AVAILABLE.into(), |v| eng(v, unit))
}

/// Compares `a` with `b`, prints the table, writes `html` if given. Exits 0 whether or
/// not they differ (a difference is the answer), 2 when a side cannot be read.
pub fn compare(a: &Path, b: &Path, html: Option<&Path>) -> Result<(), Failure> {
    let (sa, sb) = (
        load(a).exit_with(Exit::BadInput)?,
        load(b).exit_with(Exit::BadInput)?,
    );
    if sa.kind != sb.kind {
        return Err(anyhow::anyhow!(
            "{} is a {} and {} a {}: compare two runs or two studies",
            a.display(),
            sa.kind,
            b.display(),
            sb.kind
        ))
        .exit_with(Exit::BadInput);
    }
    let rows = rows(&sa, &sb);
    print!("{}", text(&sa, &sb, &rows));
    if let Some(path) = html {
        crate::writers::atomic::write_atomic(path, html_page(&sa, &sb, &rows).as_bytes())
            .with_context(|| format!("writing {}", path.display()))
            .exit_with(Exit::SimulationFailed)?;
        println!("  html  {}", path.display());
    }
    Ok(())
}

/// The file behind a side: a folder's summary.json or results.json, or the file itself.
fn file_of(path: &Path) -> PathBuf {
    if path.is_dir() {
        let summary = path.join("summary.json");
        match summary.is_file() {
            true => summary,
            false => path.join("results.json"),
        }
    } else {
        path.to_path_buf()
    }
}

fn load(path: &Path) -> Result<Side> {
    let file = file_of(path);
    let text =
        std::fs::read_to_string(&file).with_context(|| format!("reading {}", file.display()))?;
    let doc: Value =
        serde_json::from_str(&text).with_context(|| format!("{} is not JSON", file.display()))?;
    if doc.get("cases").is_some() {
        study(&doc).with_context(|| format!("{} is not a study's results.json", file.display()))
    } else if doc.get("measurements").is_some() {
        run(&doc).with_context(|| format!("{} is not a run's summary.json", file.display()))
    } else {
        bail!(
            "{}: neither a run's summary.json nor a study's results.json",
            file.display()
        )
    }
}

/// A figure's value as a number: flags as 1 (yes) or 0 (no); choices have none.
fn number(v: &Value) -> Option<f64> {
    v.as_f64()
        .or_else(|| v.as_bool().map(|b| f64::from(u8::from(b))))
}

fn figure_list(list: Option<&Value>, into: &mut BTreeMap<String, (f64, String)>) {
    for m in list.and_then(Value::as_array).into_iter().flatten() {
        if let (Some(n), Some(v)) = (m["name"].as_str(), number(&m["value"])) {
            let unit = m["unit"].as_str().unwrap_or("1").to_string();
            into.insert(n.to_string(), (v, unit));
        }
    }
}

fn run(doc: &Value) -> Result<Side> {
    let mut figures = BTreeMap::new();
    figure_list(doc.get("design"), &mut figures);
    figure_list(doc.get("measurements"), &mut figures);
    let passed = doc["passed"].as_bool().context("no \"passed\"")?;
    figures.insert("passed".into(), (f64::from(u8::from(passed)), "1".into()));
    Ok(Side {
        name: doc["scenario"].as_str().unwrap_or("run").to_string(),
        kind: "run",
        figures,
    })
}

fn study(doc: &Value) -> Result<Side> {
    let units = &doc["units"];
    let mut figures = BTreeMap::new();
    for (k, v) in doc["counts"].as_object().into_iter().flatten() {
        if let Some(n) = v.as_f64() {
            figures.insert(format!("cases {k}"), (n, "1".into()));
        }
    }
    for case in doc["cases"].as_array().context("no \"cases\"")? {
        let id = case["id"].as_str().unwrap_or("?");
        for (name, v) in case["measurements"].as_object().into_iter().flatten() {
            if let Some(v) = number(v) {
                let unit = units[name].as_str().unwrap_or("1").to_string();
                figures.insert(format!("{id} {name}"), (v, unit));
            }
        }
    }
    Ok(Side {
        name: doc["study"].as_str().unwrap_or("study").to_string(),
        kind: "study",
        figures,
    })
}

fn rows(a: &Side, b: &Side) -> Vec<Row> {
    let keys: std::collections::BTreeSet<&String> =
        a.figures.keys().chain(b.figures.keys()).collect();
    keys.into_iter()
        .map(|k| {
            let (fa, fb) = (a.figures.get(k), b.figures.get(k));
            Row {
                key: k.clone(),
                unit: fa.or(fb).map_or("1".into(), |f| f.1.clone()),
                a: fa.map(|f| f.0),
                b: fb.map(|f| f.0),
            }
        })
        .collect()
}

fn text(a: &Side, b: &Side, rows: &[Row]) -> String {
    let changed = rows.iter().filter(|r| r.changed()).count();
    let mut out = format!(
        "compare {} {} (A) with {} (B): {changed} of {} figures differ (marked *)\n",
        a.kind,
        a.name,
        b.name,
        rows.len()
    );
    let _ = writeln!(out, "  {:<52} {:>12} {:>12}  B − A", "figure", "A", "B");
    for r in rows {
        let _ = writeln!(
            out,
            "{} {:<52} {:>12} {:>12}  {}",
            if r.changed() { '*' } else { ' ' },
            r.key,
            shown(r.a, &r.unit),
            shown(r.b, &r.unit),
            r.delta()
        );
    }
    out
}

const STYLE: &str = "<style>td,th{border-bottom:1px solid #e2e0d8;padding:3px 8px;\
white-space:nowrap;text-align:left}tr.changed td{background:#fbeee0}\
tr.changed td:first-child{border-left:4px solid #c0602a}</style>";

fn html_page(a: &Side, b: &Side, rows: &[Row]) -> String {
    let changed = rows.iter().filter(|r| r.changed()).count();
    let mut body = String::from(STYLE);
    let _ = write!(
        body,
        "<h1>Compare {} {} (A) with {} (B)</h1><p>{changed} of {} figures differ \
         (highlighted).</p>",
        a.kind,
        escape(&a.name),
        escape(&b.name),
        rows.len()
    );
    body.push_str(&caution());
    body.push_str("<table><tr><th>figure</th><th>A</th><th>B</th><th>B − A</th></tr>");
    for r in rows {
        let _ = write!(
            body,
            "<tr{}><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            if r.changed() {
                " class=\"changed\""
            } else {
                ""
            },
            escape(&r.key),
            escape(&shown(r.a, &r.unit)),
            escape(&shown(r.b, &r.unit)),
            escape(&r.delta())
        );
    }
    body.push_str("</table>");
    page(
        &format!("{} vs {} — stepflux compare", a.name, b.name),
        &body,
        "",
    )
}
