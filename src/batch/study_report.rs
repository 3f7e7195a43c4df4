//! `report.html` of a study: the worst case of each key figure, then every case —
//! failing cases first, sortable by any column (a few lines of inline script), each
//! linked to its own run report where its waveforms were kept — and the safety
//! caution. Self-contained like the run report; values in engineering notation.

use std::fmt::Write as _;
use std::path::Path;

use anyhow::Result;

use super::histogram;
use super::record::{write_atomic, CaseRecord, Status};
use super::table::{worst_case, worst_of, StudyMeta};
use stepflux_models::job::verdict::LimitDef;
use stepflux_models::measure::Kind;

use crate::eng::{count, eng, pass_fail, percent, prefixed};
use crate::writers::html::{caution, escape, page};

/// Figures shown per case and in the worst-case table (which figures a study page
/// leads with is this page's choice; their labels, units and worse directions are the
/// catalogue's).
const KEY: [&str; 8] = [
    "startup.overshoot_pct",
    "startup.t90",
    "out.v.ripple_pp",
    "reset_check.worst.reset_margin_pct",
    "reset_check.worst.flux_margin_pct",
    "reset_check.worst.drain_peak",
    "reset_check.failed_cycles",
    "efficiency.stage",
];

/// A column heading from the figure's declaration: its label, and the section it is
/// read in ("start-up", "core reset, tightest cycle") so the short label stays clear.
fn heading(name: &str) -> String {
    use stepflux_models::measure::catalogue::{find, Section};
    match find(name) {
        Some(d) if d.section == Section::Files => escape(d.label),
        Some(d) => format!(
            "{}<br><small>{}</small>",
            escape(d.label),
            escape(d.section.title())
        ),
        None => escape(name),
    }
}

/// Sorts a table by the clicked column: numbers by their `data-v`, else text;
/// a second click reverses.
const SORT: &str = "document.querySelectorAll('table.sortable th').forEach(function(th,i){\
th.addEventListener('click',function(){var b=th.closest('table').tBodies[0];\
var up=th.dataset.up!=='1';th.dataset.up=up?'1':'0';\
var key=function(r){var c=r.cells[i];return c.dataset.v!==undefined?parseFloat(c.dataset.v):c.textContent;};\
Array.from(b.rows).sort(function(x,y){var p=key(x),q=key(y);\
var d=(typeof p==='number'&&typeof q==='number')?p-q:String(p).localeCompare(String(q));\
return up?d:-d;}).forEach(function(r){b.appendChild(r);});});});";

const STYLE: &str = "<style>table.sortable th{cursor:pointer;background:#eef1ee}\
table.sortable td,table.sortable th{border-bottom:1px solid #e2e0d8;padding:3px 8px;\
white-space:nowrap}\
tr.failed td:first-child,tr.errored td:first-child{border-left:4px solid #b0402a}</style>";

/// Writes `dir/report.html` for the study's records.
pub fn write(dir: &Path, meta: &StudyMeta, records: &[CaseRecord]) -> Result<()> {
    write_atomic(
        &dir.join("report.html"),
        html(dir, meta, records).as_bytes(),
    )
}

fn value_of<'a>(r: &'a CaseRecord, name: &str) -> Option<(f64, &'a str)> {
    r.measurements
        .iter()
        .find(|m| m.key == name)
        .and_then(|m| m.number().map(|v| (v, m.unit)))
}

/// A figure as a person reads it, as its declaration says (fractions in percent,
/// counts whole).
fn shown(name: &str, value: f64, unit: &str) -> String {
    match stepflux_models::measure::catalogue::find(name).map(|d| d.kind) {
        Some(Kind::Fraction) => eng(100.0 * value, "%"),
        Some(Kind::Count) => count(value),
        _ => eng(value, unit),
    }
}

/// The case id, linked to its run report when its waveform folder was kept.
fn case_cell(dir: &Path, r: &CaseRecord) -> String {
    let rel = format!("waveforms/{}/report.html", r.name);
    if dir.join(&rel).is_file() {
        format!("<a href=\"{}\">{}</a>", escape(&rel), escape(&r.id))
    } else {
        escape(&r.id)
    }
}

fn html(dir: &Path, meta: &StudyMeta, records: &[CaseRecord]) -> String {
    let counts = super::table::counts(records);
    let mut b = String::from(STYLE);
    let _ = write!(
        b,
        "<h1>Study {}: {} passed, {} failed, {} errored of {} cases</h1><p>{}</p>",
        escape(&meta.study),
        counts["passed"],
        counts["failed"],
        counts["errored"],
        meta.cases,
        escape(&meta.description)
    );
    b.push_str(&caution());
    worst_table(&mut b, dir, records);
    pass_rate(&mut b, records);
    cases_table(&mut b, dir, meta, records);
    page(&format!("{} — stepflux study", meta.study), &b, SORT)
}

