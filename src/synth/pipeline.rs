//! The pipeline file and README written beside a synthetic campaign.
//!
//! Owns: their text, and the relative path from a pipeline's folder to the
//! campaign. The pipeline uses only keys the plan accepts today; sections
//! that other stages are building are written as a commented block.

use std::path::{Component, Path, PathBuf};

use super::scenario::{Flow, RunSetup};
use super::{OutFormat, RunSummary, Scenario, SynthOptions};
use crate::error::{Error, Result};

/// The run's frames pattern and frame table, relative to the campaign.
pub(crate) fn run_paths(opts: &SynthOptions, id: &str) -> (String, String) {
    let frames = match opts.format {
        OutFormat::Csv => format!("{id}/f[0-9]*.csv"),
        OutFormat::Parquet => format!("{id}/vectors.parquet"),
    };
    (frames, format!("{id}/frames.csv"))
}

/// `x` rounded to 10 significant digits, in exponent form (so that
/// 40e-6 prints as `4e-5`, not `3.9999999999999996e-5`).
fn tidy(x: f64) -> String {
    let r: f64 = format!("{x:.9e}").parse().unwrap_or(x);
    format!("{r:e}")
}

/// One line describing a run's flow.
pub(crate) fn describe(setup: &RunSetup) -> String {
    match setup.flow {
        Flow::Wake {
            frequency,
            diameter,
            street,
        } => format!(
            "free stream {} m/s behind a {} mm cylinder in water (Re = {:.0}); shedding at {:.4} Hz; street wavelength {:.2} mm, row spacing {:.2} mm, circulation {:.4e} m^2/s",
            setup.speed,
            diameter * 1e3,
            setup.speed * diameter / super::scenario::NU_WATER,
            frequency,
            street.a * 1e3,
            street.b * 1e3,
            street.gamma
        ),
        Flow::Vortex { gamma, rc } => format!(
            "steady Lamb-Oseen vortex, circulation {gamma:.4e} m^2/s, core radius {:.3} mm, peak swirl {} m/s",
            rc * 1e3,
            setup.speed
        ),
        Flow::Pulsing {
            gamma,
            rc,
            amplitude,
            frequency,
        } => format!(
            "Lamb-Oseen vortex pulsing at {frequency} Hz (circulation {gamma:.4e} m^2/s x (1 + {amplitude} sin)), core radius {:.3} mm",
            rc * 1e3
        ),
        Flow::Uniform { u, v } => format!("uniform stream u = {u:.5} m/s, v = {v:.5} m/s"),
        Flow::SolidBody { rate } => format!("solid-body rotation at {rate:.5} rad/s"),
        Flow::Cylinder { radius, u_inf } => format!(
            "potential flow at {u_inf} m/s past a cylinder of {} mm diameter",
            2e3 * radius
        ),
        Flow::TaylorGreen { u0, k, nu } => format!(
            "decaying Taylor-Green array, amplitude {u0} m/s, wavelength {:.3} mm, nu = {nu:e} m^2/s",
            std::f64::consts::TAU / k * 1e3
        ),
        Flow::Diffusing { gamma, rc0, nu } => format!(
            "Lamb-Oseen vortex diffusing in still water, circulation {gamma:.4e} m^2/s, core radius {:.3} mm at t = 0 (rc^2 = rc0^2 + 4 nu t), nu = {nu:e} m^2/s",
            rc0 * 1e3
        ),
        Flow::Burgers { gamma, alpha, nu } => format!(
            "steady Burgers vortex, circulation {gamma:.4e} m^2/s, axial strain {alpha:.5} 1/s, core radius {:.3} mm, nu = {nu:e} m^2/s",
            (4.0 * nu / alpha).sqrt() * 1e3
        ),
    }
}

