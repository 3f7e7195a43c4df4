//! The `stepflux` library behind the command line: scenario and study loading, the
//! run pipeline, batch runs and the writers. The binary (`main.rs`) parses arguments
//! and maps failures to exit codes; the fuzz targets and property tests load and run
//! scenarios through this library.

pub mod batch;
pub mod bounds;
pub mod budget;
pub mod check;
pub mod cli;
pub mod compare_cmd;
pub mod demo;
pub mod efficiency_cmd;
pub mod eng;
pub mod exit;
pub mod interrupt;
pub mod job;
pub mod loop_cmd;
pub mod pipeline;
pub mod plot_cmd;
pub mod print;
pub mod readout;
pub mod run_cmd;
pub mod scenario;
pub mod settle_cmd;
pub mod size_cmd;
pub mod steady;
pub mod summary;
pub mod text;
pub mod units;
pub mod writers;
