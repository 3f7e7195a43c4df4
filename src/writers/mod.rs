//! Output writers: waveforms (HDF5), plots (SVG), the efficiency plot (SVG), the run
//! report (HTML), whole files written atomically.

pub mod atomic;
pub mod efficiency_plot;
pub mod hdf5;
pub mod html;
pub mod plots;
pub mod waveforms;
