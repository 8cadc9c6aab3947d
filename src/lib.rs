//! curlew: reduce planar PIV campaigns.
//!
//! The library is organised by the stages a frame flows through:
//! `plan` → `io` (read) → `field` (grid) → `validate` → `fill` → `stencil` /
//! `derive` → `stats` (accumulate) → `io` (write) / `plot` / `report`.
//! `reduce` drives a run through them; `synth` makes campaigns with known
//! truth. The binary (`src/main.rs`, `src/cli/`) only parses arguments and
//! maps errors to exit codes.

pub mod compare;
pub mod derive;
pub mod error;
pub mod field;
pub mod fill;
pub mod io;
pub mod modes;
pub mod plan;
pub mod plot;
pub mod reduce;
pub mod report;
pub mod result;
pub mod spectra;
pub mod stats;
pub mod stencil;
pub mod synth;
#[cfg(test)]
pub mod testutil;
pub mod validate;

pub use error::{Error, ErrorKind, Result};

/// The tool version written into every manifest.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
