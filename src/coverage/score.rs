//! Scoring reported uncertainties against actual errors: coverage and width.
//!
//! Owns: the two numbers the study reports for every uncertainty column
//! and the targets they are judged by. Does not own: where the errors come
//! from (`cell`) or how they are tabled (`study`).
//!
//! # The two numbers
//!
//! Given pairs `(e, u)` of an actual error and the reported standard
//! uncertainty of the same value:
//!
//! - **coverage** at `k = 2`: the fraction of pairs with `|e| <= k u`. For a
//!   Gaussian error whose standard deviation is `u` it is
//!   `erf(2/sqrt 2) = 0.9545` (GUM, JCGM 100:2008, G.1.3 and table G.1:
//!   k = 2 gives 95.45 %).
//! - **width ratio**: the median of the reported `u` over the root mean
//!   square of the actual `e`, `median(u) / rms(e)`. It is 1 when the
//!   uncertainty has the right size; coverage alone cannot tell a right
//!   interval from one much too wide (100 % coverage).
//!
//! A column that reports an *expanded* uncertainty at 95 % (`*_p95`) is
//! scored with `k = 1` and its ratio is taken against `1.96 rms(e)` (the
//! normal 97.5 % quantile; common practice).
//!
//! Pairs where either number is NaN or infinite are left out (an unknown
//! uncertainty is not scored as zero), and their count is reported.
//!
//! # Targets
//!
//! Coverage 0.93 to 0.97 and ratio 0.8 to 1.25 (the issue that asked for
//! the study). The sampling error of a coverage over `n` independent pairs
//! is `sqrt(p (1 - p) / n)` (binomial); errors at neighbouring nodes are
//! correlated, so the effective `n` is smaller than the count of pairs.

/// Target band of the k = 2 coverage.
pub(crate) const COVERAGE_TARGET: (f64, f64) = (0.93, 0.97);
/// Target band of the width ratio.
pub(crate) const RATIO_TARGET: (f64, f64) = (0.8, 1.25);
/// Normal 97.5 % quantile, for expanded (p95) columns.
pub(crate) const Z95: f64 = 1.959_963_984_540_054;

/// Coverage and width of one uncertainty column against its actual errors.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Score {
    /// Pairs scored (both numbers finite).
    pub n: usize,
    /// Pairs left out (an unknown error or uncertainty).
    pub n_unknown: usize,
    /// Fraction with `|e| <= k u`.
    pub coverage: f64,
    /// `median(u) / (scale rms(e))`.
    pub ratio: f64,
    /// Root mean square of the actual errors.
    pub rms_error: f64,
    /// Median of the reported uncertainties.
    pub median_unc: f64,
}

/// How a column is read: standard (`k = 2`, scale 1) or expanded at 95 %
/// (`k = 1`, scale 1.96).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Reading {
    /// A standard uncertainty (`*_unc`): covered when |error| <= 2 u.
    Standard,
    /// An expanded uncertainty at 95 % (`*_unc_p95`): covered when
    /// |error| <= U, the ratio taken against U / 1.96.
    Expanded95,
    /// The "errors" are per-node RMS errors already (an RMS over frames):
    /// the ratio is scored, the coverage is not (NaN).
    WidthOnly,
}

impl Reading {
    /// `(k, scale)` of the reading.
    pub(crate) fn factors(self) -> (f64, f64) {
        match self {
            Reading::Standard | Reading::WidthOnly => (2.0, 1.0),
            Reading::Expanded95 => (1.0, Z95),
        }
    }
}

/// Scores `(error, uncertainty)` pairs (module doc). With no finite pair,
/// coverage and ratio are NaN.
pub fn score(pairs: impl IntoIterator<Item = (f64, f64)>, reading: Reading) -> Score {
    let (k, scale) = reading.factors();
    let (mut n, mut unknown, mut inside, mut se) = (0usize, 0usize, 0usize, 0.0f64);
    let mut us = Vec::new();
    for (e, u) in pairs {
        if !(e.is_finite() && u.is_finite()) {
            unknown += 1;
            continue;
        }
        n += 1;
        inside += (e.abs() <= k * u) as usize;
        se += e * e;
        us.push(u);
    }
    let median_unc = median(&mut us);
    let rms_error = if n > 0 {
        (se / n as f64).sqrt()
    } else {
        f64::NAN
    };
    Score {
        n,
        n_unknown: unknown,
        coverage: if n > 0 && reading != Reading::WidthOnly {
            inside as f64 / n as f64
        } else {
            f64::NAN
        },
        ratio: median_unc / (scale * rms_error),
        rms_error,
        median_unc,
    }
}

/// The median (mean of the two middle values for an even count); NaN when
/// empty. Reorders `v`.
pub(crate) fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

/// The verdict on a score.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Both numbers in their target bands.
    Meets,
    /// Covers too little, or too narrow: the uncertainty is optimistic.
    TooSmall,
    /// Covers too much, or too wide: the uncertainty is pessimistic.
    TooLarge,
    /// Coverage and width disagree (one too small, the other too large),
    /// e.g. heavy-tailed errors.
    Mixed,
    /// Nothing to score.
    Unknown,
}

