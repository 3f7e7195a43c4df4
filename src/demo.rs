//! `stepflux demo`: placeholder computation that proves the output path
//! (directory layout, HDF5 streaming, units) end to end. The converter demo
//! replaces `waveform` once models can run; the writing side stays.

use std::path::{Path, PathBuf};

use anyhow::Context;

use crate::exit::{Exit, ExitWith, Failure};
use crate::writers::hdf5::{Hdf5Writer, DEFAULT_CHUNK_LEN};

/// Placeholder signal: a 10 kHz ringing decaying with a 200 µs time
/// constant, roughly what an underdamped output filter shows after a step.
const RING_HZ: f64 = 10e3;
const DECAY_S: f64 = 200e-6;
const SAMPLE_S: f64 = 1e-6;
const SAMPLES: usize = 1000;

pub fn waveform(t: f64) -> f64 {
    (-t / DECAY_S).exp() * (std::f64::consts::TAU * RING_HZ * t).sin()
}

/// Sample time of index `i`; computed from the index rather than accumulated
/// so that rounding does not drift over long runs.
pub fn sample_time(i: usize) -> f64 {
    // Sample counts stay far below 2^53, so the conversion is exact.
    i as f64 * SAMPLE_S
}

/// What `run` produced, for the summary line.
pub struct Written {
    pub path: PathBuf,
    pub samples: usize,
}

pub fn run(out: &Path) -> Result<Written, Failure> {
    let dir = out.join("demo");
    if out.exists() && !out.is_dir() {
        return Err(anyhow::anyhow!(
            "output location {} exists and is not a directory",
            out.display()
        ))
        .exit_with(Exit::BadInput);
    }
    std::fs::create_dir_all(&dir)
        .with_context(|| format!("creating output directory {}", dir.display()))
        .exit_with(Exit::BadInput)?;

    let path = dir.join("waveforms.h5");
    let samples = write(&path)
        .with_context(|| format!("writing demo waveforms to {}", path.display()))
        .exit_with(Exit::SimulationFailed)?;
    Ok(Written { path, samples })
}

/// Streams in fixed blocks, the way a run hands over one stretch of
/// samples at a time, so no buffer grows with run length.
fn write(path: &Path) -> anyhow::Result<usize> {
    const BLOCK: usize = 256;
    let mut w = Hdf5Writer::create(path, DEFAULT_CHUNK_LEN)?;
    let time = w.add_signal("time", "s")?;
    let ring = w.add_signal("ringing", "V")?;
    let mut t_block = [0.0; BLOCK];
    let mut v_block = [0.0; BLOCK];
    let mut start = 0;
    while start < SAMPLES {
        let n = BLOCK.min(SAMPLES - start);
        for (k, (t_slot, v_slot)) in t_block.iter_mut().zip(&mut v_block).take(n).enumerate() {
            let t = sample_time(start + k);
            *t_slot = t;
            *v_slot = waveform(t);
        }
        w.append(time, &t_block[..n])?;
        w.append(ring, &v_block[..n])?;
        start += n;
    }
    let samples = w.len(time).unwrap_or(0);
    w.finish()?;
    Ok(samples)
}
