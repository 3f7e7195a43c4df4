//! Output writers: waveforms (HDF5), plots (SVG), the efficiency and Bode plots (SVG).

pub mod bode_plot;
pub mod efficiency_plot;
pub mod hdf5;
pub mod plots;
pub mod waveforms;
