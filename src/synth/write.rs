//! Writing a synthetic campaign: frames, frame tables, truth, the pipeline.
//!
//! Owns: the bytes of a synthetic campaign (layout in `synth`'s module doc)
//! and its atomic appearance: everything goes into an `io::OutputDir` (a
//! hidden sibling folder swapped into place only when complete; the same
//! rules as `run`'s output folder).
//!
//! Speed: frames are made and written in parallel (rayon) in chunks of a
//! fixed size; the coordinate text of every node is formatted once per run;
//! values are printed by `numfmt` without allocation; each frame file is
//! built in memory and written with one system call. Truth statistics and
//! events are gathered in frame order after each chunk, so output bytes do
//! not depend on the number of threads.

use std::fs;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use super::corrupt::{self, Kind, Measured};
use super::numfmt::{decimals_for, push};
use super::pipeline;
use super::scenario::{RunSetup, TruthFrame};
use super::truth::TruthStats;
use super::{
    frame_name, LengthUnit, OutFormat, RunSummary, SynthOptions, SynthSummary, VelocityUnit,
};
use crate::error::{Error, Result, WithPath};
use crate::io::{atomic_bytes, OutputDir};

/// Frames made in parallel before their truth is gathered.
const CHUNK: usize = 64;

/// Writes the campaign of `runs` into `out` (see `synth::generate`).
pub(crate) fn write_campaign(
    opts: &SynthOptions,
    runs: &[RunSetup],
    out: &Path,
) -> Result<SynthSummary> {
    if out.exists() && !opts.force {
        return Err(Error::usage(format!(
            "output folder {} exists; pass --force to replace it",
            out.display()
        )));
    }
    let dir = OutputDir::begin(out)?;
    let temp = dir.path().to_path_buf();
    let mut summaries = Vec::new();
    for (r, setup) in runs.iter().enumerate() {
        summaries.push(write_run(opts, r, setup, &temp.join(&setup.id))?);
    }
    let text = pipeline::pipeline_toml(opts, runs, "");
    let p = temp.join("pipeline.toml");
    fs::write(&p, text).with_path(&p)?;
    let p = temp.join("README.md");
    fs::write(&p, pipeline::readme(opts, runs, &summaries)).with_path(&p)?;
    dir.commit()?;
    if let Some(copy) = &opts.pipeline_copy {
        let dir = match copy.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        fs::create_dir_all(&dir).with_path(&dir)?;
        let prefix = pipeline::relative_path(&dir, out)?;
        let text = pipeline::pipeline_toml(opts, runs, &prefix);
        atomic_bytes(copy, text.as_bytes())?;
    }
    Ok(SynthSummary {
        out: out.to_path_buf(),
        pipeline: out.join("pipeline.toml"),
        runs: summaries,
    })
}

/// Metres per written length unit, and (m/s) per written velocity unit.
pub(crate) fn unit_scales(opts: &SynthOptions, setup: &RunSetup) -> (f64, f64) {
    let ls = match opts.length_unit {
        LengthUnit::M => 1.0,
        LengthUnit::Mm => 1e-3,
        LengthUnit::Px => opts.pixel_size,
    };
    let vs = match opts.velocity_unit {
        VelocityUnit::MPerS => 1.0,
        VelocityUnit::MmPerS => 1e-3,
        VelocityUnit::Px => setup.px_velocity,
    };
    (ls, vs)
}

/// Decimals of written coordinates and velocities: `digits` significant
/// digits relative to the largest coordinate and to the speed, and at
/// least a thousandth of the pitch for coordinates.
fn value_decimals(
    opts: &SynthOptions,
    setup: &RunSetup,
    ls: f64,
    vs: f64,
) -> (Option<u32>, Option<u32>) {
    let g = setup.grid;
    let coord = [g.x0, g.x(g.nx - 1), g.y0, g.y(g.ny - 1)]
        .iter()
        .fold(0f64, |m, v| m.max(v.abs()))
        / ls;
    let pitch = g.dx.min(g.dy) / ls;
    let dxy = decimals_for(coord, opts.digits).map(|d| {
        d.max((1000.0 / pitch).log10().ceil().max(0.0) as u32)
            .min(15)
    });
    (dxy, decimals_for(setup.speed / vs, opts.digits))
}

