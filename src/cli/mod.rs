//! One file per command, each with its `Args` (clap) and a `run` entry point.

pub mod check;
pub mod coverage;
pub mod inspect;
pub mod merge;
pub mod run;
pub mod summary;
pub mod synth;
