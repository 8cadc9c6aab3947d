//! The scenarios: their domains, calibrations and noise-free fields.
//!
//! Owns: turning `SynthOptions` and one run's free-stream speed into a
//! `RunSetup` (grid in SI, pulse separation, noise in m/s, the flow) and
//! evaluating the noise-free field of a frame. Does not own: corruption
//! (`corrupt`) or files (`write`).

use ndarray::Array2;

use super::flows::{self, Sample, Street};
use super::{Scenario, SynthOptions};
use crate::error::{Error, Result};
use crate::field::Grid;

/// Direction of the `uniform` scenario's stream, degrees from +x (so that
/// both components are nonzero).
pub(crate) const UNIFORM_ANGLE_DEG: f64 = 20.0;

/// Kinematic viscosity of water at 20 °C, m²/s (1.0e-6, from memory).
pub(crate) const NU_WATER: f64 = 1.0e-6;

/// The flow of one run, with its parameters in SI.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "flow", rename_all = "kebab-case")]
pub enum Flow {
    /// The convecting vortex street (see `flows::Street`); `frequency` is
    /// the shedding frequency in Hz.
    Wake {
        street: Street,
        frequency: f64,
        diameter: f64,
    },
    /// One steady Lamb–Oseen vortex at the origin.
    Vortex { gamma: f64, rc: f64 },
    /// A Lamb–Oseen vortex at the origin whose circulation pulses as
    /// `gamma (1 + amplitude sin(2 pi frequency t))` (core radius fixed).
    Pulsing {
        gamma: f64,
        rc: f64,
        amplitude: f64,
        frequency: f64,
    },
    /// A uniform stream `(u, v)`.
    Uniform { u: f64, v: f64 },
    /// Solid-body rotation about the origin.
    SolidBody { rate: f64 },
    /// Potential flow past a cylinder at the origin.
    Cylinder { radius: f64, u_inf: f64 },
    /// The decaying Taylor–Green array.
    TaylorGreen { u0: f64, k: f64, nu: f64 },
    /// A Lamb–Oseen vortex at the origin diffusing in still fluid: core
    /// radius `sqrt(rc0² + 4 nu t)` (`flows::diffusing_vortex`).
    Diffusing { gamma: f64, rc0: f64, nu: f64 },
    /// The steady Burgers vortex at the origin, axial strain `alpha`
    /// (`flows::burgers`).
    Burgers { gamma: f64, alpha: f64, nu: f64 },
}

/// The circulation of the pulsing vortex at time `t`:
/// `gamma (1 + amplitude sin(2 pi frequency t))` (`Flow::Pulsing`; the
/// synthetic frames and the coverage study's truth use this one formula).
pub(crate) fn pulsed_gamma(gamma: f64, amplitude: f64, frequency: f64, t: f64) -> f64 {
    gamma * (1.0 + amplitude * (std::f64::consts::TAU * frequency * t).sin())
}

/// Everything about one run that does not change from frame to frame.
#[derive(Debug, Clone, serde::Serialize)]
pub struct RunSetup {
    pub id: String,
    /// The scenario's velocity scale: the free stream, or the peak speed.
    pub speed: f64,
    pub grid: Grid,
    /// Seconds between the two exposures, chosen so that `speed` moves
    /// `displacement_px` pixels (rounded to two significant digits).
    pub pulse_separation: f64,
    /// m/s per pixel of displacement.
    pub px_velocity: f64,
    /// Standard deviation of the noise of each component, m/s.
    pub noise_sigma: f64,
    pub flow: Flow,
}

impl RunSetup {
    /// Time of frame `k` (0-based), s.
    pub(crate) fn time(&self, opts: &SynthOptions, k: usize) -> f64 {
        k as f64 / opts.frame_rate
    }

    /// Phase of frame `k` in degrees in [0, 360), for periodic flows.
    pub(crate) fn phase_deg(&self, opts: &SynthOptions, k: usize) -> Option<f64> {
        match self.flow {
            Flow::Wake { frequency, .. } | Flow::Pulsing { frequency, .. } => {
                let cycles = frequency * self.time(opts, k);
                Some((360.0 * cycles.fract()).rem_euclid(360.0))
            }
            _ => None,
        }
    }

