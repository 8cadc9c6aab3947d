//! Output folders: built aside, swapped in whole, never over an input or a
//! stranger's folder, cleaned up after a kill.
//!
//! Owns: `OutputDir`, the one way every command (`run`, `merge`, `synth`)
//! makes its output folder. Everything is written into the hidden sibling
//! `<parent>/.<name>.partial-<host>-<pid>`; `commit` moves an existing
//! final folder aside to `.<name>.old-<host>-<pid>`, renames the temporary
//! folder into place and removes the old one. Does not own: the files
//! inside (stages, `write`).
//!
//! Rules, checked in `begin` before any work:
//! - the output folder must not be, or contain, any input (the pipeline
//!   file, frame files and their folders, frame tables, partial folders):
//!   replacing it would delete them;
//! - an existing folder is replaced only when it is empty or a previous
//!   curlew output (it holds `manifest.json` (run, merge), `partial.json`
//!   (run --shard) or `pipeline.toml` beside a `README.md` that starts
//!   `# Synthetic campaign` (synth));
//! - leftovers of killed curlew processes on this host beside it (the
//!   process id no longer lives) are removed; a moved-aside old output
//!   whose commit was killed is put back when no output took its place.
//!
//! Signals: the first `begin` installs a SIGINT/SIGTERM handler (Unix) that
//! removes every live temporary folder and exits with 128 + the signal
//! number. `commit` holds the same lock, so a signal during the swap waits
//! for it to finish: the folder is then either the old or the new one,
//! whole. SIGKILL cannot be caught; its leftovers go at the next run.

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard, Once};

use crate::error::{Error, Result, WithPath};

use super::write::{parent_of, write_error};

/// The temporary folders of this process not yet committed or dropped.
static LIVE: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());
static HANDLER: Once = Once::new();

fn live() -> MutexGuard<'static, Vec<PathBuf>> {
    LIVE.lock().unwrap_or_else(|e| e.into_inner())
}

/// Installs the SIGINT/SIGTERM handler once (Unix; elsewhere nothing).
fn install_handler() {
    HANDLER.call_once(|| {
        #[cfg(unix)]
        {
            use signal_hook::consts::{SIGINT, SIGTERM};
            if let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) {
                std::thread::spawn(move || {
                    if let Some(sig) = signals.forever().next() {
                        let list = live();
                        for p in list.iter() {
                            let _ = fs::remove_dir_all(p);
                        }
                        eprintln!(
                            "curlew: interrupted (signal {sig}); {} unfinished output folder(s) removed, \
                             earlier outputs untouched",
                            list.len()
                        );
                        std::process::exit(128 + sig);
                    }
                });
            }
        }
    });
}

/// This machine's name, for the names of temporary folders (so a run on a
/// shared file system never removes another machine's live work).
fn host() -> String {
    let h = fs::read_to_string("/proc/sys/kernel/hostname")
        .or_else(|_| fs::read_to_string("/etc/hostname"))
        .unwrap_or_default();
    let h: String = h
        .trim()
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .take(64)
        .collect();
    if h.is_empty() {
        "host".into()
    } else {
        h
    }
}

/// Whether process `pid` runs on this machine. Without `/proc` it cannot
/// tell and answers yes (nothing is then cleaned).
fn alive(pid: u32) -> bool {
    let proc = Path::new("/proc");
    !proc.is_dir() || proc.join(pid.to_string()).exists()
}

/// True when `dir` is a previous curlew output (see the module rules).
pub(crate) fn is_curlew_output(dir: &Path) -> bool {
    let synth = || {
        let mut head = [0u8; 20];
        dir.join("pipeline.toml").is_file()
            && fs::File::open(dir.join("README.md"))
                .and_then(|mut f| std::io::Read::read_exact(&mut f, &mut head))
                .is_ok()
            && &head == b"# Synthetic campaign"
    };
    dir.join("manifest.json").is_file() || dir.join("partial.json").is_file() || synth()
}

/// `p` made absolute with `.` and `..` resolved and symbolic links
/// followed as far as the path exists (the rest appended as written).
pub(crate) fn normalise(p: &Path) -> PathBuf {
    let abs = if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir().unwrap_or_default().join(p)
    };
    let mut existing = abs.clone();
    let mut rest: Vec<std::ffi::OsString> = Vec::new();
    loop {
        if let Ok(c) = existing.canonicalize() {
            let mut out = c;
            for part in rest.iter().rev() {
                match part.to_str() {
                    Some(".") => {}
                    Some("..") => {
                        out.pop();
                    }
                    _ => out.push(part),
                }
            }
            return out;
        }
        match (existing.file_name(), existing.parent()) {
            (Some(name), Some(parent)) => {
                rest.push(name.to_os_string());
                existing = parent.to_path_buf();
            }
            _ => return abs,
        }
    }
}

/// Refuses `out` when it equals or contains one of `inputs`.
fn check_not_over_inputs(out: &Path, inputs: &[PathBuf]) -> Result<()> {
    let o = normalise(out);
    for i in inputs {
        let n = normalise(i);
        if n.starts_with(&o) {
            let what = if n == o {
                "is an input".to_string()
            } else {
                format!("holds the input {}", i.display())
            };
            return Err(Error::usage(format!(
                "the output folder {what}; replacing it would delete it. \
                 Choose an output folder outside the inputs (--out)"
            ))
            .with_path(out));
        }
    }
    Ok(())
}

