//! Phase from the flow itself: each frame's phase read from the first pair
//! of POD coefficients, for periodic runs measured without a trigger.
//!
//! Method (van Oudheusden, Scarano, van Hinsberg & Watt 2005, Exp. Fluids
//! 39:86): for a periodic flow the first two modes form a pair with
//! a1 = sqrt(2 λ1) sin φ, a2 = sqrt(2 λ2) cos φ, so
//! φ = atan2(a1 / sqrt(2 λ1), a2 / sqrt(2 λ2)), in [0, 360) degrees. The
//! origin and the direction of φ are those of the modes' signs (fixed by
//! `finish`): the phase is defined up to a constant offset and a reflection,
//! as any phase without a trigger is.
//!
//! Is the pair a pair? Three checks, thresholds of our own choosing (stated
//! in docs/modes.md): the energy ratio λ2/λ1 ≥ 0.5; the frames lie on a
//! ring: the normalised radius r = sqrt(a1²/(2λ1) + a2²/(2λ2)) (1 for a
//! pure sinusoid) has a coefficient of variation ≤ 0.3 (a structureless
//! two-dimensional Gaussian cloud gives 0.52); and at most 5 % of the frames
//! fall inside r < 0.3 (the hole of the ring). A pair that fails is
//! reported with its reasons and its phases are not offered as a frame
//! table.

use std::path::Path;

use super::Pod;
use crate::error::{Error, Result};
use crate::io::{self, Table, Values};

/// The phase of every frame and the checks of the pair.
#[derive(Debug, Clone)]
pub struct PhaseEstimate {
    /// Per frame (in frame order): the phase read from a1 and a2, degrees
    /// in [0, 360) (`phase_deg` of `phase-from-modes.csv`).
    pub phase_deg: Vec<f64>,
    /// Normalised ring radius of every frame (1 on the ideal ring).
    pub radius: Vec<f64>,
    /// λ2/λ1; a pair needs at least 0.5.
    pub energy_ratio: f64,
    /// Coefficient of variation of the radius.
    pub radius_cv: f64,
    /// Fraction of frames with radius < 0.3.
    pub hole_fraction: f64,
    /// Why modes 1 and 2 are not a pair (empty: they are).
    pub failed: Vec<String>,
}

/// Thresholds of the pair checks (see the module doc).
pub(crate) const MIN_ENERGY_RATIO: f64 = 0.5;
pub(crate) const MAX_RADIUS_CV: f64 = 0.3;
pub(crate) const MAX_HOLE_FRACTION: f64 = 0.05;

/// Estimates every frame's phase from modes 1 and 2.
pub(crate) fn estimate(pod: &Pod) -> Result<PhaseEstimate> {
    if pod.energy.len() < 2 || pod.energy[1].partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
    {
        return Err(Error::data(
            "phase from the flow needs two POD modes with energy",
        ));
    }
    let (s1, s2) = ((2.0 * pod.energy[0]).sqrt(), (2.0 * pod.energy[1]).sqrt());
    let mut phase_deg = Vec::with_capacity(pod.n_frames);
    let mut radius = Vec::with_capacity(pod.n_frames);
    for a in &pod.coefficients {
        let (p, q) = (a[0] / s1, a[1] / s2);
        phase_deg.push(p.atan2(q).to_degrees().rem_euclid(360.0));
        radius.push(p.hypot(q));
    }
    let n = radius.len() as f64;
    let mean = radius.iter().sum::<f64>() / n;
    let var = radius.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    let radius_cv = var.sqrt() / mean;
    let hole_fraction = radius.iter().filter(|&&r| r < 0.3).count() as f64 / n;
    let energy_ratio = pod.energy[1] / pod.energy[0];
    let mut failed = Vec::new();
    if energy_ratio < MIN_ENERGY_RATIO {
        failed.push(format!(
            "energy ratio of modes 2 and 1 is {energy_ratio:.3} (a pair needs >= {MIN_ENERGY_RATIO})"
        ));
    }
    if radius_cv.is_nan() || radius_cv > MAX_RADIUS_CV {
        failed.push(format!(
            "the phase portrait is not a ring: radius varies by {:.0} % (a pair needs <= {:.0} %)",
            100.0 * radius_cv,
            100.0 * MAX_RADIUS_CV
        ));
    }
    if hole_fraction > MAX_HOLE_FRACTION {
        failed.push(format!(
            "{:.0} % of the frames lie near the centre of the phase portrait (a ring has <= {:.0} %)",
            100.0 * hole_fraction,
            100.0 * MAX_HOLE_FRACTION
        ));
    }
    Ok(PhaseEstimate {
        phase_deg,
        radius,
        energy_ratio,
        radius_cv,
        hole_fraction,
        failed,
    })
}

/// Writes the phases as a frame table (`frame, phase_deg`, and `time_s`
/// when every frame has a time), readable by `[[run]] frame_table`.
pub(crate) fn write_frame_table(
    path: &Path,
    pod: &Pod,
    est: &PhaseEstimate,
    names: &dyn Fn(u64) -> String,
) -> Result<()> {
    let mut t = Table::new();
    t.push(
        "frame",
        Values::Str(pod.frame_index.iter().map(|&i| names(i)).collect()),
    );
    if pod.frame_time.iter().all(Option::is_some) {
        t.push(
            "time_s",
            Values::F64(pod.frame_time.iter().map(|t| t.unwrap()).collect()),
        );
    }
    t.push("phase_deg", Values::F64(est.phase_deg.clone()));
    io::write_csv(path, &t)
}

/// Circular RMS difference (degrees) between two phase series after the
/// best constant offset and, when `reflect`, the better of the two
/// directions: sqrt(mean(wrap(a - b - offset)²)), the offset the circular
/// mean of the differences. For checks against a known phase.
pub fn circular_rms(a: &[f64], b: &[f64], reflect: bool) -> f64 {
    let rms = |sign: f64| {
        let d: Vec<f64> = a
            .iter()
            .zip(b)
            .map(|(x, y)| (sign * x - y).to_radians())
            .collect();
        let (s, c) = d
            .iter()
            .fold((0.0, 0.0), |(s, c), x| (s + x.sin(), c + x.cos()));
        let off = s.atan2(c);
        let w = |x: f64| {
            (x - off + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU)
                - std::f64::consts::PI
        };
        (d.iter().map(|&x| w(x).powi(2)).sum::<f64>() / d.len() as f64)
            .sqrt()
            .to_degrees()
    };
    if reflect {
        rms(1.0).min(rms(-1.0))
    } else {
        rms(1.0)
    }
}
