//! `stepflux plot FILE.h5 --signal NAME... -o FILE.svg`: plots saved signals of a
//! waveform file, one panel each, against time (or another 1-D dataset).

use std::path::Path;

use anyhow::Context;

use crate::exit::{Exit, ExitWith, Failure};
use crate::writers::plots;

/// Plots `signals` of `file` against `x` into `out`.
pub fn plot(file: &Path, signals: &[String], x: &str, out: &Path) -> Result<(), Failure> {
    if !file.is_file() {
        return Err(anyhow::anyhow!("{} is not a file", file.display())).exit_with(Exit::BadInput);
    }
    if signals.is_empty() {
        return Err(anyhow::anyhow!(
            "name at least one signal with --signal (e.g. --signal out.v)"
        ))
        .exit_with(Exit::BadInput);
    }
    let names: Vec<&str> = signals.iter().map(String::as_str).collect();
    let title = format!("{} — {}", file.display(), names.join(", "));
    plots::plot(file, x, &names, &title, out)
        .with_context(|| format!("plotting {} from {}", names.join(", "), file.display()))
        .exit_with(Exit::BadInput)?;
    println!("wrote {}", out.display());
    Ok(())
}
