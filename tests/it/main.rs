//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod bad_input;
mod detection;
mod modes;
mod reference;
mod run;
mod spectra;
