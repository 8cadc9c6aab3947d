//! Finishing a run: N_eff from the lag sums, the ensemble and phase
//! tables (`table`), the energy split (`phase`), summary scalars for
//! campaign.csv, convergence at the probes (`probes`) and the warnings.
//!
//! Summary scalars (name, SI value): `omega_mean_peak` (signed omega_mean
//! of largest magnitude over the well-determined nodes, `peak_node`) with
//! `_unc`, `_x`, `_y`; `u_mean_unc_median`,
//! `omega_mean_unc_median`; for time-resolved runs, and for runs without
//! any frame times (frames taken as evenly spaced), `n_eff_mean` (mean over
//! nodes of (u_n_eff + v_n_eff)/2), `n_eff_ratio` (its mean ratio to the
//! samples), `time_step_s` (NaN without times) and `n_eff_by_frame_index`
//! (1 without times, else 0); with phases `k_coherent_frac`,
//! `k_stochastic_frac` (sums over nodes) and `phase_frames`; always
//! `samples_per_node_mean`.

use super::moments::{Moments, Scalar};
use super::phase;
use super::probes::{self, ProbeInput};
use super::strata::{strata, Strata};
use super::table::{coverage_suffix, independent, node_table, scale_exponents, Ctx};
use super::{Params, PhaseBin, RunAccumulator, RunStats};
use crate::field::NodeTable;

/// Fewest frames for which N_eff is estimated over the frame index of a
/// run without frame times (shorter records keep N_eff = N: a handful of
/// samples cannot tell a time scale).
const MIN_INDEX_FRAMES: u64 = 20;

/// The finished statistics of `acc` with the uncertainty settings of `p`
/// (`RunAccumulator::finish`).
pub(super) fn finish(acc: &RunAccumulator, p: &Params) -> RunStats {
    let mut warnings = Vec::new();
    let grid = acc.grid;
    let nodes = grid.len();
    let omega = acc.omega();
    if omega.is_none() {
        warnings.push("no omega among the derived quantities; the omega columns are empty".into());
    }
    let ctx = context(acc, p, &mut warnings);
    if let Some(w) = concentrated_rejections(&acc.ens.n_replaced, acc.ens.frames, &grid) {
        warnings.push(w);
    }
    let ne = effective_samples(acc, p, &mut warnings);

    // Phase bins and the energy split.
    let has_phase = acc.bins.iter().any(|b| b.is_some()) || acc.outside > 0;
    let empty = Moments::new(nodes, acc.quantities.len());
    let bin_moments: Vec<&Moments> = acc
        .bins
        .iter()
        .map(|b| b.as_ref().unwrap_or(&empty))
        .collect();
    let [k_coh, k_sto, k_coh_unc] = if has_phase {
        phase::energy_split(&bin_moments, nodes)
    } else {
        std::array::from_fn(|_| vec![f64::NAN; nodes])
    };
    let strata = phase_strata(acc, &bin_moments, has_phase);
    let ensemble = node_table(
        &acc.ens,
        &ne.neff,
        [k_coh.clone(), k_sto.clone(), k_coh_unc],
        &ctx,
        strata.as_deref(),
    );
    let mut summary = Vec::new();
    let phase_tables = if has_phase {
        bin_tables(
            acc,
            &ctx,
            &bin_moments,
            [&k_coh, &k_sto],
            &mut summary,
            &mut warnings,
        )
    } else {
        Vec::new()
    };
    summary_scalars(&ensemble, &grid, &ne, &mut summary);
    let convergence = probe_convergence(acc, p, &ne.neff, &mut warnings);
    RunStats {
        ensemble,
        phase: phase_tables,
        convergence,
        n_eff: ne.run,
        summary,
        warnings,
    }
}

