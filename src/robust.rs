//! Robust statistics of samples: median, quantiles and the median absolute
//! deviation, with one convention used by every stage.
//!
//! Owns: the order statistics of a plain sample of finite values held in
//! memory. Does not own: the binned median and MAD of the ensemble test
//! (`validate::ensemble`, which inverts an interpolated histogram because
//! it never holds the samples), nor the fast fixed-size median of the
//! normalized median test (`validate::median`, a sorting network checked
//! against [`median`] by its tests).
//!
//! Convention (common practice; numpy.median and numpy.quantile's default
//! "linear" method, Hyndman & Fan 1996 definition 7): the sorted sample
//! x(0) <= ... <= x(n-1) has the `q` quantile at position h = q (n - 1),
//! linearly interpolated between x(floor h) and x(ceil h). The median is
//! the 0.5 quantile: the middle value for odd n, the mean of the two middle
//! values for even n. The MAD is the median of |x - median(x)|;
//! [`MAD_TO_SIGMA`] scales it to a standard deviation for normal data.
//!
//! Edge behaviour: an empty sample gives NaN. Values are ordered with
//! `f64::total_cmp`; callers pass finite values (a NaN would sort to an
//! end and be counted). Selection is O(n) and reorders the slice in place;
//! nothing allocates.

/// 1 / Phi^-1(3/4): the MAD times this is a consistent estimate of the
/// standard deviation of normal data (Hampel 1974; common practice).
pub const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// The median of `v` (mean of the two middle values for an even count),
/// reordering `v`; NaN when empty.
pub fn median(v: &mut [f64]) -> f64 {
    quantile(v, 0.5)
}

/// The `q` quantile (clamped to 0..1) of `v` by linear interpolation
/// between order statistics (see the module convention), reordering `v`;
/// NaN when empty.
pub fn quantile(v: &mut [f64], q: f64) -> f64 {
    let n = v.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = q.clamp(0.0, 1.0) * (n - 1) as f64;
    let lo = h as usize; // h >= 0: truncation is the floor
    let (_, x_lo, right) = v.select_nth_unstable_by(lo, f64::total_cmp);
    let x_lo = *x_lo;
    let frac = h - lo as f64;
    if frac == 0.0 || right.is_empty() {
        return x_lo;
    }
    // x(lo + 1) is the smallest value right of the selected one.
    let x_hi = right.iter().copied().fold(f64::INFINITY, f64::min);
    if frac == 0.5 {
        // The median of an even count: exactly (a + b) / 2 as numpy.median.
        0.5 * (x_lo + x_hi)
    } else {
        x_lo + frac * (x_hi - x_lo)
    }
}

/// The median of the finite values of an iterator; NaN when none is finite.
pub fn median_of(v: impl Iterator<Item = f64>) -> f64 {
    let mut s: Vec<f64> = v.filter(|x| x.is_finite()).collect();
    median(&mut s)
}

/// The `q` quantile of the finite values of an iterator; NaN when none is
/// finite.
pub fn quantile_of(v: impl Iterator<Item = f64>, q: f64) -> f64 {
    let mut s: Vec<f64> = v.filter(|x| x.is_finite()).collect();
    quantile(&mut s, q)
}

/// (median, MAD) of `v`: the MAD is the raw median of |x - median|, not
/// scaled (multiply by [`MAD_TO_SIGMA`] for a standard deviation).
/// Overwrites `v` with the absolute deviations; NaN, NaN when empty.
pub fn median_mad(v: &mut [f64]) -> (f64, f64) {
    let m = median(v);
    v.iter_mut().for_each(|x| *x = (*x - m).abs());
    (m, median(v))
}

/// The median of non-negative finite values given as their IEEE 754 bit
/// patterns (for non-negative floats the integer order is the value order,
/// and integer selection is faster), reordering `bits`; NaN when empty.
/// Same convention as [`median`].
pub fn median_of_nonnegative_bits(bits: &mut [u64]) -> f64 {
    let n = bits.len();
    if n == 0 {
        return f64::NAN;
    }
    let (left, m, _) = bits.select_nth_unstable(n / 2);
    let m = f64::from_bits(*m);
    if n % 2 == 1 {
        return m;
    }
    let l = f64::from_bits(left.iter().copied().max().unwrap_or(0));
    0.5 * (l + m)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::rng;
    use rand::Rng;

    /// The plain definition: sort, then interpolate at q (n - 1).
    fn by_sorting(v: &[f64], q: f64) -> f64 {
        let mut s = v.to_vec();
        s.sort_by(f64::total_cmp);
        let h = q * (s.len() - 1) as f64;
        let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
        s[lo] + (h - lo as f64) * (s[hi] - s[lo])
    }

    #[test]
    fn numpy_median_convention_for_even_and_odd_counts() {
        // numpy.median([1, 2, 3, 4]) = 2.5; numpy.median([3, 1, 2]) = 2
        // (common practice, the documented numpy convention).
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&mut [7.0]), 7.0);
        assert!(median(&mut []).is_nan());
        // numpy.quantile([1, 2, 3, 4], 0.25) = 1.75 ("linear", definition 7).
        assert_eq!(quantile(&mut [4.0, 3.0, 2.0, 1.0], 0.25), 1.75);
        assert_eq!(quantile(&mut [4.0, 3.0, 2.0, 1.0], 1.0), 4.0);
        assert_eq!(quantile(&mut [4.0, 3.0, 2.0, 1.0], 0.0), 1.0);
        // MAD of 1, 1, 2, 2, 4, 6, 9: median 2, |deviations| 1 1 0 0 2 4 7,
        // MAD 1 (the usual textbook example).
        let mut v = [1.0, 1.0, 2.0, 2.0, 4.0, 6.0, 9.0];
        assert_eq!(median_mad(&mut v), (2.0, 1.0));
    }

    #[test]
    fn selection_equals_the_sorted_definition() {
        let mut r = rng(5);
        for n in 1..40 {
            let v: Vec<f64> = (0..n).map(|_| r.random_range(-3.0..3.0)).collect();
            for q in [0.0, 0.1, 0.25, 0.5, 0.75, 0.9, 0.998, 1.0] {
                let got = quantile(&mut v.clone(), q);
                let want = by_sorting(&v, q);
                assert!((got - want).abs() <= 1e-15 * want.abs(), "n {n} q {q}");
            }
            let want = by_sorting(&v, 0.5);
            assert_eq!(median(&mut v.clone()), want, "n {n}");
            let abs: Vec<f64> = v.iter().map(|x| x.abs()).collect();
            let mut bits: Vec<u64> = abs.iter().map(|x| x.to_bits()).collect();
            assert_eq!(
                median_of_nonnegative_bits(&mut bits),
                median(&mut abs.clone())
            );
        }
    }

    #[test]
    fn the_scale_factor_is_the_inverse_normal_quartile() {
        // Phi^-1(0.75) = 0.6744897501960817 (statrs; tables give 0.67449).
        use statrs::distribution::{ContinuousCDF, Normal};
        let z = Normal::new(0.0, 1.0).unwrap().inverse_cdf(0.75);
        assert!((MAD_TO_SIGMA - 1.0 / z).abs() < 1e-12, "{}", 1.0 / z);
    }
}