    /// The noise-free field of frame `k`: `(u, v, omega, inside_body)`
    /// arrays shaped `(ny, nx)`; NaN inside a body.
    pub(crate) fn truth(&self, opts: &SynthOptions, k: usize) -> TruthFrame {
        let g = self.grid;
        let t = self.time(opts, k);
        let vortices = match self.flow {
            Flow::Wake { street, .. } => {
                street.vortices(self.phase_deg(opts, k).unwrap_or(0.0).to_radians())
            }
            _ => Vec::new(),
        };
        let n = g.len();
        // the vortex scenario's optional uniform stream (no vorticity)
        let stream = Sample {
            u: opts.stream,
            v: 0.0,
            omega: 0.0,
        };
        let (mut u, mut v, mut w) = (
            Vec::with_capacity(n),
            Vec::with_capacity(n),
            Vec::with_capacity(n),
        );
        let mut body = Vec::with_capacity(n);
        for j in 0..g.ny {
            let y = g.y(j);
            for i in 0..g.nx {
                let x = g.x(i);
                let s = self.sample(x, y, t, stream, &vortices);
                let s = s.unwrap_or(Sample {
                    u: f64::NAN,
                    v: f64::NAN,
                    omega: f64::NAN,
                });
                u.push(s.u);
                v.push(s.v);
                w.push(s.omega);
                body.push(s.u.is_nan());
            }
        }
        let arr = |d: Vec<f64>| Array2::from_shape_vec(g.shape(), d).expect("grid shape");
        TruthFrame {
            u: arr(u),
            v: arr(v),
            omega: arr(w),
            body: Array2::from_shape_vec(g.shape(), body).expect("grid shape"),
        }
    }

    /// The noise-free sample of the flow at (x, y) and time `t`: `None`
    /// inside a body. `stream` is the vortex scenarios' uniform stream and
    /// `vortices` the street's vortices at this frame.
    fn sample(
        &self,
        x: f64,
        y: f64,
        t: f64,
        stream: Sample,
        vortices: &[(f64, f64, f64, f64)],
    ) -> Option<Sample> {
        match self.flow {
            Flow::Wake { street, .. } => Some(flows::vortex_street(x, y, &street, vortices)),
            Flow::Vortex { gamma, rc } => {
                Some(flows::lamb_oseen(x, y, 0.0, 0.0, gamma, rc) + stream)
            }
            Flow::Pulsing {
                gamma,
                rc,
                amplitude,
                frequency,
            } => {
                let g = pulsed_gamma(gamma, amplitude, frequency, t);
                Some(flows::lamb_oseen(x, y, 0.0, 0.0, g, rc) + stream)
            }
            Flow::Uniform { u, v } => Some(Sample { u, v, omega: 0.0 }),
            Flow::SolidBody { rate } => Some(flows::solid_body(x, y, 0.0, 0.0, rate)),
            Flow::Cylinder { radius, u_inf } => flows::cylinder(x, y, 0.0, 0.0, radius, u_inf),
            Flow::TaylorGreen { u0, k, nu } => Some(flows::taylor_green(x, y, t, u0, k, nu)),
            Flow::Diffusing { gamma, rc0, nu } => {
                Some(flows::diffusing_vortex(x, y, t, gamma, rc0, nu))
            }
            Flow::Burgers { gamma, alpha, nu } => Some(flows::burgers(x, y, gamma, alpha, nu)),
        }
    }
}

/// The noise-free field of one frame.
#[derive(Debug, Clone)]
pub(crate) struct TruthFrame {
    pub u: Array2<f64>,
    pub v: Array2<f64>,
    pub omega: Array2<f64>,
    /// Nodes inside a body (no measurement there).
    pub body: Array2<bool>,
}

/// The run id of a speed: `u` and the speed in cm/s, three digits
/// (0.15 m/s → `u015`).
pub(crate) fn run_id(speed: f64) -> String {
    format!("u{:03}", (speed * 100.0).round() as i64)
}

