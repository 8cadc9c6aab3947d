//! Whole-accumulator tests on fields built by hand: the helpers, and the
//! properties of merging and serialisation (`values`: the numbers).

mod values;

use ndarray::Array2;
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::codec::FORMAT_MAGIC;
use super::*;
use crate::derive::Quantity;
use crate::field::{Field, FrameMeta, Grid, FILLED, REPLACED, VALID};
use crate::io::Values;
use crate::testutil::{assert_close, rng};

const Q: [&str; 2] = ["omega", "div"];

fn grid(nx: usize, ny: usize) -> Grid {
    Grid {
        nx,
        ny,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    }
}

/// One frame from per-node (u, v, omega, div) and status functions.
struct Frame {
    meta: FrameMeta,
    field: Field,
    derived: Derived,
}

fn frame(
    g: Grid,
    index: usize,
    time: Option<f64>,
    phase: Option<f64>,
    vals: &dyn Fn(usize, usize) -> [f64; 4],
    status: &dyn Fn(usize, usize) -> u8,
) -> Frame {
    let sh = g.shape();
    let mut field = Field::empty(g);
    let mut a: Vec<Array2<f64>> = (0..4).map(|_| Array2::zeros(sh)).collect();
    for j in 0..g.ny {
        for i in 0..g.nx {
            let v = vals(j, i);
            for q in 0..4 {
                a[q][[j, i]] = v[q];
            }
            field.status[[j, i]] = status(j, i);
        }
    }
    field.u = a[0].clone();
    field.v = a[1].clone();
    let quantity = |name: &'static str, value: &Array2<f64>, unc: f64| Quantity {
        name,
        unit: "1/s",
        value: value.clone(),
        unc: Some(Array2::from_elem(sh, unc)),
        bias: Some(Array2::from_elem(sh, 0.01)),
        trunc: Some([
            Array2::from_elem(sh, 0.01 + 0.002 * (index % 3) as f64),
            Array2::from_elem(sh, 1e-5),
        ]),
        shift: Some(Array2::from_elem(
            sh,
            if name == "div" {
                -0.001 * (index % 2) as f64
            } else {
                0.0
            },
        )),
    };
    let derived = Derived {
        u: a[0].clone(),
        v: a[1].clone(),
        u_unc: Array2::from_elem(sh, 0.02),
        v_unc: Array2::from_elem(sh, 0.03),
        quantities: vec![
            quantity("omega", &a[2], 0.1 + 0.1 * (index % 2) as f64),
            quantity("div", &a[3], 0.05),
        ],
        noise_estimate: None,
        noise_used: 0.02,
        correlation: crate::stencil::correlation::Correlation::Independent,
        smoothing_s: None,
        scheme_map: Array2::zeros(sh),
        scheme_names: vec!["least-squares"],
        scheme_counts: vec![sh.0 * sh.1],
        fallback_nodes: 0,
        sigma_fallback_nodes: 0,
        inst_omega: None,
        vel_trunc: None,
    };
    Frame {
        meta: FrameMeta {
            index,
            name: format!("f{index:04}"),
            time_s: time,
            phase_deg: phase,
        },
        field,
        derived,
    }
}

/// The systematic part of a mean that `frame`'s signed truncation
/// estimates `0.01 + 0.002 (index mod 3)` give over the frames `idx`
/// (independent samples): `sqrt(max(0, mean^2 - s^2 / N))` (table module).
fn expected_systematic(idx: impl Iterator<Item = usize>) -> f64 {
    let b: Vec<f64> = idx.map(|i| 0.01 + 0.002 * (i % 3) as f64).collect();
    let n = b.len() as f64;
    let m = b.iter().sum::<f64>() / n;
    let s2 = b.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0);
    (m * m - s2 / n).max(0.0).sqrt()
}

/// The systematic part of one instantaneous value for the same estimates:
/// their mean square less their model noise variance 1e-5 (`frame`),
/// `sqrt(mean(b^2) - 1e-5)`.
fn expected_systematic_inst(idx: impl Iterator<Item = usize>) -> f64 {
    let b: Vec<f64> = idx.map(|i| 0.01 + 0.002 * (i % 3) as f64).collect();
    let ms = b.iter().map(|x| x * x).sum::<f64>() / b.len() as f64;
    (ms - 1e-5).max(0.0).sqrt()
}

