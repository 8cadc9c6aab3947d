//! Integration tests: one binary, a file per command or stage, a temporary
//! folder per test (see `util`).

mod util;

mod bad_input;
mod detection;
mod masks_axes;
mod reference;
mod run;
