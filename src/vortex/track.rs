//! Tracking cores from slice to slice (phase bins in order, or frames),
//! and what the tracks measure: convection velocity and core growth.
//!
//! Owns: `Track`, `track`, `line_fit`. Does not own: the cores (`core`).
//!
//! Method (nearest neighbour with a gate and a predicted position, common
//! practice in particle and vortex tracking):
//! 1. The typical displacement per step: the median over consecutive slices
//!    of the displacement from each core to the nearest core of the same
//!    sign in the next slice (x and y medians apart).
//! 2. Each track's predicted position in the next slice is its last
//!    position plus its last displacement (plus the typical displacement
//!    when it has one point). Pairs (track, core of the same sign) closer
//!    than `gate` pitches to the prediction are matched, closest first,
//!    each track and core once. Unmatched cores start tracks; unmatched
//!    tracks end (no gaps are bridged).
//! 3. Phase bins are periodic: a track ending in the last bin continues
//!    with a track starting in bin 0 one period later, when that one is
//!    within the gate of its prediction (never with itself).
//!
//! Convection velocity: least-squares lines `x(t)`, `y(t)` through the
//! centroids weighted by `1 / u(x)^2`, with `t = phase / (2 pi f)` for bins;
//! slope uncertainty `1 / sqrt(sum w (t - t_w)^2)`, scaled by
//! `sqrt(chi2 / (n - 2))` when the scatter exceeds the weights (Birge
//! ratio; common practice). Core growth: the same line through the fitted
//! `rc^2` (Lamb-Oseen: `rc^2 = rc0^2 + 4 nu t`, Saffman 1992), so
//! `growth / 4` is an apparent viscosity. At least 3 points with times;
//! cores that touch the end of the data (`Core::edge`) are left out of
//! both fits, since their centroids are pulled inward.

use super::SliceCores;

/// One point of a track.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrackPoint {
    /// Index into the slice sequence given to `track`.
    pub slice: usize,
    /// Index of the core in its slice.
    pub core: usize,
    /// Time, s, unwrapped over periods (NaN when unknown).
    pub time_s: f64,
}

/// A fitted line's slope with its standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Slope {
    /// The slope, in the unit of the fitted quantity per second.
    pub value: f64,
    /// Its standard uncertainty (Birge-scaled when the scatter exceeds the
    /// weights), same unit.
    pub unc: f64,
}

/// One tracked vortex.
#[derive(Debug, Clone, PartialEq)]
pub struct Track {
    /// Track number from 0 (the `track` column of `tracks.csv` and
    /// `vortices.csv`).
    pub id: usize,
    /// Sign of the cores' vorticity: +1 anticlockwise, -1 clockwise.
    pub sign: i8,
    /// The matched cores, in slice order (the `point` rows).
    pub points: Vec<TrackPoint>,
    /// dx/dt, dy/dt of the centroid (m/s).
    pub velocity: Option<[Slope; 2]>,
    /// d(rc^2)/dt of the Lamb-Oseen fits (m²/s).
    pub growth: Option<Slope>,
}

/// Weighted least-squares line `y = a + b t`: the slope `b` with its
/// uncertainty (see the module doc). `s` are the standard uncertainties of
/// `y` (unit weights where any is not finite and positive). Non-finite
/// points are left out; `None` with fewer than 3 points or one time.
pub(crate) fn line_fit(t: &[f64], y: &[f64], s: &[f64]) -> Option<Slope> {
    let idx: Vec<usize> = (0..t.len())
        .filter(|&k| t[k].is_finite() && y[k].is_finite())
        .collect();
    if idx.len() < 3 {
        return None;
    }
    let known = idx.iter().all(|&k| s[k].is_finite() && s[k] > 0.0);
    let w = |k: usize| if known { 1.0 / (s[k] * s[k]) } else { 1.0 };
    let sw: f64 = idx.iter().map(|&k| w(k)).sum();
    let tm = idx.iter().map(|&k| w(k) * t[k]).sum::<f64>() / sw;
    let ym = idx.iter().map(|&k| w(k) * y[k]).sum::<f64>() / sw;
    let stt: f64 = idx.iter().map(|&k| w(k) * (t[k] - tm).powi(2)).sum();
    if stt <= 0.0 {
        return None;
    }
    let b = idx
        .iter()
        .map(|&k| w(k) * (t[k] - tm) * (y[k] - ym))
        .sum::<f64>()
        / stt;
    let chi2: f64 = idx
        .iter()
        .map(|&k| w(k) * (y[k] - ym - b * (t[k] - tm)).powi(2))
        .sum();
    let ratio = chi2 / (idx.len() - 2) as f64;
    let scale = if known { ratio.max(1.0) } else { ratio };
    Some(Slope {
        value: b,
        unc: (scale / stt).sqrt(),
    })
}

