//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod bad_input;
mod coverage_command;
mod coverage_study;
mod budget;
mod detection;
mod fuzz;
mod masks_axes;
mod netcdf_out;
mod modes;
mod reference;
mod reliability;
mod run;
mod truth;
mod spectra;
