//! A run's flow conditions as numbers: the given ones, the Reynolds and
//! Strouhal numbers, and the frequency of a periodic run (given, or
//! estimated from the frames' phases and times).
//!
//! The frequency estimate from phases and times is `stats::frequency`'s.

use crate::field::Extra;
use crate::result::RunResult;
pub(crate) use crate::stats::frequency::estimate_frequency;

/// Where a run's frequency came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum FrequencySource {
    Given,
    Estimated,
}

/// The run's frequency (Hz) and its source.
pub(crate) fn run_frequency(run: &RunResult) -> Option<(f64, FrequencySource)> {
    if let Some(f) = run.conditions.frequency {
        return Some((f, FrequencySource::Given));
    }
    let mut tp: Vec<(f64, f64)> = run
        .frames
        .iter()
        .filter_map(|f| Some((f.meta.time_s?, f.meta.phase_deg?)))
        .filter(|(t, p)| t.is_finite() && p.is_finite())
        .collect();
    estimate_frequency(&mut tp).map(|f| (f, FrequencySource::Estimated))
}

/// Condition columns for `campaign.csv`, in SI: `U_m_s`, `L_m`,
/// `nu_m2_s`, `Re` (= U L / ν), `f_Hz` (given) or `f_est_Hz` (estimated),
/// `St` (= f L / U), then every numeric free key under its own name.
/// A column appears only when its inputs are known.
pub(crate) fn campaign_columns(run: &RunResult) -> Vec<(String, f64)> {
    let c = &run.conditions;
    let mut out = Vec::new();
    let mut put = |k: &str, v: Option<f64>| {
        if let Some(v) = v {
            out.push((k.to_string(), v));
        }
    };
    put("U_m_s", c.velocity);
    put("L_m", c.length);
    put("nu_m2_s", c.viscosity);
    put("Re", c.reynolds());
    if let Some((f, src)) = run_frequency(run) {
        let key = match src {
            FrequencySource::Given => "f_Hz",
            FrequencySource::Estimated => "f_est_Hz",
        };
        put(key, Some(f));
        put("St", c.strouhal(f));
    }
    for (k, v) in &c.extra {
        if let Extra::Number(x) = v {
            out.push((k.clone(), *x));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::fixtures::{grid, run, VORTEX};
    use crate::testutil::assert_close;

    #[test]
    fn reynolds_and_strouhal_by_hand() {
        // Fixture: U = 0.3 m/s, L = 0.01 m, ν = 1e-6 m²/s; frames at
        // t = 0.01 k s with phase 5 Hz · t · 360° (mod 360).
        // Re = 0.3 · 0.01 / 1e-6 = 3000; f = 5 Hz; St = 5 · 0.01 / 0.3 = 1/6.
        let mut r = run("r", &VORTEX, grid(8, 6));
        r.conditions
            .extra
            .push(("angle_deg".into(), Extra::Number(4.0)));
        r.conditions
            .extra
            .push(("fluid".into(), Extra::Text("water".into())));
        let cols = campaign_columns(&r);
        let get = |k: &str| cols.iter().find(|c| c.0 == k).map(|c| c.1);
        assert_close(get("Re").unwrap(), 3000.0, 0.0, 1e-12, "Re");
        assert_close(get("f_est_Hz").unwrap(), 5.0, 0.0, 1e-9, "f estimated");
        assert_close(get("St").unwrap(), 1.0 / 6.0, 0.0, 1e-9, "St");
        assert_eq!(get("angle_deg"), Some(4.0));
        assert_eq!(get("fluid"), None);
        assert_eq!(get("f_Hz"), None);
        r.conditions.frequency = Some(2.0);
        let cols = campaign_columns(&r);
        let get = |k: &str| cols.iter().find(|c| c.0 == k).map(|c| c.1);
        assert_eq!(get("f_Hz"), Some(2.0));
        assert_close(
            get("St").unwrap(),
            2.0 * 0.01 / 0.3,
            0.0,
            1e-12,
            "St given f",
        );
    }

    #[test]
    fn frequency_estimate_needs_linear_phase() {
        let mut tp: Vec<(f64, f64)> = (0..20)
            .map(|k| {
                (
                    k as f64 * 0.02,
                    (k as f64 * 0.02 * 3.0 * 360.0 + 10.0) % 360.0,
                )
            })
            .collect();
        tp.reverse();
        assert_close(estimate_frequency(&mut tp).unwrap(), 3.0, 0.0, 1e-9, "3 Hz");
        let mut random: Vec<(f64, f64)> = (0..20)
            .map(|k| (k as f64, ((k * 7919) % 360) as f64))
            .collect();
        assert_eq!(estimate_frequency(&mut random), None);
        assert_eq!(estimate_frequency(&mut [(0.0, 1.0), (1.0, 2.0)]), None);
    }
}
