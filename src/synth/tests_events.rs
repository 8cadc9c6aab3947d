//! Tests of a synthetic campaign's bookkeeping (split from `tests.rs`):
//! the corruption events of `truth/events.csv` are exactly what the written
//! frames show, and the noise of the measured vectors has the asked
//! standard deviation.

use std::collections::BTreeSet;
use std::path::Path;

use super::tests::{rows, small};
use super::*;

#[test]
fn events_match_the_written_frames_and_the_in_memory_frames() {
    let tmp = tempfile::tempdir().unwrap();
    let opts = small(Scenario::Wake);
    let out = tmp.path().join("c");
    let sum = generate(&opts, &out).unwrap();
    let g = sum.runs[0].grid;
    let events = read_events(&out.join("u015/truth/events.csv"));
    let sigma_px = opts.noise_px;
    let px_velocity = opts.pixel_size / sum.runs[0].pulse_separation;
    let mut tally = Tally::default();
    for k in 0..opts.frames {
        tally.check_frame(&opts, &out, g, k, (sigma_px, px_velocity));
    }
    let Tally {
        found,
        n_meas,
        sum_sq,
    } = tally;
    assert_eq!(found, events);
    check_event_counts(&events, &sum.runs[0], opts.frames * g.len());
    // noise standard deviation 0.1 px: sample std within 4 sigma of the chi
    // distribution (relative sd 1/sqrt(2n))
    let sd = (sum_sq / n_meas as f64).sqrt();
    let rel = 1.0 / (2.0 * n_meas as f64).sqrt();
    assert!(
        (sd / sigma_px - 1.0).abs() < 4.0 * rel + 1e-3,
        "noise {sd} px over {n_meas}"
    );
}

/// One corruption event of the truth: frame file, node i, j, and kind.
type Event = (String, usize, usize, String);

/// The events of a run's `truth/events.csv`, after checking its header.
fn read_events(path: &Path) -> BTreeSet<Event> {
    let ev = rows(path);
    assert_eq!(ev[0], ["frame", "i", "j", "kind"]);
    let mut events: BTreeSet<Event> = BTreeSet::new();
    for r in &ev[1..] {
        events.insert((
            r[0].clone(),
            r[1].parse().unwrap(),
            r[2].parse().unwrap(),
            r[3].clone(),
        ));
    }
    events
}

/// What the written frames show: the events found in them, and the count
/// and sum of squares of the measured vectors' errors in px.
#[derive(Default)]
struct Tally {
    found: BTreeSet<Event>,
    n_meas: usize,
    sum_sq: f64,
}

impl Tally {
    /// Checks frame `k` of run 0 as written under `out` against the
    /// in-memory frame, collecting its events and measured errors.
    fn check_frame(
        &mut self,
        opts: &SynthOptions,
        out: &Path,
        g: Grid,
        k: usize,
        (sigma_px, px_velocity): (f64, f64),
    ) {
        let f = frame_field(opts, 0, k).unwrap();
        let file = f.meta.name.clone();
        let rs = rows(&out.join("u015").join(format!("{file}.csv")));
        assert_eq!(file, format!("f{:05}", k + 1));
        assert_eq!(rs[0], ["x", "y", "u", "v"]);
        let mut seen = vec![false; g.len()];
        for r in &rs[1..] {
            let (i, j) = node_of(r, g);
            seen[j * g.nx + i] = true;
            self.check_row(r, &f, (i, j), (sigma_px, px_velocity));
        }
        for (n, s) in seen.iter().enumerate() {
            if !s {
                self.found
                    .insert((file.clone(), n % g.nx, n / g.nx, "missing".into()));
                assert_ne!(n % g.nx, 0, "an edge node must never be a missing row");
            }
        }
    }

    /// Checks one written row (node `i`, `j`) of frame `f`: an empty row is
    /// an empty node, an outlier is an event, any other vector is the
    /// measured one within the print rounding and within 7 sigma of the truth.
    fn check_row(
        &mut self,
        r: &[String],
        f: &SynthFrame,
        (i, j): (usize, usize),
        (sigma_px, px_velocity): (f64, f64),
    ) {
        let file = &f.meta.name;
        if r[2].is_empty() {
            assert!(r[3].is_empty());
            self.found.insert((file.clone(), i, j, "empty".into()));
            assert_eq!(f.kind[[j, i]], Kind::Empty as u8);
            return;
        }
        let (u, v): (f64, f64) = (r[2].parse().unwrap(), r[3].parse().unwrap());
        // printed with 5 significant digits of 0.15 m/s: |rounding| <= 5e-6
        assert!(
            (u - f.measured.u[[j, i]]).abs() <= 5.0001e-6,
            "{file} {i} {j}"
        );
        assert!((v - f.measured.v[[j, i]]).abs() <= 5.0001e-6);
        let (eu, evv) = (
            (u - f.truth.u[[j, i]]) / px_velocity,
            (v - f.truth.v[[j, i]]) / px_velocity,
        );
        if f.kind[[j, i]] == Kind::Outlier as u8 {
            self.found.insert((file.clone(), i, j, "outlier".into()));
        } else {
            assert_eq!(f.kind[[j, i]], Kind::Measured as u8);
            assert!(eu.abs() < 7.0 * sigma_px && evv.abs() < 7.0 * sigma_px);
            self.n_meas += 2;
            self.sum_sq += eu * eu + evv * evv;
        }
    }
}

/// The grid node (i, j) of a written row's x, y (mm), checked to lie on it.
fn node_of(r: &[String], g: Grid) -> (usize, usize) {
    let x: f64 = r[0].parse::<f64>().unwrap() * 1e-3;
    let y: f64 = r[1].parse::<f64>().unwrap() * 1e-3;
    let i = ((x - g.x0) / g.dx).round() as usize;
    let j = ((y - g.y0) / g.dy).round() as usize;
    assert!((g.x(i) - x).abs() < 1e-9 && (g.y(j) - y).abs() < 1e-9);
    (i, j)
}

/// The run summary counts each kind of event, and the outlier and gap
/// fractions over the `nodes` node-frames are those asked for.
fn check_event_counts(events: &BTreeSet<Event>, run: &RunSummary, nodes: usize) {
    let count = |kind: &str| events.iter().filter(|e| e.3 == kind).count();
    assert_eq!(count("outlier"), run.n_outliers);
    assert_eq!(count("missing"), run.n_missing);
    assert_eq!(count("empty"), run.n_empty);
    // fractions within 4 binomial standard deviations (common practice)
    let n = nodes as f64;
    for (c, p) in [
        (count("outlier"), 0.05),
        (count("missing") + count("empty"), 0.04),
    ] {
        let sd = (n * p * (1.0 - p)).sqrt();
        assert!(
            (c as f64 - n * p).abs() < 4.0 * sd,
            "{c} events for p = {p} of {n}"
        );
    }
}
