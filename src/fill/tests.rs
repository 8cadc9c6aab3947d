use super::*;
use crate::field::Grid;
use crate::testutil::{assert_close, rng};
use rand::Rng;

fn grid(nx: usize, ny: usize) -> Grid {
    Grid {
        nx,
        ny,
        x0: 0.0,
        y0: 0.0,
        dx: 1.0,
        dy: 1.0,
    }
}

fn hole(f: &mut Field, j: usize, i: usize, code: u8) {
    f.status[[j, i]] = code;
    f.u[[j, i]] = f64::NAN;
    f.v[[j, i]] = f64::NAN;
}

#[test]
fn isolated_holes_in_a_linear_field_are_filled_exactly_and_valid_vectors_kept() {
    // the mean of the 8 neighbours of a linear field is the centre value
    let lin = |x: f64, y: f64| (1.0 + 0.3 * x - 0.2 * y, -0.5 + 0.1 * x + 0.4 * y);
    let mut f = Field::from_fn(grid(9, 7), lin);
    f.sigma_u.fill(0.01);
    f.sigma_v.fill(0.02);
    let orig = f.clone();
    hole(&mut f, 2, 3, REPLACED);
    hole(&mut f, 4, 6, FILLED);
    let c = fill(&Params::default(), &mut f);
    assert_eq!(
        c,
        Counts {
            replaced: 1,
            filled: 1,
            unfilled: 0
        }
    );
    for (j, i) in [(2, 3), (4, 6)] {
        let (u, v) = lin(i as f64, j as f64);
        assert_close(f.u[[j, i]], u, 1e-12, 0.0, "u");
        assert_close(f.v[[j, i]], v, 1e-12, 0.0, "v");
    }
    assert_eq!(f.status[[2, 3]], REPLACED);
    assert_eq!(f.status[[4, 6]], FILLED);
    for j in 0..7 {
        for i in 0..9 {
            if orig.status[[j, i]] == f.status[[j, i]] && f.status[[j, i]] == VALID {
                assert_eq!(f.u[[j, i]], orig.u[[j, i]]);
                assert_eq!(f.sigma_u[[j, i]], 0.01);
            }
        }
    }
    // sigma is the fill's model error only (the noise goes through the
    // weights in derive): zero for a linear field (the 8-neighbour mean is
    // exact for it), and the weights are 1/8 on the 8 valid neighbours.
    assert_close(
        f.sigma_u[[2, 3]],
        0.0,
        1e-12,
        0.0,
        "model error of a linear field",
    );
    let w = &f
        .fill_weights
        .iter()
        .find(|r| r.node == 2 * 9 + 3)
        .unwrap()
        .weights;
    assert_eq!(w.len(), 8);
    assert!(w.iter().all(|&(_, x)| (x - 0.125).abs() < 1e-15));
}

#[test]
fn the_hole_with_most_valid_neighbours_is_filled_first() {
    // holes at (2,2) [7 valid neighbours] and (2,3) [also a hole at
    // (2,2) nearby, 6 valid]. (2,2) is filled first from valid values only.
    let mut f = Field::from_fn(grid(6, 5), |x, y| (x * x + y, 0.0));
    hole(&mut f, 2, 2, REPLACED);
    hole(&mut f, 2, 3, REPLACED);
    hole(&mut f, 1, 4, REPLACED);
    let orig = Field::from_fn(grid(6, 5), |x, y| (x * x + y, 0.0));
    fill(&Params::default(), &mut f);
    // (2,2) has neighbours (1,1),(1,2),(1,3),(2,1),(3,1),(3,2),(3,3): 7 valid
    let want: f64 = [(1, 1), (1, 2), (1, 3), (2, 1), (3, 1), (3, 2), (3, 3)]
        .iter()
        .map(|&(j, i)| orig.u[[j, i]])
        .sum::<f64>()
        / 7.0;
    assert_close(
        f.u[[2, 2]],
        want,
        1e-12,
        0.0,
        "(2,2) from its 7 valid neighbours",
    );
}

