//! Whole-file writes: to a temporary name in the same folder, then a rename, so a
//! reader (a person, a resumed batch) sees the old file or the new one, never a part
//! of one; a failed write removes its temporary file.

use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use serde::Serialize;

/// Leading and trailing marks of a temporary name: `.<name>.<pid>.tmp`.
const TMP_PREFIX: &str = ".";
const TMP_SUFFIX: &str = ".tmp";

/// The temporary name `path` is written under by this process. The pid keeps two
/// processes (shards sharing a folder) off each other's temporary file.
fn temporary(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(
        "{TMP_PREFIX}{name}.{}{TMP_SUFFIX}",
        std::process::id()
    ))
}

/// Writes `bytes` to `path` through a temporary file and a rename.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = temporary(path);
    let written = std::fs::write(&tmp, bytes)
        .with_context(|| format!("writing {}", path.display()))
        .and_then(|()| {
            std::fs::rename(&tmp, path).with_context(|| format!("renaming to {}", path.display()))
        });
    if written.is_err() {
        // Best effort: the write error is the one to report.
        let _ = std::fs::remove_file(&tmp);
    }
    written
}

/// Writes a value as pretty JSON, atomically.
pub fn write_json<T: Serialize>(path: &Path, value: &T) -> Result<()> {
    let mut text = serde_json::to_string_pretty(value).context("formatting JSON")?;
    text.push('\n');
    write_atomic(path, text.as_bytes())
}

/// Removes the temporary files in `dir` that a process no longer running left
/// behind (a crash, a kill); returns how many. Files of live processes are kept,
/// as another shard may be about to rename its own.
pub fn remove_stale_temporaries(dir: &Path) -> Result<usize> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Ok(0);
    };
    let mut removed = 0;
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let Some(pid) = temporary_pid(&name) else {
            continue;
        };
        if !process_alive(pid) {
            let path = entry.path();
            std::fs::remove_file(&path)
                .with_context(|| format!("removing stale temporary file {}", path.display()))?;
            removed += 1;
        }
    }
    Ok(removed)
}

/// The pid in a temporary file name, if `name` is one.
fn temporary_pid(name: &str) -> Option<u32> {
    let core = name.strip_prefix(TMP_PREFIX)?.strip_suffix(TMP_SUFFIX)?;
    core.rsplit_once('.')?.1.parse().ok()
}

/// Whether a process with this pid runs on this machine (Linux: it has a /proc
/// entry). Where /proc is missing, every pid reads as gone.
fn process_alive(pid: u32) -> bool {
    pid == std::process::id() || Path::new(&format!("/proc/{pid}")).exists()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn temporary_names_carry_the_pid() {
        let t = temporary(Path::new("out/c0001.json"));
        let name = t.file_name().and_then(|n| n.to_str()).unwrap_or_default();
        assert_eq!(temporary_pid(name), Some(std::process::id()));
        assert_eq!(temporary_pid("c0001.json"), None);
        assert_eq!(temporary_pid(".c0001.json.x.tmp"), None);
    }
}
