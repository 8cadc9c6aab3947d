//! The random error of the vectors of one snapshot, estimated from the data.
//!
//! Owns: `estimate`. Does not own: how the estimate is used (`derive`).
//!
//! Method: the residual at the centre of a least-squares cubic fitted to
//! five consecutive vectors along a row or a column is
//! `r = (3/35) (f-2 - 4 f-1 + 6 f0 - 4 f1 + f2)` (derived from the
//! Savitzky-Golay smoothing weights (-3, 12, 17, 12, -3)/35), proportional to
//! the fourth difference `D4 = f-2 - 4 f-1 + 6 f0 - 4 f1 + f2`. A smooth flow
//! contributes `h^4 f''''` to it, which is small wherever the flow is
//! resolved; white noise of standard deviation `sigma` contributes variance
//! `70 sigma^2` (the fit's degrees of freedom: 1 + 16 + 36 + 16 + 1), or
//! `K sigma^2` with `K = sum_a sum_b w_a w_b rho(d_ab)` for correlated errors
//! (the correlation model of the plan). Every row and column position whose
//! five vectors are all valid measurements (status 0) gives one value per
//! component; the estimate is robust against the few large residuals at
//! vortex cores and remaining outliers through the median absolute value:
//! `sigma = 1.4826 median(|D4|) / sqrt(K)` (1.4826 = 1/Phi^-1(3/4), the MAD
//! consistency constant for Gaussian errors, common practice).
//!
//! Edge behaviour: replaced, filled and masked vectors never enter (they are
//! smooth by construction and would bias the estimate low). With fewer than
//! `MIN_SAMPLES` values the estimate is `None`.

use crate::field::{Field, VALID};
use crate::stencil::correlation::Correlation;
use crate::stencil::{Stencil, Tap};

/// The fewest fourth differences an estimate is made from.
pub const MIN_SAMPLES: usize = 20;

const D4: [f64; 5] = [1.0, -4.0, 6.0, -4.0, 1.0];

/// The random error (m/s, one value for both components) of the valid
/// vectors of `field`, or `None` when too few runs of five valid vectors
/// exist.
pub fn estimate(field: &Field, corr: &Correlation) -> Option<f64> {
    let (ny, nx) = field.status.dim();
    let u = field.u.as_standard_layout();
    let v = field.v.as_standard_layout();
    let (u, v) = (u.as_slice().unwrap(), v.as_slice().unwrap());
    let valid: Vec<bool> = field
        .status
        .iter()
        .zip(u.iter().zip(v))
        .map(|(&s, (a, b))| s == VALID && a.is_finite() && b.is_finite())
        .collect();
    // |D4| as the bits of a non-negative double: they order as the values
    // do, so the median selection compares integers (crate::robust).
    let mut r: Vec<u64> = Vec::with_capacity(4 * ny * nx);
    let d4 = |a: &[f64], k: usize, step: usize| {
        (a[k] - 4.0 * a[k + step] + 6.0 * a[k + 2 * step] - 4.0 * a[k + 3 * step] + a[k + 4 * step])
            .abs()
            .to_bits()
    };
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if i + 4 < nx && valid[k..k + 5].iter().all(|&b| b) {
                r.push(d4(u, k, 1));
                r.push(d4(v, k, 1));
            }
            if j + 4 < ny && (0..5).all(|m| valid[k + m * nx]) {
                r.push(d4(u, k, nx));
                r.push(d4(v, k, nx));
            }
        }
    }
    if r.len() < MIN_SAMPLES {
        return None;
    }
    let med = crate::robust::median_of_nonnegative_bits(&mut r);
    let d4 = Stencil::new(
        D4.iter()
            .enumerate()
            .map(|(k, &w)| Tap {
                dj: 0,
                di: k as i32 - 2,
                w,
            })
            .collect(),
    );
    Some(crate::robust::MAD_TO_SIGMA * med / corr.gain(&d4).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::derive::flows::lamb_oseen;
    use crate::field::Grid;
    use crate::testutil::{assert_close, rng};
    use ndarray::Array2;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn recovers_injected_noise_next_to_a_vortex_within_ten_percent() {
        // A Lamb-Oseen vortex, peak u_theta = 0.638 Gamma/(2 pi rc)
        // (Saffman 1992) = 0.51 m/s, core radius 4 pitches, in a 0.3 m/s
        // stream; noise 2 % and 5 % of the peak, independent and 50 %-overlap
        // correlated (top-hat average of white noise, docs/methods.md).
        let g = Grid {
            nx: 64,
            ny: 48,
            x0: 0.0,
            y0: 0.0,
            dx: 1e-3,
            dy: 1e-3,
        };
        let f = lamb_oseen(0.02, 4e-3, 0.03, 0.024, 0.3);
        let mut rng = rng(7);
        for sigma in [0.01, 0.025] {
            for overlap in [false, true] {
                let mut fld = Field::from_fn(g, &f);
                let n = Normal::new(0.0, 1.0).unwrap();
                let white = |rng: &mut rand_chacha::ChaCha8Rng| {
                    Array2::from_shape_fn((g.ny + 1, g.nx + 1), |_| n.sample(rng))
                };
                for a in [&mut fld.u, &mut fld.v] {
                    let e = white(&mut rng);
                    for j in 0..g.ny {
                        for i in 0..g.nx {
                            a[[j, i]] += sigma
                                * if overlap {
                                    0.5 * (e[[j, i]]
                                        + e[[j, i + 1]]
                                        + e[[j + 1, i]]
                                        + e[[j + 1, i + 1]])
                                } else {
                                    e[[j, i]]
                                };
                        }
                    }
                }
                let corr = if overlap {
                    Correlation::Window(0.5)
                } else {
                    Correlation::Independent
                };
                let est = estimate(&fld, &corr).unwrap();
                assert_close(
                    est,
                    sigma,
                    0.0,
                    0.10,
                    &format!("sigma {sigma} overlap {overlap}"),
                );
            }
        }
    }

    #[test]
    fn too_few_valid_runs_give_no_estimate() {
        let g = Grid {
            nx: 4,
            ny: 4,
            x0: 0.0,
            y0: 0.0,
            dx: 1.0,
            dy: 1.0,
        };
        let fld = Field::from_fn(g, |x, y| (x, y));
        assert!(estimate(&fld, &Correlation::Independent).is_none());
    }
}
