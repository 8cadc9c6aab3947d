//! The node tables: accumulated moments → the ensemble or a phase bin's
//! columns with their uncertainties.
//!
//! Columns, in order (NN = the coverage in percent, e.g. 95):
//! docs/interface.md: `n_valid, u_mean, v_mean, u_std, v_std, uv_cov, omega_mean,
//! omega_std, u_mean_unc, v_mean_unc, omega_mean_unc, omega_inst_unc`;
//! then `n_samples, u_std_unc, v_std_unc, uv_cov_unc, omega_std_unc,
//! u_mean_unc_pNN, v_mean_unc_pNN, omega_mean_unc_pNN, u_inst_unc,
//! v_inst_unc, omega_bias, k, k_coherent, k_stochastic, u_skew, u_flat,
//! v_skew, v_flat, omega_skew, omega_flat, u_n_eff, v_n_eff, omega_n_eff,
//! outlier_frac, filled_frac`; then for every other derived quantity q, in
//! `derive` order: `q_mean, q_std, q_mean_unc, q_std_unc, q_mean_unc_pNN,
//! q_inst_unc, q_bias`. Phase-bin tables have the same columns (N_eff = N;
//! `k_coherent` = the bin's (u~^2 + v~^2)/2, `k_stochastic` = the bin's k)
//! followed by `u_coherent, v_coherent, omega_coherent` (bin mean minus
//! ensemble mean). `n_valid`, `n_samples` and `*_n_eff` are counts stored
//! as f64. `outlier_frac`/`filled_frac`: fraction of the frames offered in
//! which the node was replaced / filled.
//!
//! Column rules (every value SI; NaN where a node has too few samples):
//! - `*_mean`, `*_std` (sample standard deviation, divisor N - 1), `uv_cov`
//!   (divisor N - 1), skewness and flatness from the population central
//!   moments (`m3 / m2^1.5`, `m4 / m2^2`; common practice).
//! - `*_mean_unc`: combined standard uncertainty of the mean (GUM eq. 10):
//!   the random part `s / sqrt(N_eff)` times `sqrt((N-1)/(N-N/N_eff))`
//!   (`gum::mean_unc_correlated`; nu = N_eff - 1) — in a phased run's
//!   ensemble, where the bins partition the circle, `s` is the stratified
//!   within-bin one and the bins' imbalance is a further systematic part
//!   (`strata`; nu = min(N_eff - 1, N - B)) — the truncation of the
//!   mean of a derived quantity, or the smoothing bias of a smoothed u and
//!   v (`systematic`: the debiased mean of the signed per-frame estimates;
//!   not corrected, nu = infinity), and the
//!   scale systematics:
//!   a quantity of unit m^a s^b made from pixel displacements and positions
//!   scales as M^a dt^b with the magnification M and the pulse separation
//!   dt, so it carries the relative uncertainty
//!   `sqrt((a r_cal)^2 + (b r_dt)^2)` times |value| (velocity: a = 1,
//!   b = -1; vorticity: a = 0, b = -1, i.e. no calibration term). Both have
//!   nu = infinity.
//! - Appended at the end (after the per-quantity blocks):
//!   `u_std_denoised, v_std_denoised, omega_std_denoised, k_denoised`
//!   (`denoised`), `k_coherent_unc` (`phase`), `omega_bias_inst` (the
//!   debiased RMS truncation of one frame, pooled: `systematic_inst`), then
//!   per other quantity `q_std_denoised, q_bias_inst, q_noise_shift` (the
//!   mean analytic noise shift removed from `q_mean`; NaN: none known).
//! - `*_std_unc`: `gum::std_unc_flat` (measured flatness) with the scale systematic of
//!   the quantity; `uv_cov_unc`: `sqrt((s_u^2 s_v^2 + cov^2)/(N_eff - 1))`
//!   with twice the velocity's relative scale uncertainty.
//! - `*_mean_unc_pNN`: expanded uncertainty at coverage NN %, k from
//!   Student t at the Welch-Satterthwaite nu_eff.
//! - `*_inst_unc`: the standard uncertainty of one instantaneous value: the
//!   RMS over the counted samples of the per-frame propagated (random)
//!   uncertainty combined in quadrature with `*_bias_inst`, its systematic
//!   part (as `*_mean_unc` holds `*_bias`); the `*_std_denoised` columns
//!   remove the random part only. `*_bias`: the systematic part of the mean.
//! - N_eff: per node and series (u, v, omega) for time-resolved runs (see
//!   `lags`); the other derived quantities use omega's, `uv_cov` the smaller
//!   of u's and v's. Otherwise, and always inside phase bins (one frame per
//!   cycle per bin), N_eff = N.

