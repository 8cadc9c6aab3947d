//! Per-thread caches and buffers of the gradient stage.
//!
//! Owns: the cache of slow-path stencils (edge and mask fits, effective
//! composites) keyed by what they are made from and the validity pattern
//! around the node; the pool of tensor buffers reused from frame to frame;
//! the fingerprints that make the keys. Does not own: what is cached
//! (`gradient`).
//!
//! Invariant: every key holds everything the cached value depends on (the
//! stencil's weights, the axis and pitch, the fit window, the correlation
//! model, the validity pattern), so results never depend on which frames a
//! thread saw before.

use std::cell::RefCell;
use std::collections::hash_map::DefaultHasher;
use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hash, Hasher};
use std::rc::Rc;

use super::gradient::Grad;
use crate::stencil::correlation::Correlation;
use crate::stencil::Stencil;

thread_local! {
    /// Buffers of finished tensors, reused by the next frame on this thread
    /// (allocating and faulting in 16 grid-sized arrays per frame cost
    /// about a quarter of the stage's time).
    static POOL: RefCell<Vec<Vec<f64>>> = const { RefCell::new(Vec::new()) };
}

/// A NaN-filled buffer of `n` values, from the pool when one is there.
pub fn pooled(n: usize) -> Vec<f64> {
    let mut v = POOL.with(|p| p.borrow_mut().pop()).unwrap_or_default();
    v.clear();
    v.resize(n, f64::NAN);
    v
}

impl Grad {
    /// Gives the tensor's buffers back for reuse by later frames.
    pub fn recycle(self) {
        POOL.with(|p| {
            let mut p = p.borrow_mut();
            for a in self
                .val
                .into_iter()
                .chain(self.var)
                .chain(self.bias)
                .chain(self.bvar)
            {
                if p.len() < 64 && !a.is_empty() {
                    p.push(a.into_raw_vec_and_offset().0);
                }
            }
        });
    }
}

/// A stencil with its correlation gain, shared between nodes.
pub type Shared = Rc<(Stencil, f64)>;
type SlowCache = HashMap<(u64, u128), Option<Shared>, BuildHasherDefault<KeyHasher>>;

thread_local! {
    /// Slow-path stencils by (fingerprint of what they are made from,
    /// validity pattern around the node). Edge and mask patterns repeat
    /// from node to node and from frame to frame, so each fit is made once
    /// per thread. Cleared when it grows past `CACHE_MAX` entries.
    static CACHE: RefCell<SlowCache> = RefCell::new(HashMap::default());
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
const CACHE_MAX: usize = 200_000;

pub fn cached(
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
    CACHE.with(|c| {
        if let Some(hit) = c.borrow().get(&key) {
            return hit.clone();
        }
        let v = make().map(build);
        let mut c = c.borrow_mut();
        if c.len() >= CACHE_MAX {
            c.clear();
        }
        c.insert(key, v.clone());
        v
    })
}

pub fn corr_fingerprint(c: &Correlation) -> u64 {
    match *c {
        Correlation::Independent => 1,
        Correlation::Window(x) => 2 ^ x.to_bits().rotate_left(3),
        Correlation::Adjacent(x) => 3 ^ x.to_bits().rotate_left(7),
    }
}

/// A fingerprint of a stencil and the context it is used in.
pub fn fingerprint(tag: u8, s: &Stencil, extra: &[u64]) -> u64 {
    let mut h = DefaultHasher::new();
    tag.hash(&mut h);
    for t in &s.taps {
        (t.dj, t.di, t.w.to_bits()).hash(&mut h);
    }
    extra.hash(&mut h);
    h.finish()
}