/// Rounds to two significant digits (pulse separations as a lab sets
/// them), as the double nearest the decimal value (2.1e-3, not
/// 2.1000000000000003e-3), so the pipeline's printed value is exact.
fn round2(x: f64) -> f64 {
    format!("{x:.1e}").parse().unwrap_or(x)
}

/// The default grid of a scenario: `(nx, ny, pitch in m)`.
pub(crate) fn default_grid(s: Scenario) -> (usize, usize, f64) {
    match s {
        Scenario::Wake => (40, 25, 2.0e-3),
        _ => (48, 36, 1.0e-3),
    }
}

/// Resolves one run of `opts` at free-stream speed (or velocity scale)
/// `speed` (m/s).
pub(crate) fn setup_run(opts: &SynthOptions, speed: f64) -> Result<RunSetup> {
    if !(speed.is_finite() && speed > 0.0) {
        return Err(Error::usage(format!(
            "speed {speed} m/s must be a positive number"
        )));
    }
    let grid = run_grid(opts);
    let (flow, peak) = scenario_flow(opts, &grid, speed);
    let pulse_separation = round2(opts.displacement_px * opts.pixel_size / peak);
    let px_velocity = opts.pixel_size / pulse_separation;
    Ok(RunSetup {
        id: run_id(speed),
        speed,
        grid,
        pulse_separation,
        px_velocity,
        noise_sigma: opts.noise_px * px_velocity,
        flow,
    })
}

/// The grid of a run: the scenario's default, or the size and pitch asked.
fn run_grid(opts: &SynthOptions) -> Grid {
    let (dnx, dny, dpitch) = default_grid(opts.scenario);
    let nx = opts.nx.unwrap_or(dnx);
    let ny = opts.ny.unwrap_or(dny);
    let pitch = opts.pitch.unwrap_or(dpitch);
    let d = opts.diameter;
    let (x0, y0) = match opts.scenario {
        // the wake's domain starts two diameters behind the cylinder's centre
        Scenario::Wake => (2.0 * d, -0.5 * (ny - 1) as f64 * pitch),
        _ => (
            -0.5 * (nx - 1) as f64 * pitch,
            -0.5 * (ny - 1) as f64 * pitch,
        ),
    };
    Grid {
        nx,
        ny,
        x0,
        y0,
        dx: pitch,
        dy: pitch,
    }
}

/// The flow of the run's scenario at `speed` (m/s) on `grid`, and its peak
/// speed (m/s), which sets the pulse separation.
fn scenario_flow(opts: &SynthOptions, grid: &Grid, speed: f64) -> (Flow, f64) {
    let (nx, ny, pitch) = (grid.nx, grid.ny, grid.dx);
    let d = opts.diameter;
    let half_w = 0.5 * (nx - 1) as f64 * pitch;
    let half_h = 0.5 * (ny - 1) as f64 * pitch;
    match opts.scenario {
        Scenario::Wake => wake_flow(opts, grid, speed),
        Scenario::Vortex => vortex_flow(opts, half_h, pitch, speed),
        Scenario::Uniform => {
            let a = UNIFORM_ANGLE_DEG.to_radians();
            (
                Flow::Uniform {
                    u: speed * a.cos(),
                    v: speed * a.sin(),
                },
                speed,
            )
        }
        Scenario::SolidBody => (
            Flow::SolidBody {
                rate: speed / half_h,
            },
            speed * half_w.hypot(half_h) / half_h,
        ),
        Scenario::Cylinder => (
            Flow::Cylinder {
                radius: 0.5 * d,
                u_inf: speed,
            },
            2.0 * speed,
        ),
        Scenario::DiffusingVortex | Scenario::Burgers => viscous_vortex(opts, half_h, pitch, speed),
        Scenario::TaylorGreen => {
            // one wavelength across the domain height
            let k = std::f64::consts::TAU / (2.0 * half_h + pitch);
            (
                Flow::TaylorGreen {
                    u0: speed,
                    k,
                    nu: NU_WATER,
                },
                speed,
            )
        }
    }
}