use super::gum::{self, Component};
use super::moments::{Moments, Scalar};
use super::strata::Strata;
use super::systematic::{systematic, systematic_inst};
use super::Params;
use crate::derive::quantities::clip0;
use crate::field::{Grid, NodeTable};

/// Column suffix of the expanded uncertainty: 0.95 → "p95", 0.9545 → "p95_45".
pub(crate) fn coverage_suffix(p: f64) -> String {
    let pct = p * 100.0;
    if (pct - pct.round()).abs() < 1e-9 {
        format!("p{}", pct.round() as i64)
    } else {
        let s = format!("{pct:.4}");
        format!("p{}", s.trim_end_matches('0').replace('.', "_"))
    }
}

/// Exponents (a, b) of a unit written as m^a s^b ("m/s", "1/s", "m^2/s^2",
/// "", "1"); `None` for anything else.
pub(crate) fn scale_exponents(unit: &str) -> Option<(i32, i32)> {
    let unit = unit.trim();
    let (num, den) = match unit.split_once('/') {
        Some((n, d)) => (n, Some(d)),
        None => (unit, None),
    };
    let mut e = (0, 0);
    let mut part = |s: &str, sign: i32| -> Option<()> {
        for tok in s.split(['*', ' ', '.']).filter(|t| !t.is_empty()) {
            let (base, pow) = match tok.split_once('^') {
                Some((b, p)) => (b, p.parse::<i32>().ok()?),
                None => (tok, 1),
            };
            match base {
                "m" => e.0 += sign * pow,
                "s" => e.1 += sign * pow,
                "1" => {}
                _ => return None,
            }
        }
        Some(())
    };
    part(num, 1)?;
    if let Some(d) = den {
        part(d.trim_start_matches('(').trim_end_matches(')'), -1)?;
    }
    Some(e)
}

/// What the table builder needs besides the moments.
pub(super) struct Ctx<'a> {
    pub grid: Grid,
    pub p: &'a Params,
    pub quantities: &'a [String],
    /// Relative scale uncertainty of each quantity (NaN-free; 0 when none).
    pub q_rel: Vec<f64>,
    pub vel_rel: f64,
    pub omega: Option<usize>,
    pub suffix: String,
}

/// Statistics of one scalar at one node.
struct Stat {
    n: f64,
    mean: f64,
    std: f64,
    skew: f64,
    flat: f64,
    /// RMS over the frames of the propagated random uncertainty.
    inst: f64,
    /// `inst` combined with `bias_inst` (the `*_inst_unc` columns).
    inst_total: f64,
    /// Systematic (truncation) part of the uncertainty of the mean.
    bias: f64,
    /// Systematic part of one instantaneous value (`systematic_inst`).
    bias_inst: f64,
    /// Mean expected noise shift removed from `mean` (NaN: none known, and
    /// nothing removed).
    shift: f64,
}

fn stat(s: &Scalar, k: usize, bias: f64, bias_inst: f64) -> Stat {
    let n = s.n[k];
    let nan = f64::NAN;
    // The analytic noise shift, removed from the mean (quantities module);
    // NaN where none was offered (velocity, lambda_ci, the Gammas, or a
    // version-1 partial state): then nothing is removed.
    let shift = if s.shift_n[k] > 0.0 {
        s.shift[k] / s.shift_n[k]
    } else {
        nan
    };
    let mean = if n > 0.0 {
        s.mean[k] - if shift.is_finite() { shift } else { 0.0 }
    } else {
        nan
    };
    let std = if n >= 2.0 {
        (s.m2[k] / (n - 1.0)).sqrt()
    } else {
        nan
    };
    let (skew, flat) = if n >= 3.0 && s.m2[k] > 0.0 {
        let m2 = s.m2[k] / n;
        (s.m3[k] / n / m2.powf(1.5), s.m4[k] / n / (m2 * m2))
    } else {
        (nan, nan)
    };
    let rms = |sum: f64, c: f64| if c > 0.0 { (sum / c).sqrt() } else { nan };
    let inst = rms(s.unc2[k], s.unc_n[k]);
    Stat {
        n,
        mean,
        std,
        skew,
        flat,
        inst,
        // GUM eq. 10 with unit sensitivities; no systematic part known: the
        // random part alone
        inst_total: if bias_inst.is_finite() {
            inst.hypot(bias_inst)
        } else {
            inst
        },
        bias,
        bias_inst,
        shift,
    }
}

