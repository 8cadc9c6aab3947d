//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod auto_scheme;
mod bad_input;
mod budget;
mod coverage_command;
mod coverage_study;
mod detection;
mod formats;
mod fuzz;
mod header_units;
mod layers;
mod masks_axes;
mod modes;
mod netcdf_out;
mod reference;
mod reliability;
mod reliability_shards;
mod reliability_signals;
mod report_numbers;
mod resolved;
mod run;
mod scales;
mod smoothing;
mod spectra;
mod truth;
mod values;
mod vortices;