/// Phase bins as strata of the ensemble mean (`strata`), when the bins
/// partition the circle: no narrower windows, no frame outside them. The
/// strata of u, v and each quantity, in that order; `None` otherwise.
fn phase_strata(
    acc: &RunAccumulator,
    bin_moments: &[&Moments],
    has_phase: bool,
) -> Option<Vec<Strata>> {
    let partition = has_phase
        && acc.outside == 0
        && acc
            .params
            .phase_width_deg
            .is_none_or(|w| (w * acc.params.phase_bins as f64 - 360.0).abs() < 1e-9 * 360.0);
    partition.then(|| {
        let of = |pick: &dyn Fn(&Moments) -> &Scalar| {
            let bins: Vec<&Scalar> = bin_moments.iter().map(|m| pick(m)).collect();
            strata(pick(&acc.ens), &bins)
        };
        let mut v = vec![of(&|m| &m.u), of(&|m| &m.v)];
        v.extend((0..acc.quantities.len()).map(|i| of(&|m| &m.q[i])));
        v
    })
}

/// The table context: the relative scale uncertainty of every quantity and
/// of the velocity (warning for a unit not of the form m^a/s^b).
fn context<'a>(acc: &'a RunAccumulator, p: &'a Params, warnings: &mut Vec<String>) -> Ctx<'a> {
    let rel = |unit: &str, name: &str, warnings: &mut Vec<String>| -> f64 {
        if p.calibration_unc == 0.0 && p.pulse_separation_unc == 0.0 {
            return 0.0;
        }
        match scale_exponents(unit) {
            Some((a, b)) => ((a as f64 * p.calibration_unc).powi(2)
                + (b as f64 * p.pulse_separation_unc).powi(2))
            .sqrt(),
            None => {
                warnings.push(format!(
                    "unit '{unit}' of {name} is not of the form m^a/s^b; its calibration and pulse-separation uncertainty is left out"
                ));
                0.0
            }
        }
    };
    let q_rel = acc
        .quantities
        .iter()
        .zip(&acc.units)
        .map(|(q, u)| rel(u, q, warnings))
        .collect();
    Ctx {
        grid: acc.grid,
        p,
        quantities: &acc.quantities,
        q_rel,
        vel_rel: rel("m/s", "velocity", warnings),
        omega: acc.omega(),
        suffix: coverage_suffix(p.coverage),
    }
}

/// N_eff per node and series, and what the summary says of it.
struct Neff {
    /// Per node, for u, v and omega.
    neff: [Vec<f64>; 3],
    /// The run's mean over nodes of (u_n_eff + v_n_eff) / 2, when estimated.
    run: Option<f64>,
    /// The uniform time step, s.
    step: Option<f64>,
    /// No frame times: N_eff estimated over the frame index.
    by_index: bool,
}

