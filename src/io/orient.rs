//! Which way the input's y axis and its v component point.
//!
//! Owns: `[input] y_axis` and `v_axis` once resolved, the one place where
//! image-oriented input is turned into curlew's frame (x to the right, y
//! up, v positive along +y), and the sentence `check`, the manifest and the
//! report print about it. Does not own: parsing (`text`, `parquet`) or the
//! grid (`grid`).
//!
//! # Method
//!
//! Image coordinates grow downwards. Reading such a file as if y pointed
//! up mirrors the field, and every vorticity `dv/dx - du/dy` changes sign
//! without any other sign of trouble. With `y_axis = "down"` every row's
//! position is mapped `y -> -y`, and with `v_axis = "down"` (which follows
//! `y_axis` unless stated) every `v -> -v`, before the grid is inferred.
//! Negation is exact in IEEE 754 arithmetic (computed as `0 - a` so that
//! a written zero stays +0), so a frame written both ways
//! reduces to bit-identical outputs. The output's y is then minus the
//! file's y (its origin stays where the file had it).
//!
//! Edge behaviour: NaN stays NaN; uncertainties (`sigma_v`) are magnitudes
//! and are not negated.

use serde::Serialize;

use super::grid::RawRows;

/// The direction of y and of v in the input files.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
pub struct Orientation {
    /// y grows downwards in the files (image rows).
    pub y_down: bool,
    /// v is positive downwards in the files.
    pub v_down: bool,
    /// `y_axis` was written in the pipeline (else "up" was assumed).
    pub stated: bool,
}

impl Orientation {
    /// Maps the rows of one frame into curlew's frame (y up, v along +y).
    pub(crate) fn apply(&self, rows: &mut RawRows) {
        // `0.0 - a` is `-a` exactly, except that both zeros give +0: a
        // written "0" then reads the same both ways (no "-0" in outputs).
        if self.y_down {
            rows.y.iter_mut().for_each(|y| *y = 0.0 - *y);
        }
        if self.v_down {
            rows.v.iter_mut().for_each(|v| *v = 0.0 - *v);
        }
    }

    /// Maps one position given in the files' coordinates (a mask polygon's
    /// vertex, say) into curlew's frame, still in the file's unit.
    pub(crate) fn position(&self, x: f64, y: f64) -> (f64, f64) {
        (x, if self.y_down { 0.0 - y } else { y })
    }

    /// One sentence for `check`, the manifest and the report.
    pub fn describe(&self) -> String {
        let dir = |down: bool| if down { "down" } else { "up" };
        let how = if self.stated {
            "as stated in [input] y_axis"
        } else {
            "assumed: y_axis is not given"
        };
        let mut s = format!(
            "y axis {}, v positive {} ({how})",
            dir(self.y_down),
            dir(self.v_down)
        );
        if self.y_down {
            s.push_str("; outputs use y up, equal to minus the files' y");
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn down_negates_y_and_v_but_not_x_u_or_sigma() {
        let mut rows = RawRows {
            x: vec![1.0, 2.0],
            y: vec![3.0, -0.5],
            u: vec![0.1, 0.2],
            v: vec![0.3, f64::NAN],
            sigma_v: Some(vec![0.01, 0.02]),
            ..Default::default()
        };
        let o = Orientation {
            y_down: true,
            v_down: true,
            stated: true,
        };
        o.apply(&mut rows);
        assert_eq!(rows.x, vec![1.0, 2.0]);
        assert_eq!(rows.y, vec![-3.0, 0.5]);
        assert_eq!(rows.u, vec![0.1, 0.2]);
        assert_eq!(rows.v[0], -0.3);
        assert!(rows.v[1].is_nan());
        assert_eq!(rows.sigma_v, Some(vec![0.01, 0.02]));
        assert!(o.describe().contains("y axis down, v positive down"));
    }

    #[test]
    fn v_may_differ_from_y() {
        let mut rows = RawRows {
            y: vec![2.0],
            v: vec![0.5],
            ..Default::default()
        };
        let o = Orientation {
            y_down: true,
            v_down: false,
            stated: true,
        };
        o.apply(&mut rows);
        assert_eq!((rows.y[0], rows.v[0]), (-2.0, 0.5));
        assert!(!Orientation::default().describe().contains("stated"));
    }
}
