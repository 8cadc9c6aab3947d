//! Helpers for unit tests: tolerant comparison, seeded randomness, and the
//! reference libraries (numpy/scipy) run through `python3`.
//!
//! `.ci/run` installs numpy and scipy; a test that needs them fails (never
//! skips) when they are missing, so a reference check cannot pass silently.

use std::io::Write;
use std::process::{Command, Stdio};

/// Asserts `|a - b| <= abs + rel * |b|`, naming the values.
#[track_caller]
pub fn assert_close(a: f64, b: f64, abs: f64, rel: f64, what: &str) {
    let tol = abs + rel * b.abs();
    assert!(
        (a - b).abs() <= tol || (a.is_nan() && b.is_nan()),
        "{what}: got {a:.12e}, expected {b:.12e} (|diff| {:.3e} > tol {tol:.3e})",
        (a - b).abs()
    );
}

/// A seeded generator; the seed is printed so a failure can be replayed.
pub fn rng(seed: u64) -> rand_chacha::ChaCha8Rng {
    use rand::SeedableRng;
    eprintln!("test rng seed: {seed}");
    rand_chacha::ChaCha8Rng::seed_from_u64(seed)
}

/// Runs a Python program (numpy/scipy available) with `stdin` as input and
/// returns its standard output. Panics with the program's error output when
/// it fails, so a missing reference library is a failure, not a skip.
pub fn python(program: &str, stdin: &str) -> String {
    let mut child = Command::new("python3")
        .arg("-c")
        .arg(program)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("python3 must be on PATH for reference checks (.ci/run installs numpy and scipy)");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(stdin.as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "reference python failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// Parses whitespace-separated floats (the usual output of a reference script).
pub fn floats(text: &str) -> Vec<f64> {
    text.split_whitespace()
        .map(|t| t.parse().unwrap())
        .collect()
}

#[cfg(test)]
mod tests {
    #[test]
    fn python_reference_runs() {
        let out = super::python("import numpy as np, sys; print(np.median([float(t) for t in sys.stdin.read().split()]))", "1 2 3 4 5 6 7 8");
        assert_eq!(super::floats(&out), vec![4.5]);
    }
}
