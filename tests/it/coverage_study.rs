//! The coverage study (docs/uncertainty.md, "The study"): the engine
//! checked where the answer is known by construction, the fast subset of
//! cells with their targets, and the full matrix as an ignored test that
//! rewrites the table:
//!
//! ```text
//! cargo test --test it -- --ignored coverage_table
//! ```
//!
//! (writes docs/uncertainty-table.md and docs/uncertainty-table.csv; about
//! 10 minutes in the dev profile on 2 cores).

use curlew::coverage::cell::{self, Row};
use curlew::coverage::study::{self, FlowSpec, Spec};
use curlew::coverage::{verdict, Verdict};

use crate::util::Work;

fn find<'a>(rows: &'a [Row], column: &str, region: &str) -> &'a Row {
    rows.iter()
        .find(|r| r.column == column && r.region == region)
        .unwrap_or_else(|| panic!("no row {column} / {region}"))
}

fn run(spec: &Spec, w: &Work) -> Vec<Row> {
    let c = study::cell_for(spec);
    let t = std::time::Instant::now();
    let rows = cell::run(&c, &w.path(&spec.seed.to_string())).unwrap();
    eprintln!("{} in {:.1} s", c.name, t.elapsed().as_secs_f64());
    rows
}

#[test]
fn coverage_engine_scores_the_velocity_mean_of_a_uniform_stream_as_gaussian() {
    // Known by construction: a uniform stream with white noise of sigma
    // per component, no gaps, no smoothing: u_mean - U is exactly the mean
    // of N independent N(0, sigma²) draws and u_mean_unc = s/sqrt(N)
    // (N_eff = N). Its coverage at k = 2 is P(|t_99| <= 2 s/sigma ...) ~
    // 0.954 (GUM G.1.3 for the Gaussian; Student t with 99 degrees of
    // freedom gives 0.952) and the ratio median(s)/sigma ~ 1 - 1/(4N).
    // 4 replicas x 1024 nodes, tolerance from the binomial error (the
    // nodes are independent here): 2 sqrt(0.95 0.05 / 4096) = 0.007.
    let w = Work::new();
    let rows = run(
        &Spec {
            flow: FlowSpec::Uniform,
            seed: 31,
            ..Spec::default()
        },
        &w,
    );
    for col in ["u_mean_unc", "v_mean_unc", "u_inst_unc", "v_inst_unc"] {
        let r = find(&rows, col, "all");
        eprintln!("{col}: {:?}", r.score);
        if r.score.coverage.is_finite() {
            assert!(
                (r.score.coverage - 0.953).abs() < 0.015,
                "{col}: coverage {}",
                r.score.coverage
            );
        }
        assert!(
            (r.score.ratio - 1.0).abs() < 0.05,
            "{col}: ratio {}",
            r.score.ratio
        );
        assert_eq!(verdict(&r.score), Verdict::Meets, "{col}");
    }
    // the p95 column is an expanded interval: 95 % at k = 1
    let r = find(&rows, "u_mean_unc_p95", "all");
    assert!((r.score.coverage - 0.95).abs() < 0.015, "{:?}", r.score);
    // std of the velocity against the other replicas (leave one out):
    // the noise sigma is the same everywhere, so the reported u(s) must
    // cover as a Gaussian does
    let r = find(&rows, "u_std_unc", "interior");
    assert!((r.score.coverage - 0.954).abs() < 0.02, "{:?}", r.score);
    // the regions partition the grid: interior + edge = all
    let n = |reg| find(&rows, "u_mean_unc", reg).score.n;
    assert_eq!(n("interior") + n("edge"), n("all"));
    assert_eq!(n("all"), 4 * 32 * 32);
}

#[test]
fn coverage_of_a_uniform_stream_instantaneous_vorticity_and_the_mean_vorticity_covers() {
    // Issue 11: in a uniform stream (no truncation error at all) the mean
    // vorticity's uncertainty is many times its actual error, because the
    // noise of the per-frame truncation estimate enters as a systematic
    // part. The engine must see that (ratio far above 1.25) while the
    // instantaneous vorticity, whose model is pure noise propagation, meets
    // its targets in the interior. When the estimators are fixed the first
    // assertion is to be turned into the target (see docs/uncertainty.md).
    let w = Work::new();
    let rows = run(
        &Spec {
            flow: FlowSpec::Uniform,
            seed: 32,
            ..Spec::default()
        },
        &w,
    );
    let inst = find(&rows, "omega_inst_unc", "interior");
    assert!(
        (0.93..=0.97).contains(&inst.score.coverage) && (0.8..=1.25).contains(&inst.score.ratio),
        "{:?}",
        inst.score
    );
    let mean = find(&rows, "omega_mean_unc", "interior");
    eprintln!("omega_mean_unc interior: {:?}", mean.score);
    assert!(mean.score.coverage > 0.9, "{:?}", mean.score);
    assert!(mean.score.ratio.is_finite() && mean.score.ratio > 0.8);
    // The bias column, where the true systematic error is zero: the
    // replicas' averaged error is their noise over sqrt(R), and the row is
    // scored with it (src/coverage/cell.rs). Scored against omega_bias
    // alone it read 0.778 / 0.97 on the committed table's uniform cell,
    // "too small" for no fault of the column; with the noise 0.991 / 1.62
    // (the ratio above 1.25 is the bias column's own noise floor: too
    // large, a named miss of docs/uncertainty.md).
    let bias = find(&rows, "omega_bias", "interior");
    eprintln!("omega_bias interior: {:?}", bias.score);
    assert!(bias.score.coverage >= 0.93, "{:?}", bias.score);
    assert!(
        bias.score.ratio > 0.8 && bias.score.ratio < 2.5,
        "{:?}",
        bias.score
    );
}

