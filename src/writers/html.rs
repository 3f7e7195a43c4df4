//! `report.html`: one self-contained page per run that a designer reads at a glance —
//! verdicts first with their margins, the key figures in engineering notation, the
//! plots the run wrote (embedded inline), the scenario text, the tool version and the
//! safety caution. No scripts, fonts or images from elsewhere: it opens offline.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};

use crate::readout::{readout, Mark};
use crate::summary::Summary;

/// Our own light palette: pale paper, slate text, green for pass, brick for fail,
/// amber for a warning.
const STYLE: &str = "body{font-family:system-ui,sans-serif;margin:24px auto;max-width:1040px;\
color:#23303b;background:#fbfaf6;line-height:1.4}\
h1{font-size:1.5em;margin:0 0 4px}h2{font-size:1.15em;margin:24px 0 6px;color:#3a5566}\
table{border-collapse:collapse;margin:4px 0}td,th{padding:3px 12px 3px 0;text-align:left;\
vertical-align:top}th{color:#50626f;font-weight:600}\
.mark{font-weight:700;padding:1px 8px;border-radius:4px;font-size:.9em}\
.pass{background:#dcefdc;color:#1f5d2a}.FAIL{background:#f6d8d2;color:#8a2414}\
.warn{background:#f7ecc9;color:#6d5000}.verdict{font-size:1.1em}\
.caution{border-left:4px solid #c98a1b;background:#fdf4e1;padding:8px 12px;margin:16px 0}\
.note{color:#5b6b76;font-size:.9em}\
figure{margin:12px 0;background:#fff;border:1px solid #e2e0d8;padding:6px}\
svg{max-width:100%;height:auto}pre{background:#f1efe8;padding:10px;overflow:auto;\
font-size:.85em}";

/// Text made safe inside HTML elements and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A whole page around `body`, with the shared style and `script` (may be empty).
pub fn page(title: &str, body: &str, script: &str) -> String {
    let script = if script.is_empty() {
        String::new()
    } else {
        format!("<script>{script}</script>")
    };
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width,initial-scale=1\">\
         <title>{}</title><style>{STYLE}</style></head><body>\n{body}\n{script}</body></html>\n",
        escape(title)
    )
}

/// The caution block every report carries.
pub fn caution() -> String {
    format!(
        "<p class=\"caution\"><strong>Safety.</strong> {}</p>",
        escape(crate::summary::CAUTION)
    )
}

/// A verdict mark as a coloured label.
pub fn mark(m: Mark) -> String {
    format!("<span class=\"mark {0}\">{0}</span>", m.text())
}

/// Writes `dir/report.html` for one run and returns its path.
pub fn write_run_report(
    dir: &Path,
    summary: &Summary,
    plots: &[PathBuf],
    scenario_text: &str,
) -> Result<PathBuf> {
    let html = run_report(summary, plots, scenario_text)?;
    let path = dir.join("report.html");
    std::fs::write(&path, html).with_context(|| format!("writing {}", path.display()))?;
    Ok(path)
}

fn run_report(s: &Summary, plots: &[PathBuf], scenario_text: &str) -> Result<String> {
    let r = readout(s);
    let mut b = String::new();
    let _ = write!(b, "<h1>{}</h1>", escape(&r.headline));
    let _ = write!(b, "<p class=\"note\">{}</p>", escape(&s.tool));
    b.push_str("<h2>Verdicts</h2><table>");
    for line in &r.verdicts {
        let _ = write!(
            b,
            "<tr class=\"verdict\"><td>{}</td><td>{}</td></tr>",
            mark(line.mark),
            escape(&line.text)
        );
    }
    b.push_str("</table>");
    b.push_str(&caution());
    for (title, rows) in &r.sections {
        let _ = write!(b, "<h2>{}</h2><table>", escape(title));
        for (label, value) in rows {
            let _ = write!(
                b,
                "<tr><th>{}</th><td>{}</td></tr>",
                escape(label),
                escape(value)
            );
        }
        b.push_str("</table>");
    }
    if !plots.is_empty() {
        b.push_str(
            "<h2>Waveforms</h2><p class=\"note\">Plots show sampled waveforms reduced to \
             the minimum and maximum of each pixel column; the exact peaks of every cycle \
             are in the cycle table of waveforms.h5 and in summary.json.</p>",
        );
    }
    for p in plots {
        let svg = std::fs::read_to_string(p)
            .with_context(|| format!("reading {} for the report", p.display()))?;
        // The SVG is our own plotters output; only an XML declaration would be out of
        // place inline.
        let svg = svg.trim_start_matches(|c| c != '<');
        let svg = match svg.strip_prefix("<?xml") {
            Some(rest) => rest.split_once("?>").map_or("", |(_, r)| r),
            None => svg,
        };
        let _ = write!(b, "<figure>{svg}</figure>");
    }
    let _ = write!(b, "<h2>Scenario</h2><pre>{}</pre>", escape(scenario_text));
    Ok(page(&format!("{} — stepflux report", s.scenario), &b, ""))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Markup characters in scenario text must not become markup (HTML5 §13.1.2.6:
    /// these five are the ones that matter in text and quoted attributes).
    #[test]
    fn escape_makes_markup_inert() {
        assert_eq!(
            escape("<a href=\"x\">R&D's</a>"),
            "&lt;a href=&quot;x&quot;&gt;R&amp;D&#39;s&lt;/a&gt;"
        );
    }

    /// The page carries no external resource: no src= or href= pointing anywhere,
    /// and no URL scheme other than the SVG namespace identifier.
    #[test]
    fn a_page_is_self_contained() {
        let html = page("t", &caution(), "let x = 1;");
        assert!(html.starts_with("<!DOCTYPE html>"));
        assert!(!html.contains("src=") && !html.contains("href=") && !html.contains("http"));
        assert!(html.contains(&escape(crate::summary::CAUTION)));
    }
}
