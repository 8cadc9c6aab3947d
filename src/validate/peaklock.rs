//! A peak-locking diagnostic: how strongly the sub-pixel parts of the
//! measured displacements cluster.
//!
//! This statistic is curlew's own, not a published peak-locking metric: it
//! applies the Rayleigh test of circular statistics to the displacement
//! modulo one pixel.
//!
//! # Method
//!
//! For every valid vector, each component's displacement in px, `d = u /
//! px_velocity` (px_velocity = pixel size / pulse separation), is reduced
//! to its sub-pixel part `f = d - round(d)` in [-0.5, 0.5). Treating `2 pi f`
//! as an angle, the mean resultant length is
//!
//! ```text
//! R = | (1/n) sum exp(2 pi i d) |        (0 <= R <= 1)
//! ```
//!
//! R is near 0 when sub-pixel parts are spread evenly and tends to 1 when
//! they pile up at one value (integer displacements: peak locking). The
//! Rayleigh test of uniformity (Zar, *Biostatistical Analysis*, from memory)
//! with Z = n R^2 gives
//!
//! ```text
//! p = exp(-Z) (1 + (2Z - Z^2)/(4n) - (24Z - 132Z^2 + 76Z^3 - 9Z^4)/(288 n^2))
//! ```
//!
//! clamped to [0, 1]. With the millions of vectors of a run p is tiny even
//! for a harmless R, so the warning uses the effect size: it is raised when
//! R > `WARN_R` (0.1) and p < 0.001. A flow whose displacements barely vary
//! (a uniform stream) also gives a large R without any locking; when more
//! than half of the displacements round to one integer the result is marked
//! inconclusive and no warning is raised.
//!
//! Accumulation is exact and mergeable: sub-pixel parts go into 1000 integer
//! bins (R is computed from bin centres, which biases it by a factor
//! sinc(pi/1000) = 1 - 1.6e-6), integer parts into a histogram over
//! [-256, 256] px (clamped at the ends).

/// R above which (with p < 0.001) a run gets a peak-locking warning.
pub(crate) const WARN_R: f64 = 0.1;
const FINE: usize = 1000;
const INT_HALF: i64 = 256;

/// Mergeable accumulator of sub-pixel displacement parts (integer counts:
/// merging is exact, and the partial files of shards carry it).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub(crate) struct PeakLockAcc {
    px_velocity: f64,
    fine: Vec<u64>,
    ints: Vec<u64>,
}

/// The diagnostic of a run.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub(crate) struct PeakLock {
    /// Displacement components counted (two per valid vector).
    pub n: u64,
    pub r: f64,
    pub p_value: f64,
    /// (bin centre in px, fraction of samples) over [-0.5, 0.5), 20 bins.
    pub histogram: Vec<(f64, f64)>,
    /// More than half of the displacements round to one integer: R says
    /// more about the flow than about the correlation.
    pub inconclusive: bool,
    pub warning: Option<String>,
}

impl PeakLockAcc {
    /// `px_velocity`: m/s per pixel of displacement.
    pub(crate) fn new(px_velocity: f64) -> Self {
        PeakLockAcc {
            px_velocity,
            fine: vec![0; FINE],
            ints: vec![0; (2 * INT_HALF + 1) as usize],
        }
    }

    /// Adds the valid vectors (status 0, finite) of one frame.
    pub(crate) fn push(&mut self, field: &crate::field::Field) {
        let (st, u, v) = (
            field.status.as_slice().expect("standard layout"),
            field.u.as_slice().expect("standard layout"),
            field.v.as_slice().expect("standard layout"),
        );
        for ((&s, &u), &v) in st.iter().zip(u).zip(v) {
            if s == crate::field::VALID && u.is_finite() && v.is_finite() {
                self.add(u / self.px_velocity);
                self.add(v / self.px_velocity);
            }
        }
    }

    /// Adds one displacement in px.
    #[inline]
    pub(crate) fn add(&mut self, d: f64) {
        let r = round_half_away(d);
        let f = d - r; // [-0.5, 0.5]
        let b = (((f + 0.5) * FINE as f64) as usize).min(FINE - 1);
        self.fine[b] += 1;
        let ri = (r as i64).clamp(-INT_HALF, INT_HALF) + INT_HALF;
        self.ints[ri as usize] += 1;
    }

    pub(crate) fn merge(&mut self, later: PeakLockAcc) {
        for (a, b) in self.fine.iter_mut().zip(later.fine) {
            *a += b;
        }
        for (a, b) in self.ints.iter_mut().zip(later.ints) {
            *a += b;
        }
    }

