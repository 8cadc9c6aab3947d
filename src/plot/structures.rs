//! Figures of a run's coherent structures and scales: the POD energy
//! spectrum with its sampling error and noise floor, the leading modes as
//! maps, the phase portrait of modes 1 and 2, the spectra with their
//! confidence bands, and the two-point correlations at the probes.
//!
//! Owns: what these figures show. The panels are built by plain functions
//! (`energy_panel`, `portrait_panel`, …) so that tests can check the values
//! drawn against the tables written; `figures` draws those present.
//! Log axes are drawn as log₁₀ of the value on a linear axis (the axis
//! label says so).

use std::path::Path;

use super::colormap::TIDE;
use super::draw::{write_figure, MapFigure, MapPanel};
use super::lines::{Curve, LineFigure, LinePanel, RUN_COLORS};
use super::{figure_ref, symmetric_limit, Params, Units};
use crate::error::Result;
use crate::field::Grid;
use crate::modes::Pod;
use crate::result::{FigureRef, RunResult};

/// The energy spectrum: log₁₀ of each mode's energy fraction with the
/// North et al. (1982) error bar, and the noise floor as a line.
pub(crate) fn energy_panel(pod: &Pod) -> LinePanel {
    let tot = pod.total_energy;
    let lg = |x: f64| if x > 0.0 { x.log10() } else { f64::NAN };
    let xy: Vec<(f64, f64)> = pod
        .energy
        .iter()
        .enumerate()
        .map(|(j, e)| ((j + 1) as f64, lg(e / tot)))
        .collect();
    let band = pod
        .energy
        .iter()
        .zip(&pod.energy_unc)
        .enumerate()
        .map(|(j, (e, u))| ((j + 1) as f64, lg((e - u) / tot), lg((e + u) / tot)))
        .collect();
    let mut curves = vec![Curve {
        label: "energy fraction ± North et al. error".into(),
        xy,
        band: Some(band),
        color: RUN_COLORS[0],
        markers: true,
    }];
    if let Some(f) = pod.noise_floor {
        let r = pod.energy.len() as f64;
        curves.push(Curve {
            label: "noise floor".into(),
            xy: vec![(1.0, lg(f / tot)), (r, lg(f / tot))],
            band: None,
            color: RUN_COLORS[1],
            markers: false,
        });
    }
    LinePanel {
        title: "POD energy spectrum".into(),
        x_label: "mode".into(),
        y_label: "log₁₀ energy fraction".into(),
        curves,
        x_names: None,
    }
}

/// The phase portrait: every frame at (a₁/√(2λ₁), a₂/√(2λ₂)), with the
/// unit circle of a pure sinusoidal pair.
pub(crate) fn portrait_panel(pod: &Pod) -> Option<LinePanel> {
    if pod.energy.len() < 2 || pod.energy[1] <= 0.0 {
        return None;
    }
    let (s1, s2) = ((2.0 * pod.energy[0]).sqrt(), (2.0 * pod.energy[1]).sqrt());
    let xy = pod
        .coefficients
        .iter()
        .map(|a| (a[0] / s1, a[1] / s2))
        .collect();
    let circle = (0..=90)
        .map(|k| {
            let t = std::f64::consts::TAU * k as f64 / 90.0;
            (t.cos(), t.sin())
        })
        .collect();
    Some(LinePanel {
        title: "Phase portrait of modes 1 and 2".into(),
        x_label: "a₁ / √(2λ₁)".into(),
        y_label: "a₂ / √(2λ₂)".into(),
        curves: vec![
            Curve {
                label: "unit circle".into(),
                xy: circle,
                band: None,
                color: RUN_COLORS[5],
                markers: false,
            },
            Curve {
                label: "frames".into(),
                xy,
                band: None,
                color: RUN_COLORS[0],
                markers: true,
            },
        ],
        x_names: None,
    })
}

