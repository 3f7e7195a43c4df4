//! Output writers: waveforms (HDF5), plots (SVG).

pub mod hdf5;
pub mod plots;
pub mod waveforms;