/// A scalar's statistics at one node with its uncertainties.
struct Full {
    st: Stat,
    /// Combined and expanded standard uncertainty of the mean.
    mean_unc: f64,
    mean_exp: f64,
    std_unc: f64,
}

/// The statistics of `s` at every node, with N_eff `neff` and the relative
/// scale uncertainty `rel` (see the module doc). With `strata` (the
/// ensemble of a phased run, `strata`), the random part of the mean is the
/// stratified one and the bins' imbalance a systematic part, at the nodes
/// where stratification applies.
fn full(
    s: &Scalar,
    neff: &[f64],
    rel: f64,
    coverage: f64,
    strata: Option<&Strata>,
    grid: &Grid,
) -> Vec<Full> {
    let ratio: Vec<f64> = (0..s.n.len())
        .map(|k| if s.n[k] > 0.0 { neff[k] / s.n[k] } else { 1.0 })
        .collect();
    let bias = systematic(s, &ratio, grid);
    let bias_inst = systematic_inst(s, grid);
    (0..s.n.len())
        .map(|k| {
            let ne = neff[k];
            let st = stat(s, k, bias[k], bias_inst[k]);
            let (mut mean_unc, mut mean_exp) = (f64::NAN, f64::NAN);
            if st.n >= 2.0 {
                let strat = strata.filter(|t| t.std[k].is_finite());
                let mut c = vec![match strat {
                    Some(t) => Component {
                        u: gum::mean_unc_correlated(t.std[k], st.n, ne),
                        dof: (ne - 1.0).min(t.dof[k]),
                    },
                    None => Component {
                        u: gum::mean_unc_correlated(st.std, st.n, ne),
                        dof: ne - 1.0,
                    },
                }];
                if let Some(t) = strat {
                    c.push(Component {
                        u: t.imbalance[k].abs(),
                        dof: f64::INFINITY,
                    });
                }
                if st.bias.is_finite() {
                    c.push(Component {
                        u: st.bias,
                        dof: f64::INFINITY,
                    });
                }
                if rel > 0.0 {
                    c.push(Component {
                        u: rel * st.mean.abs(),
                        dof: f64::INFINITY,
                    });
                }
                let (uc, nu) = gum::combine(&c);
                mean_unc = uc;
                mean_exp = if uc == 0.0 {
                    0.0
                } else {
                    gum::coverage_factor(coverage, nu) * uc
                };
            }
            let r = gum::std_unc_flat(st.std, st.flat, ne);
            let std_unc = (r * r + (rel * st.std).powi(2)).sqrt();
            Full {
                st,
                mean_unc,
                mean_exp,
                std_unc,
            }
        })
        .collect()
}

/// The columns of one set of moments (ensemble or bin). `neff` holds the
/// per-node N_eff of (u, v, omega); `k_parts` the k_coherent,
/// k_stochastic and k_coherent_unc maps; `strata` (a phased run's
/// ensemble) the phase-bin strata of u, v and each quantity, in that order.
pub(super) fn node_table(
    m: &Moments,
    neff: &[Vec<f64>; 3],
    k_parts: [Vec<f64>; 3],
    c: &Ctx,
    strata: Option<&[Strata]>,
) -> NodeTable {
    let s = Series::of(m, neff, c, strata);
    let cov = uv_covariance(m);
    let cov_unc = s.uv_covariance_unc(&cov, c.vel_rel);
    let [k_coh, k_sto, k_coh_unc] = k_parts;
    let mut t = NodeTable::new(c.grid);
    s.push_interface_columns(&mut t, cov);
    s.push_own_columns(&mut t, cov_unc, [k_coh, k_sto], &c.suffix);
    s.push_appended_columns(&mut t, k_coh_unc);
    t
}

/// The per-node statistics of every series of one set of moments.
struct Series<'a> {
    m: &'a Moments,
    neff: &'a [Vec<f64>; 3],
    u: Vec<Full>,
    v: Vec<Full>,
    /// Omega's (of an empty scalar when omega is not derived).
    w: Vec<Full>,
    /// Each derived quantity other than omega, by name, in `derive` order.
    others: Vec<(&'a String, Vec<Full>)>,
}

/// One column: `g` of every node's statistics.
fn col(f: &[Full], g: &dyn Fn(&Full) -> f64) -> Vec<f64> {
    f.iter().map(g).collect()
}

/// The sample covariance of u and v (divisor N - 1) at every node; NaN
/// below two samples.
fn uv_covariance(m: &Moments) -> Vec<f64> {
    (0..m.cuv.len())
        .map(|k| {
            if m.u.n[k] >= 2.0 {
                m.cuv[k] / (m.u.n[k] - 1.0)
            } else {
                f64::NAN
            }
        })
        .collect()
}

