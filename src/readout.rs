//! A run's summary as a person reads it: verdicts first, each failure in one line that
//! says why (criterion, value against limit, cycle and time), then the key figures in
//! engineering notation. The terminal summary and the HTML report both show this, so
//! they never disagree.

use crate::eng::{count, eng, pass_fail, percent, yes_no};
use stepflux_models::job::verdict::Bound;
use stepflux_models::measure::{step, Figure, Kind, Section as CatalogueSection, Value};

use crate::summary::{Summary, Verdict};

/// How a verdict line reads.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mark {
    Pass,
    Fail,
    /// Not a spec limit, but worth a look (a start-up that is not monotonic).
    Warn,
}

impl Mark {
    /// "pass", "FAIL" or "warn".
    pub fn text(self) -> &'static str {
        match self {
            Mark::Pass => pass_fail(true),
            Mark::Fail => pass_fail(false),
            Mark::Warn => "warn",
        }
    }
}

/// One verdict: a mark and one line saying what was judged against what.
#[derive(Clone, Debug, PartialEq)]
pub struct Line {
    pub mark: Mark,
    pub text: String,
}

/// A titled group of (label, value) figures.
pub type Section = (&'static str, Vec<(String, String)>);

/// Everything a person reads about one run.
pub struct Readout {
    /// "demo: PASS — 1499 cycles, 10.0 ms simulated in 270 ms".
    pub headline: String,
    pub verdicts: Vec<Line>,
    pub sections: Vec<Section>,
}

/// The readout of a summary.
pub fn readout(s: &Summary) -> Readout {
    let mut verdicts: Vec<Line> = s.verdicts.iter().map(limit_line).collect();
    verdicts.extend(reset_line(s));
    verdicts.extend(startup_line(s));
    if let Some(why) = &s.stopped {
        verdicts.push(fail(format!("design failure: {why}")));
    }
    if let Some(e) = &s.error {
        verdicts.push(fail(format!("run stopped by an error: {e}")));
    }
    let cycles = s.get("reset_check.cycles").map_or("no".into(), count);
    let headline = format!(
        "{}: {} — {cycles} cycles, {} simulated in {}",
        s.scenario,
        if s.passed { "PASS" } else { "FAIL" },
        eng(s.simulated_time_s, "s"),
        eng(s.run_time_s, "s"),
    );
    Readout {
        headline,
        verdicts,
        sections: sections(s),
    }
}

fn fail(text: String) -> Line {
    Line {
        mark: Mark::Fail,
        text,
    }
}

/// "output ripple 33.3 mV ≤ 50.0 mV (margin 16.7 mV)" or
/// "step recovery 310 µs > limit 200 µs".
fn limit_line(v: &Verdict) -> Line {
    let (label, unit) = (v.limit.label, v.limit.unit);
    let bound = eng(v.bound, unit);
    let text = match (v.value, v.margin()) {
        (Some(x), Some(margin)) => {
            let (ok_sign, bad_sign) = match v.limit.bound {
                Bound::AtMost => ("≤", ">"),
                Bound::AtLeast => ("≥", "<"),
            };
            if v.pass {
                format!(
                    "{label} {} {ok_sign} {bound} (margin {})",
                    eng(x, unit),
                    eng(margin, unit)
                )
            } else {
                format!("{label} {} {bad_sign} limit {bound}", eng(x, unit))
            }
        }
        _ => format!("{label} not measured (limit {bound})"),
    };
    Line {
        mark: if v.pass { Mark::Pass } else { Mark::Fail },
        text,
    }
}

/// The core-reset verdict in one line: the first failing cycle's criterion, value
/// against limit, cycle and time; or the tightest cycle when every cycle passed.
fn reset_line(s: &Summary) -> Option<Line> {
    let pass = s.figure("reset_check.pass")?.flag()?;
    let cycles = s.get("reset_check.cycles").map_or("n/a".into(), count);
    if pass {
        let why = criterion_text(s, "reset_check.worst").unwrap_or_default();
        return Some(Line {
            mark: Mark::Pass,
            text: format!(
                "core reset: all {cycles} cycles; tightest {why}{}",
                at_cycle(s, "reset_check.worst")
            ),
        });
    }
    let why = criterion_text(s, "reset_check.first_failure").unwrap_or("a criterion".into());
    let failed = s
        .get("reset_check.failed_cycles")
        .map_or("n/a".into(), count);
    Some(fail(format!(
        "core reset FAIL: {why}{} ({failed} of {cycles} cycles fail)",
        at_cycle(s, "reset_check.first_failure")
    )))
}

/// " at cycle 12, t = 80.0 µs".
fn at_cycle(s: &Summary, prefix: &str) -> String {
    match (
        s.get(&format!("{prefix}.cycle")),
        s.get(&format!("{prefix}.time")),
    ) {
        (Some(c), Some(t)) => format!(" at cycle {}, t = {}", count(c), eng(t, "s")),
        _ => String::new(),
    }
}

/// What the cycle's worst criterion compared, e.g. "drain 808 V > derated rating
/// 100 V". The figures give the peak and the margin m = (limit − peak)/limit, so the
/// limit is peak/(1 − m); no figure is added to the summary for it.
fn criterion_text(s: &Summary, prefix: &str) -> Option<String> {
    let get = |what: &str| s.get(&format!("{prefix}.{what}"));
    let name = s.figure(&format!("{prefix}.criterion"))?.choice()?;
    let m = get("criterion_margin")?;
    let cmp = if m < 0.0 { ">" } else { "≤" };
    let text = match name {
        "reset_incomplete" => {
            "reset not complete: a reset diode still conducts at the next turn-on".into()
        }
        "reset_margin" => {
            let have = get("reset_margin_pct")?;
            let need = have - 100.0 * m;
            let cmp = if m < 0.0 { "<" } else { "≥" };
            format!(
                "reset margin {} {cmp} required {} of the period",
                eng(have, "%"),
                eng(need, "%")
            )
        }
        "mag_current_start" => {
            let i = get("mag_current_start")?;
            format!(
                "magnetising current at turn-on {} {cmp} limit {}",
                eng(i, "A"),
                eng(i / (1.0 - m), "A")
            )
        }
        "flux_density" => {
            let have = get("flux_margin_pct")?;
            let b = get("b_peak")?;
            let cmp = if m < 0.0 { "<" } else { "≥" };
            format!(
                "flux margin {} {cmp} required {} (peak {})",
                eng(have, "%"),
                eng(have - 100.0 * m, "%"),
                eng(b, "T")
            )
        }
        "drain_voltage" => {
            let v = get("drain_peak")?;
            format!(
                "drain {} {cmp} derated rating {}",
                eng(v, "V"),
                eng(v / (1.0 - m), "V")
            )
        }
        probe => {
            let v = get(&format!("{probe}.peak"))?;
            format!(
                "{probe} {} {cmp} derated rating {}",
                eng(v, "V"),
                eng(v / (1.0 - m), "V")
            )
        }
    };
    Some(text)
}

/// A start-up that dips before reaching 90 % says so: not a spec limit, but two
/// regulators fighting (soft start against current limit) look like this.
fn startup_line(s: &Summary) -> Option<Line> {
    if s.figure("startup.monotonic")?.flag()? {
        return None;
    }
    let dip = s.get("startup.max_dip_before_t90").unwrap_or(f64::NAN);
    let allowance = s.get("startup.dip_allowance").unwrap_or(f64::NAN);
    Some(Line {
        mark: Mark::Warn,
        text: format!(
            "start-up not monotonic: the output falls back {} before reaching 90 % \
             (allowance {})",
            eng(dip, "V"),
            eng(allowance, "V")
        ),
    })
}

/// The key figures, grouped as the catalogue places them, each in engineering
/// notation with its unit; of the core-reset figures, the tightest cycle's.
fn sections(s: &Summary) -> Vec<Section> {
    let pick = |section: CatalogueSection| -> Vec<(String, String)> {
        s.measurements
            .iter()
            .filter(|f| f.def.section == section)
            .filter(|f| {
                section != CatalogueSection::Reset || f.key.starts_with("reset_check.worst.")
            })
            .map(|f| (label(f), show(f)))
            .collect()
    };
    let mut out = vec![
        (
            CatalogueSection::StartUp.title(),
            pick(CatalogueSection::StartUp),
        ),
        ("steps", steps(s)),
        (
            CatalogueSection::Steady.title(),
            pick(CatalogueSection::Steady),
        ),
        (
            CatalogueSection::Reset.title(),
            pick(CatalogueSection::Reset),
        ),
    ];
    out.retain(|(_, rows)| !rows.is_empty());
    out
}

/// A figure's label; a figure measured on a probe names it ("out.v ripple (p-p)").
fn label(f: &Figure) -> String {
    match f.def.key.strip_prefix("*.") {
        Some(rest) => match f.key.strip_suffix(rest) {
            Some(scope) => format!("{} {}", scope.trim_end_matches('.'), f.def.label),
            None => f.def.label.to_string(),
        },
        None => f.def.label.to_string(),
    }
}

/// A figure's value as its declaration says to read it.
pub fn show(f: &Figure) -> String {
    match (&f.value, f.def.kind) {
        (Value::Flag(b), _) => yes_no(*b).into(),
        (Value::Choice(c), _) => c.replace('_', " "),
        (Value::Number(v), Kind::Fraction) => percent(*v),
        (Value::Number(v), Kind::Count) => count(*v),
        (Value::Number(v), _) => eng(*v, f.unit),
    }
}

/// Each step's deviation and recovery in one row: "-96.9 mV (1.94 %) / +22.3 mV,
/// recovers in 27.2 µs".
fn steps(s: &Summary) -> Vec<(String, String)> {
    let mut labels: Vec<&str> = s
        .measurements
        .iter()
        .filter(|f| std::ptr::eq(f.def, &step::RECOVERY))
        .filter_map(|f| f.key.strip_suffix(".recovery"))
        .collect();
    labels.dedup();
    labels
        .into_iter()
        .map(|l| {
            let g = |w: &str| s.get(&format!("{l}.{w}")).unwrap_or(f64::NAN);
            let text = format!(
                "under {} ({}), over {} ({}), recovers in {}",
                eng(g("undershoot"), "V"),
                eng(g("undershoot_pct"), "%"),
                eng(g("overshoot"), "V"),
                eng(g("overshoot_pct"), "%"),
                eng(g("recovery"), "s"),
            );
            (l.replace('_', " "), text)
        })
        .collect()
}

#[cfg(test)]
#[path = "readout_tests.rs"]
mod tests;