/// Random frames with a few replaced and filled nodes, phases and times.
fn random_frames(g: Grid, n: usize, seed: u64, timed: bool) -> Vec<Frame> {
    let mut r = rng(seed);
    (0..n)
        .map(|f| {
            let noise: Vec<f64> = (0..4 * g.len())
                .map(|_| StandardNormal.sample(&mut r))
                .collect();
            let st: Vec<u8> = (0..g.len())
                .map(|_| match r.random_range(0..20) {
                    0 => REPLACED,
                    1 => FILLED,
                    _ => VALID,
                })
                .collect();
            let phase = r.random_range(0.0..720.0) - 180.0;
            frame(
                g,
                f,
                timed.then_some(f as f64 * 1e-3),
                Some(phase),
                &|j, i| {
                    let k = j * g.nx + i;
                    [
                        1.0 + 0.1 * noise[4 * k],
                        0.2 + 0.05 * noise[4 * k + 1],
                        30.0 * noise[4 * k + 2],
                        noise[4 * k + 3],
                    ]
                },
                &|j, i| st[j * g.nx + i],
            )
        })
        .collect()
}

fn params() -> Params {
    Params {
        phase_bins: 4,
        probes: vec![(1e-3, 1e-3)],
        max_lag: 6,
        ..Params::default()
    }
}

fn accumulate(p: &Params, g: Grid, frames: &[Frame]) -> RunAccumulator {
    let mut a = RunAccumulator::new(p, g, &Q);
    for f in frames {
        a.push(&f.meta, &f.field, &f.derived);
    }
    a
}

fn chunked(p: &Params, g: Grid, frames: &[Frame], size: usize) -> RunAccumulator {
    let mut it = frames.chunks(size).map(|c| accumulate(p, g, c));
    let mut a = it.next().unwrap();
    it.for_each(|c| a.merge(c));
    a
}

/// Every column of two stats agree within `rel` (NaN where the other is NaN).
fn assert_same(a: &RunStats, b: &RunStats, rel: f64, what: &str) {
    let tables = |s: &RunStats| {
        let mut v = vec![s.ensemble.clone()];
        v.extend(s.phase.iter().map(|p| p.table.clone()));
        v
    };
    for (ta, tb) in tables(a).iter().zip(tables(b).iter()) {
        assert_eq!(ta.columns.len(), tb.columns.len());
        for ((na, ca), (nb, cb)) in ta.columns.iter().zip(&tb.columns) {
            assert_eq!(na, nb);
            for (x, y) in ca.iter().zip(cb) {
                assert_close(*x, *y, 1e-300, rel, &format!("{what}: {na}"));
            }
        }
    }
    let (Some(ca), Some(cb)) = (&a.convergence, &b.convergence) else {
        assert!(
            a.convergence.is_none() && b.convergence.is_none(),
            "{what}: convergence"
        );
        return;
    };
    for ((na, va), (nb, vb)) in ca.columns.iter().zip(&cb.columns) {
        assert_eq!(na, nb);
        match (va, vb) {
            (Values::F64(x), Values::F64(y)) => {
                for (x, y) in x.iter().zip(y) {
                    assert_close(*x, *y, 1e-300, rel, &format!("{what}: convergence {na}"));
                }
            }
            _ => assert_eq!(va, vb, "{what}: convergence {na}"),
        }
    }
}

#[test]
fn chunk_merges_equal_one_pass_and_repeat_bit_for_bit() {
    let g = grid(3, 2);
    let frames = random_frames(g, 70, 41, true);
    let p = params();
    let one = accumulate(&p, g, &frames).finish(&p);
    for size in [1, 16, 33] {
        let c = chunked(&p, g, &frames, size);
        assert_same(&c.finish(&p), &one, 1e-12, &format!("chunks of {size}"));
        // The same chunking always gives the same bytes (any thread count).
        assert_eq!(c.to_bytes(), chunked(&p, g, &frames, size).to_bytes());
    }
    assert!(one.n_eff.is_some());
}

#[test]
fn merge_is_associative_for_random_splits() {
    let g = grid(3, 2);
    let p = params();
    for seed in 0..4u64 {
        let frames = random_frames(g, 45, 420 + seed, true);
        let mut r = rng(4200 + seed);
        let i = r.random_range(1..30);
        let j = r.random_range(i + 1..44);
        let [a, b, c] = [&frames[..i], &frames[i..j], &frames[j..]].map(|f| accumulate(&p, g, f));
        let mut left = a.clone();
        left.merge(b.clone());
        left.merge(c.clone());
        let mut bc = b;
        bc.merge(c);
        let mut right = a;
        right.merge(bc);
        assert_same(
            &left.finish(&p),
            &right.finish(&p),
            1e-12,
            &format!("(a+b)+c vs a+(b+c), split {i}/{j}"),
        );
    }
}

