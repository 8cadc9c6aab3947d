//! Synthetic campaigns with analytic ground truth.
//!
//! STUB (skeleton): the synth owner replaces the `todo!()` bodies.
