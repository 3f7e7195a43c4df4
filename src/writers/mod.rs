//! Output writers: waveforms (HDF5), plots (SVG), the run report (HTML).

pub mod hdf5;
pub mod html;
pub mod plots;
pub mod waveforms;
