//! curlew: reduce planar PIV campaigns.
//!
//! The library is organised by the stages a frame flows through:
//! `plan` → `io` (read) → `field` (grid) → `validate` → `fill` → `stencil` /
//! `derive` → `stats` (accumulate) → `io` (write) / `plot` / `report`.
//! `reduce` drives a run through them; `synth` makes campaigns with known
//! truth. The binary (`src/main.rs`, `src/cli/`) only parses arguments and
//! maps errors to exit codes. The modules depend on each other downwards
//! only, through fixed layers (data, kernels, files, analyses, results,
//! figures, plan, report, driver: DEVELOPERS.md, "The house").
//!
//! A whole campaign is one call: `Campaign::load(path)?.run(&RunOptions)`
//! (see [`facade`]). The stages are also usable one by one; from two
//! velocity arrays to the vorticity and its propagated uncertainty:
//!
//! ```
//! use curlew::derive::{derive, Params, Scheme, VelocityNoise};
//! use curlew::field::{Field, Grid};
//! use curlew::stencil::derivatives::DiffScheme;
//! use ndarray::Array2;
//!
//! // Solid-body rotation at 2 rad/s on a 20 x 16 grid of 1 mm pitch:
//! // u = -Omega y, v = Omega x, so omega = 2 Omega = 4 1/s everywhere.
//! let grid = Grid { nx: 20, ny: 16, x0: 0.0, y0: 0.0, dx: 1e-3, dy: 1e-3 };
//! let u = Array2::from_shape_fn((16, 20), |(j, _)| -2.0 * grid.y(j));
//! let v = Array2::from_shape_fn((16, 20), |(_, i)| 2.0 * grid.x(i));
//! let field = Field::from_velocity(grid, u, v)?;
//! let params = Params {
//!     scheme: Scheme::Fixed(DiffScheme::Central),
//!     velocity_noise: VelocityNoise::Value(1e-3), // 1 mm/s per component
//!     ..Params::default()
//! };
//! let d = derive(&params, &field);
//! let omega = d.get("omega").unwrap();
//! assert!((omega.value[[8, 10]] - 4.0).abs() < 1e-9);
//! // Central differences, independent errors: u(omega) = sigma / h
//! // (noise factor 1.000 of the methods table, docs/methods.md) = 1 1/s.
//! let unc = omega.unc.as_ref().unwrap()[[8, 10]];
//! assert!((unc - 1.0).abs() < 1e-9, "{unc}");
//! # Ok::<(), curlew::Error>(())
//! ```

#![warn(missing_docs)]

pub mod budget;
pub mod compare;
pub mod coverage;
pub mod derive;
pub mod describe;
pub mod error;
pub mod facade;
pub mod field;
pub mod fill;
pub mod io;
pub mod mask;
pub mod modes;
pub mod plan;
pub mod plot;
pub mod reduce;
pub mod report;
pub mod result;
pub mod robust;
pub mod scales;
pub mod spectra;
pub mod stats;
pub mod stencil;
pub mod synth;
#[cfg(test)]
pub mod testutil;
pub mod validate;
pub mod vortex;

pub use error::{Error, ErrorKind, Result};
pub use facade::{merge, Campaign, Progress, RunOptions};

/// The tool version written into every manifest.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
