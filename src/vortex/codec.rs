//! The bytes of the per-frame cores a shard carries to `merge`
//! (`<run id>/frame-cores.bin`, only with `[vortices] frames = true`).
//!
//! Owns: `to_bytes` / `from_bytes` of `FrameCores`. Layout (`io::blob`): a
//! magic line, a u32 version, a JSON header with the shape (per frame its
//! index and core count; per core its sign, node count, whether it has a
//! fit, whether it touches an edge), then one little-endian f64 stream:
//! per frame its time, then per core the 14 measures of `MEASURES` order,
//! the 9 fit values when it has a fit, and its node indices (exact as f64
//! below 2^53). Every f64 reads back bit for bit, NaN included, so merged
//! shards give exactly what one run gives.

use serde::{Deserialize, Serialize};

use super::core::Core;
use super::fit::LambOseen;
use super::frames::FrameCores;
use super::{SliceCores, SliceKind};
use crate::error::Result;
use crate::io::blob::BlobReader;

const MAGIC: &[u8] = b"curlew frame cores\n";
const VERSION: u32 = 1;

#[derive(Serialize, Deserialize)]
struct Header {
    /// (frame index, cores) per frame.
    frames: Vec<(u64, usize)>,
    /// (sign, nodes, has fit, edge) per core, frame by frame.
    cores: Vec<(i8, usize, bool, bool)>,
}

fn measures(c: &Core) -> [f64; 14] {
    [
        c.x,
        c.y,
        c.x_unc,
        c.y_unc,
        c.x_gamma1,
        c.y_gamma1,
        c.area,
        c.radius_eq,
        c.radius_moment,
        c.radius_moment_unc,
        c.circulation,
        c.circulation_unc,
        c.peak_omega,
        c.peak_omega_unc,
    ]
}

fn fit_values(f: &LambOseen) -> [f64; 9] {
    [
        f.x,
        f.y,
        f.gamma,
        f.rc,
        f.x_unc,
        f.y_unc,
        f.gamma_unc,
        f.rc_unc,
        f.chi2_red,
    ]
}

