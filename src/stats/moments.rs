//! Per-node central moments that merge: the one accumulator kernel.
//!
//! Owns: `Scalar` (count, mean, second to fourth central sums of one value
//! per node, plus the sums of squared per-sample uncertainty and bias) and
//! `Moments` (u, v with their co-moment, every derived quantity, and the
//! status counts of one set of frames: the ensemble or one phase bin).
//!
//! Method: the pairwise update of Chan, Golub & LeVeque (1979, Am. Stat.
//! 37:242) extended to third and fourth central sums by Pébay (2008, Sandia
//! report SAND2008-6212, eqs. 3.1-3.3; from memory, checked here against
//! numpy). Adding one sample is the same formula with `nb = 1`, so push and
//! merge share one kernel and a run pushed frame by frame equals, to
//! round-off, the same run pushed in chunks and merged.
//! For sets a (n_a, mean_a, M2_a, M3_a, M4_a) and b, with d = mean_b - mean_a
//! and n = n_a + n_b:
//!
//! ```text
//! mean = mean_a + d n_b / n
//! M2   = M2_a + M2_b + d^2 n_a n_b / n
//! M3   = M3_a + M3_b + d^3 n_a n_b (n_a - n_b) / n^2 + 3 d (n_a M2_b - n_b M2_a) / n
//! M4   = M4_a + M4_b + d^4 n_a n_b (n_a^2 - n_a n_b + n_b^2) / n^3
//!        + 6 d^2 (n_a^2 M2_b + n_b^2 M2_a) / n^2 + 4 d (n_a M3_b - n_b M3_a) / n
//! C_uv = C_a + C_b + d_u d_v n_a n_b / n
//! ```
//!
//! Edge behaviour: an empty side leaves the other unchanged (no NaN is ever
//! formed from 0/0); a sample that is not finite is never offered (the
//! caller decides what counts). Memory is a fixed number of `f64` per node
//! and quantity, independent of the number of frames.

/// The number of vectors a version-1 partial state holds per scalar.
pub(crate) const PARTS_V1: usize = 9;

/// Moments of one scalar at every node. All vectors have one entry per node.
#[derive(Debug, Clone, PartialEq, Default)]
pub(crate) struct Scalar {
    pub n: Vec<f64>,
    pub mean: Vec<f64>,
    pub m2: Vec<f64>,
    pub m3: Vec<f64>,
    pub m4: Vec<f64>,
    /// Sum over counted samples of the squared instantaneous uncertainty.
    pub unc2: Vec<f64>,
    /// Number of counted samples that carried a finite uncertainty.
    pub unc_n: Vec<f64>,
    /// Sum of the squared truncation-bias estimate.
    pub bias2: Vec<f64>,
    pub bias_n: Vec<f64>,
    /// Count, mean and second central sum of the *signed* truncation
    /// estimate (the same pairwise update as the value, second order).
    pub tb_n: Vec<f64>,
    pub tb_mean: Vec<f64>,
    pub tb_m2: Vec<f64>,
    /// Sum of the truncation estimate's own noise variance.
    pub tb_var: Vec<f64>,
    /// Sum and count of the expected noise shift of the value (finite ones).
    pub shift: Vec<f64>,
    pub shift_n: Vec<f64>,
}

impl Scalar {
    pub(crate) fn new(nodes: usize) -> Self {
        let z = vec![0.0; nodes];
        Scalar {
            n: z.clone(),
            mean: z.clone(),
            m2: z.clone(),
            m3: z.clone(),
            m4: z.clone(),
            unc2: z.clone(),
            unc_n: z.clone(),
            bias2: z.clone(),
            bias_n: z.clone(),
            tb_n: z.clone(),
            tb_mean: z.clone(),
            tb_m2: z.clone(),
            tb_var: z.clone(),
            shift: z.clone(),
            shift_n: z,
        }
    }

    /// The vectors in their fixed serialisation order (format version 2;
    /// version 1 wrote the first `PARTS_V1`).
    pub(crate) fn parts(&self) -> [&Vec<f64>; 15] {
        [
            &self.n,
            &self.mean,
            &self.m2,
            &self.m3,
            &self.m4,
            &self.unc2,
            &self.unc_n,
            &self.bias2,
            &self.bias_n,
            &self.tb_n,
            &self.tb_mean,
            &self.tb_m2,
            &self.tb_var,
            &self.shift,
            &self.shift_n,
        ]
    }

    pub(crate) fn parts_mut(&mut self) -> [&mut Vec<f64>; 15] {
        [
            &mut self.n,
            &mut self.mean,
            &mut self.m2,
            &mut self.m3,
            &mut self.m4,
            &mut self.unc2,
            &mut self.unc_n,
            &mut self.bias2,
            &mut self.bias_n,
            &mut self.tb_n,
            &mut self.tb_mean,
            &mut self.tb_m2,
            &mut self.tb_var,
            &mut self.shift,
            &mut self.shift_n,
        ]
    }

