//! The report's paragraphs on coherent structures and scales, in plain
//! words: the POD's leading energies, the dominant frequencies of the
//! spectra with their Strouhal numbers, and the integral length scales with
//! the noise spike at zero separation.
//!
//! Owns: words only. Every number is read from the same structures the
//! tables are written from (`pod.csv`: `modes::output::energy_table`;
//! `spectral-peaks.csv`: `spectra::run::peaks_table`; `scales.csv`:
//! `scales::finish::scales_table`), in the tables' units except where the
//! words name another (mm for lengths, % for fractions); numbers carry
//! three significant digits (`describe::num`). tests/it/report_numbers.rs
//! parses the words back and compares them with the tables.

use std::fmt::Write;

use super::html::{esc, url};
use crate::describe::num;
use crate::modes::Pod;
use crate::result::RunResult;
use crate::scales::Scales;
use crate::spectra::run::RunSpectra;

/// Three significant digits.
fn n3(x: f64) -> String {
    num(x, 3)
}

/// A fraction as a percentage with three significant digits (no unit).
fn p3(x: f64) -> String {
    num(100.0 * x, 3)
}

/// Metres as millimetres, three significant digits; "n/a" when unknown.
fn mm(x: f64) -> String {
    if x.is_finite() {
        n3(x * 1e3)
    } else {
        "n/a".into()
    }
}

/// A length in mm with its standard uncertainty when it has one.
fn mm_pm(x: f64, u: f64) -> String {
    if x.is_finite() && u.is_finite() {
        format!("{} ± {}", mm(x), mm(u))
    } else {
        mm(x)
    }
}

/// The POD in words (see the module doc).
pub(crate) fn pod_words(pod: &Pod) -> Vec<String> {
    let tot = pod.total_energy;
    let frac = |j: usize| pod.energy[j] / tot;
    let unc = |j: usize| pod.energy_unc[j] / tot;
    let mut s = Vec::new();
    match pod.energy.len() {
        0 => return s,
        1 => s.push(format!(
            "POD of {} frames: mode 1 holds {} % of the fluctuation energy (± {} %).",
            pod.n_frames,
            p3(frac(0)),
            p3(unc(0))
        )),
        _ => s.push(format!(
            "POD of {} frames: mode 1 holds {} % of the fluctuation energy (± {} %), mode 2 {} % (± {} %); modes 1 and 2 together {} %.",
            pod.n_frames,
            p3(frac(0)),
            p3(unc(0)),
            p3(frac(1)),
            p3(unc(1)),
            p3(frac(0) + frac(1))
        )),
    }
    if let Some(floor) = pod.noise_floor {
        let above = pod.energy.iter().filter(|&&e| e > floor).count();
        s.push(format!(
            "{above} of the {} modes reported lie above the level uncorrelated measurement noise alone would reach.",
            pod.energy.len()
        ));
    }
    let sep = |j: usize| {
        if pod.separated[j] {
            "separated"
        } else {
            "not separated"
        }
    };
    if pod.energy.len() >= 2 {
        s.push(format!(
            "By North's rule (North et al. 1982) mode 1 is {} from its neighbours' energies and mode 2 is {}; a travelling structure shows as a pair of nearly equal energies that are not separated.",
            sep(0),
            sep(1)
        ));
    }
    s
}

/// "probe0_u" → "probe 0 u"; "a1" → "POD a1".
fn series_label(name: &str) -> String {
    match name.strip_prefix("probe").and_then(|r| r.split_once('_')) {
        Some((k, c)) => format!("probe {k} {c}"),
        None => format!("POD {name}"),
    }
}

/// The spectra in words (see the module doc).
pub(crate) fn spectra_words(sp: &RunSpectra) -> Vec<String> {
    let mut s = Vec::new();
    let Some(first) = sp.series.first() else {
        return s;
    };
    s.push(format!(
        "Welch spectra of {} series: {} segments of {} samples at {} Hz, {} degrees of freedom, resolution {} Hz, {} % intervals from the chi-squared law.",
        sp.series.len(),
        first.psd.segments,
        sp.nperseg,
        n3(sp.fs),
        n3(first.psd.dof),
        n3(first.psd.df),
        p3(sp.coverage)
    ));
    if let Some((f, src)) = sp.reference {
        let src = match src {
            "given" => "given in the run's conditions",
            _ => "estimated from the frame table's phases and times",
        };
        s.push(format!("The run's frequency is {} Hz ({src}).", n3(f)));
    }
    for ser in &sp.series {
        let label = series_label(&ser.name);
        let Some((f, u)) = ser.peak else {
            s.push(format!("{label}: no peak inside the spectrum."));
            continue;
        };
        let mut t = format!("{label}: dominant frequency {} ± {} Hz", n3(f), n3(u));
        if let Some((vel, len)) = sp.scales {
            let _ = write!(t, ", St = {} ± {}", n3(f * len / vel), n3(u * len / vel));
        }
        if let Some((r, _)) = sp.reference {
            let _ = write!(
                t,
                ", {} standard uncertainties from the run's frequency",
                n3((f - r) / u)
            );
        }
        t.push('.');
        s.push(t);
    }
    s
}

