//! Checks of the two-point statistics: an analytic random field with a
//! known Gaussian correlation (with and without white noise), a slow
//! two-pass reference with gaps, merging and bytes.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

use super::*;

fn grid(n: usize, d: f64) -> Grid {
    Grid {
        nx: n,
        ny: n,
        x0: 0.0,
        y0: 0.0,
        dx: d,
        dy: d,
    }
}

fn acc_for(g: Grid, probes: &[(usize, usize)]) -> CorrAcc {
    CorrAcc::with_layout(Layout {
        grid: g,
        points: probes.iter().map(|&(i, j)| (g.x(i), g.y(j))).collect(),
        nodes: probes.iter().map(|&(i, j)| j * g.nx + i).collect(),
        include_filled: false,
    })
}

/// One frame of a homogeneous random field with correlation
/// exp(−r²/(2ℓ²)): M random Fourier modes, wavevectors k ~ N(0, I/ℓ²),
/// phases uniform, amplitude sqrt(2/M) (unit variance). E[cos(k·r)] is the
/// characteristic function of k: exactly the Gaussian (Rahimi & Recht 2007,
/// random Fourier features, from memory).
fn gaussian_field(g: &Grid, ell: f64, r: &mut ChaCha8Rng) -> Vec<f64> {
    const M: usize = 8;
    let modes: Vec<(f64, f64, f64)> = (0..M)
        .map(|_| {
            let kx: f64 = StandardNormal.sample(r);
            let ky: f64 = StandardNormal.sample(r);
            (
                kx / ell,
                ky / ell,
                r.random::<f64>() * std::f64::consts::TAU,
            )
        })
        .collect();
    let a = (2.0 / M as f64).sqrt();
    (0..g.len())
        .map(|k| {
            let (x, y) = (g.x(k % g.nx), g.y(k / g.nx));
            modes
                .iter()
                .map(|(kx, ky, ph)| a * (kx * x + ky * y + ph).cos())
                .sum()
        })
        .collect()
}

#[test]
fn a_field_of_known_gaussian_correlation_gives_its_integral_scale_and_noise_spike() {
    // Analytic: ρ(r) = exp(−r²/(2ℓ²)), L = ∫_0^∞ ρ dr = ℓ sqrt(π/2).
    let seed = 11;
    eprintln!("seed {seed}");
    let (ell, d, n) = (1.0, 0.25, 49);
    let g = grid(n, d);
    let c = n / 2;
    let sigma_n = 0.3;
    let mut clean = acc_for(g, &[(c, c)]);
    let mut noisy = acc_for(g, &[(c, c)]);
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    let counts = vec![true; g.len()];
    let unc = vec![sigma_n; g.len()];
    for _ in 0..4000 {
        let u = gaussian_field(&g, ell, &mut r);
        let v = gaussian_field(&g, ell, &mut r);
        clean.push_values(&counts, [&u, &v], [&unc, &unc]);
        let add = |a: &[f64], r: &mut ChaCha8Rng| -> Vec<f64> {
            a.iter()
                .map(|x| {
                    let e: f64 = StandardNormal.sample(r);
                    x + sigma_n * e
                })
                .collect()
        };
        let (un, vn) = (add(&u, &mut r), add(&v, &mut r));
        noisy.push_values(&counts, [&un, &vn], [&unc, &unc]);
    }
    let l_true = ell * (std::f64::consts::PI / 2.0).sqrt();
    let s = finish(&clean);
    for (comp, cs) in s.probes[0].comp.iter().enumerate() {
        for ax in [&cs.x, &cs.y] {
            // ρ at one ℓ: exp(−1/2) within the sampling error (~0.03)
            let at_ell = ax.profile[c + 4].1;
            assert!((at_ell - (-0.5f64).exp()).abs() < 0.06, "rho(ell) {at_ell}");
            let rel = (ax.length - l_true) / l_true;
            eprintln!(
                "clean {comp}: L {:.4} vs {l_true:.4} ({:+.1} %), rho0 {:.4}",
                ax.length,
                100.0 * rel,
                ax.rho0
            );
            assert!(ax.reached_zero);
            assert!(rel.abs() < 0.1, "L {} vs {l_true}", ax.length);
            // no noise: the extrapolation of a Gaussian top gives ρ0 = 1
            assert!((ax.rho0 - 1.0).abs() < 0.01, "rho0 {}", ax.rho0);
        }
    }
    let s = finish(&noisy);
    let var_n = sigma_n * sigma_n;
    for cs in &s.probes[0].comp {
        let spike = cs.noise_var_spike;
        eprintln!(
            "noisy: variance {:.4}, spike noise variance {spike:.4} vs {var_n} (propagated {:.4}); L {:.4}, noise removed {:.4}",
            cs.variance, cs.noise_var_propagated, cs.x.length, cs.x.length_noise_removed
        );
        assert!((spike - var_n).abs() < 0.25 * var_n, "spike {spike}");
        assert!((cs.noise_var_propagated - var_n).abs() < 1e-12);
        for ax in [&cs.x, &cs.y] {
            // the spike lowers ρ(r > 0) by 1/(1 + σn²): the raw scale is
            // short by about 8 %, the noise-removed one is not
            assert!(ax.length < 0.97 * l_true, "raw L {}", ax.length);
            let rel = (ax.length_noise_removed - l_true) / l_true;
            assert!(
                rel.abs() < 0.1,
                "noise-removed L {}",
                ax.length_noise_removed
            );
        }
    }
}