/// Effective sample sizes from the lag sums (time-resolved runs, and runs
/// without frame times taken as evenly spaced), with their warnings;
/// N_eff = N otherwise.
fn effective_samples(acc: &RunAccumulator, p: &Params, warnings: &mut Vec<String>) -> Neff {
    let nodes = acc.grid.len();
    let omega = acc.omega();
    let mut neff = independent(&acc.ens, omega);
    let mut run_neff = None;
    let base = acc.clock.time_base();
    let step = base.map(|b| b.step);
    time_base_warnings(acc, base, warnings);
    // Without any frame times the frames are taken as evenly spaced in
    // their index (the common case of a fixed acquisition rate); the
    // autocorrelation then says whether they are independent.
    let by_index = acc.clock.timed == 0 && acc.clock.frames >= MIN_INDEX_FRAMES;
    if let (true, Some(lags)) = (step.is_some() || by_index, acc.lags.as_ref()) {
        let cap = p.max_lag.min(acc.params.max_lag).max(1);
        let mut capped = [0usize; 3];
        let mut short = [0usize; 3];
        let series: Vec<&Scalar> = match omega {
            Some(o) => vec![&acc.ens.u, &acc.ens.v, &acc.ens.q[o]],
            None => vec![&acc.ens.u, &acc.ens.v],
        };
        for (s, sc) in series.iter().enumerate() {
            for (k, slot) in neff[s].iter_mut().enumerate() {
                let e = lags.n_eff(s * nodes + k, sc.n[k], sc.mean[k], sc.m2[k], cap);
                *slot = e.n_eff;
                capped[s] += usize::from(e.capped);
                short[s] += usize::from(e.short);
            }
        }
        for (s, name) in ["u", "v", "omega"].iter().enumerate() {
            if short[s] > 0 {
                warnings.push(format!(
                    "at {} of {nodes} nodes the record of {name} holds fewer than {} effective samples (N_eff from the autocorrelation); a record that short cannot tell its own time scale well and N_eff there may be too high by 20-50 %: record longer or treat those uncertainties as lower bounds",
                    short[s],
                    super::lags::SHORT_N_EFF
                ));
            }
        }
        if omega.is_none() {
            neff[2] = (0..nodes).map(|k| neff[0][k].min(neff[1][k])).collect();
        }
        for (s, name) in ["u", "v", "omega"].iter().enumerate() {
            if capped[s] > 0 {
                warnings.push(format!(
                    "at {} of {nodes} nodes the autocorrelation of {name} is still positive at the lag cap ({cap} frames); N_eff there is an upper bound (raise [statistics] max_lag)",
                    capped[s]
                ));
            }
        }
        let vals: Vec<f64> = (0..nodes)
            .filter(|&k| acc.ens.u.n[k] > 0.0)
            .map(|k| 0.5 * (neff[0][k] + neff[1][k]))
            .collect();
        if !vals.is_empty() {
            run_neff = Some(vals.iter().sum::<f64>() / vals.len() as f64);
        }
    }
    Neff {
        neff,
        run: run_neff,
        step,
        by_index,
    }
}

/// The warnings on the frame times: times that are not uniform (samples
/// then independent) and gaps in a uniform time base.
fn time_base_warnings(
    acc: &RunAccumulator,
    base: Option<super::lags::TimeBase>,
    warnings: &mut Vec<String>,
) {
    if acc.clock.timed > 0 && base.is_none() && acc.clock.frames >= 3 {
        warnings.push(format!(
            "{} of {} frames have time_s but the steps are not uniform; samples are treated as independent (N_eff = N)",
            acc.clock.timed, acc.clock.frames
        ));
    }
    if let Some(b) = base.filter(|b| b.gaps > 0) {
        warnings.push(format!(
            "time_s has {} gaps longer than the step of {:.4e} s (burst recording?); N_eff uses the autocorrelation over the frames, including the few lag pairs across a gap",
            b.gaps, b.step
        ));
    }
}

/// The phase-bin tables (bin moments, coherent parts, energies), their
/// warnings and the phase summary scalars.
fn bin_tables(
    acc: &RunAccumulator,
    ctx: &Ctx,
    bin_moments: &[&Moments],
    [k_coh, k_sto]: [&Vec<f64>; 2],
    summary: &mut Vec<(String, f64)>,
    warnings: &mut Vec<String>,
) -> Vec<PhaseBin> {
    let phase_tables: Vec<PhaseBin> = bin_moments
        .iter()
        .enumerate()
        .map(|(b, m)| bin_table(acc, ctx, b, m))
        .collect();
    bin_warnings(acc, &phase_tables, warnings);
    let (sc, ss): (f64, f64) = k_coh
        .iter()
        .zip(k_sto)
        .filter(|(a, b)| a.is_finite() && b.is_finite())
        .fold((0.0, 0.0), |(x, y), (a, b)| (x + a, y + b));
    if sc + ss > 0.0 {
        summary.push(("k_coherent_frac".to_string(), sc / (sc + ss)));
        summary.push(("k_stochastic_frac".to_string(), ss / (sc + ss)));
    }
    summary.push((
        "phase_frames".to_string(),
        bin_moments.iter().map(|m| m.frames).sum(),
    ));
    phase_tables
}