    /// Adds one sample `x` at node `k`: the merge formula with `n_b = 1`,
    /// `M2_b = M3_b = M4_b = 0`, with the terms that are exactly zero or
    /// exactly one dropped and the rest evaluated in the same order, so the
    /// result is bit for bit that of `merge_node(k, 1, x, 0, 0, 0)` (tested).
    #[inline]
    pub(crate) fn add(&mut self, k: usize, x: f64) {
        let na = self.n[k];
        if na == 0.0 {
            self.n[k] = 1.0;
            self.mean[k] = x;
            self.m2[k] = 0.0;
            self.m3[k] = 0.0;
            self.m4[k] = 0.0;
            return;
        }
        let (m2a, m3a) = (self.m2[k], self.m3[k]);
        let n = na + 1.0;
        let d = x - self.mean[k];
        let dn = d / n;
        self.mean[k] += dn;
        self.m4[k] +=
            d * dn * dn * dn * na * (na * na - na + 1.0) + 6.0 * dn * dn * m2a + 4.0 * dn * -m3a;
        self.m3[k] += d * dn * dn * na * (na - 1.0) + 3.0 * dn * -m2a;
        self.m2[k] += d * dn * na;
        self.n[k] = n;
    }

    /// Adds the squared uncertainty and bias of a counted sample, when finite.
    #[inline]
    pub(crate) fn add_unc(&mut self, k: usize, unc: Option<f64>, bias: Option<f64>) {
        if let Some(s) = unc.filter(|s| s.is_finite()) {
            self.unc2[k] += s * s;
            self.unc_n[k] += 1.0;
        }
        if let Some(b) = bias.filter(|b| b.is_finite()) {
            self.bias2[k] += b * b;
            self.bias_n[k] += 1.0;
        }
    }

    /// Adds the signed truncation estimate `b` (with noise variance `vb`)
    /// and the noise shift of a counted sample, each when finite.
    #[inline]
    pub(crate) fn add_trunc(
        &mut self,
        k: usize,
        b: Option<f64>,
        vb: Option<f64>,
        shift: Option<f64>,
    ) {
        if let (Some(b), Some(vb)) = (b, vb) {
            if b.is_finite() && vb.is_finite() {
                let na = self.tb_n[k];
                let n = na + 1.0;
                let d = b - self.tb_mean[k];
                self.tb_mean[k] += d / n;
                self.tb_m2[k] += d * d * na / n;
                self.tb_n[k] = n;
                self.tb_var[k] += vb;
            }
        }
        if let Some(s) = shift.filter(|s| s.is_finite()) {
            self.shift[k] += s;
            self.shift_n[k] += 1.0;
        }
    }

    #[inline]
    fn merge_node(&mut self, k: usize, nb: f64, mb: f64, m2b: f64, m3b: f64, m4b: f64) {
        let na = self.n[k];
        if nb == 0.0 {
            return;
        }
        if na == 0.0 {
            self.n[k] = nb;
            self.mean[k] = mb;
            self.m2[k] = m2b;
            self.m3[k] = m3b;
            self.m4[k] = m4b;
            return;
        }
        let (m2a, m3a) = (self.m2[k], self.m3[k]);
        let n = na + nb;
        let d = mb - self.mean[k];
        let dn = d / n;
        let nab = na * nb;
        self.mean[k] += dn * nb;
        self.m4[k] += m4b
            + d * dn * dn * dn * nab * (na * na - nab + nb * nb)
            + 6.0 * dn * dn * (na * na * m2b + nb * nb * m2a)
            + 4.0 * dn * (na * m3b - nb * m3a);
        self.m3[k] += m3b + d * dn * dn * nab * (na - nb) + 3.0 * dn * (na * m2b - nb * m2a);
        self.m2[k] += m2b + d * dn * nab;
        self.n[k] = n;
    }

    /// Merges `b` (same nodes) into `self`.
    pub(crate) fn merge(&mut self, b: &Scalar) {
        for k in 0..self.n.len() {
            self.merge_node(k, b.n[k], b.mean[k], b.m2[k], b.m3[k], b.m4[k]);
            self.unc2[k] += b.unc2[k];
            self.unc_n[k] += b.unc_n[k];
            self.bias2[k] += b.bias2[k];
            self.bias_n[k] += b.bias_n[k];
            let (na, nb) = (self.tb_n[k], b.tb_n[k]);
            if nb > 0.0 {
                let n = na + nb;
                let d = b.tb_mean[k] - self.tb_mean[k];
                self.tb_mean[k] += d * nb / n;
                self.tb_m2[k] += b.tb_m2[k] + d * d * na * nb / n;
                self.tb_n[k] = n;
            }
            self.tb_var[k] += b.tb_var[k];
            self.shift[k] += b.shift[k];
            self.shift_n[k] += b.shift_n[k];
        }
    }
}

