//! The gradient engine's working state: what one worker keeps from frame to
//! frame so that the gradient stage does not rebuild or reallocate it.
//!
//! Owns: the axis operators made so far, the cache of slow-path stencils
//! (edge and mask fits, effective composites) keyed by what they are made
//! from and the validity pattern around the node, and the pool of tensor
//! buffers reused from frame to frame. Does not own: what is cached (`ops`,
//! `gradient`).
//!
//! A worker (a thread of the reduction, a test, a single call of `derive`)
//! makes one `Workspace` and hands it by `&mut` to every frame it
//! derives; a workspace is not shared between threads (`Rc` inside).
//!
//! Invariant: every key holds everything the cached value depends on (the
//! stencil's weights, the axis and pitch, the fit window, the correlation
//! model, the validity pattern), so results never depend on which frames a
//! workspace saw before, nor on whether it is fresh.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};
use std::rc::Rc;

use ndarray::Array2;

use super::ops::{AxisOp, OpSpec, Shared};
use crate::stencil::correlation::Correlation;
use crate::stencil::Stencil;

type SlowCache = HashMap<(u64, u128), Option<Shared>, BuildHasherDefault<KeyHasher>>;

/// Slow-path stencils kept at most; the cache is cleared when it grows past.
const CACHE_MAX: usize = 200_000;
/// Axis operators kept at most (a run uses a handful: candidates x axes).
const OPS_MAX: usize = 64;
/// Buffers kept at most in the pool.
const POOL_MAX: usize = 64;

/// The gradient engine a worker owns: axis operators, slow-path stencils
/// and tensor buffers, reused from frame to frame (`derive_with`).
#[derive(Default)]
pub struct Workspace {
    /// Buffers of finished tensors, reused by the next frame (allocating
    /// and faulting in 16 grid-sized arrays per frame cost about a quarter
    /// of the stage's time).
    pool: Vec<Vec<f64>>,
    /// Slow-path stencils by (fingerprint of what they are made from,
    /// validity pattern around the node). Edge and mask patterns repeat
    /// from node to node and from frame to frame, so each fit is made once
    /// per worker. Cleared when it grows past `CACHE_MAX` entries.
    slow: SlowCache,
    /// The axis operators made so far: building one fits a polynomial per
    /// fallback stencil, which frames of one run share.
    ops: HashMap<u64, Rc<AxisOp>>,
}

impl std::fmt::Debug for Workspace {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Workspace")
            .field("pooled_buffers", &self.pool.len())
            .field("slow_stencils", &self.slow.len())
            .field("axis_operators", &self.ops.len())
            .finish()
    }
}

impl Workspace {
    /// An empty workspace (nothing made yet).
    pub(crate) fn new() -> Workspace {
        Workspace::default()
    }

    /// A NaN-filled buffer of `n` values, from the pool when one is there.
    pub(super) fn buffer(&mut self, n: usize) -> Vec<f64> {
        let mut v = self.pool.pop().unwrap_or_default();
        v.clear();
        v.resize(n, f64::NAN);
        v
    }

    /// Takes arrays back for reuse by later frames (empty ones are dropped).
    pub(super) fn give_back(&mut self, arrays: impl IntoIterator<Item = Array2<f64>>) {
        for a in arrays {
            if self.pool.len() < POOL_MAX && !a.is_empty() {
                self.pool.push(a.into_raw_vec_and_offset().0);
            }
        }
    }

    /// The stencil `make` gives, with its correlation gain under `corr`;
    /// made once per `key` (uncached without a key).
    pub(super) fn stencil(
        &mut self,
        key: Option<(u64, u128)>,
        make: impl FnOnce() -> Option<Stencil>,
        corr: &Correlation,
    ) -> Option<Shared> {
        let build = |s: Stencil| {
            let g = corr.gain(&s);
            Rc::new((s, g))
        };
        let Some(key) = key else {
            return make().map(build);
        };
        if let Some(hit) = self.slow.get(&key) {
            return hit.clone();
        }
        let v = make().map(build);
        if self.slow.len() >= CACHE_MAX {
            self.slow.clear();
        }
        self.slow.insert(key, v.clone());
        v
    }

    /// The axis operator `spec` describes, made once.
    pub(super) fn axis_op(&mut self, spec: &OpSpec) -> Rc<AxisOp> {
        let key = spec.key();
        if let Some(op) = self.ops.get(&key) {
            return op.clone();
        }
        let op = Rc::new(AxisOp::new(spec));
        if self.ops.len() > OPS_MAX {
            self.ops.clear();
        }
        self.ops.insert(key, op.clone());
        op
    }
}

/// A cheap hasher for the cache keys, which are already well-mixed
/// fingerprints and bit patterns (SipHash would dominate the slow path).
#[derive(Default)]
struct KeyHasher(u64);

impl Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..chunk.len()].copy_from_slice(chunk);
            self.0 = (self.0.rotate_left(5) ^ u64::from_le_bytes(b))
                .wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
        }
    }
}