impl FrameCores {
    /// The bytes of the frames' cores (see the module doc).
    pub(crate) fn to_bytes(&self) -> Vec<u8> {
        let mut h = Header {
            frames: Vec::with_capacity(self.slices.len()),
            cores: Vec::new(),
        };
        let mut f: Vec<f64> = Vec::new();
        for s in &self.slices {
            let index = match s.kind {
                SliceKind::Frame { index } => index,
                _ => u64::MAX,
            };
            h.frames.push((index, s.cores.len()));
            f.push(s.time_s);
            for c in &s.cores {
                h.cores
                    .push((c.sign, c.nodes.len(), c.fit.is_some(), c.edge));
                f.extend(measures(c));
                if let Some(fit) = &c.fit {
                    f.extend(fit_values(fit));
                }
                f.extend(c.nodes.iter().map(|&k| k as f64));
            }
        }
        let json = serde_json::to_vec(&h).unwrap_or_default();
        let mut out = Vec::with_capacity(MAGIC.len() + 12 + json.len() + 8 * f.len());
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&VERSION.to_le_bytes());
        out.extend_from_slice(&(json.len() as u64).to_le_bytes());
        out.extend_from_slice(&json);
        for x in f {
            out.extend_from_slice(&x.to_le_bytes());
        }
        out
    }

    /// Reads `to_bytes` back (a state that only merges: no finder).
    pub(crate) fn from_bytes(b: &[u8]) -> Result<FrameCores> {
        let (mut r, h): (_, Header) = BlobReader::open(
            b,
            MAGIC,
            VERSION,
            "frame-cores.bin",
            "a curlew frame-cores file",
        )?;
        let mut cores = h.cores.iter();
        let mut slices = Vec::with_capacity(h.frames.len());
        for &(index, n) in &h.frames {
            let time_s = r.floats(1)?[0];
            let mut out = Vec::with_capacity(n);
            for _ in 0..n {
                let &(sign, n_nodes, has_fit, edge) = cores
                    .next()
                    .ok_or_else(|| r.bad("the header lists fewer cores than its frames hold"))?;
                let m = r.floats(14)?;
                let fit = match has_fit {
                    true => {
                        let v = r.floats(9)?;
                        Some(LambOseen {
                            x: v[0],
                            y: v[1],
                            gamma: v[2],
                            rc: v[3],
                            x_unc: v[4],
                            y_unc: v[5],
                            gamma_unc: v[6],
                            rc_unc: v[7],
                            chi2_red: v[8],
                        })
                    }
                    false => None,
                };
                let nodes = r.floats(n_nodes)?.into_iter().map(|k| k as usize).collect();
                out.push(Core {
                    sign,
                    nodes,
                    x: m[0],
                    y: m[1],
                    x_unc: m[2],
                    y_unc: m[3],
                    x_gamma1: m[4],
                    y_gamma1: m[5],
                    area: m[6],
                    radius_eq: m[7],
                    radius_moment: m[8],
                    radius_moment_unc: m[9],
                    circulation: m[10],
                    circulation_unc: m[11],
                    peak_omega: m[12],
                    peak_omega_unc: m[13],
                    fit,
                    edge,
                });
            }
            slices.push(SliceCores {
                kind: SliceKind::Frame { index },
                time_s,
                cores: out,
            });
        }
        if cores.next().is_some() {
            return Err(r.bad("the header lists more cores than its frames hold"));
        }
        r.finish("bytes follow the last core")?;
        Ok(FrameCores {
            finder: None,
            slices,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn frame_cores_read_back_bit_for_bit_and_a_cut_file_is_refused() {
        let core = |sign: i8, fit: bool| Core {
            sign,
            nodes: vec![3, 4, 17, 18],
            x: 0.125,
            y: -3e-3,
            x_unc: 1e-4,
            y_unc: if fit { 2e-4 } else { f64::NAN },
            x_gamma1: 0.124,
            y_gamma1: -2e-3,
            area: 4e-6,
            radius_eq: 1.128e-3,
            radius_moment: 7e-4,
            radius_moment_unc: 2e-5,
            circulation: 0.0125,
            circulation_unc: 3e-4,
            peak_omega: -41.5,
            peak_omega_unc: 0.7,
            fit: fit.then_some(LambOseen {
                x: 0.1251,
                y: -3.1e-3,
                gamma: 0.018,
                rc: 1.5e-3,
                x_unc: 2e-5,
                y_unc: 2e-5,
                gamma_unc: 4e-4,
                rc_unc: 3e-5,
                chi2_red: 1.07,
            }),
            edge: !fit,
        };
        let fc = FrameCores {
            finder: None,
            slices: vec![
                SliceCores {
                    kind: SliceKind::Frame { index: 7 },
                    time_s: 0.35,
                    cores: vec![core(1, true), core(-1, false)],
                },
                SliceCores {
                    kind: SliceKind::Frame { index: 9 },
                    time_s: f64::NAN,
                    cores: vec![],
                },
            ],
        };
        let b = fc.to_bytes();
        let back = FrameCores::from_bytes(&b).unwrap();
        assert_eq!(back.slices.len(), 2);
        assert_eq!(back.slices[0].kind, SliceKind::Frame { index: 7 });
        assert_eq!(back.slices[0].cores[0], fc.slices[0].cores[0]);
        assert_eq!(back.slices[0].cores[1].fit, None);
        assert!(back.slices[0].cores[1].y_unc.is_nan());
        assert!(back.slices[1].time_s.is_nan() && back.slices[1].cores.is_empty());
        let e = FrameCores::from_bytes(&b[..b.len() - 8]).unwrap_err();
        assert!(e.message.contains("frame-cores.bin"), "{e}");
    }
}
