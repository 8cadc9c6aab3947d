//! The analytic truth a synthetic campaign is scored against: per node, the
//! mean over a set of frames of the noise-free velocity and of every
//! gradient quantity, and the true temporal (co)variances of the velocity.
//!
//! Owns: the exact values of the quantities of `derive::quantities` from
//! the analytic gradient tensor (`synth::gradients`), written here from
//! their published definitions (not by calling the code under test).
//! Does not own: the flows (`synth`).

use crate::field::Grid;
use crate::synth::gradients::{self, Gradient};
use crate::synth::scenario::pulsed_gamma;
use crate::synth::{Flow, RunSetup, SynthOptions};

/// Quantities with an analytic truth here (the Gammas have none).
pub(crate) const QUANTITIES: [&str; 8] = [
    "omega",
    "div",
    "exx",
    "eyy",
    "exy",
    "lambda_ci",
    "q",
    "stretching",
];

/// The exact value of quantity `name` for the tensor `g`, from its
/// definition: omega = dv/dx - du/dy; div = du/dx + dv/dy; strain-rate
/// components exx = du/dx, eyy = dv/dy, exy = (du/dy + dv/dx)/2;
/// swirling strength lambda_ci = imaginary part of the complex eigenvalues
/// of the 2-D tensor (Zhou, Adrian, Balachandar & Kendall 1999, J. Fluid
/// Mech. 387:353), 0 when they are real; Q = (|Omega|² - |S|²)/2 (Hunt,
/// Wray & Moin 1988); stretching = -omega div (= omega dw/dz for an
/// incompressible flow). None for a name without a truth here.
pub(crate) fn quantity(name: &str, g: &Gradient) -> Option<f64> {
    let (a, b, c, d) = (g.dudx, g.dudy, g.dvdx, g.dvdy);
    Some(match name {
        "omega" => c - b,
        "div" => a + d,
        "exx" => a,
        "eyy" => d,
        "exy" => 0.5 * (b + c),
        "lambda_ci" => {
            // eigenvalues of [[a, b], [c, d]]: tr/2 ± sqrt((tr/2)² - det)
            let disc = 0.25 * (a + d) * (a + d) - (a * d - b * c);
            (-disc).max(0.0).sqrt()
        }
        "q" => {
            // |Omega|² = (b - c)²/2, |S|² = a² + d² + (b + c)²/2
            0.5 * (0.5 * (b - c) * (b - c) - (a * a + d * d + 0.5 * (b + c) * (b + c)))
        }
        "stretching" => -(c - b) * (a + d),
        _ => return None,
    })
}

/// The analytic gradient tensor of the run's flow at `(x, y)` and time `t`.
/// None where the flow has no value (inside a body) or the scenario has no
/// gradient here (the wake and the cylinder are not used by the study).
pub(crate) fn gradient_at(setup: &RunSetup, t: f64, x: f64, y: f64) -> Option<Gradient> {
    match setup.flow {
        Flow::Vortex { gamma, rc } => Some(gradients::lamb_oseen(x, y, 0.0, 0.0, gamma, rc)),
        Flow::Pulsing {
            gamma,
            rc,
            amplitude,
            frequency,
        } => {
            let g = pulsed_gamma(gamma, amplitude, frequency, t);
            Some(gradients::lamb_oseen(x, y, 0.0, 0.0, g, rc))
        }
        Flow::Uniform { .. } => Some(Gradient::default()),
        Flow::SolidBody { rate } => Some(gradients::solid_body(rate)),
        Flow::TaylorGreen { u0, k: wk, nu } => Some(gradients::taylor_green(x, y, t, u0, wk, nu)),
        Flow::Cylinder { radius, u_inf } => gradients::cylinder(x, y, 0.0, 0.0, radius, u_inf),
        Flow::Wake { .. } | Flow::Diffusing { .. } | Flow::Burgers { .. } => None,
    }
}

/// Per-node truth: the average over a set of times of the noise-free
/// velocity and of every quantity.
#[derive(Debug, Clone)]
pub(crate) struct Truth {
    pub grid: Grid,
    /// Mean of the noise-free u, v per node.
    pub u: Vec<f64>,
    pub v: Vec<f64>,
    /// Mean of each quantity of `QUANTITIES` per node (same order).
    pub q: Vec<Vec<f64>>,
}

impl Truth {
    /// The mean of quantity `name`, or None.
    pub(crate) fn mean(&self, name: &str) -> Option<&[f64]> {
        match name {
            "u" => Some(&self.u),
            "v" => Some(&self.v),
            _ => QUANTITIES
                .iter()
                .position(|q| *q == name)
                .map(|p| self.q[p].as_slice()),
        }
    }
}