/// The moments of one set of frames (the ensemble, or one phase bin).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Moments {
    /// Frames offered to this set.
    pub frames: f64,
    pub u: Scalar,
    pub v: Scalar,
    /// Co-moment sum of u and v, `sum (u - mean_u)(v - mean_v)`.
    pub cuv: Vec<f64>,
    /// Per-node counts of vectors that were valid, replaced, filled.
    pub n_valid: Vec<f64>,
    pub n_replaced: Vec<f64>,
    pub n_filled: Vec<f64>,
    /// One per derived quantity, in the accumulator's quantity order.
    pub q: Vec<Scalar>,
}

impl Moments {
    pub(crate) fn new(nodes: usize, n_quantities: usize) -> Self {
        let z = vec![0.0; nodes];
        Moments {
            frames: 0.0,
            u: Scalar::new(nodes),
            v: Scalar::new(nodes),
            cuv: z.clone(),
            n_valid: z.clone(),
            n_replaced: z.clone(),
            n_filled: z,
            q: (0..n_quantities).map(|_| Scalar::new(nodes)).collect(),
        }
    }

    /// Adds a velocity sample (u, v) at node `k`, co-moment first (it uses
    /// the means before the update).
    #[inline]
    pub(crate) fn add_velocity(&mut self, k: usize, u: f64, v: f64) {
        let na = self.u.n[k];
        if na > 0.0 {
            let du = u - self.u.mean[k];
            let dv = v - self.v.mean[k];
            self.cuv[k] += du * dv * na / (na + 1.0);
        }
        self.u.add(k, u);
        self.v.add(k, v);
    }

    /// Merges `b` (the frames after `self`'s) into `self`.
    pub(crate) fn merge(&mut self, b: &Moments) {
        assert_eq!(
            self.q.len(),
            b.q.len(),
            "merging moments of different quantity sets"
        );
        for k in 0..self.cuv.len() {
            let (na, nb) = (self.u.n[k], b.u.n[k]);
            if na > 0.0 && nb > 0.0 {
                let du = b.u.mean[k] - self.u.mean[k];
                let dv = b.v.mean[k] - self.v.mean[k];
                self.cuv[k] += b.cuv[k] + du * dv * na * nb / (na + nb);
            } else if na == 0.0 {
                self.cuv[k] = b.cuv[k];
            }
            self.n_valid[k] += b.n_valid[k];
            self.n_replaced[k] += b.n_replaced[k];
            self.n_filled[k] += b.n_filled[k];
        }
        self.u.merge(&b.u);
        self.v.merge(&b.v);
        for (a, bq) in self.q.iter_mut().zip(&b.q) {
            a.merge(bq);
        }
        self.frames += b.frames;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{assert_close, float, floats, reference, rng};
    use rand_distr::{Distribution, Exp};

    fn moments_of(xs: &[f64]) -> Scalar {
        let mut s = Scalar::new(1);
        for &x in xs {
            s.add(0, x);
        }
        s
    }

    #[test]
    fn central_sums_match_numpy_for_a_skewed_sample() {
        // Reference: numpy central sums and numpy.cov of a skewed sample
        // (tests/reference/moments.py).
        let r = reference("moments");
        let xs = floats(&r["x"]);
        assert_eq!(xs.len(), 500);
        let s = moments_of(&xs);
        assert_close(s.mean[0], float(&r["mean"]), 0.0, 1e-13, "mean");
        assert_close(s.m2[0], float(&r["m2"]), 0.0, 1e-12, "M2");
        assert_close(s.m3[0], float(&r["m3"]), 0.0, 1e-10, "M3");
        assert_close(s.m4[0], float(&r["m4"]), 0.0, 1e-11, "M4");
        let mut m = Moments::new(1, 0);
        for &x in &xs {
            m.add_velocity(0, x, 2.0 * x + x.sin());
        }
        assert_close(m.cuv[0], float(&r["comoment"]), 0.0, 1e-12, "co-moment");
    }

    #[test]
    fn adding_a_sample_is_bit_for_bit_the_merge_of_one() {
        let mut r = rng(13);
        let (mut a, mut b) = (Scalar::new(1), Scalar::new(1));
        for _ in 0..10_000 {
            let x = Exp::new(0.3).unwrap().sample(&mut r) - 2.0;
            a.add(0, x);
            b.merge_node(0, 1.0, x, 0.0, 0.0, 0.0);
            for (p, q) in a.parts().iter().zip(b.parts().iter()) {
                assert_eq!(p[0].to_bits(), q[0].to_bits());
            }
        }
    }

    #[test]
    fn merging_halves_equals_one_pass_and_empty_sides_are_neutral() {
        let mut r = rng(12);
        let xs: Vec<f64> = (0..301)
            .map(|_| Exp::new(0.5).unwrap().sample(&mut r) - 1.0)
            .collect();
        let whole = moments_of(&xs);
        for cut in [0, 1, 150, 300, 301] {
            let mut a = moments_of(&xs[..cut]);
            a.merge(&moments_of(&xs[cut..]));
            for (got, want) in a.parts().iter().zip(whole.parts().iter()) {
                assert_close(got[0], want[0], 1e-12, 1e-12, &format!("cut {cut}"));
            }
        }
    }
}
