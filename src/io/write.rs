//! Writing: CSV tables, atomic files and folders, file hashes.
//!
//! Owns: the rule that no output ever appears half-written. A file is
//! written to a temporary sibling `.<name>.partial-<pid>-<n>` and renamed
//! over the target only when complete; a folder (`OutputDir`) is built as a
//! temporary sibling and swapped in on `commit`. Does not own: what goes
//! into the tables (stages).
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

use crate::error::{Error, Result, WithPath};

use super::table::{Table, Values};

fn sibling(path: &Path, tag: &str) -> PathBuf {
    static COUNTER: AtomicUsize = AtomicUsize::new(0);
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let name = path
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    path.with_file_name(format!(".{name}.{tag}-{}-{n}", std::process::id()))
}

fn parent_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Writes a file through `write` into a temporary sibling, then renames it
/// onto `path`. On any error the temporary is removed and `path` untouched.
pub(crate) fn atomic_file(path: &Path, write: impl FnOnce(&mut File) -> Result<()>) -> Result<()> {
    let parent = parent_of(path);
    fs::create_dir_all(parent).with_path(parent)?;
    let tmp = sibling(path, "partial");
    let result = (|| {
        let mut f = File::create(&tmp).with_path(&tmp)?;
        write(&mut f).map_err(|e| e.with_path(path))?;
        drop(f);
        fs::rename(&tmp, path).with_path(path)
    })();
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
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

/// Writes `table` as CSV with a header line; atomic (see module docs).
pub fn write_csv(path: &Path, table: &Table) -> Result<()> {
    atomic_file(path, |file| {
        let mut w = BufWriter::with_capacity(1 << 16, file);
        let mut line: Vec<u8> = Vec::with_capacity(256);
        for (k, (name, _)) in table.columns.iter().enumerate() {
            if k > 0 {
                line.push(b',');
            }
            push_str(&mut line, name);
        }
        line.push(b'\n');
        w.write_all(&line).with_path(path)?;
        for r in 0..table.n_rows() {
            line.clear();
            for (k, (_, vals)) in table.columns.iter().enumerate() {
                if k > 0 {
                    line.push(b',');
                }
                match vals {
                    Values::F64(v) => push_f64(&mut line, v[r]),
                    Values::I64(v) => {
                        let _ = write!(line, "{}", v[r]);
                    }
                    Values::Str(v) => push_str(&mut line, &v[r]),
                }
            }
            line.push(b'\n');
            w.write_all(&line).with_path(path)?;
        }
        w.flush().with_path(path)
    })
}

/// Size in bytes and SHA-256 (lower-case hex) of a file, read in 64 KiB
/// blocks.
pub fn hash_file(path: &Path) -> Result<(u64, String)> {
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
pub fn hash_bytes(bytes: &[u8]) -> (u64, String) {
    let hex: String = Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    (bytes.len() as u64, hex)
}

/// An output folder that appears only when the work succeeded: everything
/// is written into the temporary sibling `<parent>/.<name>.partial-<pid>`,
/// and `commit` swaps it in place of the old folder. Dropped without
/// `commit`, the temporary folder is removed and the old one is untouched.
pub struct OutputDir {
    pub final_path: PathBuf,
    pub temp_path: PathBuf,
    done: bool,
}

impl OutputDir {
    /// Creates a fresh temporary folder beside `final_path` (and the parent
    /// folder if needed). An existing `final_path` that is not a folder is an
    /// error: it is never replaced.
    pub fn begin(final_path: &Path) -> Result<OutputDir> {
        let parent = parent_of(final_path);
        fs::create_dir_all(parent).with_path(parent)?;
        if final_path.exists() && !final_path.is_dir() {
            return Err(Error::data(
                "the output path exists and is not a folder; it will not be replaced",
            )
            .with_path(final_path));
        }
        let name = final_path
            .file_name()
            .ok_or_else(|| Error::usage("the output folder needs a name").with_path(final_path))?
            .to_string_lossy()
            .into_owned();
        let temp_path = parent.join(format!(".{name}.partial-{}", std::process::id()));
        if temp_path.exists() {
            fs::remove_dir_all(&temp_path).with_path(&temp_path)?;
        }
        fs::create_dir(&temp_path).with_path(&temp_path)?;
        Ok(OutputDir {
            final_path: final_path.to_path_buf(),
            temp_path,
            done: false,
        })
    }

    /// The folder to write into (the temporary one).
    pub fn path(&self) -> &Path {
        &self.temp_path
    }

    /// Moves an existing final folder aside, renames the temporary folder to
    /// the final name, then removes the old one. If the swap fails the old
    /// folder is put back.
    pub fn commit(mut self) -> Result<()> {
        let old = if self.final_path.exists() {
            let old = sibling(&self.final_path, "old");
            fs::rename(&self.final_path, &old).with_path(&self.final_path)?;
            Some(old)
        } else {
            None
        };
        if let Err(e) = fs::rename(&self.temp_path, &self.final_path) {
            if let Some(old) = &old {
                let _ = fs::rename(old, &self.final_path);
            }
            return Err(Error::io(&self.final_path, e));
        }
        self.done = true;
        if let Some(old) = old {
            fs::remove_dir_all(&old).with_path(&old)?;
        }
        Ok(())
    }
}

impl Drop for OutputDir {
    fn drop(&mut self) {
        if !self.done {
            let _ = fs::remove_dir_all(&self.temp_path);
        }
    }
}