/// The table of phase bin `b` with moments `m`: the node table (N_eff = N,
/// the bin's coherent and stochastic energies) and the coherent parts
/// (bin mean minus ensemble mean) of u, v and omega.
fn bin_table(acc: &RunAccumulator, ctx: &Ctx, b: usize, m: &Moments) -> PhaseBin {
    let nodes = acc.grid.len();
    let omega = acc.omega();
    let mean = |s: &Scalar, k: usize| if s.n[k] > 0.0 { s.mean[k] } else { f64::NAN };
    let coh: Vec<[f64; 3]> = (0..nodes)
        .map(|k| {
            let w = omega.map_or(f64::NAN, |o| mean(&m.q[o], k) - mean(&acc.ens.q[o], k));
            [
                mean(&m.u, k) - mean(&acc.ens.u, k),
                mean(&m.v, k) - mean(&acc.ens.v, k),
                w,
            ]
        })
        .collect();
    let [kc, kc_unc] = phase::bin_coherent(m, &acc.ens, nodes);
    let ks = (0..nodes)
        .map(|k| {
            if m.u.n[k] >= 2.0 {
                0.5 * (m.u.m2[k] + m.v.m2[k]) / (m.u.n[k] - 1.0)
            } else {
                f64::NAN
            }
        })
        .collect();
    let mut table = node_table(m, &independent(m, omega), [kc, ks, kc_unc], ctx, None);
    for (i, name) in ["u_coherent", "v_coherent", "omega_coherent"]
        .iter()
        .enumerate()
    {
        table.push(*name, coh.iter().map(|c| c[i]).collect());
    }
    PhaseBin {
        bin: b,
        centre_deg: phase::centre_deg(acc.params.phase_bins, b),
        n_frames: m.frames as usize,
        table,
    }
}

/// The warnings of the phase binning: empty bins, frames without a phase
/// and frames outside every phase window.
fn bin_warnings(acc: &RunAccumulator, phase_tables: &[PhaseBin], warnings: &mut Vec<String>) {
    let empty_bins: Vec<String> = phase_tables
        .iter()
        .filter(|b| b.n_frames == 0)
        .map(|b| b.bin.to_string())
        .collect();
    if !empty_bins.is_empty() {
        warnings.push(format!(
            "phase bins {} hold no frames",
            empty_bins.join(", ")
        ));
    }
    if acc.unphased > 0 {
        warnings.push(format!(
            "{} of {} frames have no phase_deg; they are left out of the phase bins",
            acc.unphased, acc.clock.frames
        ));
    }
    if acc.outside > 0 {
        warnings.push(format!(
            "{} frames lie outside every phase window ({} degrees wide); they are left out of the phase bins",
            acc.outside,
            acc.params.phase_width_deg.unwrap_or(f64::NAN)
        ));
    }
}

/// The summary scalars of campaign.csv from the ensemble table: the peak
/// (`peak_node`), the median uncertainties, N_eff and the samples.
fn summary_scalars(
    ensemble: &NodeTable,
    grid: &crate::field::Grid,
    ne: &Neff,
    summary: &mut Vec<(String, f64)>,
) {
    let nodes = grid.len();
    let (neff, step, by_index) = (&ne.neff, ne.step, ne.by_index);
    let col = |n: &str| ensemble.get(n).expect("column");
    let (om, omu) = (col("omega_mean"), col("omega_mean_unc"));
    if let Some((k, _)) = peak_node(ensemble) {
        summary.push(("omega_mean_peak".into(), om[k]));
        summary.push(("omega_mean_peak_unc".into(), omu[k]));
        summary.push(("omega_mean_peak_x".into(), grid.x(k % grid.nx)));
        summary.push(("omega_mean_peak_y".into(), grid.y(k / grid.nx)));
    }
    for name in ["u_mean_unc", "omega_mean_unc"] {
        let mut v: Vec<f64> = col(name)
            .iter()
            .copied()
            .filter(|x| x.is_finite())
            .collect();
        if !v.is_empty() {
            summary.push((format!("{name}_median"), crate::robust::median(&mut v)));
        }
    }
    if let Some(run) = ne.run {
        summary.push(("n_eff_mean".into(), run));
        let n = col("n_samples");
        let r: Vec<f64> = (0..nodes)
            .filter(|&k| n[k] > 0.0)
            .map(|k| 0.5 * (neff[0][k] + neff[1][k]) / n[k])
            .collect();
        summary.push(("n_eff_ratio".into(), r.iter().sum::<f64>() / r.len() as f64));
        summary.push(("time_step_s".into(), step.unwrap_or(f64::NAN)));
        // 1: no frame times, N_eff estimated over the frame index.
        summary.push(("n_eff_by_frame_index".into(), f64::from(u8::from(by_index))));
    }
    let samples = col("n_samples");
    summary.push((
        "samples_per_node_mean".into(),
        samples.iter().sum::<f64>() / nodes.max(1) as f64,
    ));
}

