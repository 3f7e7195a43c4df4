//! What a finished run prints on the terminal: where its outputs are and the figures a
//! designer looks at first (summary.json has them all). A closed stdout (a pager quit
//! early) is not worth a panic, so write failures are ignored.

use std::io::Write;

use crate::pipeline::RunOutput;
use crate::report::Summary;

/// Figures printed by name; step figures are matched by suffix.
const KEYS: [&str; 19] = [
    "startup.t90",
    "startup.overshoot_pct",
    "startup.max_duty",
    "out.v.mean",
    "out.v.ripple_pp",
    "lout.i.ripple_pp",
    "efficiency.stage",
    "efficiency.converter",
    "power.loss_total",
    "reset_check.pass",
    "reset_check.failed_cycles",
    "reset_check.worst.reset_margin_pct",
    "reset_check.worst.flux_margin_pct",
    "reset_check.worst.drain_peak",
    "reset_check.first_failure.cycle",
    "reset_check.first_failure.time",
    "reset_check.first_failure.mag_current_start",
    "reset_check.bsat_crossed.cycle",
    "reset_check.bsat_crossed.time",
];

fn is_key(name: &str) -> bool {
    KEYS.contains(&name)
        || name.ends_with("undershoot_pct")
        || name.ends_with("overshoot_pct")
        || name.ends_with(".recovery")
}

/// Prints one run's headline, key figures, verdicts and output paths.
pub fn run_summary(output: &RunOutput) {
    let mut out = std::io::stdout().lock();
    let s: &Summary = &output.summary;
    let cycles = s.get("reset_check.cycles").unwrap_or(0.0);
    let _ = writeln!(
        out,
        "{}: {cycles} cycles, {:.3} ms simulated in {:.2} s",
        s.scenario,
        1e3 * s.simulated_time_s,
        s.run_time_s
    );
    for f in s.measurements.iter().filter(|f| is_key(&f.name)) {
        let value = f
            .value
            .map_or_else(|| "-".to_string(), |v| format!("{v:.5}"));
        let _ = writeln!(out, "  {:<40} {value:>12} {}", f.name, f.unit);
    }
    for v in &s.verdicts {
        let mark = if v.pass { "pass" } else { "FAIL" };
        let value = v
            .value
            .map_or_else(|| "-".to_string(), |x| format!("{x:.4}"));
        let _ = writeln!(
            out,
            "  [{mark}] {} = {value} ({} {})",
            v.limit, v.kind, v.bound
        );
    }
    if let Some(why) = &s.stopped {
        let _ = writeln!(out, "  design failure: {why}");
    }
    if let Some(e) = &s.error {
        let _ = writeln!(out, "  error: {e}");
    }
    if let Some(i) = &s.interrupted {
        let _ = writeln!(
            out,
            "  interrupted at {:.6} ms simulated: results up to there were written",
            1e3 * i.at_s
        );
    }
    let _ = writeln!(
        out,
        "  waveforms: {}",
        output.dir.join("waveforms.h5").display()
    );
    let _ = writeln!(
        out,
        "  summary:   {}",
        output.dir.join("summary.json").display()
    );
    for p in &output.plots {
        let _ = writeln!(out, "  plot:      {}", p.display());
    }
    let _ = writeln!(out, "  {}", crate::report::CAUTION);
}