#[test]
fn pushing_equals_merging_single_frames_bit_for_bit() {
    // Push is the merge formula with n_b = 1, so chunks of one frame give
    // the very same bytes as one pass.
    let g = grid(3, 2);
    let frames = random_frames(g, 30, 49, true);
    let p = params();
    assert_eq!(
        chunked(&p, g, &frames, 1).to_bytes(),
        accumulate(&p, g, &frames).to_bytes()
    );
}

// Thread counts: tests/it/run.rs `results_do_not_depend_on_the_number_of_threads`
// runs the driver itself (`reduce::state::RunState::merge` of its chunks).

#[test]
fn an_empty_run_finishes_with_empty_columns() {
    let g = grid(2, 2);
    let p = params();
    let s = RunAccumulator::new(&p, g, &Q).finish(&p);
    assert_eq!(s.ensemble.get("n_valid").unwrap(), &[0.0; 4]);
    assert!(s.ensemble.get("u_mean").unwrap().iter().all(|x| x.is_nan()));
    assert!(s.phase.is_empty() && s.n_eff.is_none());
    assert_eq!(s.convergence.unwrap().n_rows(), 0);
}

#[test]
fn ensemble_does_not_depend_on_frame_order() {
    // Without time_s the samples are independent: any order, same statistics.
    let g = grid(2, 2);
    let mut frames = random_frames(g, 40, 43, false);
    let p = Params {
        probes: vec![],
        ..params()
    };
    let one = accumulate(&p, g, &frames).finish(&p);
    frames.reverse();
    for (i, f) in frames.iter_mut().enumerate() {
        f.meta.index = i;
    }
    assert_same(
        &chunked(&p, g, &frames, 7).finish(&p),
        &one,
        1e-12,
        "reversed",
    );
}

#[test]
fn merging_out_of_order_or_mismatched_partials_is_an_error() {
    let g = grid(2, 2);
    let frames = random_frames(g, 10, 44, false);
    let p = params();
    let a = accumulate(&p, g, &frames[..5]);
    let b = accumulate(&p, g, &frames[5..]);
    let mut late = b.clone();
    let e = late.try_merge(a.clone()).unwrap_err();
    assert!(e.message.contains("out of order"), "{e}");
    let other = accumulate(
        &Params {
            phase_bins: 6,
            ..p.clone()
        },
        g,
        &frames[5..],
    );
    let e = a.clone().try_merge(other).unwrap_err();
    assert!(e.message.contains("phase_bins"), "{e}");
    let mut empty = RunAccumulator::new(&p, g, &Q);
    empty.merge(a.clone());
    empty.merge(RunAccumulator::new(&p, g, &Q));
    assert_eq!(
        empty.to_bytes(),
        a.to_bytes(),
        "empty accumulators are neutral"
    );
}

#[test]
fn serialisation_round_trips_and_rejects_other_versions_and_damage() {
    let g = grid(3, 2);
    let frames = random_frames(g, 20, 45, true);
    let p = params();
    let a = accumulate(&p, g, &frames);
    let bytes = a.to_bytes();
    assert_eq!(&bytes[..8], FORMAT_MAGIC);
    let back = RunAccumulator::from_bytes(&bytes).unwrap();
    assert_eq!(back.to_bytes(), bytes);
    assert_same(&back.finish(&p), &a.finish(&p), 0.0, "round trip");
    let mut v3 = bytes.clone();
    v3[8..12].copy_from_slice(&3u32.to_le_bytes());
    let e = RunAccumulator::from_bytes(&v3).unwrap_err();
    assert!(
        e.message.contains("version 3") && e.message.contains("versions 1 to 2"),
        "{e}"
    );
    // A version-1 state (written before the signed truncation sums) still
    // reads and merges; it lacks exactly those sums.
    let v1 = a.to_bytes_as(1);
    assert_eq!(u32::from_le_bytes(v1[8..12].try_into().unwrap()), 1);
    let old = RunAccumulator::from_bytes(&v1).unwrap();
    assert_eq!(old.ens.q[0].n, a.ens.q[0].n);
    assert_eq!(old.ens.q[0].bias2, a.ens.q[0].bias2);
    assert!(old.ens.q[0].tb_n.iter().all(|&x| x == 0.0));
    assert!(a.ens.q[0].tb_n.iter().any(|&x| x > 0.0));
    let e = RunAccumulator::from_bytes(&bytes[..bytes.len() - 100]).unwrap_err();
    assert!(e.message.contains("truncated"), "{e}");
    let mut dmg = bytes.clone();
    dmg[40] ^= 1;
    assert!(RunAccumulator::from_bytes(&dmg)
        .unwrap_err()
        .message
        .contains("checksum"));
    assert!(RunAccumulator::from_bytes(b"PK\x03\x04 not ours")
        .unwrap_err()
        .message
        .contains("magic"));
    assert_eq!(RunAccumulator::from_bytes(&[]).unwrap_err().exit_code(), 1);
}

