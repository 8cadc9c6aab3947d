//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod bad_input;
mod detection;
mod masks_axes;
mod netcdf_out;
mod reference;
mod run;
