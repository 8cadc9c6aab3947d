//! Unit checks of the POD sketch: a flow made of known orthogonal modes
//! with known energies (analytic), the sketch against its definition with
//! gaps (a slow obviously-correct reference), merge and bytes invariance,
//! and phase from a known pair.

use super::sketch::{omega_row, ModeSketch};
use super::*;

const NX: usize = 7;
const NY: usize = 5;
/// Amplitudes of the three known modes.
const C: [f64; 3] = [2.0, 1.2, 0.5];

fn params(modes: usize, over: usize) -> Params {
    Params {
        enabled: true,
        modes,
        oversampling: over,
        ..Params::default()
    }
}

/// Three exactly orthonormal spatial modes on NX × NY nodes (u then v):
/// discrete sines, orthogonal on the grid by construction.
fn known_modes() -> Vec<Vec<f64>> {
    let n = NX * NY;
    let mut out = Vec::new();
    for (p, q, comp) in [(1usize, 1usize, 0usize), (2, 1, 1), (1, 2, 0)] {
        let mut m = vec![0.0; 2 * n];
        for j in 0..NY {
            for i in 0..NX {
                let s = (std::f64::consts::PI * p as f64 * (i + 1) as f64 / (NX + 1) as f64).sin()
                    * (std::f64::consts::PI * q as f64 * (j + 1) as f64 / (NY + 1) as f64).sin();
                m[comp * n + j * NX + i] = s;
            }
        }
        let norm = m.iter().map(|x| x * x).sum::<f64>().sqrt();
        m.iter_mut().for_each(|x| *x /= norm);
        out.push(m);
    }
    out
}

/// Frames x_f = mean + Σ_j c_j φ_j s_j(f), with s_j whole periods of sines
/// and cosines over N frames: zero mean and exactly orthogonal in f, so the
/// energies are known: λ_j = c_j² (N/2) / (N − 1).
fn known_flow(n_frames: usize, c: [f64; 3]) -> (Vec<Vec<f64>>, Vec<f64>, Vec<Vec<f64>>) {
    let modes = known_modes();
    let nf = n_frames as f64;
    let tau = std::f64::consts::TAU;
    let s = |j: usize, f: usize| {
        let t = f as f64 / nf;
        match j {
            0 => (tau * 3.0 * t).sin(),
            1 => (tau * 3.0 * t).cos(),
            _ => (tau * 5.0 * t).sin(),
        }
    };
    let d = 2 * NX * NY;
    let frames = (0..n_frames)
        .map(|f| {
            (0..d)
                .map(|r| {
                    let mean = if r < NX * NY { 0.3 } else { -0.02 };
                    mean + (0..3).map(|j| c[j] * modes[j][r] * s(j, f)).sum::<f64>()
                })
                .collect()
        })
        .collect();
    let energy = c.iter().map(|c| c * c * (nf / 2.0) / (nf - 1.0)).collect();
    (frames, energy, modes)
}

fn sketch_of(frames: &[Vec<f64>], p: &Params, range: std::ops::Range<usize>) -> ModeSketch {
    let n = NX * NY;
    let mut s = ModeSketch::new(p, n);
    let unc = vec![0.01; n];
    for f in range {
        let x = &frames[f];
        s.push(f as u64, None, [&x[..n], &x[n..]], [&unc, &unc]);
    }
    s
}

#[test]
fn known_orthogonal_modes_and_energies_are_recovered() {
    let (frames, energy, modes) = known_flow(48, C);
    // sketch width 8 < 47 frames, but the flow spans 3 dimensions: exact.
    let pod = finish(&sketch_of(&frames, &params(4, 4), 0..48), 50).unwrap();
    for j in 0..3 {
        let rel = (pod.energy[j] - energy[j]).abs() / energy[j];
        assert!(
            rel < 1e-12,
            "mode {}: {} vs {} ({rel:e})",
            j + 1,
            pod.energy[j],
            energy[j]
        );
        let dot: f64 = pod.modes[j].iter().zip(&modes[j]).map(|(a, b)| a * b).sum();
        assert!(
            (dot.abs() - 1.0).abs() < 1e-12,
            "mode {} overlap {dot}",
            j + 1
        );
    }
    assert!(
        pod.energy[3] < 1e-20 * energy[0],
        "4th energy {}",
        pod.energy[3]
    );
    let tot: f64 = energy.iter().sum();
    assert!((pod.total_energy - tot).abs() < 1e-12 * tot);
    // coefficients reproduce the energies: Σ a_j² / (N − 1) = λ_j
    for j in 0..3 {
        let e = pod.coefficients.iter().map(|a| a[j] * a[j]).sum::<f64>() / 47.0;
        assert!((e - pod.energy[j]).abs() < 1e-12 * energy[0]);
    }
    // the mean is the flow's mean
    assert!((pod.mean[0] - 0.3).abs() < 1e-14 && (pod.mean[NX * NY] + 0.02).abs() < 1e-14);
}