#[test]
fn coverage_of_the_resolved_vortex_meets_its_targets_where_it_does_today() {
    // The resolved Lamb-Oseen vortex (core 4 h; Saffman 1992), white noise,
    // raw least squares: the velocity means and the instantaneous vorticity
    // away from the core meet both targets (docs/uncertainty.md table).
    let w = Work::new();
    let rows = run(&Spec::default(), &w);
    for (col, region) in [
        ("u_mean_unc", "interior"),
        ("v_mean_unc", "interior"),
        ("u_mean_unc", "edge"),
        ("omega_inst_unc", "far"),
        // the truncation pooled over 3 x 3 nodes (stats/systematic.rs
        // `systematic`): 0.853 / 0.68 before, 0.942 / 0.95 with it
        ("omega_mean_unc", "far"),
    ] {
        let r = find(&rows, col, region);
        eprintln!("{col} {region}: {:?}", r.score);
        assert_eq!(
            verdict(&r.score),
            Verdict::Meets,
            "{col} {region}: {:?}",
            r.score
        );
    }
}

#[test]
fn coverage_of_the_mean_vorticity_holds_in_vortex_cores_resolved_and_not() {
    // Issue 11's bar for the mean vorticity: k = 2 coverage >= 0.90 over the
    // field and in the core, for a core of 4 pitches and one of only 1.5
    // (Lamb-Oseen; Saffman 1992), raw least squares, white noise. Before the
    // pooled truncation (stats/systematic.rs `systematic`) the 1.5-pitch core
    // covered 0.875 and the 4-pitch interior 0.882.
    for core in [4.0, 1.5] {
        let w = Work::new();
        let spec = Spec {
            flow: FlowSpec::Vortex(core),
            ..Spec::default()
        };
        let rows = run(&spec, &w);
        for region in ["all", "core"] {
            let r = find(&rows, "omega_mean_unc", region);
            eprintln!("core {core} h, omega_mean_unc {region}: {:?}", r.score);
            assert!(
                r.score.coverage >= 0.90,
                "core {core} h {region}: {:?}",
                r.score
            );
        }
    }
}

/// The full matrix: rewrites docs/uncertainty-table.md and .csv (after
/// every cell, so that an interrupted run leaves the cells it finished,
/// marked as partial).
#[test]
#[ignore]
fn coverage_table() {
    let w = Work::new();
    let t0 = std::time::Instant::now();
    // CURLEW_COVERAGE_CELLS=a,b runs only the cells whose name contains
    // one of the pieces (a piece "!c" leaves out the cells containing c),
    // into target/coverage-subset/ (docs/ keeps the whole matrix's table).
    let only: Option<Vec<String>> = std::env::var("CURLEW_COVERAGE_CELLS")
        .ok()
        .map(|v| v.split(',').map(str::to_string).collect());
    let specs: Vec<_> = study::matrix()
        .into_iter()
        .filter(|s| {
            only.as_ref().is_none_or(|o| {
                let name = study::cell_for(s).name;
                let (out, keep): (Vec<&String>, Vec<&String>) =
                    o.iter().partition(|p| p.starts_with('!'));
                !out.iter().any(|p| name.contains(&p[1..]))
                    && (keep.is_empty() || keep.iter().any(|p| name.contains(p.as_str())))
            })
        })
        .collect();
    let manifest = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let root = if only.is_some() {
        manifest.join("target").join("coverage-subset")
    } else {
        manifest.join("docs")
    };
    std::fs::create_dir_all(&root).unwrap();
    let mut rows = Vec::new();
    for (k, spec) in specs.iter().enumerate() {
        let c = study::cell_for(spec);
        let t = std::time::Instant::now();
        rows.extend(cell::run(&c, &w.path(&format!("cell{k}"))).unwrap());
        eprintln!("{} in {:.1} s", c.name, t.elapsed().as_secs_f64());
        let secs = t0.elapsed().as_secs_f64();
        let done = if k + 1 == specs.len() {
            format!("{} cells", specs.len())
        } else {
            format!("PARTIAL: {} of {} cells", k + 1, specs.len())
        };
        let md = format!(
            "# Coverage study: the table\n\n\
             Made by `cargo test --release --test it -- --ignored coverage_table` ({done}, {secs:.0} s)\
             . What the columns mean and the reasons for the misses: \
             [uncertainty.md](uncertainty.md). Every region of every column: \
             [uncertainty-table.csv](uncertainty-table.csv).\n\n{}\n\n{}",
            study::summary(&rows),
            study::markdown(&rows)
        );
        std::fs::write(root.join("uncertainty-table.md"), md).unwrap();
        std::fs::write(root.join("uncertainty-table.csv"), study::csv(&rows)).unwrap();
    }
    eprintln!("{}", study::summary(&rows));
}
