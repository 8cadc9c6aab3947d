//! Filling invalid and rejected vectors from valid neighbours.
//!
//! Owns: giving values (and an uncertainty of their own) to nodes of status
//! `REPLACED` (1) and `FILLED` (2). Nodes that cannot be filled become
//! `MASKED` (3) with NaN. Valid vectors are never changed.
//!
//! STUB (skeleton): signatures agreed between the stages; the filling owner
//! replaces the `todo!()` bodies.

use crate::field::Field;

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {}

impl Default for Params {
    fn default() -> Self {
        Params {}
    }
}

#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Counts {
    /// Rejected vectors that were replaced.
    pub replaced: usize,
    /// Missing or invalid input vectors that were filled.
    pub filled: usize,
    /// Nodes that could not be filled (now masked).
    pub unfilled: usize,
}

pub fn fill(p: &Params, field: &mut Field) -> Counts {
    let _ = (p, field);
    todo!("fill: fill")
}