/// The process id in a leftover name `.<name>.<tag>-<host>-<pid>` of this
/// host, if `entry` is one.
fn leftover_pid(entry: &str, name: &str, tag: &str, host: &str) -> Option<u32> {
    let rest = entry.strip_prefix(&format!(".{name}.{tag}-{host}-"))?;
    rest.parse().ok()
}

/// Removes the leftovers of dead curlew processes beside `final_path`, and
/// puts back an old output whose swap was killed half-way.
fn clean_leftovers(final_path: &Path, name: &str, host: &str) -> Result<()> {
    let parent = parent_of(final_path);
    let Ok(entries) = fs::read_dir(parent) else {
        return Ok(());
    };
    let own = std::process::id();
    for e in entries.flatten() {
        let entry = e.file_name().to_string_lossy().into_owned();
        for tag in ["old", "partial"] {
            let Some(pid) = leftover_pid(&entry, name, tag, host) else {
                continue;
            };
            if pid == own || alive(pid) {
                continue;
            }
            let p = e.path();
            if tag == "old" && !final_path.exists() {
                fs::rename(&p, final_path).with_path(final_path)?;
                eprintln!(
                    "curlew: put back {} (a killed run had moved it aside)",
                    final_path.display()
                );
            } else {
                fs::remove_dir_all(&p).with_path(&p)?;
                eprintln!(
                    "curlew: removed {} (left by a killed run, process {pid})",
                    p.display()
                );
            }
        }
    }
    Ok(())
}

/// An output folder that appears only when the work succeeded (see the
/// module docs). Dropped without `commit`, the temporary folder is removed
/// and the old one is untouched.
pub struct OutputDir {
    /// Where the folder appears on `commit` (`--out`).
    pub final_path: PathBuf,
    /// The temporary sibling folder the outputs are written into.
    pub temp_path: PathBuf,
    old_path: PathBuf,
    done: bool,
}

impl OutputDir {
    /// `begin_over` with no inputs to protect.
    pub fn begin(final_path: &Path) -> Result<OutputDir> {
        Self::begin_over(final_path, &[])
    }

    /// Checks the rules of the module docs against `inputs` (files or
    /// folders the command reads), cleans leftovers, and creates the
    /// temporary folder beside `final_path`.
    pub(crate) fn begin_over(final_path: &Path, inputs: &[PathBuf]) -> Result<OutputDir> {
        install_handler();
        let name = final_path
            .file_name()
            .filter(|n| !matches!(n.to_str(), Some(".") | Some("..")))
            .ok_or_else(|| Error::usage("the output folder needs a name").with_path(final_path))?
            .to_string_lossy()
            .into_owned();
        check_not_over_inputs(final_path, inputs)?;
        let parent = parent_of(final_path);
        fs::create_dir_all(parent).map_err(|e| write_error(parent, e))?;
        let host = host();
        clean_leftovers(final_path, &name, &host)?;
        if final_path.exists() {
            if !final_path.is_dir() {
                return Err(Error::usage(
                    "the output path exists and is not a folder; it will not be replaced",
                )
                .with_path(final_path));
            }
            let empty = fs::read_dir(final_path)
                .with_path(final_path)?
                .next()
                .is_none();
            if !empty && !is_curlew_output(final_path) {
                return Err(Error::usage(
                    "the output folder exists, is not empty and is not a curlew output \
                     (no manifest.json); it will not be replaced. Choose a new or empty folder (--out)",
                )
                .with_path(final_path));
            }
        }
        let pid = std::process::id();
        let temp_path = parent.join(format!(".{name}.partial-{host}-{pid}"));
        let old_path = parent.join(format!(".{name}.old-{host}-{pid}"));
        if temp_path.exists() {
            fs::remove_dir_all(&temp_path).with_path(&temp_path)?;
        }
        fs::create_dir(&temp_path).map_err(|e| write_error(&temp_path, e))?;
        live().push(temp_path.clone());
        Ok(OutputDir {
            final_path: final_path.to_path_buf(),
            temp_path,
            old_path,
            done: false,
        })
    }

    /// The folder to write into (the temporary one).
    pub fn path(&self) -> &Path {
        &self.temp_path
    }

    /// Moves an existing final folder aside, renames the temporary folder to
    /// the final name, then removes the old one. If the swap fails the old
    /// folder is put back. A signal waits until the swap is over.
    pub fn commit(mut self) -> Result<()> {
        let mut list = live();
        let had_old = self.final_path.exists();
        if had_old {
            fs::rename(&self.final_path, &self.old_path)
                .map_err(|e| write_error(&self.final_path, e))?;
        }
        if let Err(e) = fs::rename(&self.temp_path, &self.final_path) {
            if had_old {
                let _ = fs::rename(&self.old_path, &self.final_path);
            }
            return Err(write_error(&self.final_path, e));
        }
        self.done = true;
        list.retain(|p| p != &self.temp_path);
        drop(list);
        if had_old {
            fs::remove_dir_all(&self.old_path).with_path(&self.old_path)?;
        }
        Ok(())
    }
}

impl Drop for OutputDir {
    fn drop(&mut self) {
        if !self.done {
            let mut list = live();
            let _ = fs::remove_dir_all(&self.temp_path);
            list.retain(|p| p != &self.temp_path);
        }
    }
}