/// Frames with gaps: values from a seeded stream, some nodes missing.
fn frames_with_gaps(g: &Grid, nf: usize, seed: u64) -> Vec<(Vec<bool>, Vec<f64>, Vec<f64>)> {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    (0..nf)
        .map(|f| {
            let base: f64 = StandardNormal.sample(&mut r);
            let counts = (0..g.len()).map(|_| r.random::<f64>() > 0.1).collect();
            let u = (0..g.len())
                .map(|k| 1.0 + base * (k as f64 * 0.1).cos() + 0.3 * r.random::<f64>())
                .collect();
            let v = (0..g.len())
                .map(|k| -0.5 + base * (k as f64 * 0.2 + f as f64).sin() + 0.2 * r.random::<f64>())
                .collect();
            (counts, u, v)
        })
        .collect()
}

#[test]
fn correlations_equal_a_two_pass_pairwise_reference_and_merge_exactly() {
    let g = Grid {
        nx: 6,
        ny: 5,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 2e-3,
    };
    let fr = frames_with_gaps(&g, 70, 5);
    let unc = vec![0.01; g.len()];
    let probes = [(2, 2), (0, 4)];
    let mut whole = acc_for(g, &probes);
    for (c, u, v) in &fr {
        whole.push_values(c, [u, v], [&unc, &unc]);
    }
    // chunks of 16 merged in order, and a 2-shard split through bytes
    let mut chunked = acc_for(g, &probes);
    for part in fr.chunks(16) {
        let mut a = acc_for(g, &probes);
        for (c, u, v) in part {
            a.push_values(c, [u, v], [&unc, &unc]);
        }
        let a = CorrAcc::from_bytes(&a.to_bytes()).unwrap();
        chunked.compatible(&a).unwrap();
        chunked.merge(a);
    }
    let (sw, sc) = (finish(&whole), finish(&chunked));
    for (p, &(i, j)) in probes.iter().enumerate() {
        let k = j * g.nx + i;
        for comp in 0..2 {
            for q in 0..g.len() {
                // slow reference: the pairs, their means, then Pearson
                let pairs: Vec<(f64, f64)> = fr
                    .iter()
                    .filter(|(c, _, _)| c[k] && c[q])
                    .map(|(_, u, v)| {
                        if comp == 0 {
                            (u[k], u[q])
                        } else {
                            (v[k], v[q])
                        }
                    })
                    .collect();
                let n = pairs.len() as f64;
                let (ma, mb) = (
                    pairs.iter().map(|x| x.0).sum::<f64>() / n,
                    pairs.iter().map(|x| x.1).sum::<f64>() / n,
                );
                let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
                for (a, b) in &pairs {
                    sab += (a - ma) * (b - mb);
                    saa += (a - ma) * (a - ma);
                    sbb += (b - mb) * (b - mb);
                }
                let rho = sab / (saa * sbb).sqrt();
                let got = sw.probes[p].rho[comp][q];
                assert!((got - rho).abs() < 1e-12, "p {p} q {q}: {got} vs {rho}");
                assert_eq!(sw.probes[p].pairs[q], n);
                assert!((sc.probes[p].rho[comp][q] - rho).abs() < 1e-12);
            }
        }
    }
    assert_eq!(chunked.frames, 70);
    let b = whole.to_bytes();
    assert_eq!(CorrAcc::from_bytes(&b).unwrap(), whole);
    assert!(CorrAcc::from_bytes(&b[..b.len() - 3]).is_err());
}

