//! The validated job lives in `models` (`stepflux_models::job`); the binary builds it
//! from a scenario file and hands it on.

pub use stepflux_models::job::*;