/// Convergence of the running statistics at the probes (`probes`).
fn probe_convergence(
    acc: &RunAccumulator,
    p: &Params,
    neff: &[Vec<f64>; 3],
    warnings: &mut Vec<String>,
) -> Option<crate::field::Table> {
    let omega = acc.omega();
    let grid = acc.grid;
    (!acc.traces.is_empty()).then(|| {
        let inputs: Vec<ProbeInput> = acc
            .traces
            .iter()
            .zip(&acc.params.probes)
            .map(|(t, &point)| {
                let k = t.node;
                let ratio = |s: usize, n: f64| if n > 0.0 { neff[s][k] / n } else { 1.0 };
                let nw = omega.map_or(0.0, |o| acc.ens.q[o].n[k]);
                ProbeInput {
                    point,
                    node: k,
                    rows: &t.rows,
                    ratio: [
                        ratio(0, acc.ens.u.n[k]),
                        ratio(1, acc.ens.v.n[k]),
                        ratio(2, nw),
                    ],
                }
            })
            .collect();
        probes::convergence(&grid, &inputs, p.convergence_tail, p.coverage, warnings)
    })
}

/// The node of largest |ω̄| among the well-determined nodes, and its value.
/// Well determined: the random part of u(ω̄), to first order
/// `sqrt(omega_inst_unc² − omega_bias_inst²) / sqrt(n_valid)` (the random
/// part of one frame's uncertainty over the root of the samples), at most
/// 3 × its median over the field,
/// which keeps a poorly sampled or one-sided-stencil edge or corner node
/// from posing as the peak. The random part, not the whole of u(ω̄): a
/// vortex core's truncation error, which belongs in u(ω̄), must not
/// disqualify the core itself (with the truncation pooled over
/// neighbourhoods, `systematic::systematic`, the demo's cores had u(ω̄) up to 7
/// times the median and the peak fell on a weaker node). Tables without
/// those two columns use u(ω̄) itself; without any uncertainty column every
/// finite node counts. The one peak rule of campaign.csv, the report and
/// the comparison scalars.
pub(crate) fn peak_node(t: &NodeTable) -> Option<(usize, f64)> {
    let w = t.get("omega_mean")?;
    let random: Option<Vec<f64>> = match (t.get("omega_inst_unc"), t.get("n_valid")) {
        (Some(u), Some(n)) => {
            // omega_inst_unc less its systematic part, where one is given
            let b = t.get("omega_bias_inst");
            Some(
                (0..u.len())
                    .map(|k| {
                        let bk = b.map_or(0.0, |b| if b[k].is_finite() { b[k] } else { 0.0 });
                        crate::derive::quantities::clip0(u[k] * u[k] - bk * bk).sqrt() / n[k].sqrt()
                    })
                    .collect(),
            )
        }
        _ => t.get("omega_mean_unc").map(|u| u.to_vec()),
    };
    let lim = random
        .as_ref()
        .map(|u| 3.0 * crate::robust::median_of(u.iter().copied()))
        .filter(|m| m.is_finite());
    let ok = |k: usize| match (lim, &random) {
        (Some(l), Some(u)) => u[k].is_finite() && u[k] <= l,
        _ => true,
    };
    w.iter()
        .enumerate()
        .filter(|(k, x)| x.is_finite() && ok(*k))
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
        .map(|(k, x)| (k, *x))
}

