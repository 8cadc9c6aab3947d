//! The figures of one run: which exist, their values in display units,
//! their limits and captions.
//!
//! Figures (each skipped when its columns are missing): vorticity with a
//! vector overlay, uncertainty of the mean vorticity, mean speed, velocity
//! fluctuations, Reynolds shear stress, validation map, rejected fraction
//! per frame, convergence (these three in `quality`), phase sequence,
//! vorticity budget (`budget`).

mod quality;

use std::path::Path;

use super::colormap::{Colormap, EMBER, TIDE};
use super::draw::{write_figure, Axes, MapFigure, MapPanel};
use super::{figure_ref, magnitude_limit, symmetric_limit, Params};
use crate::error::Result;
use crate::field::NodeTable;
use crate::result::{FigureRef, RunResult};

/// Display units of a run's figures: dimensional (mm, m/s, 1/s) or
/// nondimensional with the run's U and L (x/L, u/U, ωL/U).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Units {
    /// (U, L) when nondimensional.
    pub scales: Option<(f64, f64)>,
}

impl Units {
    pub(crate) fn new(p: &Params, run: &RunResult) -> Units {
        Units {
            scales: if p.nondimensional {
                run.conditions.scales()
            } else {
                None
            },
        }
    }
    pub(crate) fn axes(&self) -> Axes {
        match self.scales {
            Some((_, l)) => Axes {
                scale: l,
                x_label: "x / L".into(),
                y_label: "y / L".into(),
            },
            None => Axes {
                scale: 1e-3,
                x_label: "x (mm)".into(),
                y_label: "y (mm)".into(),
            },
        }
    }
    /// Factor from SI velocity to display, and its unit text.
    pub(crate) fn velocity(&self) -> (f64, &'static str) {
        match self.scales {
            Some((u, _)) => (1.0 / u, "/ U"),
            None => (1.0, "(m/s)"),
        }
    }
    /// Factor from SI vorticity (1/s) to display.
    pub(crate) fn vorticity(&self) -> (f64, &'static str) {
        match self.scales {
            Some((u, l)) => (l / u, "L / U"),
            None => (1.0, "(1/s)"),
        }
    }
    /// Factor from SI kinematic stress (m²/s²) to display.
    pub(crate) fn stress(&self) -> (f64, &'static str) {
        match self.scales {
            Some((u, _)) => (1.0 / (u * u), "/ U²"),
            None => (1.0, "(m²/s²)"),
        }
    }
}

/// `x` with three significant digits.
pub(crate) fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let d = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    if !(1e-3..1e5).contains(&x.abs()) {
        return format!("{x:.2e}");
    }
    format!("{x:.d$}")
}

fn scaled(v: &[f64], f: f64) -> Vec<f64> {
    v.iter().map(|x| x * f).collect()
}

fn vector_every(p: &Params, nt: &NodeTable) -> usize {
    p.vector_every
        .unwrap_or_else(|| (nt.grid.nx.max(nt.grid.ny) / 24).max(1))
}

/// "every node", "every 2nd node", "every 3rd node", "every 11th node"...
pub(super) fn every_words(n: usize) -> String {
    let suffix = match (n % 10, n % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    if n <= 1 {
        "every ".to_string()
    } else {
        format!("every {n}{suffix} ")
    }
}

struct Ctx<'a> {
    p: &'a Params,
    run: &'a RunResult,
    out: &'a Path,
    dir: std::path::PathBuf,
    units: Units,
    figs: Vec<FigureRef>,
}

impl<'a> Ctx<'a> {
    fn map(
        &self,
        title: &str,
        values: Vec<f64>,
        cmap: &'static Colormap,
        range: (f64, f64),
        vectors: bool,
    ) -> Option<MapPanel<'a>> {
        let run: &'a RunResult = self.run;
        let e = &run.stats.ensemble;
        let vec = if vectors {
            match (e.get("u_mean"), e.get("v_mean")) {
                (Some(u), Some(v)) => Some((u, v, vector_every(self.p, e))),
                _ => None,
            }
        } else {
            None
        };
        Some(MapPanel {
            title: title.into(),
            grid: e.grid,
            values,
            cmap,
            range,
            vectors: vec,
            faded: None,
            mask: run.mask.clone(),
            marks: None,
        })
    }

    fn save(
        &mut self,
        fig: &impl super::draw::Figure,
        stem: &str,
        title: &str,
        caption: String,
    ) -> Result<()> {
        let paths = write_figure(fig, &self.dir, stem)?;
        self.figs.push(figure_ref(self.out, paths, title, caption));
        Ok(())
    }

    fn single(
        &mut self,
        panel: MapPanel,
        bar: String,
        stem: &str,
        title: &str,
        caption: String,
    ) -> Result<()> {
        let fig = MapFigure::new(None, vec![panel], self.units.axes(), bar, 1, self.p.width);
        self.save(&fig, stem, title, caption)
    }
}