/// One frame made in the parallel part.
struct Made {
    truth: TruthFrame,
    measured: Measured,
    bytes: u64,
}

/// Writes one run (frames, frame table, truth) into `dir`.
fn write_run(opts: &SynthOptions, run: usize, setup: &RunSetup, dir: &Path) -> Result<RunSummary> {
    let truth_dir = dir.join("truth");
    fs::create_dir_all(&truth_dir).with_path(&truth_dir)?;
    if opts.truth_frames {
        let p = truth_dir.join("fields");
        fs::create_dir_all(&p).with_path(&p)?;
    }
    let layout = RunLayout::new(opts, run, setup, dir);
    let mut gathered = Gathered::new(opts, setup);
    let mut parquet = match opts.format {
        OutFormat::Parquet => Some(ParquetFrames::create(
            &dir.join("vectors.parquet"),
            &layout.cols,
        )?),
        OutFormat::Csv => None,
    };
    let mut start = 0;
    while start < opts.frames {
        let end = (start + CHUNK).min(opts.frames);
        let made = layout.make_chunk(start, end)?;
        if let Some(pq) = parquet.as_mut() {
            pq.write_chunk(start, &made, &layout.xy)?;
        }
        gathered.add_chunk(&layout, start, &made);
        start = end;
    }
    if let Some(pq) = parquet {
        gathered.summary.bytes = pq.finish()?;
    }
    let p = dir.join("frames.csv");
    fs::write(&p, &gathered.frame_table).with_path(&p)?;
    if opts.truth {
        write_truth(opts, setup, &gathered, &truth_dir)?;
    } else {
        fs::remove_dir_all(&truth_dir).with_path(&truth_dir)?;
    }
    Ok(gathered.summary)
}

/// What every frame of a run shares: its setup, folder and the formatted
/// coordinates of its nodes.
struct RunLayout<'a> {
    opts: &'a SynthOptions,
    run: usize,
    setup: &'a RunSetup,
    dir: &'a Path,
    /// "x,y," of every node, formatted once.
    prefixes: Vec<Vec<u8>>,
    /// x and y of every node in written units (the parquet columns).
    xy: (Vec<f64>, Vec<f64>),
    cols: Columns,
}

impl<'a> RunLayout<'a> {
    /// The layout of run `run` written into `dir`.
    fn new(opts: &'a SynthOptions, run: usize, setup: &'a RunSetup, dir: &'a Path) -> Self {
        let g = setup.grid;
        let (ls, vs) = unit_scales(opts, setup);
        let (dxy, dvel) = value_decimals(opts, setup, ls, vs);
        // "x,y," of every node, formatted once
        let prefixes: Vec<Vec<u8>> = (0..g.len())
            .map(|k| {
                let mut b = Vec::with_capacity(24);
                push(&mut b, g.x(k % g.nx) / ls, dxy);
                b.push(b',');
                push(&mut b, ysign(opts) * (g.y(k / g.nx) / ls), dxy);
                b.push(b',');
                b
            })
            .collect();
        RunLayout {
            opts,
            run,
            setup,
            dir,
            prefixes,
            xy: prefixes_xy(opts, setup, ls),
            cols: Columns::new(opts, setup, vs, dvel),
        }
    }

    /// Makes frames `start..end` in parallel, writing their CSV files (and
    /// truth fields when asked); returned in frame order.
    fn make_chunk(&self, start: usize, end: usize) -> Result<Vec<Made>> {
        (start..end)
            .into_par_iter()
            .map(|k| self.make_frame(k))
            .collect::<Result<Vec<Made>>>()
    }

    /// Makes frame `k` and writes its CSV file (and truth field when asked).
    fn make_frame(&self, k: usize) -> Result<Made> {
        let (opts, setup, dir) = (self.opts, self.setup, self.dir);
        let truth = setup.truth(opts, k);
        let measured = corrupt::corrupt(opts, setup, &truth, self.run, k);
        let name = frame_name(k, opts.frames);
        let mut bytes = 0;
        if opts.format == OutFormat::Csv {
            let buf = frame_csv(&measured, &self.prefixes, &self.cols);
            let p = dir.join(format!("{name}.csv"));
            fs::write(&p, &buf).with_path(&p)?;
            bytes = buf.len() as u64;
        }
        if opts.truth_frames {
            let buf = truth_frame_csv(setup, &truth);
            let p = dir.join("truth").join("fields").join(format!("{name}.csv"));
            fs::write(&p, &buf).with_path(&p)?;
        }
        Ok(Made {
            truth,
            measured,
            bytes,
        })
    }
}