/// `[mask]` for a scenario with a body (the cylinder, in the written unit
/// and axes), unless the frames carry a mask column; else nothing.
fn mask_section(opts: &SynthOptions, runs: &[RunSetup]) -> String {
    let radius = runs.iter().find_map(|r| match r.flow {
        crate::synth::scenario::Flow::Cylinder { radius, .. } => Some(radius),
        _ => None,
    });
    match (radius, opts.mask_column) {
        (Some(r), false) => {
            let ls = match runs.first() {
                Some(setup) => crate::synth::write::unit_scales(opts, setup).0,
                None => 1.0,
            };
            format!(
                "\n[mask]                        # the body: no flow there (status 3, never filled)\n\
                 circles = [[0.0, 0.0, {}]]\n",
                tidy(r / ls)
            )
        }
        _ => String::new(),
    }
}

/// The pipeline for the campaign; `prefix` (with a trailing `/` or empty)
/// is prepended to every path (the campaign folder seen from the
/// pipeline's folder).
pub(crate) fn pipeline_toml(opts: &SynthOptions, runs: &[RunSetup], prefix: &str) -> String {
    let mut t = String::new();
    t.push_str(&pipeline_header(opts));
    t.push_str(&input_section(opts));
    t.push_str(&mask_section(opts, runs));
    t.push_str(&processing_sections(opts));
    t.push_str(&run_sections(opts, runs, prefix));
    t
}

/// The pipeline's opening comments and its `[campaign]`.
fn pipeline_header(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str("# A synthetic campaign written by `curlew synth`; ground truth in <run>/truth/.\n");
    t.push_str(&format!(
        "# scenario: {}; seed: {}; frames per run: {}; noise {} px; outliers {}; gaps {}\n",
        opts.scenario.name(),
        opts.seed,
        opts.frames,
        opts.noise_px,
        opts.outlier_fraction,
        opts.gap_fraction
    ));
    if let Some(c) = &opts.command {
        t.push_str(&format!("# made by: {c}\n"));
    }
    t.push_str(&format!(
        "\n[campaign]\nname = \"{}\"\ndescription = \"synthetic {} scenario with analytic ground truth (seed {})\"\n",
        opts.campaign,
        opts.scenario.name(),
        opts.seed
    ));
    t
}

/// The pipeline's `[input]`: format, columns, units and the camera.
fn input_section(opts: &SynthOptions) -> String {
    let mut t = String::new();
    let format = match opts.format {
        OutFormat::Csv => "csv",
        OutFormat::Parquet => "parquet",
    };
    let mut extra = String::new();
    if opts.sigma_columns {
        extra.push_str(", sigma_u = \"sigma_u\", sigma_v = \"sigma_v\"");
    }
    if opts.flag_column {
        extra.push_str(", flag = \"flag\"");
    }
    if opts.mask_column {
        extra.push_str(", mask = \"mask\"");
    }
    t.push_str(&format!(
        "\n[input]\nformat = \"{format}\"\ncolumns = {{ x = \"x\", y = \"y\", u = \"u\", v = \"v\"{extra} }}\nlength_unit = \"{}\"\nvelocity_unit = \"{}\"\npixel_size = {}                # metres per pixel\ny_axis = \"{}\"\n",
        opts.length_unit.name(),
        opts.velocity_unit.name(),
        tidy(opts.pixel_size),
        if opts.y_down { "down" } else { "up" }
    ));
    t
}

/// The processing sections: derivatives, uncertainty, phase, output,
/// budget, validation and fill.
fn processing_sections(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str("\n[derivatives]\nscheme = \"least-squares\"\n");
    t.push_str(&format!(
        "\n[uncertainty]\nvelocity_noise = \"{}\"\nneighbour_correlation = {:?}   # as generated\n",
        if opts.sigma_columns {
            "columns"
        } else {
            "estimate"
        },
        opts.noise_correlation
    ));
    if opts.periodic() {
        t.push_str(&format!("\n[phase]\nbins = {}\n", opts.phase_bins));
    }
    t.push_str("\n[output]\nframe_fields = false\n");
    if matches!(opts.scenario, Scenario::DiffusingVortex | Scenario::Burgers) {
        // the instantaneous budget of the middle frame (and its neighbours)
        t.push_str(&format!(
            "\n[budget]                      # docs/budget.md\nframes = [{}]\n",
            opts.frames / 2
        ));
    }
    // The validation this data was made for: the outliers synth plants are
    // random vectors, which the normalized median test (Westerweel &
    // Scarano 2005: threshold 2, eps 0.1 px, common practice) finds; eps is
    // given in pixels so that noise-free scenarios keep their exact vectors.
    t.push_str(
        "\n# Validation chain for this data: the normalized median test\n\
         # (Westerweel & Scarano 2005, eps 0.1 px, threshold 2); a frame with more\n\
         # than 30 % rejected vectors is left out of the statistics.\n\
         [validation]\n\
         median = { eps_px = 0.1, threshold = 2.0 }\n\
         max_rejected_fraction = 0.3\n\
         \n[fill]\nmethod = \"neighbour-mean\"\n",
    );
    t
}

