//! The frequency of a periodic run from its frames' phases and times.
//!
//! Frequency estimate: frames with both `time_s` and `phase_deg`, in time
//! order; each phase step is unwrapped into [−180°, 180°) and the
//! cumulative phase φ(t) is fitted by least squares, f = (dφ/dt)/360°
//! (common practice). It assumes more than two frames per period: with
//! slower, phase-locked sampling the unwrapped steps alias and the
//! estimate is wrong, so give `frequency` in `[run.conditions]` then. No
//! estimate (None) with fewer than 3 such frames, a non-positive slope, or
//! an rms residual above 30° (phases not linear in time).

/// The least-squares frequency of (time, phase in degrees) samples (see the
/// module doc); sorts `tp` by time.
pub(crate) fn estimate_frequency(tp: &mut [(f64, f64)]) -> Option<f64> {
    if tp.len() < 3 {
        return None;
    }
    tp.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut cum = Vec::with_capacity(tp.len());
    let mut acc = tp[0].1;
    cum.push(acc);
    for w in tp.windows(2) {
        let step = (w[1].1 - w[0].1 + 180.0).rem_euclid(360.0) - 180.0;
        acc += step;
        cum.push(acc);
    }
    let n = tp.len() as f64;
    let tm = tp.iter().map(|p| p.0).sum::<f64>() / n;
    let pm = cum.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (p, c) in tp.iter().zip(&cum) {
        sxy += (p.0 - tm) * (c - pm);
        sxx += (p.0 - tm) * (p.0 - tm);
    }
    if sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let rms = (tp
        .iter()
        .zip(&cum)
        .map(|(p, c)| (c - pm - slope * (p.0 - tm)).powi(2))
        .sum::<f64>()
        / n)
        .sqrt();
    (slope > 0.0 && rms <= 30.0).then_some(slope / 360.0)
}