/// What a run gathers in frame order: truth statistics, events, the frame
/// table and the summary's counts.
struct Gathered {
    stats: TruthStats,
    events: Vec<u8>,
    frame_table: Vec<u8>,
    summary: RunSummary,
}

impl Gathered {
    /// Nothing gathered yet: the headers of the events and frame tables.
    fn new(opts: &SynthOptions, setup: &RunSetup) -> Self {
        let g = setup.grid;
        let mut events = Vec::with_capacity(1 << 16);
        events.extend_from_slice(b"frame,i,j,kind\n");
        let mut frame_table = Vec::with_capacity(opts.frames * 32);
        frame_table.extend_from_slice(if opts.periodic() {
            b"frame,time_s,phase_deg\n".as_slice()
        } else {
            b"frame,time_s\n".as_slice()
        });
        let summary = RunSummary {
            id: setup.id.clone(),
            speed: setup.speed,
            frames: opts.frames,
            grid: g,
            pulse_separation: setup.pulse_separation,
            noise_sigma: setup.noise_sigma,
            n_outliers: 0,
            n_missing: 0,
            n_empty: 0,
            n_flagged: 0,
            n_body: 0,
            bytes: 0,
        };
        Gathered {
            stats: TruthStats::new(g, opts.phase_bins),
            events,
            frame_table,
            summary,
        }
    }

    /// Adds the frames `made` (the first is frame `start`) in frame order.
    fn add_chunk(&mut self, layout: &RunLayout, start: usize, made: &[Made]) {
        let (opts, setup) = (layout.opts, layout.setup);
        for (off, m) in made.iter().enumerate() {
            let k = start + off;
            let name = frame_name(k, opts.frames);
            // the frame table's key: the file's name without extension
            // (`FrameMeta::name`), or the parquet frame id
            let key = match opts.format {
                OutFormat::Csv => name,
                OutFormat::Parquet => (k + 1).to_string(),
            };
            let phase = setup.phase_deg(opts, k);
            self.stats.add(&m.truth, phase);
            self.summary.bytes += m.bytes;
            self.frame_table.extend_from_slice(key.as_bytes());
            self.frame_table.push(b',');
            push(&mut self.frame_table, setup.time(opts, k), Some(9));
            if let Some(p) = phase {
                self.frame_table.push(b',');
                push(&mut self.frame_table, p, Some(4));
            }
            self.frame_table.push(b'\n');
            self.add_events(&key, k, &m.measured);
        }
    }

    /// Counts the corrupted nodes of frame `k` and lists them as events.
    fn add_events(&mut self, key: &str, k: usize, measured: &Measured) {
        let summary = &mut self.summary;
        for ((j, i), &c) in measured.kind.indexed_iter() {
            let kind = Kind::from_code(c);
            match kind {
                Kind::Measured => continue,
                Kind::Body => {
                    if k == 0 {
                        summary.n_body += 1;
                    }
                    continue;
                }
                Kind::Outlier => summary.n_outliers += 1,
                Kind::Missing => summary.n_missing += 1,
                Kind::Empty => summary.n_empty += 1,
                Kind::Flagged => summary.n_flagged += 1,
            }
            self.events.extend_from_slice(key.as_bytes());
            self.events
                .extend_from_slice(format!(",{i},{j},{}\n", kind.name()).as_bytes());
        }
    }
}

