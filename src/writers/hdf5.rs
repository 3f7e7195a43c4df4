//! Streaming HDF5 waveform writer.
//!
//! Each signal becomes a resizable, chunked 1-D `f64` dataset at the file
//! root with a `unit` string attribute. Samples are staged in a fixed
//! per-signal buffer and written one chunk at a time, so memory use is
//! bounded by `signals × chunk_len` however long the run is, and appending
//! a sample never allocates.

use std::path::{Path, PathBuf};

use anyhow::{bail, ensure, Context, Result};
use h5::types::VarLenUnicode;
use hdf5_metno as h5;

/// Samples per HDF5 chunk. 4096 × 8 B = 32 KiB, inside the roughly
/// 10 KiB–1 MiB band HDF5's chunking guidance recommends (from memory).
pub const DEFAULT_CHUNK_LEN: usize = 4096;

/// Handle returned by [`Hdf5Writer::add_signal`]; cheap to copy and index.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SignalId(usize);

/// Handle of an integer column ([`Hdf5Writer::add_integers`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct IntegerId(usize);

/// A chunked, growable 1-D dataset and the samples not yet written to it.
struct Column<T> {
    name: String,
    dataset: h5::Dataset,
    staged: Vec<T>,
    written: usize,
}

pub struct Hdf5Writer {
    path: PathBuf,
    file: h5::File,
    chunk_len: usize,
    signals: Vec<Column<f64>>,
    integers: Vec<Column<u64>>,
}

impl Hdf5Writer {
    /// Create (or truncate) `path`.
    pub fn create(path: &Path, chunk_len: usize) -> Result<Self> {
        ensure!(chunk_len > 0, "HDF5 chunk length must be positive");
        let file = h5::File::create(path)
            .with_context(|| format!("creating HDF5 file {}", path.display()))?;
        Ok(Self {
            path: path.to_path_buf(),
            file,
            chunk_len,
            signals: Vec::new(),
            integers: Vec::new(),
        })
    }

    /// Declare a signal. All signals should be declared before appending so
    /// that the stepping loop only ever touches pre-sized buffers.
    pub fn add_signal(&mut self, name: &str, unit: &str) -> Result<SignalId> {
        if self.signals.iter().any(|s| s.name == name) {
            bail!("signal {name:?} declared twice in {}", self.path.display());
        }
        let dataset = self
            .file
            .new_dataset::<f64>()
            .chunk(self.chunk_len)
            .shape((0..,))
            .create(name)
            .with_context(|| format!("creating dataset {name:?} in {}", self.path.display()))?;
        let unit_value: VarLenUnicode = unit
            .parse()
            .with_context(|| format!("unit {unit:?} of signal {name:?} is not valid text"))?;
        dataset
            .new_attr::<VarLenUnicode>()
            .shape(())
            .create("unit")
            .and_then(|attr| attr.write_scalar(&unit_value))
            .with_context(|| format!("writing unit attribute of {name:?}"))?;
        self.signals.push(Column {
            name: name.to_owned(),
            dataset,
            staged: Vec::with_capacity(self.chunk_len),
            written: 0,
        });
        Ok(SignalId(self.signals.len() - 1))
    }

    /// Create a group, so later names may be `group/name`.
    pub fn add_group(&mut self, name: &str) -> Result<()> {
        self.file
            .create_group(name)
            .with_context(|| format!("creating group {name:?} in {}", self.path.display()))?;
        Ok(())
    }

    /// Attach a text attribute to the file root (e.g. the scenario echoed back).
    pub fn set_text_attribute(&mut self, name: &str, text: &str) -> Result<()> {
        let value: VarLenUnicode = text
            .parse()
            .with_context(|| format!("attribute {name:?} is not valid text"))?;
        self.file
            .new_attr::<VarLenUnicode>()
            .shape(())
            .create(name)
            .and_then(|attr| attr.write_scalar(&value))
            .with_context(|| format!("writing attribute {name:?} to {}", self.path.display()))
    }

    /// Declare a growable integer column with a description attribute.
    pub fn add_integers(&mut self, name: &str, description: &str) -> Result<IntegerId> {
        let dataset = self
            .file
            .new_dataset::<u64>()
            .chunk(self.chunk_len)
            .shape((0..,))
            .create(name)
            .with_context(|| format!("creating dataset {name:?} in {}", self.path.display()))?;
        let text: VarLenUnicode = description
            .parse()
            .with_context(|| format!("description of {name:?} is not valid text"))?;
        dataset
            .new_attr::<VarLenUnicode>()
            .shape(())
            .create("description")
            .and_then(|attr| attr.write_scalar(&text))
            .with_context(|| format!("writing description of {name:?}"))?;
        self.integers.push(Column {
            name: name.to_owned(),
            dataset,
            staged: Vec::with_capacity(self.chunk_len),
            written: 0,
        });
        Ok(IntegerId(self.integers.len() - 1))
    }

