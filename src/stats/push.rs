//! Adding one frame to a `RunAccumulator` (`push`): the checks of the
//! frame, the moments of the ensemble and of its phase bin, the lag sums
//! for N_eff and the probe traces.

use super::lags::Lags;
use super::moments::Moments;
use super::{phase, sample_mask, RunAccumulator};
use crate::derive::Derived;
use crate::field::{Field, FrameMeta, FILLED, REPLACED, VALID};

impl RunAccumulator {
    /// Adds one frame. `field` gives the status per node (valid vectors are
    /// the samples; replaced and filled ones are not, unless
    /// `include_filled`), `derived` the values. Frames must come in
    /// increasing `meta.index`; `derived` must hold the quantities named at
    /// `new`, in that order, on this grid (a programming error otherwise).
    pub(crate) fn push(&mut self, meta: &FrameMeta, field: &Field, derived: &Derived) {
        self.check_frame(field, derived);
        let index = meta.index as u64;
        if let Some((_, last)) = self.span {
            assert!(index > last, "frame {index} pushed after frame {last}");
        }
        self.span = Some((self.span.map_or(index, |s| s.0), index));
        self.clock.push(index, meta.time_s);

        let counts = self.sample_mask(field, derived);
        self.offer_moments(meta, field, derived, &counts);
        let om = self.omega();
        self.push_lags(index, derived, &counts, om);
        self.push_traces(index, derived, &counts, om);
    }

    /// Checks that the frame lies on this grid and holds this accumulator's
    /// quantities in order (panics otherwise: a programming error), and
    /// takes the unit of each quantity that has none yet.
    fn check_frame(&mut self, field: &Field, derived: &Derived) {
        let sh = self.grid.shape();
        assert_eq!(field.status.dim(), sh, "field shape");
        assert_eq!(derived.u.dim(), sh, "derived shape");
        assert_eq!(derived.v.dim(), sh, "derived shape");
        assert_eq!(derived.u_unc.dim(), sh, "derived shape");
        assert_eq!(derived.v_unc.dim(), sh, "derived shape");
        assert_eq!(
            derived.quantities.len(),
            self.quantities.len(),
            "quantity count"
        );
        for (i, q) in derived.quantities.iter().enumerate() {
            assert_eq!(q.name, self.quantities[i], "quantity order");
            assert_eq!(q.value.dim(), sh, "{} shape", q.name);
            assert!(
                q.unc.as_ref().is_none_or(|a| a.dim() == sh),
                "{} unc shape",
                q.name
            );
            assert!(
                q.bias.as_ref().is_none_or(|a| a.dim() == sh),
                "{} bias shape",
                q.name
            );
            assert!(
                q.trunc
                    .as_ref()
                    .is_none_or(|[b, v]| b.dim() == sh && v.dim() == sh),
                "{} trunc shape",
                q.name
            );
            assert!(
                q.shift.as_ref().is_none_or(|a| a.dim() == sh),
                "{} shift shape",
                q.name
            );
            if self.units[i].is_empty() {
                self.units[i] = q.unit.to_string();
            }
        }
    }

    /// Offers the frame's samples to the ensemble's moments and to those of
    /// its phase bin (or counts it as without phase, or outside the bins).
    fn offer_moments(
        &mut self,
        meta: &FrameMeta,
        field: &Field,
        derived: &Derived,
        counts: &[bool],
    ) {
        let sh = self.grid.shape();
        offer(&mut self.ens, field, derived, counts);
        match phase::bin_of(&self.params, meta.phase_deg) {
            phase::Binned::Bin(b) => {
                let nq = self.quantities.len();
                let m = self.bins[b].get_or_insert_with(|| Moments::new(sh.0 * sh.1, nq));
                offer(m, field, derived, counts);
            }
            phase::Binned::NoPhase => self.unphased += 1,
            phase::Binned::Outside => self.outside += 1,
        }
    }

