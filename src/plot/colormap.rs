//! curlew's own colour maps, built by piecewise-linear interpolation in
//! Oklab between chosen anchor colours.
//!
//! Method: Oklab (B. Ottosson, "A perceptual color space for image
//! processing", 2020, bottosson.github.io/posts/oklab) is close to
//! perceptually uniform, so equal steps of the map parameter give near-equal
//! perceived steps when the anchors are spaced evenly in lightness. Anchors
//! are given in OkLCh (lightness, chroma, hue in degrees).
//!
//! - `TIDE` (diverging, signed quantities): deep teal (L 0.32) through a
//!   warm off-white centre (L 0.97) to deep rust (L 0.32). Lightness is
//!   symmetric about the centre, so +a and -a look equally strong; use it
//!   with symmetric limits.
//! - `EMBER` (sequential, magnitudes): pale sand (L 0.97) through
//!   terracotta to deep aubergine (L 0.26); lightness falls monotonically.
//!
//! Edge behaviour: the parameter is clamped to [0, 1]; NaN maps to the
//! no-data grey `NO_DATA`. Anchors are chosen inside the sRGB gamut
//! (tested), so no channel clips.

use plotters::style::RGBColor;

/// An anchor in OkLCh: (L, C, h in degrees).
type Lch = (f64, f64, f64);

/// A colour map: anchors at evenly spaced parameter values.
pub(crate) struct Colormap {
    #[cfg_attr(not(test), allow(dead_code))] // names the map in the tests' messages
    pub name: &'static str,
    anchors: &'static [Lch],
}

pub(crate) const TIDE: Colormap = Colormap {
    name: "tide",
    anchors: &[
        (0.32, 0.060, 235.0),
        (0.55, 0.092, 222.0),
        (0.78, 0.072, 208.0),
        (0.97, 0.008, 85.0),
        (0.78, 0.075, 50.0),
        (0.55, 0.125, 38.0),
        (0.32, 0.085, 30.0),
    ],
};

pub(crate) const EMBER: Colormap = Colormap {
    name: "ember",
    anchors: &[
        (0.97, 0.025, 90.0),
        (0.83, 0.085, 75.0),
        (0.67, 0.125, 48.0),
        (0.50, 0.120, 20.0),
        (0.36, 0.095, 350.0),
        (0.26, 0.060, 330.0),
    ],
};

/// Colour of nodes without a value.
pub(crate) const NO_DATA: RGBColor = RGBColor(200, 200, 200);

fn lch_to_lab((l, c, h): Lch) -> [f64; 3] {
    let hr = h.to_radians();
    [l, c * hr.cos(), c * hr.sin()]
}

/// Oklab → linear sRGB (Ottosson 2020, the published M1⁻¹ / M2⁻¹ matrices).
pub(crate) fn oklab_to_linear_srgb([l, a, b]: [f64; 3]) -> [f64; 3] {
    let l_ = l + 0.396_337_777_4 * a + 0.215_803_757_3 * b;
    let m_ = l - 0.105_561_345_8 * a - 0.063_854_172_8 * b;
    let s_ = l - 0.089_484_177_5 * a - 1.291_485_548_0 * b;
    let (l3, m3, s3) = (l_ * l_ * l_, m_ * m_ * m_, s_ * s_ * s_);
    [
        4.076_741_662_1 * l3 - 3.307_711_591_3 * m3 + 0.230_969_929_2 * s3,
        -1.268_438_004_6 * l3 + 2.609_757_401_1 * m3 - 0.341_319_396_5 * s3,
        -0.004_196_086_3 * l3 - 0.703_418_614_7 * m3 + 1.707_614_701_0 * s3,
    ]
}

/// sRGB transfer function (IEC 61966-2-1), linear → encoded, in [0, 1].
fn encode(c: f64) -> f64 {
    if c <= 0.003_130_8 {
        12.92 * c
    } else {
        1.055 * c.powf(1.0 / 2.4) - 0.055
    }
}

impl Colormap {
    /// The Oklab colour at parameter `t` in [0, 1] (clamped).
    pub(crate) fn lab(&self, t: f64) -> [f64; 3] {
        let n = self.anchors.len() - 1;
        let s = t.clamp(0.0, 1.0) * n as f64;
        let k = (s.floor() as usize).min(n - 1);
        let f = s - k as f64;
        let a = lch_to_lab(self.anchors[k]);
        let b = lch_to_lab(self.anchors[k + 1]);
        [
            a[0] + f * (b[0] - a[0]),
            a[1] + f * (b[1] - a[1]),
            a[2] + f * (b[2] - a[2]),
        ]
    }

    /// The sRGB colour at `t`; NaN gives `NO_DATA`.
    pub(crate) fn at(&self, t: f64) -> RGBColor {
        if t.is_nan() {
            return NO_DATA;
        }
        let rgb = oklab_to_linear_srgb(self.lab(t));
        let q = |c: f64| (encode(c.clamp(0.0, 1.0)) * 255.0).round() as u8;
        RGBColor(q(rgb[0]), q(rgb[1]), q(rgb[2]))
    }

    /// The colour of `value` on the range `[lo, hi]`.
    pub(crate) fn map(&self, value: f64, lo: f64, hi: f64) -> RGBColor {
        if !value.is_finite() {
            return NO_DATA;
        }
        let t = if hi > lo {
            (value - lo) / (hi - lo)
        } else {
            0.5
        };
        self.at(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn oklab_white_is_white() {
        // Ottosson 2020: L = 1, a = b = 0 is sRGB white (1, 1, 1).
        let w = oklab_to_linear_srgb([1.0, 0.0, 0.0]);
        for c in w {
            crate::testutil::assert_close(c, 1.0, 1e-6, 0.0, "white");
        }
    }

    #[test]
    fn maps_stay_in_gamut_and_lightness_is_monotone() {
        for (map, diverging) in [(&TIDE, true), (&EMBER, false)] {
            let mut prev_l = None::<f64>;
            for k in 0..=200 {
                let t = k as f64 / 200.0;
                let rgb = oklab_to_linear_srgb(map.lab(t));
                for c in rgb {
                    assert!(
                        (-1e-3..=1.0 + 1e-3).contains(&c),
                        "{} at {t}: {rgb:?}",
                        map.name
                    );
                }
                let l = map.lab(t)[0];
                if let Some(p) = prev_l {
                    if diverging && t <= 0.5 {
                        assert!(l >= p - 1e-12, "{} L not rising at {t}", map.name);
                    } else {
                        assert!(l <= p + 1e-12, "{} L not falling at {t}", map.name);
                    }
                }
                prev_l = Some(l);
            }
        }
        // Symmetric lightness of the diverging map.
        for k in 0..=50 {
            let t = k as f64 / 100.0;
            crate::testutil::assert_close(
                TIDE.lab(t)[0],
                TIDE.lab(1.0 - t)[0],
                1e-12,
                0.0,
                "L sym",
            );
        }
        assert_eq!(TIDE.at(f64::NAN), NO_DATA);
    }
}
