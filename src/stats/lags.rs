//! Lagged products for the effective number of independent samples of a
//! time-resolved run, kept so that chunks of frames merge exactly.
//!
//! Owns: `Lags` (per series, node and lag the sums that give the
//! autocovariance), `Clock` (is `time_s` uniform?) and `n_eff`.
//!
//! Method (common practice; the formula as in docs/methods.md, Sciacchitano &
//! Wieneke 2016): with the autocorrelation rho(k) of a node's series,
//! `N_eff = N / (1 + 2 sum_{k=1..K} (1 - k/N) rho(k))`, where K is the last
//! lag before the first lag with rho(k) <= 0 (the first zero crossing), and
//! at most `max_lag`. rho(k) is the lag-k autocovariance over the pairs
//! present, divided by the variance about the final mean:
//! `rho(k) = [sum_pairs (x_t - m)(x_{t+k} - m) / C_k] / (M2 / N)`.
//! Gaps (a node not valid in a frame, a frame not offered) simply remove
//! pairs: lags are differences of the run-wide frame index. Per node, not
//! from a spatial average: the integral time scale differs across a wake.
//! Bias of this estimator on uncorrelated samples (numpy simulation, 2000
//! trials, recorded in the stats report): mean N_eff/N = 0.91 at N = 100,
//! 0.93 at 200, 0.96 at 1000 (median 1.0): slightly conservative.
//!
//! Merging: per series, node and lag we keep, relative to a shift `c` (the
//! node's first sample, which limits cancellation), `S_k = sum x y`,
//! `P_k = sum x`, `Q_k = sum y` over pairs (x = x_t - c, y = x_{t+k} - c)
//! and their count `C_k`; then `sum (x_t - m)(x_{t+k} - m) = S_k - m'(P_k +
//! Q_k) + C_k m'^2` with `m' = m - c`. Moving a later chunk to the earlier
//! chunk's shift is exact algebra (`S += d(P + Q) + C d^2`, `P += C d`,
//! `Q += C d`). Each chunk keeps its first and last `max_lag` frames so the
//! pairs that straddle a chunk boundary are formed on merge; the merged sums
//! equal the one-pass sums to round-off (tested).
//!
//! Memory: 4 x series x nodes x lags `f64` plus 2 x `max_lag` frames of
//! samples; lag blocks are allocated only as far as the frames reach.

use std::collections::VecDeque;

/// One frame's samples for every series and node (NaN: no sample).
#[derive(Debug, Clone, PartialEq)]
pub struct LagFrame {
    pub index: u64,
    pub values: Vec<f64>,
}

/// Sums for one lag over every series-node.
#[derive(Debug, Clone, PartialEq)]
pub struct LagSums {
    pub s: Vec<f64>,
    pub p: Vec<f64>,
    pub q: Vec<f64>,
    pub c: Vec<f64>,
}

impl LagSums {
    fn new(len: usize) -> Self {
        LagSums {
            s: vec![0.0; len],
            p: vec![0.0; len],
            q: vec![0.0; len],
            c: vec![0.0; len],
        }
    }
}

/// The lagged sums of a contiguous range of frames.
#[derive(Debug, Clone, PartialEq)]
pub struct Lags {
    pub max_lag: usize,
    /// series x nodes.
    pub len: usize,
    /// Per series-node shift; NaN until the first sample.
    pub shift: Vec<f64>,
    /// `sums[k - 1]` for lag k; grows up to `max_lag`.
    pub sums: Vec<LagSums>,
    /// Frames whose index is within `max_lag - 1` of the first.
    pub head: Vec<LagFrame>,
    /// Frames whose index is within `max_lag - 1` of the last.
    pub tail: VecDeque<LagFrame>,
}

impl Lags {
    pub fn new(max_lag: usize, len: usize) -> Self {
        Lags {
            max_lag,
            len,
            shift: vec![f64::NAN; len],
            sums: Vec::new(),
            head: Vec::new(),
            tail: VecDeque::new(),
        }
    }

    fn block(&mut self, k: usize) -> &mut LagSums {
        while self.sums.len() < k {
            self.sums.push(LagSums::new(self.len));
        }
        &mut self.sums[k - 1]
    }

    /// Adds the products of `earlier` with `later` at lag `k`, using `shift`.
    fn pair(&mut self, k: usize, earlier: &[f64], later: &[f64]) {
        let shift = std::mem::take(&mut self.shift);
        let b = self.block(k);
        let sums =
            b.s.iter_mut()
                .zip(b.p.iter_mut())
                .zip(b.q.iter_mut())
                .zip(b.c.iter_mut());
        for ((((s, p), q), c), ((&a, &l), &sh)) in sums.zip(earlier.iter().zip(later).zip(&shift)) {
            if a.is_finite() && l.is_finite() {
                let (x, y) = (a - sh, l - sh);
                *s += x * y;
                *p += x;
                *q += y;
                *c += 1.0;
            }
        }
        self.shift = shift;
    }