#[test]
fn holes_far_from_data_are_masked() {
    let mut f = Field::from_fn(grid(15, 15), |x, _| (x, 1.0));
    for j in 3..12 {
        for i in 3..12 {
            hole(&mut f, j, i, FILLED);
        }
    }
    // 9x9 gap: distances 1..5 from the rim; max 3 leaves the central 3x3
    let c = fill(&Params::default(), &mut f);
    assert_eq!(c.filled, 81 - 9);
    assert_eq!(c.unfilled, 9);
    assert_eq!(f.status[[7, 7]], MASKED);
    assert!(f.u[[7, 7]].is_nan());
    assert_eq!(f.status[[5, 5]], FILLED);
    assert!(f.u[[5, 5]].is_finite() && f.sigma_u[[5, 5]].is_finite());
    // without a limit everything connected is filled
    let mut g = Field::from_fn(grid(15, 15), |x, _| (x, 1.0));
    for j in 3..12 {
        for i in 3..12 {
            hole(&mut g, j, i, FILLED);
        }
    }
    let p = Params {
        max_distance: None,
        ..Params::default()
    };
    assert_eq!(fill(&p, &mut g).unfilled, 0);
    // The model error estimate is exact for a linear (and any quadratic)
    // flow: sigma_u = |filled - true| at every filled node, rim or centre
    // (derived: the local quadratic fit reproduces the flow).
    for j in 3..12 {
        for i in 3..12 {
            let err = (g.u[[j, i]] - i as f64).abs();
            assert_close(g.sigma_u[[j, i]], err, 1e-9, 0.0, &format!("({j},{i})"));
            let sum: f64 = g
                .fill_weights
                .iter()
                .find(|r| r.node == j * 15 + i)
                .unwrap()
                .weights
                .iter()
                .map(|w| w.1)
                .sum();
            assert_close(sum, 1.0, 1e-12, 0.0, "weights sum to 1");
        }
    }
}

/// Issue 11 item 4: the uncertainty of filled vectors against Monte Carlo.
/// A uniform stream with white noise and with 50 %-overlap noise (2 x 2
/// top-hat average, rho(1) = 0.5, derived), isolated holes and a 3 x 3 gap;
/// the reported sigma of filled vectors (derive's u_unc, noise through the
/// fill weights, GUM eq. 13) must match the RMS of their actual error
/// within 20 % (before: 4-5 x too large). Measured with white noise:
/// 1.116 (the floored debiasing of the model-error term leaves a positive
/// residue where the flow is uniform; without the debiasing 1.184). Vorticity at nodes whose stencil
/// uses a filled vector: within 20 % (the cross-covariance of a filled
/// vector with its source vectors is replaced by the correlation model's
/// there; measured values printed).
#[test]
fn filled_vector_uncertainty_matches_monte_carlo() {
    use crate::derive::noise::tests::box_noise;
    use crate::derive::{derive_with, Params as DParams, Workspace};
    let g = grid(28, 28);
    let holes: Vec<(usize, usize)> = (4..24)
        .flat_map(|j| (4..24).map(move |i| (j, i)))
        .filter(|&(j, i)| (7 * j + 3 * i) % 23 == 0)
        .chain((12..15).flat_map(|j| (12..15).map(move |i| (j, i))))
        .collect();
    let near: Vec<(usize, usize)> = holes
        .iter()
        .flat_map(|&(j, i)| [(j, i + 1), (j + 1, i)])
        .filter(|n| !holes.contains(n))
        .collect();
    let mut r = rng(77);
    for w in [1, 2] {
        let (mut e2, mut u2, mut n) = (0.0, 0.0, 0usize);
        let (mut o1, mut o2, mut ou2) = (vec![0.0; near.len()], vec![0.0; near.len()], 0.0);
        let reps = 300;
        let mut ws = Workspace::new();
        for _ in 0..reps {
            let mut f = Field::from_fn(g, |_, _| (0.3, 0.1));
            f.u = &f.u + &(box_noise(&mut r, 28, 28, w) * 0.02);
            f.v = &f.v + &(box_noise(&mut r, 28, 28, w) * 0.02);
            for &(j, i) in &holes {
                hole(&mut f, j, i, REPLACED);
            }
            fill(&Params::default(), &mut f);
            let d = derive_with(
                &mut ws,
                &DParams {
                    quantities: vec![],
                    truncation: false,
                    ..DParams::default()
                },
                &f,
                None,
                None,
            );
            for &(j, i) in &holes {
                e2 += (d.u[[j, i]] - 0.3).powi(2);
                u2 += d.u_unc[[j, i]].powi(2);
                n += 1;
            }
            let om = d.get("omega").unwrap();
            for (k, &(j, i)) in near.iter().enumerate() {
                o1[k] += om.value[[j, i]];
                o2[k] += om.value[[j, i]].powi(2);
                ou2 += om.unc.as_ref().unwrap()[[j, i]].powi(2);
            }
        }
        let ratio = (u2 / e2).sqrt();
        let rf = reps as f64;
        let var: f64 = o1
            .iter()
            .zip(&o2)
            .map(|(a, b)| b / rf - (a / rf).powi(2))
            .sum::<f64>()
            / near.len() as f64;
        let oratio = (ou2 / (rf * near.len() as f64) / var).sqrt();
        eprintln!("W {w}: filled u: reported/actual {ratio:.3} ({n} values); omega next to them {oratio:.3}");
        assert_close(ratio, 1.0, 0.20, 0.0, &format!("filled u, W {w}"));
        assert_close(oratio, 1.0, 0.20, 0.0, &format!("omega near fills, W {w}"));
    }
}

