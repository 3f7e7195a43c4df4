//! What a finished run prints on the terminal: verdicts first (each failure in one
//! line that says why), the key figures in engineering notation with their units, then
//! where the outputs are (summary.json has every figure). A closed stdout (a pager quit
//! early) is not worth a panic, so write failures are ignored.

use std::io::Write;

use crate::pipeline::RunOutput;
use crate::readout::readout;

/// Prints one run's headline, verdicts, key figures and output paths.
pub fn run_summary(output: &RunOutput) {
    let mut out = std::io::stdout().lock();
    let r = readout(&output.summary);
    let _ = writeln!(out, "{}", r.headline);
    for line in &r.verdicts {
        let _ = writeln!(out, "  {:<4}  {}", line.mark.text(), line.text);
    }
    for (title, rows) in &r.sections {
        let _ = writeln!(out, "  {title}");
        for (label, value) in rows {
            let _ = writeln!(out, "    {label:<32} {value}");
        }
    }
    let files = [
        ("report", "report.html"),
        ("waveforms", "waveforms.h5"),
        ("summary", "summary.json"),
    ];
    for (what, name) in files {
        let path = output.dir.join(name);
        if path.exists() {
            let _ = writeln!(out, "  {what:<10} {}", path.display());
        }
    }
    if let Some(e) = &output.summary.error {
        let _ = writeln!(out, "  error: {e}");
    }
    if let Some(i) = &output.summary.interrupted {
        let _ = writeln!(
            out,
            "  interrupted at {} simulated: results up to there were written",
            crate::eng::eng(i.at_s, "s")
        );
    }
    for p in &output.plots {
        let _ = writeln!(out, "  {:<10} {}", "plot", p.display());
    }
    let _ = writeln!(out, "  {}", crate::summary::CAUTION);
}
