//! Writing: CSV tables, atomic files, file hashes.
//!
//! Owns: the rule that no output file ever appears half-written, for every
//! command (`run`, `merge`, `synth`, the comparisons, figures and report
//! alike). A file is written to a temporary sibling
//! `.partial-<pid>-<n>.<name>` and renamed over the target only when
//! complete (`atomic_file`, `atomic_path` for writers that want a path,
//! `atomic_bytes`); folders are `outdir::OutputDir`'s. One CSV writer
//! (`write_csv` for typed tables, `write_csv_rows` for rows of text) quotes
//! and formats every table the same way. Does not own: what goes into the
//! tables (stages).
//!
//! The guarantee is against failures of the process (an error, a crash,
//! Ctrl-C): files are not fsynced, so after a power loss a just-written file
//! may be empty; that cost (milliseconds per file, thousands of per-frame
//! files) is not paid.
//!
//! CSV floats use Rust's shortest round-trip formatting (`{}`; `{:e}` for
//! magnitudes below 1e-5 or from 1e16, to stay short), so parsing the text
//! gives back the same bits. NaN is written as an empty cell; ±inf as
//! `inf`/`-inf`. Strings are quoted when they hold `,`, `"` or a line break.

use std::fs::{self, File};
use std::io::{BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

use sha2::{Digest, Sha256};

use crate::error::{Error, ErrorKind, Result, WithPath};

use super::table::{Table, Values};

pub(crate) fn sibling(path: &Path, tag: &str) -> PathBuf {
    static COUNTER: AtomicUsize = AtomicUsize::new(0);
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let name = path
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    // The tag goes first so the name keeps its extension (image writers
    // choose the format by it).
    path.with_file_name(format!(".{tag}-{}-{n}.{name}", std::process::id()))
}

pub(crate) fn parent_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// An operating-system error while writing `path` (a full disk, say),
/// worded as a write so nobody looks for a reading problem.
pub(crate) fn write_error(path: &Path, e: std::io::Error) -> Error {
    Error::new(
        ErrorKind::Io,
        format!("cannot write: {}", e.to_string().to_lowercase()),
    )
    .with_path(path)
}

/// Calls `write` with a temporary sibling path of `path`, then renames the
/// temporary onto `path`. On any error the temporary is removed and `path`
/// untouched. For writers that open the file themselves (figures).
pub(crate) fn atomic_path(path: &Path, write: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    let parent = parent_of(path);
    fs::create_dir_all(parent).map_err(|e| write_error(parent, e))?;
    let tmp = sibling(path, "partial");
    let result = write(&tmp)
        .map_err(|e| e.with_path(path))
        .and_then(|()| fs::rename(&tmp, path).map_err(|e| write_error(path, e)));
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
}

/// Writes a file through `write` into a temporary sibling, then renames it
/// onto `path` (see `atomic_path`).
pub(crate) fn atomic_file(path: &Path, write: impl FnOnce(&mut File) -> Result<()>) -> Result<()> {
    atomic_path(path, |tmp| {
        let mut f = File::create(tmp).map_err(|e| write_error(tmp, e))?;
        write(&mut f)?;
        f.flush().map_err(|e| write_error(path, e))
    })
}

/// Writes `bytes` to `path` atomically.
pub(crate) fn atomic_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    atomic_file(path, |f| {
        f.write_all(bytes).map_err(|e| write_error(path, e))
    })
}

/// Appends the shortest text that parses back to exactly `x`.
pub(crate) fn push_f64(out: &mut Vec<u8>, x: f64) {
    if x.is_nan() {
        return;
    }
    let a = x.abs();
    if a == 0.0 || (1e-5..1e16).contains(&a) || a.is_infinite() {
        let _ = write!(out, "{x}");
    } else {
        let _ = write!(out, "{x:e}");
    }
}

fn push_str(out: &mut Vec<u8>, s: &str) {
    if s.contains([',', '"', '\n', '\r']) {
        out.push(b'"');
        out.extend_from_slice(s.replace('"', "\"\"").as_bytes());
        out.push(b'"');
    } else {
        out.extend_from_slice(s.as_bytes());
    }
}

/// Writes `header` and `rows` (cells as text, quoted where needed) as CSV;
/// atomic (see module docs).
pub(crate) fn write_csv_rows<S: AsRef<str>>(
    path: &Path,
    header: &[&str],
    rows: impl IntoIterator<Item = Vec<S>>,
) -> Result<()> {
    csv_lines(path, header.iter().copied(), |line, w| {
        for row in rows {
            line.clear();
            for (k, cell) in row.iter().enumerate() {
                if k > 0 {
                    line.push(b',');
                }
                push_str(line, cell.as_ref());
            }
            line.push(b'\n');
            w.write_all(line).map_err(|e| write_error(path, e))?;
        }
        Ok(())
    })
}

/// The CSV frame shared by both writers: the header line, then `body`
/// writing the rows through a reusable line buffer.
fn csv_lines<'h>(
    path: &Path,
    header: impl Iterator<Item = &'h str>,
    body: impl FnOnce(&mut Vec<u8>, &mut BufWriter<&mut File>) -> Result<()>,
) -> Result<()> {
    atomic_file(path, |file| {
        let mut w = BufWriter::with_capacity(1 << 16, file);
        let mut line: Vec<u8> = Vec::with_capacity(256);
        for (k, name) in header.enumerate() {
            if k > 0 {
                line.push(b',');
            }
            push_str(&mut line, name);
        }
        line.push(b'\n');
        w.write_all(&line).map_err(|e| write_error(path, e))?;
        body(&mut line, &mut w)?;
        w.flush().map_err(|e| write_error(path, e))
    })
}

/// Writes `table` as CSV with a header line; atomic (see module docs).
pub(crate) fn write_csv(path: &Path, table: &Table) -> Result<()> {
    let names = table.columns.iter().map(|(n, _)| n.as_str());
    csv_lines(path, names, |line, w| {
        for r in 0..table.n_rows() {
            line.clear();
            for (k, (_, vals)) in table.columns.iter().enumerate() {
                if k > 0 {
                    line.push(b',');
                }
                match vals {
                    Values::F64(v) => push_f64(line, v[r]),
                    Values::I64(v) => {
                        let _ = write!(line, "{}", v[r]);
                    }
                    Values::Str(v) => push_str(line, &v[r]),
                }
            }
            line.push(b'\n');
            w.write_all(line).map_err(|e| write_error(path, e))?;
        }
        Ok(())
    })
}

/// Size in bytes and SHA-256 (lower-case hex) of a file, read in 64 KiB
/// blocks.
pub(crate) fn hash_file(path: &Path) -> Result<(u64, String)> {
    let mut f = File::open(path).with_path(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    let mut size = 0u64;
    loop {
        let n = match f.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(Error::io(path, e)),
        };
        size += n as u64;
        h.update(&buf[..n]);
    }
    let hex: String = h.finalize().iter().map(|b| format!("{b:02x}")).collect();
    Ok((size, hex))
}

/// The size and SHA-256 (lower-case hex) of bytes already in memory: the
/// same as `hash_file` of the file they were read from.
pub(crate) fn hash_bytes(bytes: &[u8]) -> (u64, String) {
    let hex: String = Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    (bytes.len() as u64, hex)
}