/// Writes a run's truth: mean and phase tables, events and parameters.
fn write_truth(
    opts: &SynthOptions,
    setup: &RunSetup,
    gathered: &Gathered,
    truth_dir: &Path,
) -> Result<()> {
    let stats = &gathered.stats;
    let td = opts.digits.max(8);
    let p = truth_dir.join("mean.csv");
    fs::write(&p, stats.mean_csv(setup.speed, td)).with_path(&p)?;
    if opts.periodic() {
        let p = truth_dir.join("phase.csv");
        fs::write(&p, stats.phase_csv(setup.speed, td)).with_path(&p)?;
    }
    let p = truth_dir.join("events.csv");
    fs::write(&p, &gathered.events).with_path(&p)?;
    let params = serde_json::json!({
        "generator": format!("curlew {} synth", crate::VERSION),
        "seed": opts.seed,
        "options": opts,
        "run": setup,
        "summary": gathered.summary,
    });
    let p = truth_dir.join("params.json");
    let text = serde_json::to_string_pretty(&params)
        .map_err(|e| Error::data(format!("cannot encode parameters: {e}")))?;
    fs::write(&p, text + "\n").with_path(&p)
}

/// The column layout of written frames.
#[derive(Debug, Clone, Copy)]
struct Columns {
    /// (m/s) per written velocity unit.
    vs: f64,
    dvel: Option<u32>,
    /// The noise sigma in written units, when sigma columns are on.
    sigma: Option<f64>,
    /// -1 when v is written downwards.
    vsign: f64,
    /// Body nodes are rows with mask = 1.
    mask: bool,
    flag: bool,
}

impl Columns {
    fn new(opts: &SynthOptions, setup: &RunSetup, vs: f64, dvel: Option<u32>) -> Self {
        Columns {
            vs,
            dvel,
            sigma: opts.sigma_columns.then_some(setup.noise_sigma / vs),
            vsign: ysign(opts),
            mask: opts.mask_column,
            flag: opts.flag_column,
        }
    }

    fn header(&self) -> String {
        let mut h = String::from("x,y,u,v");
        if self.sigma.is_some() {
            h.push_str(",sigma_u,sigma_v");
        }
        if self.flag {
            h.push_str(",flag");
        }
        if self.mask {
            h.push_str(",mask");
        }
        h
    }
}

/// The CSV text of one measured frame (gaps as described in `corrupt`).
fn frame_csv(m: &Measured, prefixes: &[Vec<u8>], cols: &Columns) -> Vec<u8> {
    let mut buf = Vec::with_capacity(32 + prefixes.len() * 48);
    buf.extend_from_slice(cols.header().as_bytes());
    buf.push(b'\n');
    for (k, ((u, v), c)) in m.u.iter().zip(m.v.iter()).zip(m.kind.iter()).enumerate() {
        let kind = Kind::from_code(*c);
        let body = kind == Kind::Body;
        if kind == Kind::Missing || (body && !cols.mask) {
            continue;
        }
        buf.extend_from_slice(&prefixes[k]);
        let has_value = !matches!(kind, Kind::Empty | Kind::Body);
        if has_value {
            push(&mut buf, u / cols.vs, cols.dvel);
        }
        buf.push(b',');
        if has_value {
            push(&mut buf, cols.vsign * (v / cols.vs), cols.dvel);
        }
        if let Some(sg) = cols.sigma {
            buf.push(b',');
            if has_value {
                push(&mut buf, sg, cols.dvel.map(|d| (d + 2).min(15)));
            }
            buf.push(b',');
            if has_value {
                push(&mut buf, sg, cols.dvel.map(|d| (d + 2).min(15)));
            }
        }
        if cols.flag {
            buf.extend_from_slice(if kind == Kind::Flagged { b",1" } else { b",0" });
        }
        if cols.mask {
            buf.extend_from_slice(if body { b",1" } else { b",0" });
        }
        buf.push(b'\n');
    }
    buf
}

/// A noise-free frame in SI, full precision: x, y, u, v, omega.
fn truth_frame_csv(setup: &RunSetup, tf: &TruthFrame) -> Vec<u8> {
    let g = setup.grid;
    let mut buf = Vec::with_capacity(16 + g.len() * 90);
    buf.extend_from_slice(b"x,y,u,v,omega\n");
    for j in 0..g.ny {
        for i in 0..g.nx {
            for (c, v) in [g.x(i), g.y(j), tf.u[[j, i]], tf.v[[j, i]], tf.omega[[j, i]]]
                .iter()
                .enumerate()
            {
                if c > 0 {
                    buf.push(b',');
                }
                push(&mut buf, *v, None);
            }
            buf.push(b'\n');
        }
    }
    buf
}

