//! The validation chain in plain words, for `curlew check` and the report:
//! one phrase per test, in the order the chain runs (see the module doc of
//! `validate`), velocities in m/s and, where a calibration is known, in px
//! of displacement as well.

use super::{Bounds, Combine, EnsembleParams, Limits, MedianParams, Params, Shape};
use crate::describe::{num, percent};

/// A velocity in m/s, and in px when `px_velocity` (m/s per px of
/// displacement) is known: "0.005 m/s = 0.1 px".
fn speed(v: f64, px_velocity: Option<f64>) -> String {
    match px_velocity {
        Some(p) if p > 0.0 => format!("{} m/s = {} px", num(v, 3), num(v / p, 3)),
        _ => format!("{} m/s", num(v, 3)),
    }
}

impl Params {
    /// One phrase per step of the chain, in the order it runs; the last
    /// says when a whole frame is left out. `px_velocity`: m/s per px of
    /// displacement, when the input has a calibration.
    pub(crate) fn describe_steps(&self, px_velocity: Option<f64>) -> Vec<String> {
        let mut out = vec!["missing, NaN and flagged vectors marked invalid".to_string()];
        if let Some(l) = &self.limits {
            out.push(l.describe(px_velocity));
        }
        if let Some(e) = &self.ensemble {
            out.push(e.describe(px_velocity));
        }
        if let Some(m) = &self.median {
            out.push(m.describe(px_velocity));
        }
        if out.len() == 1 {
            out.push("no outlier test".into());
        }
        if let Some(f) = self.max_rejected_fraction {
            out.push(format!(
                "a frame with more than {} of its vectors invalid or rejected is left out of the statistics",
                percent(f)
            ));
        }
        out
    }

    /// The chain in one line: the steps joined by ", then ".
    #[cfg(test)]
    pub(crate) fn describe(&self, px_velocity: Option<f64>) -> String {
        self.describe_steps(px_velocity).join(", then ")
    }
}

impl MedianParams {
    /// "normalized median test (3 x 3, threshold 2, eps 0.005 m/s = 0.1 px,
    /// either component, at least 3 valid neighbours)".
    pub(crate) fn describe(&self, px_velocity: Option<f64>) -> String {
        let side = 2 * self.radius + 1;
        let eps = match self.eps_noise {
            Some(1.0) => {
                "eps = each frame's estimated noise (no calibration, no eps given)".to_string()
            }
            Some(k) => format!(
                "eps = {} x each frame's estimated noise (no calibration, no eps given)",
                num(k, 3)
            ),
            None => format!("eps {}", speed(self.eps, px_velocity)),
        };
        let combine = match self.combine {
            Combine::Either => "either component",
            Combine::Magnitude => "both components' residuals combined in magnitude",
        };
        format!(
            "normalized median test ({side} x {side}, threshold {}, {eps}, {combine}, at least {} valid neighbours)",
            num(self.threshold, 3),
            self.min_neighbours
        )
    }
}

impl Limits {
    /// "velocity limits (box: u -1 to 1 m/s, v -0.5 to 0.5 m/s)" or the
    /// robust form.
    pub(crate) fn describe(&self, px_velocity: Option<f64>) -> String {
        let shape = match self.shape {
            Shape::Box => "box",
            Shape::Ellipse => "ellipse",
        };
        match &self.bounds {
            Bounds::Given { u, v } => format!(
                "velocity limits ({shape}: u {} to {} m/s, v {} to {} m/s)",
                num(u[0], 4),
                num(u[1], 4),
                num(v[0], 4),
                num(v[1], 4)
            ),
            Bounds::Robust { spread, floor } => {
                let floor = if *floor > 0.0 {
                    format!(", each at least {}", speed(*floor, px_velocity))
                } else {
                    String::new()
                };
                format!(
                    "velocity limits ({shape}: the run's median ± {} robust standard deviations{floor})",
                    num(*spread, 3)
                )
            }
        }
    }
}

impl EnsembleParams {
    /// "ensemble test per node (beyond 5 robust standard deviations of the
    /// node's own distribution, floor 0.005 m/s = 0.1 px, nodes with at least
    /// 10 valid samples)".
    pub(crate) fn describe(&self, px_velocity: Option<f64>) -> String {
        format!(
            "ensemble test per node (beyond {} robust standard deviations of the node's own distribution, floor {}, nodes with at least {} valid samples)",
            num(self.k, 3),
            speed(self.floor, px_velocity),
            self.min_samples
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_chain_reads_in_si_and_px() {
        // 0.1 px at 2e-5 m/px and 4e-4 s: 0.005 m/s per 0.1 px.
        let p = Params {
            median: Some(MedianParams {
                eps: 0.1 * 2e-5 / 4e-4,
                ..MedianParams::default()
            }),
            ..Params::default()
        };
        let s = p.describe(Some(2e-5 / 4e-4));
        assert_eq!(
            s,
            "missing, NaN and flagged vectors marked invalid, then normalized median test \
             (3 x 3, threshold 2, eps 0.005 m/s = 0.1 px, either component, at least 3 valid neighbours)"
        );
        let noise = Params {
            median: Some(MedianParams {
                eps_noise: Some(1.0),
                ..MedianParams::default()
            }),
            ..Params::default()
        };
        assert!(noise
            .describe(None)
            .contains("eps = each frame's estimated noise (no calibration"));
    }

    #[test]
    fn every_test_and_the_frame_rule_appear_in_chain_order() {
        let p = Params {
            limits: Some(Limits {
                shape: Shape::Ellipse,
                bounds: Bounds::Given {
                    u: [-1.0, 2.5],
                    v: [-0.5, 0.5],
                },
            }),
            ensemble: Some(EnsembleParams {
                k: 4.0,
                floor: 0.01,
                min_samples: 12,
            }),
            median: Some(MedianParams {
                radius: 2,
                min_neighbours: 8,
                combine: Combine::Magnitude,
                ..MedianParams::default()
            }),
            max_rejected_fraction: Some(0.3),
            histogram_resolution: 0.002,
        };
        let steps = p.describe_steps(None);
        assert_eq!(steps.len(), 5, "{steps:?}");
        assert_eq!(
            steps[1],
            "velocity limits (ellipse: u -1 to 2.5 m/s, v -0.5 to 0.5 m/s)"
        );
        assert!(steps[2].starts_with("ensemble test per node (beyond 4 robust"));
        assert!(steps[2].contains("floor 0.01 m/s, nodes with at least 12"));
        assert!(steps[3].contains("(5 x 5, threshold 2, eps 0.1 m/s, both"));
        assert!(steps[4].contains("more than 30 % of its vectors"));
        let none = Params {
            median: None,
            ..Params::default()
        };
        assert_eq!(none.describe_steps(None)[1], "no outlier test");
    }
}