    /// Adds one frame (indices strictly increasing).
    pub fn push(&mut self, index: u64, values: Vec<f64>) {
        assert_eq!(values.len(), self.len, "lag frame size");
        if let Some(last) = self.tail.back() {
            assert!(
                index > last.index,
                "frames must be pushed in increasing index order"
            );
        }
        for (s, &x) in self.shift.iter_mut().zip(&values) {
            if s.is_nan() && x.is_finite() {
                *s = x;
            }
        }
        let tail = std::mem::take(&mut self.tail);
        for f in &tail {
            let k = (index - f.index) as usize;
            if k >= 1 && k <= self.max_lag {
                self.pair(k, &f.values, &values);
            }
        }
        self.tail = tail;
        let frame = LagFrame { index, values };
        let first = self.head.first().map_or(index, |f| f.index);
        if ((index - first) as usize) < self.max_lag {
            self.head.push(frame.clone());
        }
        self.tail.push_back(frame);
        while let Some(f) = self.tail.front() {
            if ((index - f.index) as usize) >= self.max_lag {
                self.tail.pop_front();
            } else {
                break;
            }
        }
    }

    /// Merges the lags of the frames that follow `self`'s.
    #[allow(clippy::needless_range_loop)] // one index over six parallel arrays
    pub fn merge(&mut self, b: Lags) {
        assert_eq!(
            (self.len, self.max_lag),
            (b.len, b.max_lag),
            "merging different lag sets"
        );
        let (Some(a_last), Some(b_first)) = (self.tail.back(), b.head.first()) else {
            if self.head.is_empty() {
                *self = b;
            }
            return;
        };
        assert!(
            b_first.index > a_last.index,
            "merge: later frames must follow"
        );
        let (a_first, b_last) = (self.head[0].index, b.tail.back().expect("tail").index);
        // Move b's sums to self's shift, then add them.
        for j in 0..self.len {
            if self.shift[j].is_nan() {
                self.shift[j] = b.shift[j];
            }
        }
        for (k0, bs) in b.sums.iter().enumerate() {
            let shift = std::mem::take(&mut self.shift);
            let a = self.block(k0 + 1);
            for j in 0..bs.s.len() {
                if bs.c[j] == 0.0 {
                    continue;
                }
                let d = b.shift[j] - shift[j];
                a.s[j] += bs.s[j] + d * (bs.p[j] + bs.q[j]) + bs.c[j] * d * d;
                a.p[j] += bs.p[j] + bs.c[j] * d;
                a.q[j] += bs.q[j] + bs.c[j] * d;
                a.c[j] += bs.c[j];
            }
            self.shift = shift;
        }
        // Pairs across the boundary.
        let tail = std::mem::take(&mut self.tail);
        for fa in &tail {
            for fb in &b.head {
                let k = (fb.index - fa.index) as usize;
                if k <= self.max_lag {
                    self.pair(k, &fa.values, &fb.values);
                }
            }
        }
        for fb in &b.head {
            if ((fb.index - a_first) as usize) < self.max_lag {
                self.head.push(fb.clone());
            }
        }
        let mut tail: VecDeque<LagFrame> = tail
            .into_iter()
            .filter(|f| ((b_last - f.index) as usize) < self.max_lag)
            .collect();
        tail.extend(b.tail);
        self.tail = tail;
    }

    /// Effective sample size at series-node `j` from its final count `n`,
    /// mean and second central sum `m2` (see the module doc), with at most
    /// `cap` lags. Returns (N_eff, lags summed, whether the cap was reached
    /// before a zero crossing). N_eff lies in [1, n]; n < 3 or zero variance
    /// gives N_eff = n.
    pub fn n_eff(&self, j: usize, n: f64, mean: f64, m2: f64, cap: usize) -> (f64, usize, bool) {
        if n < 3.0 || m2 <= 0.0 || !self.shift[j].is_finite() {
            return (n, 0, false);
        }
        let var = m2 / n;
        let mp = mean - self.shift[j];
        let mut sum = 0.0;
        let kmax = cap.min(self.sums.len());
        for k in 1..=kmax {
            let b = &self.sums[k - 1];
            let c = b.c[j];
            if c == 0.0 {
                return (finish_neff(n, sum), k - 1, false);
            }
            let cov = (b.s[j] - mp * (b.p[j] + b.q[j]) + c * mp * mp) / c;
            let rho = cov / var;
            if rho <= 0.0 {
                return (finish_neff(n, sum), k - 1, false);
            }
            sum += (1.0 - k as f64 / n) * rho;
        }
        (finish_neff(n, sum), kmax, kmax == cap && cap < n as usize)
    }
}