fn prefixes_xy(opts: &SynthOptions, setup: &RunSetup, ls: f64) -> (Vec<f64>, Vec<f64>) {
    let g = setup.grid;
    (0..g.len())
        .map(|k| (g.x(k % g.nx) / ls, ysign(opts) * (g.y(k / g.nx) / ls)))
        .unzip()
}

/// -1 for image-oriented files (y and v written downwards), else 1;
/// multiplying by it is an exact negation.
fn ysign(opts: &SynthOptions) -> f64 {
    if opts.y_down {
        -1.0
    } else {
        1.0
    }
}

/// The parquet long table of a run, written in row groups of one chunk.
///
/// Written with polars directly behind this one type; when `io` gains a
/// frames writer this is the one place to switch.
struct ParquetFrames {
    path: PathBuf,
    cols: Columns,
    writer: polars::prelude::BatchedWriter<fs::File>,
}

impl ParquetFrames {
    fn create(path: &Path, cols: &Columns) -> Result<Self> {
        use polars::prelude::*;
        let file = fs::File::create(path).with_path(path)?;
        let mut fields = vec![Field::new("frame".into(), DataType::Int64)];
        let mut names = vec!["x", "y", "u", "v"];
        if cols.sigma.is_some() {
            names.extend(["sigma_u", "sigma_v"]);
        }
        fields.extend(
            names
                .iter()
                .map(|n| Field::new((*n).into(), DataType::Float64)),
        );
        if cols.flag {
            fields.push(Field::new("flag".into(), DataType::Int64));
        }
        let writer = ParquetWriter::new(file)
            .batched(&Schema::from_iter(fields))
            .map_err(|e| {
                Error::data(format!("cannot start the parquet table: {e}")).with_path(path)
            })?;
        Ok(ParquetFrames {
            path: path.to_path_buf(),
            cols: *cols,
            writer,
        })
    }

    fn write_chunk(
        &mut self,
        start: usize,
        made: &[Made],
        xy: &(Vec<f64>, Vec<f64>),
    ) -> Result<()> {
        use polars::prelude::*;
        let cap = made.len() * xy.0.len();
        let mut f = Vec::with_capacity(cap);
        let (mut x, mut y) = (Vec::with_capacity(cap), Vec::with_capacity(cap));
        let (mut u, mut v) = (Vec::with_capacity(cap), Vec::with_capacity(cap));
        let mut sg = Vec::with_capacity(if self.cols.sigma.is_some() { cap } else { 0 });
        let mut flag = Vec::with_capacity(if self.cols.flag { cap } else { 0 });
        let vs = self.cols.vs;
        for (off, m) in made.iter().enumerate() {
            let m = &m.measured;
            for (k, ((mu, mv), c)) in m.u.iter().zip(m.v.iter()).zip(m.kind.iter()).enumerate() {
                let kind = Kind::from_code(*c);
                if matches!(kind, Kind::Missing | Kind::Body) {
                    continue;
                }
                f.push((start + off + 1) as i64);
                x.push(xy.0[k]);
                y.push(xy.1[k]);
                let has = kind != Kind::Empty;
                u.push(has.then_some(mu / vs));
                v.push(has.then_some(self.cols.vsign * (mv / vs)));
                if let Some(s) = self.cols.sigma {
                    sg.push(has.then_some(s));
                }
                if self.cols.flag {
                    flag.push(i64::from(kind == Kind::Flagged));
                }
            }
        }
        let n = f.len();
        let mut columns = vec![
            Column::new("frame".into(), f),
            Column::new("x".into(), x),
            Column::new("y".into(), y),
            Column::new("u".into(), u),
            Column::new("v".into(), v),
        ];
        if self.cols.sigma.is_some() {
            columns.push(Column::new("sigma_u".into(), sg.clone()));
            columns.push(Column::new("sigma_v".into(), sg));
        }
        if self.cols.flag {
            columns.push(Column::new("flag".into(), flag));
        }
        DataFrame::new(n, columns)
            .and_then(|df| self.writer.write_batch(&df))
            .map_err(|e| {
                Error::data(format!("cannot write the parquet table: {e}")).with_path(&self.path)
            })
    }

    fn finish(self) -> Result<u64> {
        self.writer.finish().map_err(|e| {
            Error::data(format!("cannot finish the parquet table: {e}")).with_path(&self.path)
        })
    }
}