/// The estimated pass rate with its 95 % Wilson interval (errored cases count as not
/// passing), then a histogram per limit across the cases that measured it.
fn pass_rate(b: &mut String, records: &[CaseRecord]) {
    let passed = records
        .iter()
        .filter(|r| r.status == Status::Passed)
        .count();
    let Some((lo, hi)) = histogram::wilson(passed, records.len(), histogram::Z95) else {
        return;
    };
    let _ = write!(
        b,
        "<h2>Pass rate</h2><p>{passed} of {} cases passed: estimated pass rate {}, 95 % \
         confidence interval {} to {} (Wilson score interval, Wilson 1927).</p>",
        records.len(),
        percent(passed as f64 / records.len() as f64),
        percent(lo),
        percent(hi)
    );
    let mut limits: Vec<(&'static LimitDef, f64)> = Vec::new();
    for v in records.iter().flat_map(|r| &r.verdicts) {
        if !limits.iter().any(|(l, _)| l.field == v.limit.field) {
            limits.push((v.limit, v.bound));
        }
    }
    for (limit, bound) in limits {
        let unit = limit.unit;
        let values: Vec<f64> = records
            .iter()
            .flat_map(|r| &r.verdicts)
            .filter(|v| v.limit.field == limit.field)
            .filter_map(|v| v.value)
            .collect();
        if values.len() < 2 {
            continue;
        }
        let title = format!("{} across {} cases", limit.label, values.len());
        let _ = write!(
            b,
            "<figure>{}<figcaption>{}</figcaption></figure>",
            histogram::svg(&title, &values, unit, bound),
            escape(&title)
        );
    }
}

fn worst_table(b: &mut String, dir: &Path, records: &[CaseRecord]) {
    let ran: Vec<&CaseRecord> = records
        .iter()
        .filter(|r| r.status != Status::Errored)
        .collect();
    b.push_str("<h2>Worst cases</h2><table><tr><th>figure</th><th>worst</th><th>case</th></tr>");
    for name in KEY {
        let Some(rule) = worst_of(name) else { continue };
        if let Some((r, v)) = worst_case(&ran, name, rule) {
            let unit = value_of(r, name).map_or("", |(_, u)| u);
            let _ = write!(
                b,
                "<tr><th>{}</th><td>{}</td><td>{}</td></tr>",
                heading(name),
                escape(&shown(name, v, unit)),
                case_cell(dir, r)
            );
        }
    }
    b.push_str("</table>");
}

fn cases_table(b: &mut String, dir: &Path, meta: &StudyMeta, records: &[CaseRecord]) {
    b.push_str("<h2>Cases</h2><p class=\"note\">Click a column heading to sort.</p>");
    b.push_str("<table class=\"sortable\"><thead><tr><th>case</th><th>status</th>");
    for p in meta.parameters.keys() {
        let _ = write!(b, "<th>{}</th>", escape(p));
    }
    for name in KEY {
        let _ = write!(b, "<th>{}</th>", heading(name));
    }
    b.push_str("<th>failed limits</th></tr></thead><tbody>");
    // Failing cases first: errored, failed, passed; by index within each.
    let rank = |s: Status| match s {
        Status::Errored => 0,
        Status::Failed => 1,
        Status::Passed => 2,
    };
    let mut order: Vec<&CaseRecord> = records.iter().collect();
    order.sort_by_key(|r| (rank(r.status), r.index));
    for r in order {
        let status = r.status.as_str();
        let _ = write!(
            b,
            "<tr class=\"{status}\"><td data-v=\"{}\">{}</td><td>{}</td>",
            r.index,
            case_cell(dir, r),
            if r.status == Status::Passed {
                pass_fail(true)
            } else {
                status
            }
        );
        for p in meta.parameters.keys() {
            let v = r.parameters.get(p).copied().unwrap_or(f64::NAN);
            let _ = write!(b, "{}", cell(v, &prefixed(v)));
        }
        for name in KEY {
            let text = value_of(r, name).map(|(v, u)| (v, shown(name, v, u)));
            let (v, text) = text.unwrap_or((f64::NAN, "n/a".into()));
            let _ = write!(b, "{}", cell(v, &text));
        }
        let failed: Vec<&str> = r
            .verdicts
            .iter()
            .filter(|v| !v.pass)
            .map(|v| v.limit.field)
            .collect();
        let why = r.error.as_deref().unwrap_or("");
        let _ = write!(
            b,
            "<td>{}</td></tr>",
            escape(&format!("{}{}", failed.join(", "), why))
        );
    }
    b.push_str("</tbody></table>");
}

/// A cell whose sort key is the raw number (absent when not finite).
fn cell(v: f64, text: &str) -> String {
    if v.is_finite() {
        format!("<td data-v=\"{v}\">{}</td>", escape(text))
    } else {
        format!("<td>{}</td>", escape(text))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    fn record(id: &str, index: usize, status: Status) -> CaseRecord {
        let mut r = CaseRecord::new(id, index, format!("s-{id}"), String::new(), BTreeMap::new());
        r.status = status;
        r
    }

    /// Failing cases first (what a designer looks for the morning after), the caution
    /// present, and a case links to its report only when its folder was kept.
    #[test]
    fn failing_cases_come_first_and_link_only_to_kept_reports() {
        let dir =
            std::env::temp_dir().join(format!("stepflux-study-report-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(dir.join("waveforms/s-c0002")).expect("scratch");
        std::fs::write(dir.join("waveforms/s-c0002/report.html"), "x").expect("scratch");
        let meta = StudyMeta {
            study: "st".into(),
            description: String::new(),
            plan: String::new(),
            cases: 2,
            parameters: BTreeMap::new(),
        };
        let records = [
            record("c0001", 0, Status::Passed),
            record("c0002", 1, Status::Failed),
        ];
        let page = html(&dir, &meta, &records);
        let _ = std::fs::remove_dir_all(&dir);
        let failed = page.find(">c0002<").expect("failed case listed");
        let passed = page.find(">c0001<").expect("passed case listed");
        assert!(failed < passed, "failed case first");
        assert!(page.contains("href=\"waveforms/s-c0002/report.html\""));
        assert!(!page.contains("waveforms/s-c0001"));
        assert!(page.contains(&escape(crate::summary::CAUTION)));
    }
}
