//! Output writers: waveforms (HDF5), plots (SVG), the efficiency, Bode and closed-loop
//! response plots (SVG),
//! the run report (HTML), whole files written atomically.

pub mod atomic;
pub mod bode_plot;
pub mod efficiency_plot;
pub mod figure_json;
pub mod frequency_panel;
pub mod hdf5;
pub mod html;
pub mod plots;
pub mod response_plot;
pub mod waveforms;
