//! Reliability of shards and merges (split from `reliability.rs`): shard
//! counts are bounded, shards merge into the single run's outputs, and a
//! merge refuses partials that do not belong together.

use super::reliability::*;
use crate::util::*;

#[test]
fn shard_counts_beyond_the_limit_are_usage_errors() {
    let w = Work::new();
    campaign(&w, 3, "");
    let big = (1u64 << 62).to_string();
    let err = w.fails(
        &[
            "run",
            "p.toml",
            "--shard",
            &format!("{big}/{big}"),
            "--out",
            "s",
        ],
        2,
    );
    assert!(
        err.contains("--shard") && err.contains("at most 1000000"),
        "{err}"
    );
    let err = w.fails(
        &[
            "run",
            "p.toml",
            "--shard",
            "18446744073709551617/2",
            "--out",
            "s",
        ],
        2,
    );
    assert!(err.contains("--shard '18446744073709551617/2'"), "{err}");
    for bad in ["0/4", "5/4", "1/0", "a/b", "2"] {
        let err = w.fails(&["run", "p.toml", "--shard", bad, "--out", "s"], 2);
        assert!(err.contains(&format!("--shard '{bad}'")), "{err}");
    }
    assert!(!w.path("s").exists());
}

#[test]
fn more_shards_than_frames_still_merge_to_one_run() {
    let w = Work::new();
    campaign(&w, 3, "");
    w.ok(&["run", "p.toml", "--out", "whole", "--quiet"]);
    let mut parts = Vec::new();
    for k in 1..=5 {
        let out = format!("p{k}");
        w.ok(&[
            "run",
            "p.toml",
            "--shard",
            &format!("{k}/5"),
            "--out",
            &out,
            "--quiet",
        ]);
        parts.push(out);
    }
    let mut args: Vec<&str> = vec!["merge"];
    args.extend(parts.iter().map(String::as_str));
    args.extend(["--out", "merged", "--quiet"]);
    w.ok(&args);
    same_as_single_run(&w, "whole", "merged", "a");
}

/// frames.csv byte for byte; the statistics to rounding (accumulators
/// merged in another grouping than one run's: 1e-10 relative, 1e-12
/// absolute for moments near zero).
fn same_as_single_run(w: &Work, whole: &str, merged: &str, run: &str) {
    let a = std::fs::read(w.path(&format!("{whole}/{run}/frames.csv"))).unwrap();
    let b = std::fs::read(w.path(&format!("{merged}/{run}/frames.csv"))).unwrap();
    assert!(
        a == b,
        "{run}/frames.csv of the merge differs from the single run"
    );
    let a = Csv::read(&w.path(&format!("{whole}/{run}/ensemble.csv")));
    let b = Csv::read(&w.path(&format!("{merged}/{run}/ensemble.csv")));
    assert_eq!(a.header, b.header);
    for name in &a.header {
        assert_all_close(&b.col(name), &a.col(name), 1e-12, 1e-10, name);
    }
}

/// Two shards over different frames (one regenerated): the boundary
/// hashes differ and merge refuses.
#[test]
fn shards_over_different_frames_do_not_merge() {
    let w = Work::new();
    campaign(&w, 4, "");
    w.ok(&["run", "p.toml", "--shard", "1/2", "--out", "s1", "--quiet"]);
    // Frame 3 (the first of shard 2) changes before shard 2 runs: one digit,
    // so its size (and the list of names and sizes) stays the same.
    let p = w.path("frames/f0003.csv");
    let mut bytes = std::fs::read(&p).unwrap();
    let k = bytes.iter().rposition(|b| b.is_ascii_digit()).unwrap();
    bytes[k] = if bytes[k] == b'9' { b'8' } else { bytes[k] + 1 };
    std::fs::write(&p, bytes).unwrap();
    w.ok(&["run", "p.toml", "--shard", "2/2", "--out", "s2", "--quiet"]);
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("s2") && err.contains("frame f0003.csv has another content"),
        "{err}"
    );
    assert!(!w.path("m").exists());
}

#[test]
fn an_edited_partial_does_not_merge() {
    let w = Work::new();
    campaign(&w, 4, "");
    two_shards(&w);
    let p = w.path("s2/partial.json");
    let text =
        std::fs::read_to_string(&p)
            .unwrap()
            .replacen("\"rejected\":false", "\"rejected\":true", 1);
    std::fs::write(&p, text).unwrap();
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("s2/partial.json") && err.contains("changed"),
        "{err}"
    );
    // An edited accumulator is named too.
    let a = w.path("s1/a/accumulator.bin");
    let mut bytes = std::fs::read(&a).unwrap();
    let k = bytes.len() - 3;
    bytes[k] ^= 1;
    std::fs::write(&a, bytes).unwrap();
    let err = w.fails(&["merge", "s1", "s1", "--out", "m"], 1);
    assert!(
        err.contains("accumulator.bin") && err.contains("changed"),
        "{err}"
    );
    std::fs::remove_file(w.path("s1/partial.sha256")).unwrap();
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("partial.sha256") && err.contains("missing"),
        "{err}"
    );
}

#[test]
fn merging_a_folder_that_is_no_partial_is_a_usage_error() {
    let w = Work::new();
    std::fs::create_dir(w.path("nothing")).unwrap();
    let err = w.fails(&["merge", "nothing", "--out", "m"], 2);
    assert!(err.contains("nothing/partial.json"), "{err}");
}

/// The demo-like synthetic campaign (noise estimates in frames.csv) merged
/// from 3 shards: frames.csv byte for byte (the noise estimate once
/// differed by 1 ulp through JSON), statistics to rounding.
#[test]
fn a_merged_synthetic_campaign_equals_a_single_run() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "d", "--frames", "12", "--nx", "24", "--ny", "16",
    ]);
    w.ok(&["run", "d/pipeline.toml", "--out", "whole", "--quiet"]);
    for k in 1..=3 {
        w.ok(&[
            "run",
            "d/pipeline.toml",
            "--shard",
            &format!("{k}/3"),
            "--out",
            &format!("s{k}"),
            "--quiet",
        ]);
    }
    w.ok(&["merge", "s2", "s3", "s1", "--out", "merged", "--quiet"]);
    let runs: Vec<String> = std::fs::read_dir(w.path("whole"))
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.path().join("frames.csv").is_file())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    assert!(!runs.is_empty());
    for r in &runs {
        same_as_single_run(&w, "whole", "merged", r);
        let f = Csv::read(&w.path(&format!("whole/{r}/frames.csv")));
        assert!(f.col("noise_estimate").iter().any(|x| x.is_finite()));
    }
}