/// Issue #3: with 20 % of the nodes missing, inpainting (Garcia 2010) beats
/// the neighbour mean on a smooth field. Measured (seed 51, 48 x 64, 638
/// holes): rms error over the holes 1.84e-2 (neighbour mean) against
/// 3.46e-3 (inpainting, 30 iterations, the default); 3.80e-3 with 20 and
/// 3.09e-3 with 60 iterations.
#[test]
fn inpainting_beats_the_neighbour_mean_on_a_smooth_field() {
    let truth = |x: f64, y: f64| {
        let (a, b) = (x / 64.0, y / 48.0);
        ((6.0 * a).sin() * (4.0 * b).cos(), (5.0 * a * b).cos() + a)
    };
    let clean = Field::from_fn(grid(64, 48), truth);
    let mut r = rng(51);
    let mut f = clean.clone();
    let mut holes = Vec::new();
    for j in 0..48 {
        for i in 0..64 {
            if r.random::<f64>() < 0.2 {
                hole(&mut f, j, i, FILLED);
                holes.push((j, i));
            }
        }
    }
    let p0 = Params {
        max_distance: None,
        ..Params::default()
    };
    let p1 = Params {
        method: Method::Inpaint,
        ..p0.clone()
    };
    let mut a = f.clone();
    let mut b = f.clone();
    let ca = fill(&p0, &mut a);
    let cb = fill(&p1, &mut b);
    assert_eq!(ca, cb);
    let err = |g: &Field| {
        (holes
            .iter()
            .map(|&ix| (g.u[ix] - clean.u[ix]).powi(2) + (g.v[ix] - clean.v[ix]).powi(2))
            .sum::<f64>()
            / holes.len() as f64)
            .sqrt()
    };
    let (en, ei) = (err(&a), err(&b));
    eprintln!(
        "{} holes: rms error neighbour mean {en:.3e}, inpainting {ei:.3e}",
        holes.len()
    );
    assert!(ei < 0.5 * en, "inpainting {ei} vs neighbour mean {en}");
    for j in 0..48 {
        for i in 0..64 {
            if f.status[[j, i]] == VALID {
                assert_eq!(b.u[[j, i]], clean.u[[j, i]]);
            }
        }
    }
}

/// The window search against the definition: the Chebyshev distance to the
/// nearest valid node by brute force, on random masks from sparse holes to
/// mostly holes.
#[test]
fn holes_beyond_the_distance_match_brute_force() {
    let mut r = rng(23);
    for trial in 0..60 {
        let (nx, ny) = (r.random_range(1..25), r.random_range(1..20));
        let p_hole = [0.05, 0.5, 0.9, 1.0][trial % 4];
        let mut st = ndarray::Array2::from_elem((ny, nx), VALID);
        for s in st.iter_mut() {
            if r.random::<f64>() < p_hole {
                *s = if r.random::<bool>() { FILLED } else { REPLACED };
            }
        }
        let holes: Vec<usize> = (0..nx * ny)
            .filter(|&k| st.as_slice().unwrap()[k] != VALID)
            .collect();
        for d in 0..5 {
            let far = beyond(&st, &holes, d);
            for &k in &holes {
                let (j, i) = (k / nx, k % nx);
                let nearest = st
                    .indexed_iter()
                    .filter(|(_, &s)| s == VALID)
                    .map(|((jj, ii), _)| jj.abs_diff(j).max(ii.abs_diff(i)))
                    .min()
                    .unwrap_or(usize::MAX);
                assert_eq!(far[k], nearest > d, "trial {trial}, d {d}, node {k}");
            }
        }
    }
}

#[test]
fn the_fill_reads_in_plain_words() {
    assert_eq!(
        Params::default().describe(),
        "neighbour mean (holes up to 3 nodes from a valid vector; farther ones stay empty; \
         at least 2 neighbours with values)"
    );
    let p = Params {
        method: Method::Inpaint,
        max_distance: None,
        inpaint_iterations: 60,
        ..Params::default()
    };
    assert_eq!(
        p.describe(),
        "penalized least-squares inpainting, 60 iterations (every hole connected to valid vectors)"
    );
    let m = serde_json::to_value(&p).unwrap();
    assert_eq!(m["method"], "inpaint");
    assert!(m["max_distance"].is_null());
}