/// Tracks the cores of `seq` (in order). `gate` is in metres; `period`
/// (s) makes the sequence periodic (phase bins), `None` for frames.
pub(crate) fn track(seq: &[SliceCores], gate: f64, period: Option<f64>) -> Vec<Track> {
    let drift = typical_step(seq, period.is_some());
    let mut done: Vec<Track> = Vec::new();
    let mut active: Vec<Track> = Vec::new();
    for (k, s) in seq.iter().enumerate() {
        let cands: Vec<(f64, f64, i8)> = s.cores.iter().map(|c| (c.x, c.y, c.sign)).collect();
        let preds: Vec<(f64, f64, i8)> = active.iter().map(|t| predict(t, seq, drift)).collect();
        let pairs = greedy(&preds, &cands, gate);
        let mut next = Vec::new();
        let mut used = vec![false; cands.len()];
        let mut kept = vec![false; active.len()];
        for (a, c) in pairs {
            active[a].points.push(point(seq, k, c, 0.0));
            used[c] = true;
            kept[a] = true;
        }
        for (a, t) in active.drain(..).enumerate() {
            if kept[a] {
                next.push(t);
            } else {
                done.push(t);
            }
        }
        for c in (0..cands.len()).filter(|&c| !used[c]) {
            next.push(Track {
                id: 0,
                sign: cands[c].2,
                points: vec![point(seq, k, c, 0.0)],
                velocity: None,
                growth: None,
            });
        }
        active = next;
    }
    done.extend(active);
    if let Some(t) = period {
        wrap(&mut done, seq, drift, gate, t);
    }
    done.sort_by_key(|t| (t.points[0].slice, t.points[0].core));
    for (id, t) in done.iter_mut().enumerate() {
        t.id = id;
        measure(t, seq);
    }
    done
}

fn point(seq: &[SliceCores], slice: usize, core: usize, shift: f64) -> TrackPoint {
    TrackPoint {
        slice,
        core,
        time_s: seq[slice].time_s + shift,
    }
}

fn at(seq: &[SliceCores], p: &TrackPoint) -> (f64, f64) {
    let c = &seq[p.slice].cores[p.core];
    (c.x, c.y)
}

/// The predicted next position of `t` and its sign.
fn predict(t: &Track, seq: &[SliceCores], drift: (f64, f64)) -> (f64, f64, i8) {
    let n = t.points.len();
    let (x, y) = at(seq, &t.points[n - 1]);
    let (dx, dy) = if n >= 2 {
        let (x0, y0) = at(seq, &t.points[n - 2]);
        (x - x0, y - y0)
    } else {
        drift
    };
    (x + dx, y + dy, t.sign)
}

/// Closest-first one-to-one matching of predictions to candidates of the
/// same sign within `gate`: `(prediction, candidate)` pairs.
fn greedy(preds: &[(f64, f64, i8)], cands: &[(f64, f64, i8)], gate: f64) -> Vec<(usize, usize)> {
    let mut all = Vec::new();
    for (a, p) in preds.iter().enumerate() {
        for (c, q) in cands.iter().enumerate() {
            let d = (p.0 - q.0).hypot(p.1 - q.1);
            if p.2 == q.2 && d <= gate {
                all.push((d, a, c));
            }
        }
    }
    all.sort_by(|x, y| x.0.total_cmp(&y.0));
    let (mut ua, mut uc) = (vec![false; preds.len()], vec![false; cands.len()]);
    let mut out = Vec::new();
    for (_, a, c) in all {
        if !ua[a] && !uc[c] {
            ua[a] = true;
            uc[c] = true;
            out.push((a, c));
        }
    }
    out
}

/// Median displacement to the nearest same-sign core of the next slice.
fn typical_step(seq: &[SliceCores], periodic: bool) -> (f64, f64) {
    let (mut dx, mut dy) = (Vec::new(), Vec::new());
    let n = seq.len();
    let steps = if periodic { n } else { n.saturating_sub(1) };
    for k in 0..steps {
        let next = &seq[(k + 1) % n];
        for c in &seq[k].cores {
            let best = next
                .cores
                .iter()
                .filter(|d| d.sign == c.sign)
                .min_by(|a, b| {
                    (a.x - c.x)
                        .hypot(a.y - c.y)
                        .total_cmp(&(b.x - c.x).hypot(b.y - c.y))
                });
            if let Some(b) = best {
                dx.push(b.x - c.x);
                dy.push(b.y - c.y);
            }
        }
    }
    let med = |v: Vec<f64>| {
        let m = crate::robust::quantile_of(v.into_iter(), 0.5);
        if m.is_finite() {
            m
        } else {
            0.0
        }
    };
    (med(dx), med(dy))
}

