//! Outlier detection on `curlew synth` data with injected outliers at known
//! nodes (issue #3): recall for outliers larger than 10 times the noise, and
//! the false-positive rate on valid vectors, with the pipeline's default
//! normalized median test (Westerweel & Scarano 2005: eps 0.1 px,
//! threshold 2, either component).

use curlew::field::VALID;
use curlew::plan::Plan;
use curlew::synth::{self, Scenario, SynthOptions};

/// Counts (true positives, outliers > 10 sigma, false positives, valid
/// vectors) over `frames` frames of `opts`, interior nodes only (edges use a
/// one-sided neighbourhood; they are reported separately by the validation
/// map, not part of this rate).
fn detect(opts: &SynthOptions, frames: usize) -> (usize, usize, usize, usize) {
    let run = &opts.runs().unwrap()[0];
    let text = format!(
        "[campaign]\nname = \"d\"\n[input]\nlength_unit = \"mm\"\npixel_size = {:e}\npulse_separation = {:e}\n[[run]]\nid = \"a\"\nframes = \"*.csv\"\n",
        opts.pixel_size, run.pulse_separation
    );
    let plan = Plan::from_str(&text, std::path::Path::new("p.toml")).unwrap();
    let params = &plan.runs[0].validation;
    let (mut tp, mut big, mut fp, mut valid) = (0, 0, 0, 0);
    for k in 0..frames {
        let f = synth::frame_field(opts, 0, k).unwrap();
        let mut field = f.measured.clone();
        curlew::validate::validate_frame(params, &mut field, None);
        let (ny, nx) = field.grid.shape();
        for j in 1..ny - 1 {
            for i in 1..nx - 1 {
                let rejected = field.status[[j, i]] == curlew::field::REPLACED;
                let kind = f.kind[[j, i]];
                if kind == 1 {
                    let e = (f.measured.u[[j, i]] - f.truth.u[[j, i]])
                        .hypot(f.measured.v[[j, i]] - f.truth.v[[j, i]]);
                    if e > 10.0 * run.noise_sigma {
                        big += 1;
                        tp += rejected as usize;
                    }
                } else if kind == 0 && f.measured.status[[j, i]] == VALID {
                    valid += 1;
                    fp += rejected as usize;
                }
            }
        }
    }
    (tp, big, fp, valid)
}

#[test]
fn median_test_finds_injected_outliers_in_a_synthetic_vortex() {
    // A steady Lamb–Oseen vortex (the `vortex` scenario), PIV noise of
    // 0.05 px (the low end of the typical 0.05–0.1 px; common practice),
    // 3 % outliers, 2 % gaps, seed 11.
    let opts = SynthOptions {
        scenario: Scenario::Vortex,
        speeds: vec![0.2],
        noise_px: 0.05,
        seed: 11,
        ..SynthOptions::default()
    };
    let (tp, big, fp, valid) = detect(&opts, 20);
    let recall = tp as f64 / big as f64;
    let fpr = fp as f64 / valid as f64;
    eprintln!("vortex, noise 0.05 px: recall {recall:.4} ({tp}/{big}), false positives {:.3} % ({fp}/{valid})", 100.0 * fpr);
    assert!(big > 500, "enough large outliers to measure recall: {big}");
    // Measured (seed 11): recall 0.9894 (937/947), false positives 0.020 %
    // (6/29685). The issue asks recall >= 0.98
    // and false positives <= 0.5 % at threshold 2.
    assert!(recall >= 0.98, "recall {recall}");
    assert!(fpr <= 0.005, "false-positive rate {fpr}");
}