impl Verdict {
    pub(crate) fn name(self) -> &'static str {
        match self {
            Verdict::Meets => "meets",
            Verdict::TooSmall => "too small",
            Verdict::TooLarge => "too large",
            Verdict::Mixed => "mixed",
            Verdict::Unknown => "unknown",
        }
    }
}

/// Judges a score against the targets. Coverage may be NaN (a column
/// scored for width only); then the ratio alone decides.
pub fn verdict(s: &Score) -> Verdict {
    if !s.ratio.is_finite() {
        return Verdict::Unknown;
    }
    let side = |x: f64, (lo, hi): (f64, f64)| {
        if x.is_nan() {
            0
        } else if x < lo {
            -1
        } else if x > hi {
            1
        } else {
            0
        }
    };
    match (
        side(s.coverage, COVERAGE_TARGET),
        side(s.ratio, RATIO_TARGET),
    ) {
        (0, 0) => Verdict::Meets,
        (a, b) if a <= 0 && b <= 0 => Verdict::TooSmall,
        (a, b) if a >= 0 && b >= 0 => Verdict::TooLarge,
        _ => Verdict::Mixed,
    }
}

/// Two binomial standard errors of a coverage `p` over `n` independent pairs.
#[cfg(test)]
pub(crate) fn coverage_tolerance(p: f64, n: usize) -> f64 {
    2.0 * (p * (1.0 - p) / n.max(1) as f64).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal, StandardNormal};

    #[test]
    fn gaussian_errors_with_the_right_sigma_cover_95_45_percent_with_ratio_one() {
        // Known by construction: e ~ N(0, sigma_i) with u_i = sigma_i
        // (sigma varying over "nodes"); coverage = erf(sqrt 2) = 0.954500
        // (GUM G.1.3); median(u)/rms(e) = median(sigma)/sqrt(mean sigma²).
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let n = 200_000;
        let sig: Vec<f64> = (0..n).map(|i| 0.5 + (i % 7) as f64 * 0.1).collect();
        let pairs: Vec<(f64, f64)> = sig
            .iter()
            .map(|&s| {
                (
                    s * {
                        let z: f64 = StandardNormal.sample(&mut rng);
                        z
                    },
                    s,
                )
            })
            .collect();
        let sc = score(pairs.iter().copied(), Reading::Standard);
        let tol = coverage_tolerance(0.9545, n);
        assert!((sc.coverage - 0.954_500).abs() < 1.5 * tol, "{sc:?}");
        let want = 0.8 / (sig.iter().map(|s| s * s).sum::<f64>() / n as f64).sqrt();
        assert!((sc.ratio - want).abs() < 0.01, "{} vs {want}", sc.ratio);
        assert_eq!(verdict(&sc), Verdict::Meets);
        // the same errors read as p95 columns (U = 1.96 sigma): 95.0 %
        let p95: Vec<(f64, f64)> = pairs.iter().map(|&(e, s)| (e, Z95 * s)).collect();
        let sc = score(p95, Reading::Expanded95);
        assert!((sc.coverage - 0.95).abs() < 1.5 * tol, "{sc:?}");
        assert!((sc.ratio - want).abs() < 0.01);
    }

    #[test]
    fn too_wide_and_too_narrow_uncertainties_are_told_apart() {
        // u = 3 sigma: coverage erf(6/sqrt 2) ~ 1, ratio 3; u = sigma/2:
        // coverage erf(1/sqrt 2) = 0.6827 (one sigma), ratio 0.5
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        let nrm = Normal::new(0.0, 2.0).unwrap();
        let e: Vec<f64> = (0..100_000).map(|_| nrm.sample(&mut rng)).collect();
        let wide = score(e.iter().map(|&x| (x, 6.0)), Reading::Standard);
        assert!(wide.coverage > 0.999 && (wide.ratio - 3.0).abs() < 0.03);
        assert_eq!(verdict(&wide), Verdict::TooLarge);
        let narrow = score(e.iter().map(|&x| (x, 1.0)), Reading::Standard);
        assert!((narrow.coverage - 0.6827).abs() < 0.005, "{narrow:?}");
        assert!((narrow.ratio - 0.5).abs() < 0.01);
        assert_eq!(verdict(&narrow), Verdict::TooSmall);
    }

    #[test]
    fn unknown_values_are_left_out_and_counted_never_taken_as_zero() {
        let sc = score(
            [(1.0, 1.0), (f64::NAN, 1.0), (0.5, f64::NAN), (-3.0, 1.0)],
            Reading::Standard,
        );
        assert_eq!((sc.n, sc.n_unknown), (2, 2));
        assert_eq!(sc.coverage, 0.5);
        assert!((sc.rms_error - 5f64.sqrt()).abs() < 1e-12);
        let none = score(std::iter::empty(), Reading::Standard);
        assert!(none.coverage.is_nan() && none.ratio.is_nan());
        assert_eq!(verdict(&none), Verdict::Unknown);
        assert_eq!(median(&mut [3.0, 1.0, 2.0, 10.0]), 2.5);
    }
}