/// Vorticity of a mode (1/m, the mode being dimensionless): central
/// differences inside, one-sided at the edges (for the figure only).
pub(crate) fn mode_vorticity(g: &Grid, m: &[f64]) -> Vec<f64> {
    let n = g.len();
    let (u, v) = (&m[..n], &m[n..]);
    let d = |f: &[f64], i: usize, j: usize, along_x: bool| {
        let (k, len, h) = if along_x {
            (i, g.nx, g.dx)
        } else {
            (j, g.ny, g.dy)
        };
        let at = |kk: usize| {
            if along_x {
                f[j * g.nx + kk]
            } else {
                f[kk * g.nx + i]
            }
        };
        if len < 2 {
            return f64::NAN;
        }
        let (a, b) = (k.saturating_sub(1), (k + 1).min(len - 1));
        (at(b) - at(a)) / ((b - a) as f64 * h)
    };
    (0..n)
        .map(|k| {
            let (i, j) = (k % g.nx, k / g.nx);
            d(v, i, j, true) - d(u, i, j, false)
        })
        .collect()
}

/// PSD panels: log₁₀ PSD with the confidence band, one panel for the
/// probes and one for the POD coefficients.
pub(crate) fn spectra_panels(s: &crate::spectra::run::RunSpectra) -> Vec<LinePanel> {
    let lg = |x: f64| if x > 0.0 { x.log10() } else { f64::NAN };
    let mut groups: Vec<(String, Vec<Curve>)> = vec![
        ("Velocity at the probes".into(), Vec::new()),
        ("POD coefficients".into(), Vec::new()),
    ];
    for ser in &s.series {
        let g = usize::from(!ser.name.starts_with("probe"));
        let p = &ser.psd;
        let k = groups[g].1.len();
        let xy = p
            .freq
            .iter()
            .zip(&p.psd)
            .skip(1)
            .map(|(f, v)| (*f, lg(*v)))
            .collect();
        let band = (1..p.freq.len())
            .map(|i| (p.freq[i], lg(p.lower[i]), lg(p.upper[i])))
            .collect();
        let label = match ser.peak {
            Some((f, u)) => format!(
                "{} (peak {} ± {} Hz)",
                ser.name,
                super::figs::sig(f),
                super::figs::sig(u)
            ),
            None => ser.name.clone(),
        };
        groups[g].1.push(Curve {
            label,
            xy,
            band: Some(band),
            color: RUN_COLORS[k % RUN_COLORS.len()],
            markers: false,
        });
    }
    groups
        .into_iter()
        .filter(|g| !g.1.is_empty())
        .map(|(title, curves)| LinePanel {
            title,
            x_label: "frequency (Hz)".into(),
            y_label: "log₁₀ PSD ((m/s)²/Hz)".into(),
            curves,
            x_names: None,
        })
        .collect()
}

/// Correlation panels, one per probe (at most 3): ρ_uu and ρ_vv along x
/// and y against the separation (mm), and ρ₀ extrapolated to zero
/// separation (the gap to 1 is the noise spike).
pub(crate) fn correlation_panels(s: &crate::scales::Scales) -> Vec<LinePanel> {
    s.probes
        .iter()
        .take(3)
        .enumerate()
        .map(|(ip, p)| {
            let mut curves = Vec::new();
            for (c, name) in ["uu", "vv"].iter().enumerate() {
                let cs = &p.comp[c];
                for (a, (ax, axis)) in [("x", &cs.x), ("y", &cs.y)].into_iter().enumerate() {
                    curves.push(Curve {
                        label: format!("ρ_{name} along {ax}"),
                        xy: axis.profile.iter().map(|(r, v)| (r * 1e3, *v)).collect(),
                        band: None,
                        color: RUN_COLORS[2 * c + a],
                        markers: false,
                    });
                }
            }
            let rho0: Vec<(f64, f64)> = p
                .comp
                .iter()
                .flat_map(|c| [c.x.rho0, c.y.rho0])
                .filter(|v| v.is_finite())
                .map(|v| (0.0, v))
                .collect();
            if !rho0.is_empty() {
                curves.push(Curve {
                    label: "ρ₀ extrapolated (1 − ρ₀: noise spike)".into(),
                    xy: rho0,
                    band: None,
                    color: RUN_COLORS[5],
                    markers: true,
                });
            }
            LinePanel {
                title: format!("Probe {ip}"),
                x_label: "separation (mm)".into(),
                y_label: "correlation ρ".into(),
                curves,
                x_names: None,
            }
        })
        .collect()
}

