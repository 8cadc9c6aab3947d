//! Sealing a partial folder so that `merge` can trust it: exact floats,
//! checksums, and the fingerprint that ties the shards of a run to one set
//! of frames.
//!
//! Owns: the `exact` serde form of floats (JSON text as Rust's shortest
//! round-trip form in a string: serde_json's default float parser may be
//! 1 ulp off, and a merged output must equal a single run bit for bit),
//! the checksum file `partial.sha256`, and `Fingerprint`. Does not own:
//! the layout of `partial.json` (`partial`).
//!
//! Fingerprint of a run in a shard: SHA-256 of every frame's name and size
//! in frame order (cheap: no frame is read), plus the SHA-256 of the two
//! frames just outside the shard's range, which the neighbouring shards
//! read and hash themselves. `merge` then requires equal list digests and
//! matching hashes at every boundary: shards run over different copies of
//! the frames (edited, regenerated, another folder) do not merge.

use std::path::Path;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use super::{InputFile, Reduced};
use crate::error::{Error, Result, WithPath};
use crate::io::{self, FrameSource};
use crate::plan::RunPlan;

/// serde for `Option<f64>` as an exact string (`None` as null).
pub(crate) mod exact_opt {
    use serde::{Deserialize, Deserializer, Serializer};

    pub(crate) fn serialize<S: Serializer>(x: &Option<f64>, s: S) -> Result<S::Ok, S::Error> {
        match x {
            Some(v) => s.serialize_some(&format!("{v:?}")),
            None => s.serialize_none(),
        }
    }

    pub(crate) fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
        let t: Option<String> = Option::deserialize(d)?;
        t.map(|t| t.parse::<f64>().map_err(serde::de::Error::custom))
            .transpose()
    }
}

/// serde for `f64` as an exact string.
pub(crate) mod exact {
    use serde::{Deserialize, Deserializer, Serializer};

    pub(crate) fn serialize<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&format!("{x:?}"))
    }

    pub(crate) fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        String::deserialize(d)?
            .parse::<f64>()
            .map_err(serde::de::Error::custom)
    }
}

/// The frames a shard of one run belongs to (see the module docs).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub(crate) struct Fingerprint {
    /// SHA-256 of `name\tsize\n` for every frame of the run, in order.
    pub list_sha256: String,
    /// The frame just before the shard's range (file name and hash).
    pub before: Option<(String, String)>,
    /// The frame just after the shard's range.
    pub after: Option<(String, String)>,
}

fn path_of(src: &FrameSource) -> &Path {
    src.path()
}

fn file_name(p: &str) -> String {
    Path::new(p)
        .file_name()
        .map_or_else(|| p.to_string(), |n| n.to_string_lossy().into_owned())
}

/// The fingerprint of `run`'s shard `range`.
pub(crate) fn fingerprint(run: &RunPlan, range: (usize, usize)) -> Result<Fingerprint> {
    let frames = super::list_run_frames(run)?;
    let mut h = Sha256::new();
    for (meta, src) in &frames {
        let p = path_of(src);
        let size = std::fs::metadata(p).with_path(p)?.len();
        h.update(format!("{}\t{size}\n", meta.name).as_bytes());
    }
    let edge = |k: Option<usize>| -> Result<Option<(String, String)>> {
        match k.and_then(|k| frames.get(k)) {
            Some((_, src)) => {
                let p = path_of(src);
                let (_, sha) = io::hash_file(p)?;
                Ok(Some((file_name(&p.to_string_lossy()), sha)))
            }
            None => Ok(None),
        }
    };
    Ok(Fingerprint {
        list_sha256: super::campaign::hex(&h.finalize()),
        before: edge(range.0.checked_sub(1))?,
        after: edge(Some(range.1).filter(|_| range.1 > range.0))?,
    })
}

/// Checks that shard `b` follows shard `a` over the same frames of run
/// `id` (`dir` names `b` in errors).
pub(crate) fn check_follows(
    id: &str,
    a: (&Fingerprint, &[InputFile]),
    b: (&Fingerprint, &[InputFile]),
    dir: &Path,
) -> Result<()> {
    let differ = |what: &str| {
        Error::data(format!(
            "run '{id}': this shard was reduced over other frames than the shard before it \
             ({what}); every shard must read the same frames"
        ))
        .with_path(dir)
    };
    if a.0.list_sha256 != b.0.list_sha256 {
        return Err(differ("the frame names or sizes differ"));
    }
    let hash_in = |inputs: &[InputFile], name: &str| {
        inputs
            .iter()
            .find(|f| file_name(&f.path) == name)
            .map(|f| f.sha256.clone())
    };
    if let Some((name, sha)) = &a.0.after {
        if hash_in(b.1, name).is_some_and(|s| &s != sha) {
            return Err(differ(&format!("frame {name} has another content")));
        }
    }
    if let Some((name, sha)) = &b.0.before {
        if hash_in(a.1, name).is_some_and(|s| &s != sha) {
            return Err(differ(&format!("frame {name} has another content")));
        }
    }
    Ok(())
}

/// Writes `dir/partial.sha256`: the SHA-256 of `partial.json` and of every
/// run's `accumulator.bin` (and `budget.bin`, `modes.bin`, `correlation.bin`, `frame-cores.bin`), one `hash  path` line each.
pub(crate) fn write_checksums(dir: &Path, runs: &[Reduced]) -> Result<()> {
    let mut text = String::new();
    let mut files = vec!["partial.json".to_string()];
    files.extend(runs.iter().map(|r| format!("{}/accumulator.bin", r.id)));
    files.extend(
        runs.iter()
            .filter(|r| r.state.budget.is_some())
            .map(|r| format!("{}/budget.bin", r.id)),
    );
    files.extend(
        runs.iter()
            .filter(|r| r.state.modes.is_some())
            .map(|r| format!("{}/modes.bin", r.id)),
    );
    files.extend(
        runs.iter()
            .filter(|r| r.state.corr.is_some())
            .map(|r| format!("{}/{}", r.id, super::partial::CORR_FILE)),
    );
    files.extend(
        runs.iter()
            .filter(|r| r.state.frame_cores.is_some())
            .map(|r| format!("{}/{}", r.id, super::partial::FRAME_CORES_FILE)),
    );
    for f in &files {
        let (_, sha) = io::hash_file(&dir.join(f))?;
        text.push_str(&format!("{sha}  {f}\n"));
    }
    io::atomic_bytes(&dir.join("partial.sha256"), text.as_bytes())
}

/// Verifies `dir/partial.sha256`: every file it lists has its hash.
pub(crate) fn verify_checksums(dir: &Path) -> Result<()> {
    let p = dir.join("partial.sha256");
    let text = std::fs::read_to_string(&p).map_err(|e| {
        Error::data(format!(
            "the checksum file is missing or unreadable ({}); rerun this shard",
            e.to_string().to_lowercase()
        ))
        .with_path(&p)
    })?;
    for (k, line) in text.lines().enumerate() {
        let bad = || {
            Error::data("not a checksum line ('<sha256>  <file>')")
                .with_path(&p)
                .with_line(k + 1)
        };
        let (sha, file) = line.split_once("  ").ok_or_else(bad)?;
        if file.contains("..") || file.starts_with('/') {
            return Err(bad());
        }
        let f = dir.join(file);
        let (_, got) = io::hash_file(&f)?;
        if got != sha {
            return Err(Error::data(
                "this file was changed after `curlew run --shard` wrote it (its SHA-256 differs \
                 from partial.sha256); rerun that shard instead of editing it",
            )
            .with_path(&f));
        }
    }
    Ok(())
}