/// The length scales in words (see the module doc).
pub(crate) fn scales_words(sc: &Scales) -> Vec<String> {
    let mut s = Vec::new();
    for (k, p) in sc.probes.iter().enumerate() {
        for (c, cs) in p.comp.iter().enumerate() {
            let name = ["u′", "v′"][c];
            let spike = cs.noise_var_spike / cs.variance;
            let mut t = format!(
                "Probe {k} at ({} mm, {} mm), {name}: integral length scale {} mm along x and {} mm along y ({} and {} mm with the noise spike removed); the noise spike holds {} % of the variance{}, the propagated noise {} %.",
                mm(p.point.0),
                mm(p.point.1),
                mm_pm(cs.x.length, cs.x.length_unc),
                mm_pm(cs.y.length, cs.y.length_unc),
                mm(cs.x.length_noise_removed),
                mm(cs.y.length_noise_removed),
                p3(spike),
                if spike <= 0.0 { " (none seen: the correlation beside the probe extrapolates to 1 or above)" } else { "" },
                p3(cs.noise_var_propagated / cs.variance)
            );
            for (ax, a) in [("x", &cs.x), ("y", &cs.y)] {
                if !a.reached_zero && a.length.is_finite() {
                    let _ = write!(
                        t,
                        " Along {ax} the correlation stays above zero inside the window, so that scale is a lower bound."
                    );
                }
            }
            s.push(t);
        }
    }
    s
}

fn paragraph(out: &mut String, heading: &str, sentences: &[String], note: &str) {
    if sentences.is_empty() {
        return;
    }
    let _ = write!(out, "<h3>{heading}</h3>\n<p>");
    for x in sentences {
        let _ = write!(out, "{} ", esc(x));
    }
    out.push_str("</p>\n");
    if !note.is_empty() {
        let _ = writeln!(out, "<p class=\"note\">{note}</p>");
    }
}

/// Appends the run's POD, spectra and length-scale paragraphs (those
/// computed).
pub(super) fn section(out: &mut String, r: &RunResult) {
    let st = &r.structures;
    let dir = url(std::path::Path::new(&r.id));
    if let Some(pod) = &st.pod {
        paragraph(
            out,
            "Coherent structures (POD)",
            &pod_words(pod),
            &format!("Energies of the velocity fluctuations' modes, ± one standard error of sampling. Tables: <a href=\"{dir}/pod.csv\">pod.csv</a>, <a href=\"{dir}/pod-coefficients.csv\">pod-coefficients.csv</a>; method in docs/modes.md."),
        );
    }
    if let Some(sp) = &st.spectra {
        paragraph(
            out,
            "Spectra",
            &spectra_words(sp),
            &format!("Uncertainty of a dominant frequency: the delete-one jackknife over the averaged segments, combined with the peak interpolation's error under the Hann window (one bin's uniform share where only one segment was averaged); method in docs/modes.md. Tables: <a href=\"{dir}/spectral-peaks.csv\">spectral-peaks.csv</a>, <a href=\"{dir}/spectra.csv\">spectra.csv</a>."),
        );
    }
    if let Some(sc) = &st.scales {
        paragraph(
            out,
            "Length scales",
            &scales_words(sc),
            &format!("Integral scale: the two-point correlation integrated to its first zero crossing; n/a where the correlation beside the probe gives no ρ₀. A scale shorter than the grid pitch means ρ changes sign within one pitch. The spike is read from a Gaussian extrapolation of the first two separations: on a coarse grid it also holds the flow's own drop, so it may exceed the propagated noise. Uncorrelated measurement noise adds to the variance at zero separation only, so the correlation drops from 1 to ρ₀ beside the probe; that drop, times the variance, is the noise spike. Tables: <a href=\"{dir}/scales.csv\">scales.csv</a>, <a href=\"{dir}/correlation.csv\">correlation.csv</a>."),
        );
    }
}