#[test]
fn ensemble_columns_start_with_the_contract_ones() {
    let g = grid(2, 2);
    let p = params();
    let s = accumulate(&p, g, &random_frames(g, 5, 48, false)).finish(&p);
    let names: Vec<&str> = s.ensemble.columns.iter().map(|(n, _)| n.as_str()).collect();
    let contract = [
        "n_valid",
        "u_mean",
        "v_mean",
        "u_std",
        "v_std",
        "uv_cov",
        "omega_mean",
        "omega_std",
        "u_mean_unc",
        "v_mean_unc",
        "omega_mean_unc",
        "omega_inst_unc",
    ];
    assert_eq!(&names[..12], &contract);
    assert_eq!(contract, CONTRACT_COLUMNS);
    assert!(names.contains(&"div_mean_unc_p95") && !names.contains(&"x"));
    let phase_names: Vec<&str> = s.phase[0]
        .table
        .columns
        .iter()
        .map(|(n, _)| n.as_str())
        .collect();
    assert_eq!(&phase_names[..names.len()], &names[..]);
    let conv = s.convergence.unwrap();
    assert_eq!(conv.n_rows(), 5);
}

#[test]
fn state_size_does_not_grow_with_the_frames() {
    // O(nodes x quantities x moments): without probes the partial state of
    // 60 and of 200 frames has the same size (lag sums and head/tail frames
    // are capped by max_lag).
    let g = grid(3, 2);
    let p = Params {
        probes: vec![],
        ..params()
    };
    let frames = random_frames(g, 200, 51, true);
    let small = accumulate(&p, g, &frames[..60]).to_bytes().len();
    let large = accumulate(&p, g, &frames).to_bytes().len();
    assert_eq!(small, large);
}

#[test]
#[ignore = "throughput probe, run by hand"]
fn throughput_probe() {
    let g = grid(100, 100);
    let p = Params {
        probes: vec![(1e-3, 1e-3)],
        ..Params::default()
    };
    let frames = random_frames(g, 48, 52, true);
    for timed in [false, true] {
        let t0 = std::time::Instant::now();
        let mut acc = RunAccumulator::new(&p, g, &Q);
        for rep in 0..4 {
            for f in &frames {
                let mut meta = f.meta.clone();
                meta.index += rep * 48;
                if !timed {
                    meta.time_s = None;
                }
                acc.push(&meta, &f.field, &f.derived);
            }
        }
        let t1 = t0.elapsed();
        let s = acc.finish(&p);
        eprintln!(
            "timed {timed}: push {:.2} ms/frame, finish {:.1} ms, state {} MB",
            t1.as_secs_f64() * 1e3 / 192.0,
            (t0.elapsed() - t1).as_secs_f64() * 1e3,
            acc.to_bytes().len() as f64 / 1e6
        );
        assert!(s.ensemble.columns.len() > 40);
    }
}

#[test]
fn the_statistics_settings_read_in_plain_words() {
    assert_eq!(
        Params::default().describe(),
        "coverage 95 %, autocorrelation up to lag 50 frames, 12 phase bins when frames have \
         phases (each the whole 30°), only valid vectors are samples"
    );
    let p = Params {
        phase_bins: 8,
        phase_width_deg: Some(20.0),
        probes: vec![(0.01, 0.02)],
        calibration_unc: 0.005,
        pulse_separation_unc: 0.001,
        include_filled: true,
        ..Params::default()
    };
    let s = p.describe();
    for piece in [
        "8 phase bins when frames have phases (windows 20° wide)",
        "systematic: calibration 0.5 %, pulse separation 0.1 %",
        "replaced and filled vectors count as samples",
        "1 probe(s), convergence judged over the last 20 % of the frames",
    ] {
        assert!(s.contains(piece), "{piece:?} not in {s:?}");
    }
}
