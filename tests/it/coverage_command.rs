//! `curlew coverage PIPELINE`: the matched check of a user's campaign, on
//! the demo campaign (made by `curlew synth wake`, so its parameters are
//! known: 40 x 25 nodes at 2 mm, 100 frames at 15 Hz, noise 0.1 px at
//! 40 um per pixel and a 2.1 ms pulse separation, 2 % gaps, 12 phase bins).

use crate::util::Work;

fn demo() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("pipelines/demo.toml")
}

#[test]
fn coverage_command_matches_the_demo_run_and_writes_a_scored_table() {
    let w = Work::new();
    let out = w.path("cov");
    let pipe = demo();
    w.ok(&[
        "coverage",
        pipe.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--frames",
        "24",
        "--replicas",
        "2",
        "--runs",
        "u015",
        "--quiet",
    ]);
    // what was matched, against the demo's generation parameters
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("matched.json")).unwrap()).unwrap();
    let r = &m["runs"][0];
    assert_eq!(r["run"], "u015");
    assert_eq!((r["nx"].as_u64(), r["ny"].as_u64()), (Some(52), Some(24)));
    assert!((r["pitch"].as_f64().unwrap() - 1.5e-3).abs() < 1e-9);
    assert_eq!(r["frames"].as_u64(), Some(100));
    // noise 0.1 px x 40e-6 m / 2.1e-3 s = 1.905e-3 m/s; the estimate is
    // within 10 % (the flow's curvature adds a little)
    let noise = r["noise"].as_f64().unwrap();
    assert!((noise / 1.905e-3 - 1.0).abs() < 0.1, "noise {noise}");
    let gaps = r["gap_fraction"].as_f64().unwrap();
    assert!((gaps - 0.02).abs() < 0.005, "gaps {gaps}");
    assert!((r["frame_rate"].as_f64().unwrap() - 15.0).abs() < 1e-3);
    assert_eq!(r["phase"][0].as_u64(), Some(12));
    // 75.6 degrees per frame: f = St U / D = 3.15 Hz at 15 frames/s
    assert!((r["phase"][1].as_f64().unwrap() - 75.6).abs() < 1e-6);

    scored_table_is_consistent(&out);
    let md = std::fs::read_to_string(out.join("coverage.md")).unwrap();
    assert!(md.contains("### Run u015") && md.contains("| ensemble | omega_mean_unc | core |"));
    // nothing of the scratch work is left
    assert!(!out.join(".work").exists());
}

#[test]
fn coverage_command_rejects_a_single_replica() {
    let w = Work::new();
    let pipe = demo();
    let o = w.curlew(&["coverage", pipe.to_str().unwrap(), "--replicas", "1"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--replicas"));
}

/// The table: the documented columns, a row per column and region, and
/// counts that follow from the grid (2 replicas x 48 x 20 interior nodes)
fn scored_table_is_consistent(out: &std::path::Path) {
    let text = std::fs::read_to_string(out.join("coverage.csv")).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "cell,table,column,region,n,n_unknown,coverage,ratio,rms_error,median_unc,verdict"
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    let find = |table: &str, col: &str, reg: &str| {
        rows.iter()
            .find(|r| r[1] == table && r[2] == col && r[3] == reg)
            .unwrap_or_else(|| panic!("no row {table} {col} {reg}"))
    };
    let row = find("ensemble", "u_mean_unc", "interior");
    assert_eq!(row[4], "1920");
    for col in [
        "u_mean_unc",
        "v_mean_unc",
        "omega_mean_unc",
        "omega_std_unc",
    ] {
        for table in ["ensemble", "phase"] {
            let r = find(table, col, "interior");
            let (cov, ratio, rms, med): (f64, f64, f64, f64) = (
                r[6].parse().unwrap(),
                r[7].parse().unwrap(),
                r[8].parse().unwrap(),
                r[9].parse().unwrap(),
            );
            assert!((0.0..=1.0).contains(&cov), "{table} {col}: coverage {cov}");
            // the ratio is median / rms, as the columns say
            assert!(
                (ratio - med / rms).abs() <= 1e-9 * ratio.abs(),
                "{table} {col}"
            );
            // plausible: an uncertainty within a factor 10 of the error
            assert!(ratio > 0.1 && ratio < 10.0, "{table} {col}: ratio {ratio}");
        }
    }
}
