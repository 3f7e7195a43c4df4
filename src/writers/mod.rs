//! Output writers: waveforms (HDF5), plots (SVG), the efficiency plot (SVG), whole
//! files written atomically.

pub mod atomic;
pub mod efficiency_plot;
pub mod hdf5;
pub mod plots;
pub mod waveforms;