fn finish_neff(n: f64, sum: f64) -> f64 {
    (n / (1.0 + 2.0 * sum)).clamp(1.0, n)
}

/// Whether the frames' `time_s` is uniform in the run-wide frame index.
///
/// Rule (documented choice): the time step per index step between
/// consecutive timed frames is clustered (members within `UNIFORM_TOL` of
/// the cluster's smallest step). The run is time-resolved when every frame
/// has a time and at least `RESOLVED_SHARE` of the steps fall in the
/// smallest positive cluster; larger steps are gaps (burst recording, a
/// pause). Lag pairs are formed by index, so the few pairs that straddle a
/// gap enter the autocorrelation too; with bursts of B frames they are a
/// fraction of about k/B of the pairs at lag k. More than `MAX_CLUSTERS`
/// distinct steps: irregular, samples independent.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Clock {
    pub frames: u64,
    /// Frames that carried a time.
    pub timed: u64,
    pub first: Option<(u64, f64)>,
    pub last: Option<(u64, f64)>,
    /// (smallest step of the cluster, number of steps), in order of first
    /// appearance.
    pub steps: Vec<(f64, u64)>,
    pub irregular: bool,
}

/// Relative spread of time steps taken as one step (printed times round).
pub const UNIFORM_TOL: f64 = 0.01;
/// Share of the steps that must be the base step.
pub const RESOLVED_SHARE: f64 = 0.9;
/// Distinct step clusters kept before the clock is called irregular.
pub const MAX_CLUSTERS: usize = 32;

/// The time base of a time-resolved run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TimeBase {
    /// Seconds per frame index.
    pub step: f64,
    /// Steps longer than the base step.
    pub gaps: u64,
}

impl Clock {
    pub fn new() -> Self {
        Clock::default()
    }

    fn add_step(&mut self, s: f64, n: u64) {
        if self.irregular {
            return;
        }
        let near = |c: f64| (s - c).abs() <= UNIFORM_TOL * c.abs().min(s.abs());
        if let Some(cl) = self.steps.iter_mut().find(|(c, _)| near(*c)) {
            cl.0 = cl.0.min(s);
            cl.1 += n;
        } else if self.steps.len() < MAX_CLUSTERS {
            self.steps.push((s, n));
        } else {
            self.irregular = true;
            self.steps.clear();
        }
    }

    fn step(&mut self, a: (u64, f64), b: (u64, f64)) {
        self.add_step((b.1 - a.1) / (b.0 - a.0) as f64, 1);
    }

    pub fn push(&mut self, index: u64, time: Option<f64>) {
        self.frames += 1;
        if let Some(t) = time.filter(|t| t.is_finite()) {
            self.timed += 1;
            if let Some(l) = self.last {
                self.step(l, (index, t));
            }
            if self.first.is_none() {
                self.first = Some((index, t));
            }
            self.last = Some((index, t));
        }
    }

    pub fn merge(&mut self, b: &Clock) {
        if let (Some(l), Some(f)) = (self.last, b.first) {
            self.step(l, f);
        }
        if b.irregular {
            self.irregular = true;
            self.steps.clear();
        }
        for &(s, n) in &b.steps {
            self.add_step(s, n);
        }
        self.frames += b.frames;
        self.timed += b.timed;
        self.first = self.first.or(b.first);
        self.last = b.last.or(self.last);
    }

