//! Helpers for unit tests: tolerant comparison, seeded randomness, and the
//! committed reference values of general-purpose libraries (numpy, scipy,
//! pandas, pyarrow).
//!
//! A check against a reference library reads `tests/reference/<topic>.json`,
//! written by the script `tests/reference/<topic>.py` beside it; the header
//! fields `library`, `version` and `call` say what made the values. Tests
//! never run Python: `cargo test` needs only a Rust toolchain.
//! `.ci/check-references` reruns every script and fails when a value moved.

use serde_json::Value;
use std::path::PathBuf;

/// Asserts `|a - b| <= abs + rel * |b|`, naming the values.
#[track_caller]
pub(crate) fn assert_close(a: f64, b: f64, abs: f64, rel: f64, what: &str) {
    let tol = abs + rel * b.abs();
    assert!(
        (a - b).abs() <= tol || (a.is_nan() && b.is_nan()),
        "{what}: got {a:.12e}, expected {b:.12e} (|diff| {:.3e} > tol {tol:.3e})",
        (a - b).abs()
    );
}

/// A grid of `nx` x `ny` nodes at pitch `h` (m) from the origin.
pub(crate) fn grid(nx: usize, ny: usize, h: f64) -> crate::field::Grid {
    crate::field::Grid {
        nx,
        ny,
        x0: 0.0,
        y0: 0.0,
        dx: h,
        dy: h,
    }
}

/// A seeded generator; the seed is printed so a failure can be replayed.
pub(crate) fn rng(seed: u64) -> rand_chacha::ChaCha8Rng {
    use rand::SeedableRng;
    eprintln!("test rng seed: {seed}");
    rand_chacha::ChaCha8Rng::seed_from_u64(seed)
}

/// The path of a committed reference file, `tests/reference/<name>`.
pub(crate) fn reference_path(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("reference")
        .join(name)
}

/// The committed reference values of `topic` (`tests/reference/<topic>.json`),
/// checked to carry the header that says which library, version and call
/// made them.
#[track_caller]
pub(crate) fn reference(topic: &str) -> Value {
    let path = reference_path(&format!("{topic}.json"));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("{}: {e} (run tests/reference/{topic}.py)", path.display()));
    let v: Value =
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    for key in ["library", "version", "call"] {
        assert!(
            v.get(key).and_then(Value::as_str).is_some(),
            "{}: header field {key} missing",
            path.display()
        );
    }
    v
}

/// A JSON array of numbers as floats (panics naming the value otherwise).
#[track_caller]
pub(crate) fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .map(|x| x.as_f64().unwrap_or_else(|| panic!("not a number: {x}")))
        .collect()
}

/// A JSON number as a float (panics naming the value otherwise).
#[track_caller]
pub(crate) fn float(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

#[cfg(test)]
mod tests {
    #[test]
    fn every_reference_file_has_its_script_and_header() {
        let dir = super::reference_path("");
        let mut n = 0;
        for e in std::fs::read_dir(&dir).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "json") {
                let topic = p.file_stem().unwrap().to_str().unwrap();
                assert!(
                    dir.join(format!("{topic}.py")).is_file(),
                    "{} has no generating script",
                    p.display()
                );
                super::reference(topic);
                n += 1;
            }
        }
        assert!(n >= 8, "only {n} reference files");
    }
}