/// The wake behind the cylinder: a convecting vortex street and its
/// shedding frequency; peak speed the free stream.
fn wake_flow(opts: &SynthOptions, grid: &Grid, speed: f64) -> (Flow, f64) {
    let d = opts.diameter;
    let street = Street::behind_cylinder(
        speed,
        d,
        opts.strouhal,
        opts.convection,
        0.281,
        0.25,
        NU_WATER,
        grid.x(grid.nx - 1),
    );
    let frequency = opts.strouhal * speed / d;
    (
        Flow::Wake {
            street,
            frequency,
            diameter: d,
        },
        speed,
    )
}

/// One Lamb–Oseen vortex, steady or pulsing; peak swirl `speed`.
fn vortex_flow(opts: &SynthOptions, half_h: f64, pitch: f64, speed: f64) -> (Flow, f64) {
    // core radius an eighth of the domain height (or as asked); peak swirl = speed
    let rc = opts.core_pitches.map_or(half_h / 4.0, |c| c * pitch);
    let gamma = 2.0 * std::f64::consts::PI * rc * speed / flows::LAMB_OSEEN_PEAK_SWIRL;
    let flow = match opts.pulse {
        Some((amplitude, frequency)) => Flow::Pulsing {
            gamma,
            rc,
            amplitude,
            frequency,
        },
        None => Flow::Vortex { gamma, rc },
    };
    // the pulse's peak circulation sets the peak speed
    (
        flow,
        speed * (1.0 + opts.pulse.map_or(0.0, |p| p.0)) + opts.stream,
    )
}

/// The diffusing Lamb–Oseen and Burgers vortices: core radius (at t = 0)
/// an eighth of the domain height, or `core_pitches` pitches; peak swirl
/// `speed`; water. The Burgers vortex's strain follows from its core,
/// `alpha = 4 nu / rc²` (Burgers 1948).
fn viscous_vortex(opts: &SynthOptions, half_h: f64, pitch: f64, speed: f64) -> (Flow, f64) {
    let rc = opts.core_pitches.map_or(half_h / 4.0, |c| c * pitch);
    let gamma = 2.0 * std::f64::consts::PI * rc * speed / flows::LAMB_OSEEN_PEAK_SWIRL;
    let nu = NU_WATER;
    let flow = if opts.scenario == Scenario::Burgers {
        Flow::Burgers {
            gamma,
            alpha: 4.0 * nu / (rc * rc),
            nu,
        }
    } else {
        Flow::Diffusing { gamma, rc0: rc, nu }
    };
    (flow, speed)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn run_ids_and_pulse_separation() {
        assert_eq!(run_id(0.15), "u015");
        assert_eq!(run_id(0.3), "u030");
        assert_eq!(run_id(1.25), "u125");
        assert_eq!(round2(2.1333e-3), 2.1e-3);
        let opts = SynthOptions::default();
        let r = setup_run(&opts, 0.15).unwrap();
        // 8 px at 0.15 m/s with 40 µm pixels: 2.133 ms, set as 2.1 ms
        assert_eq!(r.pulse_separation, 2.1e-3);
        assert!((r.noise_sigma - 0.1 * 4e-5 / 2.1e-3).abs() < 1e-15);
        assert!(setup_run(&opts, -1.0).is_err());
    }

    #[test]
    fn wake_phase_advances_with_the_shedding_frequency() {
        let opts = SynthOptions::default();
        let r = setup_run(&opts, 0.15).unwrap();
        // f = St U / D = 0.21 * 0.15 / 0.01 = 3.15 Hz; at 15 Hz a frame
        // advances 75.6 degrees
        let p1 = r.phase_deg(&opts, 1).unwrap();
        assert!((p1 - 75.6).abs() < 1e-9, "{p1}");
        let p5 = r.phase_deg(&opts, 5).unwrap();
        assert!((p5 - (5.0 * 75.6 - 360.0)).abs() < 1e-9, "{p5}");
    }
}