#[test]
fn merged_parts_and_bytes_give_the_same_sketch() {
    let (frames, _, _) = known_flow(30, C);
    let p = params(3, 5);
    let whole = sketch_of(&frames, &p, 0..30);
    let mut a = sketch_of(&frames, &p, 0..7);
    a.merge(sketch_of(&frames, &p, 7..19));
    a.merge(ModeSketch::from_bytes(&sketch_of(&frames, &p, 19..30).to_bytes()).unwrap());
    let scale = whole.y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    for (x, y) in whole.y.iter().zip(&a.y) {
        assert!((x - y).abs() < 1e-13 * scale, "{x} vs {y}");
    }
    assert_eq!(whole.frames, a.frames);
    let b = ModeSketch::from_bytes(&whole.to_bytes()).unwrap();
    assert_eq!(b.y, whole.y);
    assert_eq!(b.m2, whole.m2);
    assert!(ModeSketch::from_bytes(&whole.to_bytes()[..100]).is_err());
}

#[test]
fn centred_sketch_with_gaps_equals_its_definition() {
    // Slow reference: Y' = Σ_f x'_f ω_fᵀ with x'_fi = x_fi − m_i where the
    // node has a value and 0 where it does not, m_i over the valid frames.
    let (mut frames, _, _) = known_flow(20, C);
    let n = NX * NY;
    for (f, x) in frames.iter_mut().enumerate() {
        if f % 3 == 0 {
            x[(f * 7) % n] = f64::NAN; // u missing → the node is a gap
        }
    }
    let p = params(2, 3);
    let s = sketch_of(&frames, &p, 0..20);
    let k = 5;
    for r in 0..2 * n {
        let node = r % n;
        let valid: Vec<usize> = (0..20)
            .filter(|&f| frames[f][node].is_finite() && frames[f][n + node].is_finite())
            .collect();
        let m = valid.iter().map(|&f| frames[f][r]).sum::<f64>() / valid.len() as f64;
        assert!((s.mean[r] - m).abs() < 1e-14);
        for q in 0..k {
            let y: f64 = valid
                .iter()
                .map(|&f| (frames[f][r] - m) * omega_row(p.seed, f as u64, k)[q])
                .sum();
            assert!((s.y[r * k + q] - y).abs() < 1e-12, "row {r} col {q}");
        }
    }
    // and the POD of gappy data stays finite with the gaps counted
    let pod = finish(&s, 10).unwrap();
    assert!(pod.energy.iter().all(|e| e.is_finite()));
    assert_eq!(s.frames[0].gaps, vec![0]);
}

#[test]
fn phase_of_a_known_pair_is_recovered() {
    let (frames, _, _) = known_flow(48, [2.0, 1.6, 0.5]);
    let pod = finish(&sketch_of(&frames, &params(4, 4), 0..48), 50).unwrap();
    let est = phase::estimate(&pod).unwrap();
    assert!(est.failed.is_empty(), "{:?}", est.failed);
    // truth: 3 periods over 48 frames
    let truth: Vec<f64> = (0..48)
        .map(|f| (360.0 * 3.0 * f as f64 / 48.0) % 360.0)
        .collect();
    let rms = phase::circular_rms(&est.phase_deg, &truth, true);
    assert!(rms < 1e-6, "circular rms {rms} deg");
    assert!(est.radius_cv < 1e-9);
}

#[test]
fn a_pair_of_unequal_modes_is_not_a_pair() {
    let (frames, _, _) = known_flow(48, C);
    let mut pod = finish(&sketch_of(&frames, &params(4, 4), 0..48), 50).unwrap();
    pod.energy[1] = 0.1 * pod.energy[0];
    let est = phase::estimate(&pod).unwrap();
    assert!(!est.failed.is_empty());
}

#[test]
fn n_eff_of_white_and_of_smooth_series() {
    // alternating ±1: ρ(1) = −1 < 0, no sum: N_eff = N
    let alt: Vec<f64> = (0..100)
        .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    assert_eq!(finish::n_eff_variance(&alt, 50), 100.0);
    // a slow sine has strong positive correlation: far fewer samples
    let slow: Vec<f64> = (0..200).map(|i| (i as f64 * 0.02).sin()).collect();
    assert!(finish::n_eff_variance(&slow, 50) < 20.0);
}

#[test]
fn close_eigenvalues_are_flagged_as_not_separated() {
    let sep = finish::separation(&[10.0, 5.0, 4.9, 1.0], &[1.0, 0.5, 0.49, 0.1]);
    assert_eq!(sep, vec![true, false, false, true]);
}