/// Draws the figures of `run.structures` that are present.
pub(crate) fn figures(p: &Params, run: &RunResult, out: &Path) -> Result<Vec<FigureRef>> {
    let dir = out.join(&run.id).join("figures");
    let mut figs = Vec::new();
    let mut save_lines =
        |panels: Vec<LinePanel>, stem: &str, title: &str, cap: String| -> Result<()> {
            if panels.is_empty() {
                return Ok(());
            }
            let fig = LineFigure {
                heading: None,
                width: p.width.max(620 * panels.len() as u32),
                height: 560,
                panels,
            };
            figs.push(figure_ref(out, write_figure(&fig, &dir, stem)?, title, cap));
            Ok(())
        };
    let st = &run.structures;
    if let Some(pod) = &st.pod {
        let mut panels = vec![energy_panel(pod)];
        panels.extend(portrait_panel(pod));
        let cap = format!(
            "Left: energy fraction of each POD mode (log₁₀) with its sampling error (North et al. 1982, ± one standard error){}. Right: every frame's coefficients of modes 1 and 2, normalised so that a sinusoidal pair lies on the unit circle.",
            if pod.noise_floor.is_some() { "; the line is the level uncorrelated measurement noise alone would reach" } else { "" }
        );
        save_lines(panels, "pod-energy", "POD energy and phase portrait", cap)?;
    }
    if let Some(s) = &st.spectra {
        let cap = format!(
            "Welch power spectral density (log₁₀), segments of {} samples at {} Hz, {} % confidence band from the chi-squared law with the segments' degrees of freedom.",
            s.nperseg,
            super::figs::sig(s.fs),
            (100.0 * s.coverage).round()
        );
        save_lines(spectra_panels(s), "spectra", "Spectra", cap)?;
    }
    if let Some(s) = &st.scales {
        let cap = "Two-point correlation of the velocity fluctuations about each probe, along x and y. The drop from 1 at zero separation to the extrapolated ρ₀ is the spike of uncorrelated measurement noise.".to_string();
        save_lines(
            correlation_panels(s),
            "correlation",
            "Two-point correlations",
            cap,
        )?;
    }
    if let Some(pod) = &st.pod {
        figs.extend(mode_maps(p, run, pod, out)?);
    }
    Ok(figs)
}

/// The leading modes as maps: each mode's vorticity in colour and its
/// velocity as arrows.
fn mode_maps(p: &Params, run: &RunResult, pod: &Pod, out: &Path) -> Result<Option<FigureRef>> {
    let g = run.grid;
    let n = g.len();
    let k = pod.modes.len().min(run.structures.figure_modes);
    if k == 0 || n == 0 {
        return Ok(None);
    }
    let vort: Vec<Vec<f64>> = pod.modes[..k]
        .iter()
        .map(|m| mode_vorticity(&g, m))
        .collect();
    let all: Vec<f64> = vort.iter().flatten().copied().collect();
    let lim = symmetric_limit(&all);
    let every = p
        .vector_every
        .unwrap_or_else(|| (g.nx.max(g.ny) / 24).max(1));
    let tot = pod.total_energy;
    let panels: Vec<MapPanel> = vort
        .into_iter()
        .enumerate()
        .map(|(j, values)| MapPanel {
            title: format!(
                "Mode {} ({:.1} % of the energy)",
                j + 1,
                100.0 * pod.energy[j] / tot
            ),
            grid: g,
            values,
            cmap: &TIDE,
            range: (-lim, lim),
            vectors: Some((&pod.modes[j][..n], &pod.modes[j][n..], every)),
            faded: None,
            marks: None,
            mask: run.mask.clone(),
        })
        .collect();
    let cols = panels.len().min(2);
    let units = Units::new(p, run);
    let fig = MapFigure::new(
        None,
        panels,
        units.axes(),
        "mode ω (1/m)".into(),
        cols,
        p.width.max(1400),
    );
    let dir = out.join(&run.id).join("figures");
    let cap = "The leading POD modes (unit norm, dimensionless): arrows show each mode's velocity, colour its vorticity (1/m). A mode's sign is arbitrary.".to_string();
    Ok(Some(figure_ref(
        out,
        write_figure(&fig, &dir, "pod-modes")?,
        "POD modes",
        cap,
    )))
}
