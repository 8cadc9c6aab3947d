//! The array formats end to end: frames in MATLAB MAT files (and NetCDF-3
//! files of many frames) reduce to the very outputs their CSV twins give.
//! Fixtures: tests/reference/mat_frame.py (scipy.io.savemat) and
//! tests/reference/netcdf3_time.py (scipy.io.netcdf_file).

use crate::util::Work;

fn reference(rel: &str) -> String {
    format!("{}/tests/reference/{rel}", env!("CARGO_MANIFEST_DIR"))
}

fn pipeline(format: &str, frames: &str, columns: &str) -> String {
    format!(
        "[campaign]\nname = \"formats\"\n\n[input]\nformat = \"{format}\"\nlength_unit = \"mm\"\n\
         velocity_unit = \"m/s\"\ncolumns = {{ {columns} }}\n\n[[run]]\nid = \"a\"\nframes = \"{frames}\"\n"
    )
}

fn same_bytes(w: &Work, a: &str, b: &str, files: &[&str]) {
    for t in files {
        let x = std::fs::read(w.path(&format!("{a}/{t}"))).unwrap();
        let y = std::fs::read(w.path(&format!("{b}/{t}"))).unwrap();
        assert!(x == y, "{t} differs between {a} and {b}");
    }
}

/// Three frames of one run, one uncompressed 2-D MAT file, one compressed
/// 2-D and one compressed of long vectors: the reduction (validation,
/// filling of the NaN vectors, vorticity, statistics) equals the CSV one
/// byte for byte.
#[test]
fn mat_frames_reduce_to_the_csv_outputs_byte_for_byte() {
    let w = Work::new();
    let cols = "x = \"xs\", y = \"ys\", u = \"U\", v = \"V\"";
    w.write(
        "mat.toml",
        &pipeline("mat", &reference("mat_run/f*.mat"), cols),
    );
    w.write(
        "csv.toml",
        &pipeline("csv", &reference("mat_run/f*.csv"), cols),
    );
    w.ok(&["run", "mat.toml", "--out", "o_mat", "--quiet"]);
    w.ok(&["run", "csv.toml", "--out", "o_csv", "--quiet"]);
    same_bytes(&w, "o_mat/a", "o_csv/a", &["ensemble.csv"]);
    let e = crate::util::Csv::read(&w.path("o_mat/a/ensemble.csv"));
    let n = e.col("n_valid");
    assert!(
        n.iter().sum::<f64>() <= 3.0 * 24.0 - 3.0,
        "three NaN vectors"
    );
    assert_eq!(e.col("u_mean").iter().filter(|x| x.is_finite()).count(), 24);
    // a wrong variable name: a data error naming file and variable
    w.write(
        "bad.toml",
        &pipeline(
            "mat",
            &reference("mat_run/f*.mat"),
            "x = \"xs\", y = \"ys\", u = \"u\", v = \"V\"",
        ),
    );
    let err = w.fails(&["run", "bad.toml", "--out", "o_bad", "--quiet"], 1);
    assert!(
        err.contains("f1.mat") && err.contains("no variable 'u'"),
        "{err}"
    );
}

/// A NetCDF-3 file of four frames on a record dimension reduces to the
/// very outputs of the same four frames written one per file (names
/// `run_t0..run_t3` both ways), streamed one frame at a time.
#[test]
fn a_netcdf_time_dimension_reduces_like_one_file_per_frame() {
    let w = Work::new();
    let cols = "x = \"x\", y = \"y\", u = \"u\", v = \"v\"";
    w.write(
        "many.toml",
        &pipeline("netcdf", &reference("nc_time/run.nc"), cols),
    );
    w.write(
        "one.toml",
        &pipeline("netcdf", &reference("nc_time/frames/run_t*.nc"), cols),
    );
    w.ok(&["run", "many.toml", "--out", "o_many", "--quiet"]);
    w.ok(&["run", "one.toml", "--out", "o_one", "--quiet"]);
    same_bytes(&w, "o_many/a", "o_one/a", &["ensemble.csv", "frames.csv"]);
    let f = crate::util::Csv::read(&w.path("o_many/a/frames.csv"));
    assert_eq!(f.rows.len(), 4);
    let check = w.ok(&["check", "many.toml"]);
    assert!(
        check.contains("; 4 from the time dimension of 1 file(s), named <file>_t<index>)"),
        "{check}"
    );
}
