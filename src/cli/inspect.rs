//! `curlew inspect FILE`: what a frame file or an output table holds.
//!
//! The format defaults from the extension (`.csv`, `.tsv`, `.parquet`/`.pq`,
//! anything else whitespace text); units and column names use the same
//! words and defaults as the pipeline's `[input]`, and are resolved by the
//! same code, so `inspect` reads a file exactly as `run` would.

use std::path::PathBuf;

use curlew::plan::input::{RawColumns, RawInput};
use curlew::{Error, Result};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The file: a frame (csv, tsv, whitespace text, parquet long table) or an output table.
    pub file: PathBuf,
    /// csv | tsv | text | parquet (default: from the extension).
    #[arg(long)]
    pub format: Option<String>,
    /// Unit of x and y in the file: m | mm | px (default m).
    #[arg(long)]
    pub length_unit: Option<String>,
    /// Unit of u and v: m/s | mm/s | px (displacement between exposures; default m/s).
    #[arg(long)]
    pub velocity_unit: Option<String>,
    /// Metres per pixel, where a unit is px.
    #[arg(long)]
    pub pixel_size: Option<f64>,
    /// Seconds between the two exposures, where velocity_unit is px.
    #[arg(long)]
    pub pulse_separation: Option<f64>,
    /// Lines to skip before the header line.
    #[arg(long)]
    pub skip_lines: Option<usize>,
    /// Column names as KEY=NAME (keys x, y, u, v, sigma_u, sigma_v, flag, frame); repeatable.
    #[arg(long = "column", value_name = "KEY=NAME")]
    pub columns: Vec<String>,
}

fn format_from_extension(path: &std::path::Path) -> &'static str {
    match path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .as_deref()
    {
        Some("csv") => "csv",
        Some("tsv") | Some("tab") => "tsv",
        Some("parquet") | Some("pq") => "parquet",
        _ => "text",
    }
}

fn columns(pairs: &[String]) -> Result<Option<RawColumns>> {
    if pairs.is_empty() {
        return Ok(None);
    }
    let mut c = RawColumns::default();
    for p in pairs {
        let (k, v) = p
            .split_once('=')
            .ok_or_else(|| Error::usage(format!("--column '{p}': expected KEY=NAME, e.g. u=vx")))?;
        let slot = match k.trim() {
            "x" => &mut c.x,
            "y" => &mut c.y,
            "u" => &mut c.u,
            "v" => &mut c.v,
            "sigma_u" => &mut c.sigma_u,
            "sigma_v" => &mut c.sigma_v,
            "flag" => &mut c.flag,
            "frame" => &mut c.frame,
            other => {
                return Err(Error::usage(format!(
                    "--column '{p}': '{other}' is not a key; expected x, y, u, v, sigma_u, sigma_v, flag or frame"
                )))
            }
        };
        *slot = Some(v.trim().to_string());
    }
    Ok(Some(c))
}

pub fn run(args: Args) -> Result<()> {
    let ext = args
        .file
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    if ext.as_deref() == Some("nc") {
        print!("{}", curlew::io::cf::summary(&args.file)?);
        return Ok(());
    }
    let mut raw = RawInput {
        format: Some(
            args.format
                .clone()
                .unwrap_or_else(|| format_from_extension(&args.file).into()),
        ),
        columns: columns(&args.columns)?,
        length_unit: args.length_unit.clone(),
        velocity_unit: args.velocity_unit.clone(),
        pixel_size: args.pixel_size,
        pulse_separation: args.pulse_separation,
        skip_lines: args.skip_lines,
        grid_tolerance: None,
        ..Default::default()
    };
    let mut spec = raw.resolve("inspect")?;
    // units the options leave open, as the file's header states them
    let pattern = glob::Pattern::escape(&args.file.to_string_lossy());
    if let Some(st) = curlew::io::units::settle(&spec, &pattern) {
        if let Some(l) = &st.length {
            raw.length_unit = Some(l.unit.to_string());
        }
        if let Some(v) = &st.velocity {
            raw.velocity_unit = Some(v.unit.to_string());
        }
        spec = raw.resolve("inspect")?;
        spec.units_from_header = Some(st);
    }
    let mut text = curlew::io::inspect::describe(&args.file, &spec)?;
    if text.contains("kind       frame") {
        text.push_str(&format!(
            "units      {}\n",
            curlew::io::units::describe(&spec)
        ));
        if spec.length_unit.is_none() || spec.velocity_unit.is_none() {
            text.push_str(
                "           give --length-unit and --velocity-unit if the file is in other units\n",
            );
        }
    }
    use std::io::Write;
    std::io::stdout()
        .write_all(text.as_bytes())
        .map_err(|e| Error::io(std::path::Path::new("<stdout>"), e))
}