/// Fraction of the frames above which a node's replacements are reported
/// as concentrated (`concentrated_rejections`).
const CONCENTRATED_FRAC: f64 = 0.2;

/// A warning when the validation replaced the vector at some nodes in more
/// than `CONCENTRATED_FRAC` of the frames and more than 5 times the run's
/// median node fraction: where the flow is sharp (a vortex core a few
/// pitches wide, a shear layer) those are mostly false positives of the
/// normalized median test, and the mean of the vectors kept there is biased
/// by the selection, which no uncertainty column holds. Measured (`synth
/// vortex --core-pitches 1.5 --frames 400 --outliers 0 --gaps 0`, threshold
/// 2): up to 65 % of the exact vectors replaced next to the centre, and
/// `u_mean` off by up to 7 of its standard uncertainties there (k = 2
/// coverage 0.84 over the core); with threshold 3, 5 % and 0.94. `None`
/// when no node qualifies; `n_replaced` counts frames per node
/// (`k = j*nx + i`).
fn concentrated_rejections(
    n_replaced: &[f64],
    frames: f64,
    grid: &crate::field::Grid,
) -> Option<String> {
    if frames < 10.0 {
        return None; // too few frames to tell a fraction
    }
    let frac: Vec<f64> = n_replaced.iter().map(|c| c / frames).collect();
    let typical = crate::robust::median_of(frac.iter().copied());
    let lim = CONCENTRATED_FRAC.max(5.0 * typical);
    let hot: Vec<usize> = (0..frac.len()).filter(|&k| frac[k] > lim).collect();
    let &worst = hot.iter().max_by(|&&a, &&b| frac[a].total_cmp(&frac[b]))?;
    Some(format!(
        "at {} of {} nodes the validation replaced the vector in more than {:.0} % of the frames \
         (up to {:.0} % at x = {:.4} m, y = {:.4} m; the median node: {:.1} %): where the flow is \
         sharp, such as a vortex core a few grid spacings wide, these are mostly false positives \
         of the normalized median test, and the means there are biased by the selection beyond \
         their uncertainty; see the outlier_frac map, and raise the median test's threshold \
         (3) or its radius if the replacements sit in the cores",
        hot.len(),
        frac.len(),
        100.0 * lim,
        100.0 * frac[worst],
        grid.x(worst % grid.nx),
        grid.y(worst / grid.nx),
        100.0 * typical,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid() -> crate::field::Grid {
        crate::testutil::grid(4, 3, 1e-3)
    }

    #[test]
    fn replacements_concentrated_at_a_few_nodes_are_reported_with_the_worst() {
        // 100 frames; 2 % replaced at most nodes, 40 % and 65 % at two.
        let mut n = vec![2.0; 12];
        n[5] = 40.0;
        n[6] = 65.0;
        let w = concentrated_rejections(&n, 100.0, &grid()).unwrap();
        assert!(w.starts_with("at 2 of 12 nodes"), "{w}");
        assert!(
            w.contains("up to 65 % at x = 0.0020 m, y = 0.0010 m"),
            "{w}"
        );
        assert!(w.contains("the median node: 2.0 %"), "{w}");
    }

    #[test]
    fn even_or_rare_replacements_are_not_reported() {
        // 15 % everywhere (a noisy run, not a local cluster), or a node at
        // 15 %: below the 20 % floor; and too few frames to tell.
        assert!(concentrated_rejections(&[15.0; 12], 100.0, &grid()).is_none());
        let mut n = vec![1.0; 12];
        n[3] = 15.0;
        assert!(concentrated_rejections(&n, 100.0, &grid()).is_none());
        n[3] = 9.0;
        assert!(concentrated_rejections(&n, 9.0, &grid()).is_none());
        // a node above 20 % but within 5 x a high median: not concentrated
        let mut n = vec![10.0; 12];
        n[0] = 45.0;
        assert!(concentrated_rejections(&n, 100.0, &grid()).is_none());
    }
}