/// Writes the figures of one run into `out/<run id>/figures/`; none when
/// the run's grid is empty.
pub(crate) fn run_figures(p: &Params, run: &RunResult, out: &Path) -> Result<Vec<FigureRef>> {
    let mut c = Ctx {
        p,
        run,
        out,
        dir: out.join(&run.id).join("figures"),
        units: Units::new(p, run),
        figs: Vec::new(),
    };
    if run.stats.ensemble.grid.is_empty() {
        return Ok(c.figs);
    }
    let nondim_note = match c.units.scales {
        Some((u, l)) => format!(" Scales: U = {u:.4} m/s, L = {:.4} mm.", l * 1e3),
        None if p.nondimensional => {
            " Nondimensional figures were asked for, but the run has no velocity and length conditions; shown in SI.".to_string()
        }
        None => String::new(),
    };
    vorticity_figure(&mut c, &nondim_note)?;
    vorticity_uncertainty_figure(&mut c)?;
    speed_figure(&mut c)?;
    fluctuations_figure(&mut c)?;
    reynolds_stress_figure(&mut c)?;
    quality::validation_figures(&mut c)?;
    quality::convergence_figure(&mut c)?;
    phase_figure(&mut c)?;
    if let Some(f) = super::budget::figure(p, run, out, c.units)? {
        c.figs.push(f);
    }
    Ok(c.figs)
}

/// Mean vorticity with the mean-velocity arrows; `nondim_note` ends the
/// caption.
fn vorticity_figure(c: &mut Ctx, nondim_note: &str) -> Result<()> {
    let (p, e) = (c.p, &c.run.stats.ensemble);
    let (wf, wu) = c.units.vorticity();
    let Some(om) = e.get("omega_mean") else {
        return Ok(());
    };
    let vals = scaled(om, wf);
    let lim = p
        .vorticity_limit
        .map(|l| l * wf)
        .unwrap_or_else(|| symmetric_limit(&vals));
    let every = vector_every(p, e);
    if let Some(panel) = c.map(
        "Mean vorticity and mean velocity",
        vals,
        &TIDE,
        (-lim, lim),
        true,
    ) {
        let cap = format!(
            "Ensemble-mean out-of-plane vorticity; arrows show the mean velocity at {}node \
             (longest arrow = largest speed). Colour limits ±{} (99.8th percentile of |ω| unless set).{nondim_note}",
            every_words(every),
            sig(lim)
        );
        c.single(panel, format!("ω {wu}"), "vorticity", "Mean vorticity", cap)?;
    }
    Ok(())
}

/// The standard uncertainty of the mean vorticity.
fn vorticity_uncertainty_figure(c: &mut Ctx) -> Result<()> {
    let (wf, wu) = c.units.vorticity();
    let Some(unc) = c.run.stats.ensemble.get("omega_mean_unc") else {
        return Ok(());
    };
    let vals = scaled(unc, wf);
    let hi = magnitude_limit(&vals);
    if let Some(panel) = c.map(
        "Standard uncertainty of the mean vorticity",
        vals,
        &EMBER,
        (0.0, hi),
        false,
    ) {
        let cap =
            "Propagated standard uncertainty (k = 1) of the ensemble-mean vorticity at each node; \
                   an estimate, not a bound."
                .to_string();
        c.single(
            panel,
            format!("u(ω) {wu}"),
            "vorticity-uncertainty",
            "Vorticity uncertainty",
            cap,
        )?;
    }
    Ok(())
}