#[test]
fn the_integral_stops_at_the_first_zero_crossing() {
    // ρ = 1, 0.5, −0.5, 0.8: trapezoid 0.75 d, then the crossing half-way
    // to the next node adds 0.5 × 0.5 × 0.5 d.
    let (l, hit) = finish::integrate_to_zero(&[1.0, 0.5, -0.5, 0.8], 2.0, 1.0);
    assert!(hit);
    assert!((l - 2.0 * (0.75 + 0.125)).abs() < 1e-15, "{l}");
    // never crossing: the truncated integral and no crossing
    let (l, hit) = finish::integrate_to_zero(&[1.0, 0.5, 0.25], 1.0, 1.0);
    assert!(!hit);
    assert!((l - 1.125).abs() < 1e-15);
}

#[test]
fn the_batch_means_uncertainty_of_the_integral_scale_matches_its_scatter() {
    // 80 replicas of 200 frames of the Gaussian-correlated field (ℓ = 1,
    // L = ℓ sqrt(π/2) = 1.2533, analytic): the scatter of the replicas'
    // integral scales against the root mean square of their reported
    // batch-means uncertainties (8 blocks of 25 frames; `blocks`).
    // Measured: mean L 1.2376, scatter 0.0944, scatter / reported 1.08.
    let (ell, d, n) = (1.0, 0.25, 25);
    let g = grid(n, d);
    let c = n / 2;
    let counts = vec![true; g.len()];
    let unc = vec![0.0; g.len()];
    let mut r = ChaCha8Rng::seed_from_u64(23);
    let (mut lx, mut ux2, mut r0u) = (Vec::new(), 0.0, 0.0);
    for _ in 0..80 {
        let mut acc = acc_for(g, &[(c, c)]);
        acc.blocks = blocks::LineBlocks::new(g, &acc.layout.nodes, false, 200);
        assert_eq!(acc.blocks.as_ref().unwrap().blocks, 8);
        for f in 0..200u64 {
            let u = gaussian_field(&g, ell, &mut r);
            let v = gaussian_field(&g, ell, &mut r);
            acc.push_values_at(f, &counts, [&u, &v], [&unc, &unc]);
        }
        let s = finish(&acc);
        let x = &s.probes[0].comp[0].x;
        lx.push(x.length);
        ux2 += x.length_unc * x.length_unc;
        r0u += x.rho0_unc;
    }
    let m = lx.iter().sum::<f64>() / lx.len() as f64;
    let sd = (lx.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (lx.len() - 1) as f64).sqrt();
    let ratio = sd / (ux2 / lx.len() as f64).sqrt();
    assert!(r0u.is_finite() && r0u > 0.0);
    assert!(ratio > 0.75 && ratio < 1.33, "{ratio}");
    assert!(
        (m / (ell * (std::f64::consts::PI / 2.0).sqrt()) - 1.0).abs() < 0.1,
        "{m}"
    );
}

#[test]
fn blocks_merge_like_one_pass_and_travel_in_the_bytes() {
    let g = grid(9, 0.5);
    let counts = vec![true; g.len()];
    let unc = vec![0.01; g.len()];
    let mut r = ChaCha8Rng::seed_from_u64(4);
    let frames: Vec<(Vec<f64>, Vec<f64>)> = (0..60)
        .map(|_| {
            (
                gaussian_field(&g, 1.0, &mut r),
                gaussian_field(&g, 1.0, &mut r),
            )
        })
        .collect();
    let fresh = || {
        let mut a = acc_for(g, &[(4, 4), (2, 6)]);
        a.blocks = blocks::LineBlocks::new(g, &a.layout.nodes, false, 60);
        a
    };
    let mut whole = fresh();
    let (mut first, mut second) = (fresh(), fresh());
    for (f, (u, v)) in frames.iter().enumerate() {
        whole.push_values_at(f as u64, &counts, [u, v], [&unc, &unc]);
        let half = if f < 27 { &mut first } else { &mut second };
        half.push_values_at(f as u64, &counts, [u, v], [&unc, &unc]);
    }
    first.merge(second);
    let (a, b) = (finish(&whole), finish(&first));
    for p in 0..2 {
        for c in 0..2 {
            let (x, y) = (&a.probes[p].comp[c].x, &b.probes[p].comp[c].x);
            assert!(x.length_unc.is_finite() && x.length_unc > 0.0);
            assert!((x.length_unc - y.length_unc).abs() < 1e-12 * x.length_unc);
        }
    }
    let back = CorrAcc::from_bytes(&first.to_bytes()).unwrap();
    assert_eq!(back, first);
}