    pub(crate) fn finish(&self) -> PeakLock {
        let n: u64 = self.fine.iter().sum();
        let (mut c, mut s) = (0.0, 0.0);
        for (b, &k) in self.fine.iter().enumerate() {
            let f = (b as f64 + 0.5) / FINE as f64 - 0.5;
            let a = 2.0 * std::f64::consts::PI * f;
            c += k as f64 * a.cos();
            s += k as f64 * a.sin();
        }
        let nf = n as f64;
        let r = if n > 0 {
            (c * c + s * s).sqrt() / nf
        } else {
            f64::NAN
        };
        let p_value = if n > 0 { rayleigh_p(r, nf) } else { f64::NAN };
        let per = FINE / 20;
        let histogram = (0..20)
            .map(|h| {
                let k: u64 = self.fine[h * per..(h + 1) * per].iter().sum();
                (
                    (h as f64 + 0.5) / 20.0 - 0.5,
                    if n > 0 { k as f64 / nf } else { 0.0 },
                )
            })
            .collect();
        let top = self.ints.iter().copied().max().unwrap_or(0);
        let inconclusive = n > 0 && 2 * top > n;
        let warning = (!inconclusive && r > WARN_R && p_value < 1e-3).then(|| {
            format!(
                "sub-pixel displacements cluster (R = {r:.3} > {WARN_R}, Rayleigh p = {p_value:.1e}, \
                 n = {n}): possible peak locking; see the sub-pixel histogram"
            )
        });
        PeakLock {
            n,
            r,
            p_value,
            histogram,
            inconclusive,
            warning,
        }
    }
}

/// Rayleigh-test p-value for mean resultant length `r` of `n` angles
/// (Zar's small-sample correction, from memory), clamped to [0, 1].
pub(crate) fn rayleigh_p(r: f64, n: f64) -> f64 {
    let z = n * r * r;
    let p = (-z).exp()
        * (1.0 + (2.0 * z - z * z) / (4.0 * n)
            - (24.0 * z - 132.0 * z * z + 76.0 * z.powi(3) - 9.0 * z.powi(4)) / (288.0 * n * n));
    p.clamp(0.0, 1.0)
}

/// `x.round()` (half away from zero) for finite `x`, without the libm call
/// that `round` is on the x86_64 base instruction set (no SSE4.1): the
/// truncation to an integer is exact below 2^52, and above it every double
/// is already an integer. No branch on the fraction: sub-pixel parts are
/// random, so such a branch would be mispredicted about every other time.
#[inline]
fn round_half_away(x: f64) -> f64 {
    if x.abs() >= 4.0e15 {
        return x;
    }
    let t = x as i64 as f64; // toward zero, exact
    let f = x - t; // exact: |f| < 1 and x, t share the exponent range
    t + f64::from(u8::from(f >= 0.5)) - f64::from(u8::from(f <= -0.5))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounding_equals_std_round() {
        let mut r = crate::testutil::rng(5);
        let mut xs = vec![
            0.5,
            -0.5,
            1.5,
            -2.5,
            0.49999999999999994,
            -0.49999999999999994,
            4.5e15 + 1.0,
            -0.0,
            1e300,
        ];
        for _ in 0..100_000 {
            let x: f64 = rand::Rng::random_range(&mut r, -40.0..40.0);
            xs.push(x);
            xs.push((x * 2.0).round() / 2.0);
        }
        for x in xs {
            assert_eq!(round_half_away(x), x.round(), "{x}");
        }
    }
    use crate::testutil::{assert_close, rng};
    use rand::Rng;

    #[test]
    fn uniform_subpixel_parts_give_small_r_and_no_warning() {
        let mut r = rng(5);
        let mut a = PeakLockAcc::new(1.0);
        for _ in 0..20000 {
            a.add(r.random_range(-8.0..8.0));
        }
        let pl = a.finish();
        // R of n uniform angles is about sqrt(pi/(4n)) = 0.0063 (derived)
        assert!(pl.r < 0.03, "R = {}", pl.r);
        assert!(pl.p_value > 1e-3);
        assert!(pl.warning.is_none() && !pl.inconclusive);
    }

    #[test]
    fn locked_displacements_warn_and_r_matches_the_wrapped_normal() {
        // d = integer + N(0, 0.1): R = exp(-(2 pi 0.1)^2 / 2) = 0.8208 (derived,
        // characteristic function of the normal)
        let mut r = rng(6);
        let nd = rand_distr::Normal::new(0.0, 0.1).unwrap();
        let mut a = PeakLockAcc::new(0.5);
        let mut b = PeakLockAcc::new(0.5);
        for k in 0..40000 {
            let d = r.random_range(-6i32..6) as f64 + rand_distr::Distribution::sample(&nd, &mut r);
            // u = d * px_velocity
            if k % 2 == 0 {
                a.add(d)
            } else {
                b.add(d)
            }
        }
        a.merge(b);
        let pl = a.finish();
        assert_close(
            pl.r,
            (-(2.0 * std::f64::consts::PI * 0.1f64).powi(2) / 2.0).exp(),
            0.01,
            0.0,
            "R",
        );
        assert!(pl.warning.is_some());
        assert_eq!(pl.n, 40000);
    }

    #[test]
    fn rayleigh_p_for_known_values() {
        // large n: p -> exp(-Z) (Zar, from memory); Z = 3 -> 0.0498
        assert_close(
            rayleigh_p((3.0f64 / 1e6).sqrt(), 1e6),
            (-3.0f64).exp(),
            1e-6,
            0.0,
            "large n",
        );
        assert_eq!(rayleigh_p(0.0, 10.0), 1.0);
    }
}
