//! `stepflux plot FILE.h5 --signal NAME... --out FILE.svg`: plots saved signals of a
//! waveform file, one panel each, against time (or another 1-D dataset), optionally
//! in a time window (`--from`, `--to`).

use std::path::Path;

use anyhow::Context;

use crate::exit::{Exit, ExitWith, Failure};
use crate::units::{self, Unit};
use crate::writers::plots;

/// Plots `signals` of `file` against `x` into `out`, only where `from` ≤ x ≤ `to`
/// (times such as "2 ms"; either may be open).
pub fn plot(
    file: &Path,
    signals: &[String],
    x: &str,
    window: (Option<&str>, Option<&str>),
    out: &Path,
) -> Result<(), Failure> {
    if !file.is_file() {
        return Err(anyhow::anyhow!("{} is not a file", file.display())).exit_with(Exit::BadInput);
    }
    if signals.is_empty() {
        return Err(anyhow::anyhow!(
            "name at least one signal with --signal (e.g. --signal out.v)"
        ))
        .exit_with(Exit::BadInput);
    }
    let time = |flag: &str, text: Option<&str>| {
        text.map(|t| units::parse(t, Unit::Second).with_context(|| format!("{flag} {t:?}")))
            .transpose()
            .exit_with(Exit::BadInput)
    };
    let window = (time("--from", window.0)?, time("--to", window.1)?);
    let names: Vec<&str> = signals.iter().map(String::as_str).collect();
    let title = format!("{} — {}", file.display(), names.join(", "));
    let panels: Vec<plots::Panel> = names.iter().map(|n| plots::Panel::of(n)).collect();
    let what = plots::Plot {
        x,
        window,
        title: &title,
    };
    plots::plot(file, &what, &panels, out)
        .with_context(|| format!("plotting {} from {}", names.join(", "), file.display()))
        .exit_with(Exit::BadInput)?;
    println!("wrote {}", out.display());
    Ok(())
}