impl<'a> Series<'a> {
    /// The statistics of u, v, omega and the other quantities of `m`.
    fn of(
        m: &'a Moments,
        neff: &'a [Vec<f64>; 3],
        c: &'a Ctx,
        strata: Option<&[Strata]>,
    ) -> Series<'a> {
        let st = |i: usize| strata.map(|s| &s[i]);
        let cv = c.p.coverage;
        let empty = Scalar::new(c.grid.len());
        let w_rel = c.omega.map_or(0.0, |o| c.q_rel[o]);
        let u = full(&m.u, &neff[0], c.vel_rel, cv, st(0), &c.grid);
        let v = full(&m.v, &neff[1], c.vel_rel, cv, st(1), &c.grid);
        let w = full(
            c.omega.map_or(&empty, |o| &m.q[o]),
            &neff[2],
            w_rel,
            cv,
            c.omega.and_then(|o| st(2 + o)),
            &c.grid,
        );
        let others = c
            .quantities
            .iter()
            .enumerate()
            .filter(|(qi, _)| Some(*qi) != c.omega)
            .map(|(qi, name)| {
                (
                    name,
                    full(&m.q[qi], &neff[2], c.q_rel[qi], cv, st(2 + qi), &c.grid),
                )
            })
            .collect();
        Series {
            m,
            neff,
            u,
            v,
            w,
            others,
        }
    }

    /// The standard uncertainty of `cov` (see the module doc), with twice
    /// the velocity's relative scale uncertainty `vel_rel`.
    fn uv_covariance_unc(&self, cov: &[f64], vel_rel: f64) -> Vec<f64> {
        let neff = self.neff;
        (0..cov.len())
            .map(|k| {
                let ne = neff[0][k].min(neff[1][k]);
                let r = gum::cov_unc(self.u[k].st.std, self.v[k].st.std, cov[k], ne);
                (r * r + (2.0 * vel_rel * cov[k]).powi(2)).sqrt()
            })
            .collect()
    }

    /// The fraction of the frames offered counted in `x`, per node.
    fn frac(&self, x: &[f64]) -> Vec<f64> {
        let m = self.m;
        x.iter()
            .map(|&a| {
                if m.frames > 0.0 {
                    a / m.frames
                } else {
                    f64::NAN
                }
            })
            .collect()
    }

    /// The columns of docs/interface.md, in order.
    fn push_interface_columns(&self, t: &mut NodeTable, cov: Vec<f64>) {
        let (fu, fv, fw) = (&self.u, &self.v, &self.w);
        t.push("n_valid", self.m.n_valid.clone());
        t.push("u_mean", col(fu, &|f| f.st.mean));
        t.push("v_mean", col(fv, &|f| f.st.mean));
        t.push("u_std", col(fu, &|f| f.st.std));
        t.push("v_std", col(fv, &|f| f.st.std));
        t.push("uv_cov", cov);
        t.push("omega_mean", col(fw, &|f| f.st.mean));
        t.push("omega_std", col(fw, &|f| f.st.std));
        t.push("u_mean_unc", col(fu, &|f| f.mean_unc));
        t.push("v_mean_unc", col(fv, &|f| f.mean_unc));
        t.push("omega_mean_unc", col(fw, &|f| f.mean_unc));
        t.push("omega_inst_unc", col(fw, &|f| f.st.inst_total));
    }

    /// Our own columns, up to the per-quantity blocks included; `k_parts`
    /// holds the k_coherent and k_stochastic maps, `sfx` the coverage
    /// suffix.
    fn push_own_columns(
        &self,
        t: &mut NodeTable,
        cov_unc: Vec<f64>,
        k_parts: [Vec<f64>; 2],
        sfx: &str,
    ) {
        let (m, neff) = (self.m, self.neff);
        let (fu, fv, fw) = (&self.u, &self.v, &self.w);
        let kk: Vec<f64> = fu
            .iter()
            .zip(fv)
            .map(|(a, b)| 0.5 * (a.st.std.powi(2) + b.st.std.powi(2)))
            .collect();
        t.push("n_samples", m.u.n.clone());
        t.push("u_std_unc", col(fu, &|f| f.std_unc));
        t.push("v_std_unc", col(fv, &|f| f.std_unc));
        t.push("uv_cov_unc", cov_unc);
        t.push("omega_std_unc", col(fw, &|f| f.std_unc));
        t.push(format!("u_mean_unc_{sfx}"), col(fu, &|f| f.mean_exp));
        t.push(format!("v_mean_unc_{sfx}"), col(fv, &|f| f.mean_exp));
        t.push(format!("omega_mean_unc_{sfx}"), col(fw, &|f| f.mean_exp));
        t.push("u_inst_unc", col(fu, &|f| f.st.inst_total));
        t.push("v_inst_unc", col(fv, &|f| f.st.inst_total));
        t.push("omega_bias", col(fw, &|f| f.st.bias));
        t.push("k", kk);
        let [k_coh, k_sto] = k_parts;
        t.push("k_coherent", k_coh);
        t.push("k_stochastic", k_sto);
        t.push("u_skew", col(fu, &|f| f.st.skew));
        t.push("u_flat", col(fu, &|f| f.st.flat));
        t.push("v_skew", col(fv, &|f| f.st.skew));
        t.push("v_flat", col(fv, &|f| f.st.flat));
        t.push("omega_skew", col(fw, &|f| f.st.skew));
        t.push("omega_flat", col(fw, &|f| f.st.flat));
        t.push("u_n_eff", neff[0].clone());
        t.push("v_n_eff", neff[1].clone());
        t.push("omega_n_eff", neff[2].clone());
        t.push("outlier_frac", self.frac(&m.n_replaced));
        t.push("filled_frac", self.frac(&m.n_filled));
        for (name, fq) in &self.others {
            t.push(format!("{name}_mean"), col(fq, &|f| f.st.mean));
            t.push(format!("{name}_std"), col(fq, &|f| f.st.std));
            t.push(format!("{name}_mean_unc"), col(fq, &|f| f.mean_unc));
            t.push(format!("{name}_std_unc"), col(fq, &|f| f.std_unc));
            t.push(format!("{name}_mean_unc_{sfx}"), col(fq, &|f| f.mean_exp));
            t.push(format!("{name}_inst_unc"), col(fq, &|f| f.st.inst_total));
            t.push(format!("{name}_bias"), col(fq, &|f| f.st.bias));
        }
    }

    /// The columns appended after every earlier column (format of 2026-12):
    /// the fluctuations less the measurement noise, the coherent energy's
    /// uncertainty `k_coh_unc`, the per-frame truncation and the noise
    /// shifts.
    fn push_appended_columns(&self, t: &mut NodeTable, k_coh_unc: Vec<f64>) {
        let den = |f: &Full| denoised(f.st.std, f.st.inst);
        let (du, dv) = (col(&self.u, &den), col(&self.v, &den));
        t.push("u_std_denoised", du.clone());
        t.push("v_std_denoised", dv.clone());
        t.push("omega_std_denoised", col(&self.w, &den));
        t.push(
            "k_denoised",
            du.iter()
                .zip(&dv)
                .map(|(a, b)| 0.5 * (a * a + b * b))
                .collect(),
        );
        t.push("k_coherent_unc", k_coh_unc);
        t.push("omega_bias_inst", col(&self.w, &|f| f.st.bias_inst));
        for (name, fq) in &self.others {
            t.push(format!("{name}_std_denoised"), col(fq, &den));
            t.push(format!("{name}_bias_inst"), col(fq, &|f| f.st.bias_inst));
            t.push(format!("{name}_noise_shift"), col(fq, &|f| f.st.shift));
        }
    }
}