/// Joins tracks ending in the last slice to tracks starting in slice 0,
/// one period later.
fn wrap(tracks: &mut Vec<Track>, seq: &[SliceCores], drift: (f64, f64), gate: f64, period: f64) {
    let last = seq.len().saturating_sub(1);
    let ends: Vec<usize> = (0..tracks.len())
        .filter(|&t| tracks[t].points.last().is_some_and(|p| p.slice == last))
        .collect();
    let starts: Vec<usize> = (0..tracks.len())
        .filter(|&t| tracks[t].points[0].slice == 0)
        .collect();
    let preds: Vec<(f64, f64, i8)> = ends
        .iter()
        .map(|&t| predict(&tracks[t], seq, drift))
        .collect();
    let cands: Vec<(f64, f64, i8)> = starts
        .iter()
        .map(|&t| {
            let (x, y) = at(seq, &tracks[t].points[0]);
            (x, y, tracks[t].sign)
        })
        .collect();
    let mut remove = Vec::new();
    for (a, c) in greedy(&preds, &cands, gate) {
        let (e, s) = (ends[a], starts[c]);
        if e == s || remove.contains(&s) || remove.contains(&e) {
            continue;
        }
        let shift = tracks[e]
            .points
            .last()
            .map_or(0.0, |p| p.time_s - seq[p.slice].time_s)
            + period;
        let more: Vec<TrackPoint> = tracks[s]
            .points
            .iter()
            .map(|p| TrackPoint {
                time_s: p.time_s + shift,
                ..*p
            })
            .collect();
        tracks[e].points.extend(more);
        remove.push(s);
    }
    remove.sort_unstable();
    for s in remove.into_iter().rev() {
        tracks.remove(s);
    }
}

/// The track's convection velocity and core growth.
fn measure(t: &mut Track, seq: &[SliceCores]) {
    let cores: Vec<&super::Core> = t
        .points
        .iter()
        .map(|p| &seq[p.slice].cores[p.core])
        .collect();
    // Cores cut by the end of the data are left out of the fits.
    let ts: Vec<f64> = t
        .points
        .iter()
        .zip(&cores)
        .map(|(p, c)| if c.edge { f64::NAN } else { p.time_s })
        .collect();
    let col = |f: &dyn Fn(&super::Core) -> f64| cores.iter().map(|c| f(c)).collect::<Vec<_>>();
    let vx = line_fit(&ts, &col(&|c| c.x), &col(&|c| c.x_unc));
    let vy = line_fit(&ts, &col(&|c| c.y), &col(&|c| c.y_unc));
    t.velocity = vx.zip(vy).map(|(a, b)| [a, b]);
    let rc2 = col(&|c| c.fit.map_or(f64::NAN, |f| f.rc * f.rc));
    let rc2_unc = col(&|c| c.fit.map_or(f64::NAN, |f| 2.0 * f.rc * f.rc_unc));
    t.growth = line_fit(&ts, &rc2, &rc2_unc);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::assert_close;

    #[test]
    fn line_fit_matches_the_textbook_formulas() {
        // Worked by hand, unweighted: t_mean 1.5, y_mean 3.75, Stt = 5,
        // Sty = 9.5, b = 1.9, a = 0.9; residuals 0.1, 0.2, -0.7, 0.4,
        // chi2 = 0.70, s^2 = chi2 / (n - 2) = 0.35, u(b) = sqrt(s^2 / Stt)
        // (the standard error of a slope, common practice).
        let s = line_fit(&[0.0, 1.0, 2.0, 3.0], &[1.0, 3.0, 4.0, 7.0], &[f64::NAN; 4]).unwrap();
        assert_close(s.value, 1.9, 1e-12, 0.0, "slope");
        assert_close(s.unc, (0.35f64 / 5.0).sqrt(), 1e-12, 0.0, "slope unc");
        assert!(line_fit(&[0.0, 1.0], &[0.0, 1.0], &[1.0, 1.0]).is_none());
    }
}
