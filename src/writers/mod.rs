//! Sinks that receive waveforms as they are produced.

pub mod hdf5;
