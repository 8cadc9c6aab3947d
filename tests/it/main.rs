//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod bad_input;
mod detection;
mod fuzz;
mod reference;
mod reliability;
mod run;
mod truth;