/// The magnitude of the mean velocity with its arrows.
fn speed_figure(c: &mut Ctx) -> Result<()> {
    let e = &c.run.stats.ensemble;
    let (vf, vu) = c.units.velocity();
    let (Some(u), Some(v)) = (e.get("u_mean"), e.get("v_mean")) else {
        return Ok(());
    };
    let speed: Vec<f64> = u.iter().zip(v).map(|(a, b)| a.hypot(*b) * vf).collect();
    let hi = magnitude_limit(&speed);
    if let Some(panel) = c.map("Mean speed", speed, &EMBER, (0.0, hi), true) {
        let cap = "Magnitude of the ensemble-mean in-plane velocity, with mean-velocity arrows."
            .to_string();
        c.single(panel, format!("|u| {vu}"), "speed", "Mean speed", cap)?;
    }
    Ok(())
}

/// The standard deviations of u and v side by side, shared limits.
fn fluctuations_figure(c: &mut Ctx) -> Result<()> {
    let (p, run) = (c.p, c.run);
    let e = &run.stats.ensemble;
    let (vf, vu) = c.units.velocity();
    let (Some(us), Some(vs)) = (e.get("u_std"), e.get("v_std")) else {
        return Ok(());
    };
    let (a, b) = (scaled(us, vf), scaled(vs, vf));
    let hi = magnitude_limit(&a).max(magnitude_limit(&b));
    let mk = |t: &str, vals| MapPanel {
        title: t.into(),
        grid: e.grid,
        values: vals,
        cmap: &EMBER,
        range: (0.0, hi),
        vectors: None,
        faded: None,
        mask: run.mask.clone(),
        marks: None,
    };
    let fig = MapFigure::new(
        None,
        vec![
            mk("Streamwise fluctuation u′", a),
            mk("Transverse fluctuation v′", b),
        ],
        c.units.axes(),
        format!("std {vu}"),
        2,
        p.width.max(1200),
    );
    let cap = "Standard deviation of u and v over the valid samples of each node.".to_string();
    c.save(&fig, "fluctuations", "Velocity fluctuations", cap)
}

/// The covariance of u and v (kinematic Reynolds shear stress).
fn reynolds_stress_figure(c: &mut Ctx) -> Result<()> {
    let (sf, su) = c.units.stress();
    let Some(uv) = c.run.stats.ensemble.get("uv_cov") else {
        return Ok(());
    };
    let vals = scaled(uv, sf);
    let lim = symmetric_limit(&vals);
    if let Some(panel) = c.map(
        "Reynolds shear stress ⟨u′v′⟩",
        vals,
        &TIDE,
        (-lim, lim),
        false,
    ) {
        let cap = "Covariance of u and v (kinematic Reynolds shear stress), symmetric limits."
            .to_string();
        c.single(
            panel,
            format!("⟨u′v′⟩ {su}"),
            "reynolds-stress",
            "Reynolds shear stress",
            cap,
        )?;
    }
    Ok(())
}

fn phase_figure(c: &mut Ctx) -> Result<()> {
    let bins = &c.run.stats.phase;
    let usable: Vec<_> = bins
        .iter()
        .filter(|b| b.table.get("omega_mean").is_some())
        .collect();
    if usable.len() < 2 {
        return Ok(());
    }
    let (wf, wu) = c.units.vorticity();
    let all: Vec<f64> = usable
        .iter()
        .flat_map(|b| b.table.get("omega_mean").unwrap().iter().map(|x| x * wf))
        .collect();
    let lim =
        c.p.vorticity_limit
            .map(|l| l * wf)
            .unwrap_or_else(|| symmetric_limit(&all));
    let panels: Vec<MapPanel> = usable
        .iter()
        .map(|b| MapPanel {
            title: format!("φ = {:.0}°  ({} frames)", b.centre_deg, b.n_frames),
            grid: b.table.grid,
            values: scaled(b.table.get("omega_mean").unwrap(), wf),
            cmap: &TIDE,
            range: (-lim, lim),
            vectors: None,
            faded: None,
            mask: c.run.mask.clone(),
            marks: None,
        })
        .collect();
    let cols = if panels.len() <= 4 { panels.len() } else { 4 };
    let n = panels.len();
    let fig = MapFigure::new(
        Some("Phase-mean vorticity".into()),
        panels,
        c.units.axes(),
        format!("ω {wu}"),
        cols,
        c.p.width.max(1600),
    );
    let cap = format!(
        "Phase-mean vorticity in {n} phase bins (bin centres shown), shared symmetric limits ±{}.",
        sig(lim)
    );
    c.save(&fig, "phase-sequence", "Phase sequence", cap)
}