/// The noise-free velocity of the run's flow at `(x, y)` and time `t`
/// (NaN for flows the study does not use).
pub(crate) fn velocity(
    setup: &RunSetup,
    opts: &SynthOptions,
    t: f64,
    x: f64,
    y: f64,
) -> (f64, f64) {
    use crate::synth::flows;
    let s = match setup.flow {
        Flow::Vortex { gamma, rc } => flows::lamb_oseen(x, y, 0.0, 0.0, gamma, rc),
        Flow::Pulsing {
            gamma,
            rc,
            amplitude,
            frequency,
        } => {
            let g = pulsed_gamma(gamma, amplitude, frequency, t);
            flows::lamb_oseen(x, y, 0.0, 0.0, g, rc)
        }
        Flow::Uniform { u, v } => flows::Sample { u, v, omega: 0.0 },
        Flow::SolidBody { rate } => flows::solid_body(x, y, 0.0, 0.0, rate),
        Flow::TaylorGreen { u0, k, nu } => flows::taylor_green(x, y, t, u0, k, nu),
        _ => return (f64::NAN, f64::NAN),
    };
    let stream = match setup.flow {
        Flow::Vortex { .. } | Flow::Pulsing { .. } => opts.stream,
        _ => 0.0,
    };
    (s.u + stream, s.v)
}

/// The truth averaged over the times `times` (s): for a steady flow one
/// time suffices; for a pulsing flow, times spread evenly over a period
/// (the ensemble's target) or over one phase bin (the bin's target).
pub(crate) fn over_times(setup: &RunSetup, opts: &SynthOptions, times: &[f64]) -> Truth {
    let g = setup.grid;
    let nodes = g.len();
    let n = times.len().max(1) as f64;
    let (mut su, mut sv) = (vec![0.0; nodes], vec![0.0; nodes]);
    let mut q = vec![vec![0.0; nodes]; QUANTITIES.len()];
    for &t in times {
        for j in 0..g.ny {
            for i in 0..g.nx {
                let node = j * g.nx + i;
                let (x, y) = (g.x(i), g.y(j));
                let (u, v) = velocity(setup, opts, t, x, y);
                su[node] += u;
                sv[node] += v;
                let gr = gradient_at(setup, t, x, y);
                for (p, name) in QUANTITIES.iter().enumerate() {
                    q[p][node] += gr.and_then(|gr| quantity(name, &gr)).unwrap_or(f64::NAN);
                }
            }
        }
    }
    let mean = |s: Vec<f64>| s.into_iter().map(|x| x / n).collect::<Vec<f64>>();
    Truth {
        grid: g,
        u: mean(su),
        v: mean(sv),
        q: q.into_iter().map(mean).collect(),
    }
}

/// The pulsation frequency of the run's flow (Hz), if it pulses.
pub(crate) fn pulse_frequency(setup: &RunSetup) -> Option<f64> {
    match setup.flow {
        Flow::Pulsing { frequency, .. } => Some(frequency),
        _ => None,
    }
}

/// Times spread evenly (midpoints of `n` slices) over the phase interval
/// `[from, to)` degrees of a flow pulsing at `f` Hz.
pub(crate) fn phase_times(f: f64, from_deg: f64, to_deg: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|k| {
            let p = from_deg + (to_deg - from_deg) * (k as f64 + 0.5) / n as f64;
            p / 360.0 / f
        })
        .collect()
}

/// Core radius and peak swirl speed of the run's vortex (None for other flows).
pub(crate) fn vortex_core(setup: &RunSetup) -> Option<f64> {
    match setup.flow {
        Flow::Vortex { rc, .. } | Flow::Pulsing { rc, .. } => Some(rc),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantities_of_textbook_tensors() {
        // solid-body rotation at Omega: omega = 2 Omega, lambda_ci = Omega,
        // Q = Omega² (the eigenvalues are ±i Omega); pure strain: Q = -a²,
        // lambda_ci = 0 (fact of the trade)
        let rot = Gradient {
            dudx: 0.0,
            dudy: -3.0,
            dvdx: 3.0,
            dvdy: 0.0,
        };
        assert_eq!(quantity("omega", &rot), Some(6.0));
        assert_eq!(quantity("lambda_ci", &rot), Some(3.0));
        assert_eq!(quantity("q", &rot), Some(9.0));
        let strain = Gradient {
            dudx: 2.0,
            dudy: 0.0,
            dvdx: 0.0,
            dvdy: -2.0,
        };
        assert_eq!(quantity("q", &strain), Some(-4.0));
        assert_eq!(quantity("lambda_ci", &strain), Some(0.0));
        assert_eq!(quantity("div", &strain), Some(0.0));
        assert_eq!(quantity("gamma1", &strain), None);
    }
}