/// One `[[run]]` per run; `prefix` as in `pipeline_toml`.
fn run_sections(opts: &SynthOptions, runs: &[RunSetup], prefix: &str) -> String {
    let mut t = String::new();
    for r in runs {
        let (frames, table) = run_paths(opts, &r.id);
        t.push_str(&format!(
            "\n[[run]]\nid = \"{}\"\nframes = \"{prefix}{frames}\"\nframe_table = \"{prefix}{table}\"\ndescription = \"{}\"\n[run.input]\npulse_separation = {}     # seconds between exposures\n",
            r.id,
            describe(r),
            tidy(r.pulse_separation)
        ));
        if let Flow::Diffusing { nu, .. } | Flow::Burgers { nu, .. } = r.flow {
            t.push_str(&format!(
                "[run.conditions]\nviscosity = {}          # m^2/s, as generated\n",
                tidy(nu)
            ));
        }
    }
    t
}

/// The README of a synthetic campaign.
pub(crate) fn readme(opts: &SynthOptions, runs: &[RunSetup], sums: &[RunSummary]) -> String {
    let mut t = String::new();
    t.push_str(&readme_intro(opts));
    if opts.scenario == Scenario::Wake {
        t.push_str(&readme_wake(opts));
    }
    t.push_str(&readme_acquisition(opts));
    t.push_str(&readme_runs(runs, sums));
    t.push_str(&readme_layout(opts));
    t
}

/// The README's title, what the data is, and the command that made it.
fn readme_intro(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str(&format!(
        "# Synthetic campaign `{}` ({} scenario)\n\n",
        opts.campaign,
        opts.scenario.name()
    ));
    t.push_str(
        "Invented data for demonstration and testing, written by `curlew synth`, with\n\
         analytic ground truth. It is not a measurement.\n\n",
    );
    if let Some(c) = &opts.command {
        t.push_str(&format!(
            "Regenerate it byte for byte with:\n\n```\n{c}\n```\n\n"
        ));
    }
    t
}

/// The README's description of the wake model and its parameters.
fn readme_wake(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str(
        "The flow: the wake behind a circular cylinder in a water channel, modelled as a\n\
         staggered double row of Lamb-Oseen vortices (clockwise above the centreline,\n\
         anticlockwise below) convecting at a fraction of the free stream over a uniform\n\
         stream. Vortices are shed at f = St U / D; each frame has a time and a phase\n\
         (degrees of the shedding cycle) in its frame table. The circulation follows from\n\
         the street's self-induced speed (von Karman street); the cores spread viscously.\n",
    );
    t.push_str(&format!(
        "Parameters: St = {}, the street convects at {} U, row spacing b = 0.281 a\n\
         (a the wavelength), core radius 0.25 D growing as rc^2 = rc0^2 + 4 nu t with\n\
         nu = 1e-6 m^2/s (water near 20 C, from memory). The model is kinematic: it is\n\
         not a solution of the Navier-Stokes equations, and its mean velocity deficit\n\
         is only what the vortices induce.\n\n",
        opts.strouhal, opts.convection
    ));
    t
}