    /// The time base when the run is time-resolved (see the type doc);
    /// `None` otherwise (samples are then independent).
    pub fn time_base(&self) -> Option<TimeBase> {
        if self.frames < 3 || self.timed != self.frames || self.irregular {
            return None;
        }
        let total: u64 = self.steps.iter().map(|c| c.1).sum();
        let &(step, n) = self
            .steps
            .iter()
            .filter(|c| c.0 > 0.0)
            .min_by(|a, b| a.0.total_cmp(&b.0))?;
        let later = self
            .steps
            .iter()
            .filter(|c| c.0 > step)
            .map(|c| c.1)
            .sum::<u64>();
        let ok = n as f64 >= RESOLVED_SHARE * total as f64 && n + later == total;
        ok.then_some(TimeBase { step, gaps: later })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::moments::Scalar;
    use crate::testutil::{assert_close, rng};
    use rand_distr::{Distribution, StandardNormal};

    fn ar1(n: usize, a: f64, seed: u64) -> Vec<f64> {
        let mut r = rng(seed);
        let mut x = 0.0;
        (0..n)
            .map(|_| {
                let e: f64 = StandardNormal.sample(&mut r);
                x = a * x + e;
                10.0 + x
            })
            .collect()
    }

    fn n_eff_of(l: &Lags, xs: &[f64], cap: usize) -> f64 {
        let mut s = Scalar::new(1);
        xs.iter()
            .filter(|x| x.is_finite())
            .for_each(|&x| s.add(0, x));
        l.n_eff(0, s.n[0], s.mean[0], s.m2[0], cap).0
    }

    #[test]
    fn ar1_with_coefficient_one_half_gives_a_third_of_the_samples() {
        // Derived (docs/methods.md): rho(k) = 0.5^k, 1 + 2 sum rho = 3, so N_eff ~ N/3.
        let n = 20_000;
        let xs = ar1(n, 0.5, 21);
        let mut l = Lags::new(50, 1);
        for (i, &x) in xs.iter().enumerate() {
            l.push(i as u64, vec![x]);
        }
        let ne = n_eff_of(&l, &xs, 50);
        eprintln!(
            "AR(1) a = 0.5, N = {n}: N_eff = {ne:.1} (N/3 = {:.1})",
            n as f64 / 3.0
        );
        assert_close(ne, n as f64 / 3.0, 0.0, 0.05, "N_eff of AR(1) 0.5");
        // White noise: N_eff close to N (first zero crossing cuts at once or soon).
        let xs = ar1(n, 0.0, 22);
        let mut l = Lags::new(50, 1);
        for (i, &x) in xs.iter().enumerate() {
            l.push(i as u64, vec![x]);
        }
        assert!(n_eff_of(&l, &xs, 50) > 0.9 * n as f64);
    }

    #[test]
    fn chunked_lags_equal_one_pass_with_gaps() {
        let n = 300;
        let mut xs = ar1(n, 0.8, 23);
        for i in (0..n).step_by(7) {
            xs[i] = f64::NAN; // gaps
        }
        let mut one = Lags::new(12, 1);
        for (i, &x) in xs.iter().enumerate() {
            one.push(i as u64, vec![x]);
        }
        for chunk in [1usize, 5, 16, 299] {
            let mut acc: Option<Lags> = None;
            for (c, part) in xs.chunks(chunk).enumerate() {
                let mut l = Lags::new(12, 1);
                for (i, &x) in part.iter().enumerate() {
                    l.push((c * chunk + i) as u64, vec![x + 0.0]);
                }
                match acc.as_mut() {
                    None => acc = Some(l),
                    Some(a) => a.merge(l),
                }
            }
            let acc = acc.unwrap();
            assert_eq!(acc.sums.len(), one.sums.len());
            for k in 0..one.sums.len() {
                assert_eq!(acc.sums[k].c, one.sums[k].c, "pair counts, chunk {chunk}");
            }
            assert_close(
                n_eff_of(&acc, &xs, 12),
                n_eff_of(&one, &xs, 12),
                0.0,
                1e-12,
                "N_eff",
            );
        }
    }

    #[test]
    fn clock_accepts_uniform_steps_across_merges_and_rejects_a_jump() {
        let mut a = Clock::new();
        let mut b = Clock::new();
        for i in 0..5u64 {
            a.push(i, Some(0.01 * i as f64));
        }
        for i in 6..9u64 {
            b.push(i, Some(0.01 * i as f64)); // index 5 missing: still uniform per index
        }
        let mut m = a.clone();
        m.merge(&b);
        let tb = m.time_base().unwrap();
        assert_close(tb.step, 0.01, 0.0, 1e-9, "step");
        assert_eq!(tb.gaps, 0);
        // One step back in time: not resolved.
        let mut c = Clock::new();
        c.push(9, Some(0.0));
        let mut back = m.clone();
        back.merge(&c);
        assert!(back.time_base().is_none());
        // Bursts: 3 bursts of 20 frames at 1 ms, 1 s apart: resolved, 2 gaps.
        let mut burst = Clock::new();
        for i in 0..60u64 {
            burst.push(i, Some((i / 20) as f64 + 1e-3 * (i % 20) as f64));
        }
        let tb = burst.time_base().unwrap();
        assert_eq!(tb.gaps, 2);
        assert_close(tb.step, 1e-3, 0.0, 1e-6, "burst step");
        // Steps that alternate 1 and 2 ms: half the steps are not the base.
        let mut alt = Clock::new();
        let mut t = 0.0;
        for i in 0..40u64 {
            alt.push(i, Some(t));
            t += if i % 2 == 0 { 1e-3 } else { 2e-3 };
        }
        assert!(alt.time_base().is_none());
        let mut d = Clock::new();
        d.push(0, None);
        d.push(1, None);
        d.push(2, None);
        assert!(d.time_base().is_none());
    }
}