    /// Lag sums for N_eff, by the run-wide frame index: with frame times
    /// they count when the times are uniform, without any they stand
    /// for an even acquisition rate (`finish`).
    fn push_lags(&mut self, index: u64, derived: &Derived, counts: &[bool], om: Option<usize>) {
        let nodes = self.grid.len();
        let series = 2 + usize::from(om.is_some());
        let max_lag = self.params.max_lag;
        let lags = self
            .lags
            .get_or_insert_with(|| Lags::new(max_lag, series * nodes));
        let mut values = vec![f64::NAN; series * nodes];
        for (k, (&c, ((&u, &v), w))) in counts
            .iter()
            .zip(
                derived
                    .u
                    .iter()
                    .zip(derived.v.iter())
                    .zip(omega_iter(derived, om, nodes)),
            )
            .enumerate()
        {
            if c {
                values[k] = u;
                values[nodes + k] = v;
                if series == 3 && w.is_finite() {
                    values[2 * nodes + k] = w;
                }
            }
        }
        lags.push(index, values);
    }

    /// Adds the frame's row (u, v, omega; NaN where the node has no sample)
    /// to each probe's trace.
    fn push_traces(&mut self, index: u64, derived: &Derived, counts: &[bool], om: Option<usize>) {
        for t in &mut self.traces {
            let (j, i) = (t.node / self.grid.nx, t.node % self.grid.nx);
            let mut row = [f64::NAN; 3];
            let (u, v) = (derived.u[[j, i]], derived.v[[j, i]]);
            if counts[t.node] {
                row[0] = u;
                row[1] = v;
                if let Some(o) = om {
                    row[2] = derived.quantities[o].value[[j, i]];
                }
            }
            t.rows.push((index, row));
        }
    }

    /// Per node: does this frame's vector count as a sample?
    fn sample_mask(&self, field: &Field, d: &Derived) -> Vec<bool> {
        sample_mask(field, d, self.params.include_filled)
    }
}

/// omega's values in node order, or NaN when there is no omega.
fn omega_iter<'a>(
    d: &'a Derived,
    om: Option<usize>,
    nodes: usize,
) -> Box<dyn Iterator<Item = f64> + 'a> {
    match om {
        Some(o) => Box::new(d.quantities[o].value.iter().copied()),
        None => Box::new(std::iter::repeat_n(f64::NAN, nodes)),
    }
}

/// Adds one frame's samples (where `counts`) to a set of moments.
fn offer(m: &mut Moments, field: &Field, d: &Derived, counts: &[bool]) {
    fn sl(a: &ndarray::Array2<f64>) -> &[f64] {
        a.as_slice().expect("standard layout")
    }
    m.frames += 1.0;
    for (k, &s) in field
        .status
        .as_slice()
        .expect("standard layout")
        .iter()
        .enumerate()
    {
        match s {
            VALID => m.n_valid[k] += 1.0,
            REPLACED => m.n_replaced[k] += 1.0,
            FILLED => m.n_filled[k] += 1.0,
            _ => {}
        }
    }
    let (u, v, su, sv) = (sl(&d.u), sl(&d.v), sl(&d.u_unc), sl(&d.v_unc));
    for (k, &c) in counts.iter().enumerate() {
        if c {
            m.add_velocity(k, u[k], v[k]);
            m.u.add_unc(k, Some(su[k]), None);
            m.v.add_unc(k, Some(sv[k]), None);
        }
    }
    // The smoother's bias, as the truncation of the velocity
    // (derive::smoothing_bias; systematic::systematic averages and debiases it).
    if let Some([bu, vbu, bv, vbv]) = &d.vel_trunc {
        let (bu, vbu, bv, vbv) = (sl(bu), sl(vbu), sl(bv), sl(vbv));
        for (k, &c) in counts.iter().enumerate() {
            if c {
                m.u.add_trunc(k, Some(bu[k]), Some(vbu[k]), None);
                m.v.add_trunc(k, Some(bv[k]), Some(vbv[k]), None);
            }
        }
    }
    for (q, acc) in d.quantities.iter().zip(m.q.iter_mut()) {
        let (x, unc, bias) = (
            sl(&q.value),
            q.unc.as_ref().map(sl),
            q.bias.as_ref().map(sl),
        );
        let (tb, tv) = match &q.trunc {
            Some([b, v]) => (Some(sl(b)), Some(sl(v))),
            None => (None, None),
        };
        let shift = q.shift.as_ref().map(sl);
        for (k, &c) in counts.iter().enumerate() {
            if c && x[k].is_finite() {
                acc.add(k, x[k]);
                acc.add_unc(k, unc.map(|a| a[k]), bias.map(|a| a[k]));
                acc.add_trunc(k, tb.map(|a| a[k]), tv.map(|a| a[k]), shift.map(|a| a[k]));
            }
        }
    }
}