/// The README's acquisition and corruption parameters.
fn readme_acquisition(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str(&format!(
        "Acquisition: {} m/px, {} frames per second, pulse separation set per run so the\n\
         peak speed moves {} px; noise {} px of displacement per component; {} of the\n\
         vectors per frame replaced by outliers (up to {} times the local speed); {} gaps\n\
         (missing rows or empty cells). Seed {}.\n\n",
        tidy(opts.pixel_size),
        opts.frame_rate,
        opts.displacement_px,
        opts.noise_px,
        opts.outlier_fraction,
        opts.outlier_scale,
        opts.gap_fraction,
        opts.seed
    ));
    t
}

/// The README's table of runs.
fn readme_runs(runs: &[RunSetup], sums: &[RunSummary]) -> String {
    let mut t = String::new();
    t.push_str("| run | flow | grid | pulse separation | outliers | missing | empty |\n|---|---|---|---|---|---|---|\n");
    for (r, s) in runs.iter().zip(sums) {
        t.push_str(&format!(
            "| {} | {} | {} x {} at {} mm | {} ms | {} | {} | {} |\n",
            r.id,
            describe(r),
            r.grid.nx,
            r.grid.ny,
            r.grid.dx * 1e3,
            r.pulse_separation * 1e3,
            s.n_outliers,
            s.n_missing,
            s.n_empty
        ));
    }
    t
}

/// The README's description of the folder layout.
fn readme_layout(opts: &SynthOptions) -> String {
    let mut t = String::new();
    t.push_str(&format!(
        "\nLayout: `pipeline.toml` reduces it (`curlew run pipeline.toml`). Each run folder\n\
         holds the frames ({}; x, y in {}, u, v in {}), `frames.csv` (frame, time_s{}),\n\
         and `truth/`: `mean.csv` (per-node mean, std and covariance of the noise-free\n\
         fields over the frames, SI){}, `events.csv` (frame, i, j, kind of every outlier\n\
         and gap; i along x, j along y, 0-based) and `params.json` (every parameter).\n",
        match opts.format {
            OutFormat::Csv => "one CSV file per frame",
            OutFormat::Parquet => "`vectors.parquet`, one long table with a frame column",
        },
        opts.length_unit.name(),
        opts.velocity_unit.name(),
        if opts.periodic() { ", phase_deg" } else { "" },
        if opts.periodic() {
            ", `phase.csv` (per phase bin and node means)"
        } else {
            ""
        }
    ));
    t
}

/// The path of `to` as seen from the folder `from`, with a trailing `/`
/// (empty when they are the same folder), using `/` separators.
pub(crate) fn relative_path(from: &Path, to: &Path) -> Result<String> {
    let abs = |p: &Path| -> Result<PathBuf> {
        let a = std::path::absolute(p)
            .map_err(|e| Error::usage(format!("cannot resolve {}: {e}", p.display())))?;
        let mut out = PathBuf::new();
        for c in a.components() {
            match c {
                Component::ParentDir => {
                    out.pop();
                }
                Component::CurDir => {}
                other => out.push(other.as_os_str()),
            }
        }
        Ok(out)
    };
    let (f, t) = (abs(from)?, abs(to)?);
    let fc: Vec<_> = f.components().collect();
    let tc: Vec<_> = t.components().collect();
    let common = fc.iter().zip(&tc).take_while(|(a, b)| a == b).count();
    let mut parts: Vec<String> = vec!["..".to_string(); fc.len() - common];
    parts.extend(
        tc[common..]
            .iter()
            .map(|c| c.as_os_str().to_string_lossy().into_owned()),
    );
    Ok(if parts.is_empty() {
        String::new()
    } else {
        parts.join("/") + "/"
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_paths_climb_and_descend() {
        assert_eq!(
            relative_path(Path::new("/a/pipelines"), Path::new("/a/demo-data")).unwrap(),
            "../demo-data/"
        );
        assert_eq!(
            relative_path(Path::new("/a/b"), Path::new("/a/b")).unwrap(),
            ""
        );
        assert_eq!(
            relative_path(Path::new("/a/./b/../c"), Path::new("/a/c/d/e")).unwrap(),
            "d/e/"
        );
    }
}