    /// Append one value to an integer column.
    pub fn append_integer(&mut self, id: IntegerId, value: u64) -> Result<()> {
        let chunk_len = self.chunk_len;
        let Some(column) = self.integers.get_mut(id.0) else {
            bail!(
                "unknown integer column {} for {}",
                id.0,
                self.path.display()
            );
        };
        column.staged.push(value);
        if column.staged.len() == chunk_len {
            column.flush()?;
        }
        Ok(())
    }

    /// Append samples, in order. Any block length works; a single sample
    /// is `std::slice::from_ref(&v)`.
    pub fn append(&mut self, id: SignalId, values: &[f64]) -> Result<()> {
        let chunk_len = self.chunk_len;
        let signal = self.signal_mut(id)?;
        let mut rest = values;
        while !rest.is_empty() {
            let room = chunk_len - signal.staged.len();
            let (head, tail) = rest.split_at(room.min(rest.len()));
            signal.staged.extend_from_slice(head);
            if signal.staged.len() == chunk_len {
                signal.flush()?;
            }
            rest = tail;
        }
        Ok(())
    }

    /// Samples accepted so far for `id` (written plus staged).
    #[cfg(test)]
    pub fn len(&self, id: SignalId) -> Option<usize> {
        self.signals.get(id.0).map(|s| s.written + s.staged.len())
    }

    /// Write out staged samples and close the file. Dropping the writer
    /// without calling this loses up to one chunk per signal, because errors
    /// from a flush in `Drop` could not be reported.
    pub fn finish(mut self) -> Result<()> {
        for signal in &mut self.signals {
            signal.flush()?;
        }
        for column in &mut self.integers {
            column.flush()?;
        }
        // Datasets hold file handles; release them before closing.
        self.signals.clear();
        self.integers.clear();
        self.file.close().context("closing the HDF5 file")
    }

    /// Writes the staged samples and flushes the file to disk, so the file as it
    /// stands is readable should the process be killed before [`Self::finish`].
    pub fn checkpoint(&mut self) -> Result<()> {
        for signal in &mut self.signals {
            signal.flush()?;
        }
        for column in &mut self.integers {
            column.flush()?;
        }
        self.file.flush().context("flushing the HDF5 file")
    }

    fn signal_mut(&mut self, id: SignalId) -> Result<&mut Column<f64>> {
        match self.signals.get_mut(id.0) {
            Some(signal) => Ok(signal),
            None => bail!("unknown signal id {} for {}", id.0, self.path.display()),
        }
    }
}

impl<T: h5::H5Type> Column<T> {
    fn flush(&mut self) -> Result<()> {
        if self.staged.is_empty() {
            return Ok(());
        }
        let start = self.written;
        let end = start + self.staged.len();
        self.dataset
            .resize(end)
            .and_then(|()| self.dataset.write_slice(self.staged.as_slice(), start..end))
            .with_context(|| format!("appending samples {start}..{end} to {:?}", self.name))?;
        self.written = end;
        self.staged.clear();
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("stepflux-writer-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("temp dir is writable");
        dir.join(name)
    }

    #[test]
    fn round_trip_across_chunk_boundaries() {
        let path = scratch("round_trip.h5");
        // Chunk of 3 with 10 samples exercises full chunks, a partial tail,
        // and a block append that straddles a boundary.
        let mut w = Hdf5Writer::create(&path, 3).expect("create");
        let a = w.add_signal("a", "V").expect("add a");
        let b = w.add_signal("b", "A").expect("add b");
        for i in 0..10 {
            w.append(a, &[f64::from(i)]).expect("append one");
        }
        w.append(b, &[0.5, 1.5]).expect("append");
        w.append(b, &[2.5, 3.5, 4.5, 5.5]).expect("append");
        assert_eq!(w.len(a), Some(10));
        assert_eq!(w.len(b), Some(6));
        w.finish().expect("finish");

        let file = h5::File::open(&path).expect("open");
        let got_a: Vec<f64> = file
            .dataset("a")
            .and_then(|d| d.read_raw())
            .expect("read a");
        let want_a: Vec<f64> = (0..10).map(f64::from).collect();
        assert_eq!(got_a, want_a);
        let got_b: Vec<f64> = file
            .dataset("b")
            .and_then(|d| d.read_raw())
            .expect("read b");
        assert_eq!(got_b, vec![0.5, 1.5, 2.5, 3.5, 4.5, 5.5]);
        let unit: VarLenUnicode = file
            .dataset("b")
            .and_then(|d| d.attr("unit"))
            .and_then(|a| a.read_scalar())
            .expect("unit");
        assert_eq!(unit.as_str(), "A");
    }

    #[test]
    fn duplicate_signal_is_rejected() {
        let path = scratch("dup.h5");
        let mut w = Hdf5Writer::create(&path, 8).expect("create");
        w.add_signal("x", "V").expect("first");
        let err = w.add_signal("x", "V").expect_err("second must fail");
        assert!(err.to_string().contains("declared twice"), "{err}");
    }

    #[test]
    fn zero_chunk_is_rejected() {
        let path = scratch("zero.h5");
        assert!(Hdf5Writer::create(&path, 0).is_err());
    }
}
