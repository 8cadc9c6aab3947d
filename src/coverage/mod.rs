//! Coverage: how honest curlew's uncertainties are, measured on synthetic
//! campaigns with known truth.
//!
//! Owns: the scoring rule (`score`: k = 2 coverage and the width ratio
//! median(u)/rms(error)), the analytic truth of every scored column
//! (`truth`), the node regions (`region`), one cell of a study (`cell`:
//! make replicas with `synth`, reduce them with the real pipeline, score
//! every uncertainty column), the study's matrix and its tables (`study`),
//! and the campaign matched to a user's own (`matched`, behind
//! `curlew coverage PIPELINE`). Does not own any estimator: it measures
//! them (docs/uncertainty.md says what each column models and lists the
//! study's table).

pub mod cell;
pub mod matched;
pub(crate) mod region;
pub mod score;
pub mod study;
pub(crate) mod truth;

pub use cell::{Cell, Row};
pub use score::{score, verdict, Reading, Score, Verdict};