/// The standard deviation of the resolved fluctuations: the sample
/// standard deviation less the RMS instantaneous uncertainty in quadrature,
/// `sqrt(max(0, s^2 - u_inst^2))` (the measurement noise adds its variance
/// to the fluctuations'; common practice). NaN when either is unknown.
fn denoised(std: f64, inst: f64) -> f64 {
    clip0(std * std - inst * inst).sqrt()
}

/// N_eff = N for every series (independent samples).
pub(super) fn independent(m: &Moments, omega: Option<usize>) -> [Vec<f64>; 3] {
    let w = omega.map_or_else(|| m.u.n.clone(), |o| m.q[o].n.clone());
    [m.u.n.clone(), m.v.n.clone(), w]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_and_suffixes() {
        assert_eq!(scale_exponents("m/s"), Some((1, -1)));
        assert_eq!(scale_exponents("1/s"), Some((0, -1)));
        assert_eq!(scale_exponents("1/s^2"), Some((0, -2)));
        assert_eq!(scale_exponents("m^2/s"), Some((2, -1)));
        assert_eq!(scale_exponents(""), Some((0, 0)));
        assert_eq!(scale_exponents("rad"), None);
        assert_eq!(coverage_suffix(0.95), "p95");
        assert_eq!(coverage_suffix(0.9545), "p95_45");
        assert_eq!(coverage_suffix(0.99), "p99");
    }
}
