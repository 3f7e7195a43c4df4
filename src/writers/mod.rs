//! Output writers: waveforms (HDF5), plots (SVG), whole files written atomically.

pub mod atomic;
pub mod hdf5;
pub mod plots;
pub mod waveforms;
