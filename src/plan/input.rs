//! `[input]` (and `[run.input]`): the docs/interface.md keys for formats, column
//! names and units, resolved into an `io::InputSpec` with SI factors.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::io::{ColumnMap, Format, InputSpec, Orientation};

/// `[input]` as written; every key optional so that a run's `[run.input]`
/// can override just what differs.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawInput {
    /// csv | tsv | text | parquet | netcdf | mat (default csv).
    pub format: Option<String>,
    /// `columns = { x, y, u, v, … }`: the names to read (defaults below).
    pub columns: Option<RawColumns>,
    /// m | mm | px (default m).
    pub length_unit: Option<String>,
    /// m/s | mm/s | px (default m/s).
    pub velocity_unit: Option<String>,
    /// Metres per pixel.
    pub pixel_size: Option<f64>,
    /// Seconds between the two exposures.
    pub pulse_separation: Option<f64>,
    /// Lines to skip before the header line (text preambles).
    pub skip_lines: Option<usize>,
    /// Tolerance on node positions, as a fraction of the grid pitch
    /// (default 0.05), for coordinates printed with rounding.
    pub grid_tolerance: Option<f64>,
    /// up | down: which way y grows in the files (down: image rows).
    pub y_axis: Option<String>,
    /// up | down: which way a positive v points in the files (default: as
    /// `y_axis`).
    pub v_axis: Option<String>,
}

/// `[input] columns` as written: the header names (for `netcdf` and
/// `mat`, the variable names) of the columns to read; `None`: the default.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawColumns {
    /// The x coordinate (default `x`).
    pub x: Option<String>,
    /// The y coordinate (default `y`).
    pub y: Option<String>,
    /// The x velocity (default `u`).
    pub u: Option<String>,
    /// The y velocity (default `v`).
    pub v: Option<String>,
    /// Per-vector standard uncertainty of u (default: none).
    pub sigma_u: Option<String>,
    /// Per-vector standard uncertainty of v (default: none).
    pub sigma_v: Option<String>,
    /// Nonzero marks an invalid vector (default: none).
    pub flag: Option<String>,
    /// The integer frame id of a parquet long table (default `frame`).
    pub frame: Option<String>,
    /// Nonzero marks a masked node ("no flow here").
    pub mask: Option<String>,
}

fn pick<T: Clone>(over: &Option<T>, base: &Option<T>) -> Option<T> {
    over.clone().or_else(|| base.clone())
}

impl RawInput {
    /// `over` (a run's `[run.input]`) on top of `self` (the campaign's).
    pub(crate) fn overridden_by(&self, over: &RawInput) -> RawInput {
        let cols = match (&self.columns, &over.columns) {
            (Some(b), Some(o)) => Some(RawColumns {
                x: pick(&o.x, &b.x),
                y: pick(&o.y, &b.y),
                u: pick(&o.u, &b.u),
                v: pick(&o.v, &b.v),
                sigma_u: pick(&o.sigma_u, &b.sigma_u),
                sigma_v: pick(&o.sigma_v, &b.sigma_v),
                flag: pick(&o.flag, &b.flag),
                frame: pick(&o.frame, &b.frame),
                mask: pick(&o.mask, &b.mask),
            }),
            (b, o) => pick(o, b),
        };
        RawInput {
            format: pick(&over.format, &self.format),
            columns: cols,
            length_unit: pick(&over.length_unit, &self.length_unit),
            velocity_unit: pick(&over.velocity_unit, &self.velocity_unit),
            pixel_size: pick(&over.pixel_size, &self.pixel_size),
            pulse_separation: pick(&over.pulse_separation, &self.pulse_separation),
            skip_lines: pick(&over.skip_lines, &self.skip_lines),
            grid_tolerance: pick(&over.grid_tolerance, &self.grid_tolerance),
            y_axis: pick(&over.y_axis, &self.y_axis),
            v_axis: pick(&over.v_axis, &self.v_axis),
        }
    }

    /// Resolves units to SI factors. `what` names the section for errors
    /// (e.g. `[input]` or `run 're2000' [run.input]`).
    pub fn resolve(&self, what: &str) -> Result<InputSpec> {
        let format = self.resolve_format(what)?;
        let columns = self.column_map();
        let (length_scale, velocity_scale) = self.unit_scales(what)?;
        let grid_tolerance = self.grid_tolerance.unwrap_or(0.05);
        if !(grid_tolerance > 0.0 && grid_tolerance < 0.5) {
            return Err(Error::usage(format!(
                "{what}: grid_tolerance = {grid_tolerance} must lie between 0 and 0.5 grid pitches"
            )));
        }
        let orientation = self.orientation(what)?;
        Ok(InputSpec {
            orientation,
            format,
            columns,
            length_scale,
            velocity_scale,
            skip_lines: self.skip_lines.unwrap_or(0),
            grid_tolerance,
            length_unit: self.length_unit.clone(),
            velocity_unit: self.velocity_unit.clone(),
            units_from_header: None,
        })
    }

    /// The frame file format (`format`, default csv).
    fn resolve_format(&self, what: &str) -> Result<Format> {
        Ok(match self.format.as_deref().unwrap_or("csv") {
            "csv" => Format::Csv,
            "tsv" => Format::Tsv,
            "text" => Format::Text,
            "parquet" => Format::Parquet,
            "netcdf" => Format::NetCdf,
            "mat" => Format::Mat,
            other => {
                return Err(Error::usage(format!(
                    "{what}: format = '{other}' is not known; expected csv, tsv, text, parquet, netcdf or mat"
                )))
            }
        })
    }

    /// The column names, defaults filled in.
    fn column_map(&self) -> ColumnMap {
        let c = self.columns.clone().unwrap_or_default();
        ColumnMap {
            x: c.x.unwrap_or_else(|| "x".into()),
            y: c.y.unwrap_or_else(|| "y".into()),
            u: c.u.unwrap_or_else(|| "u".into()),
            v: c.v.unwrap_or_else(|| "v".into()),
            sigma_u: c.sigma_u,
            sigma_v: c.sigma_v,
            flag: c.flag,
            frame: c.frame.unwrap_or_else(|| "frame".into()),
            mask: c.mask,
        }
    }

    /// Metres per length unit and (m/s) per velocity unit of the input.
    fn unit_scales(&self, what: &str) -> Result<(f64, f64)> {
        let positive = |name: &str, v: Option<f64>| -> Result<Option<f64>> {
            match v {
                Some(x) if !(x.is_finite() && x > 0.0) => Err(Error::usage(format!(
                    "{what}: {name} = {x} must be a positive number"
                ))),
                other => Ok(other),
            }
        };
        let pixel = positive("pixel_size", self.pixel_size)?;
        let dt = positive("pulse_separation", self.pulse_separation)?;
        let length_scale = match self.length_unit.as_deref().unwrap_or("m") {
            "m" => 1.0,
            "mm" => 1e-3,
            "px" => pixel.ok_or_else(|| {
                Error::usage(format!(
                    "{what}: length_unit = 'px' needs pixel_size (metres per pixel)"
                ))
            })?,
            other => {
                return Err(Error::usage(format!(
                    "{what}: length_unit = '{other}' is not known; expected m, mm or px"
                )))
            }
        };
        let velocity_scale = match self.velocity_unit.as_deref().unwrap_or("m/s") {
            "m/s" => 1.0,
            "mm/s" => 1e-3,
            "px" => {
                let p = pixel.ok_or_else(|| {
                    Error::usage(format!(
                        "{what}: velocity_unit = 'px' needs pixel_size (metres per pixel)"
                    ))
                })?;
                let t = dt.ok_or_else(|| {
                    Error::usage(format!(
                        "{what}: velocity_unit = 'px' needs pulse_separation (seconds between exposures)"
                    ))
                })?;
                p / t
            }
            other => {
                return Err(Error::usage(format!(
                    "{what}: velocity_unit = '{other}' is not known; expected m/s, mm/s or px"
                )))
            }
        };
        Ok((length_scale, velocity_scale))
    }

    /// `y_axis` and `v_axis` (v follows y unless stated).
    fn orientation(&self, what: &str) -> Result<Orientation> {
        let down = |key: &str, v: &Option<String>| -> Result<Option<bool>> {
            match v.as_deref() {
                None => Ok(None),
                Some("up") => Ok(Some(false)),
                Some("down") => Ok(Some(true)),
                Some(other) => Err(Error::usage(format!(
                    "{what}: {key} = '{other}' is not known; expected up or down"
                ))),
            }
        };
        let y = down("y_axis", &self.y_axis)?;
        let v = down("v_axis", &self.v_axis)?;
        let y_down = y.unwrap_or(false);
        Ok(Orientation {
            y_down,
            v_down: v.unwrap_or(y_down),
            stated: y.is_some(),
        })
    }

    /// The warning for positions in pixels with no stated y direction:
    /// pixel positions usually come from images, whose y grows downwards.
    pub(crate) fn orientation_warning(&self, what: &str) -> Option<String> {
        (self.length_unit.as_deref() == Some("px") && self.y_axis.is_none()).then(|| {
            format!(
                "{what}: positions are in pixels but [input] y_axis is not given; y was assumed \
                 to point up. Image coordinates usually grow downwards, which flips the sign \
                 of every vorticity: state y_axis = \"up\" or \"down\""
            )
        })
    }

    /// Metres per second per pixel of displacement, when the calibration
    /// (pixel size and pulse separation) is known.
    pub(crate) fn px_velocity(&self) -> Option<f64> {
        match (self.pixel_size, self.pulse_separation) {
            (Some(p), Some(t)) if p > 0.0 && t > 0.0 => Some(p / t),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn px_displacement_resolves_to_pixel_size_over_pulse_separation() {
        let raw = RawInput {
            velocity_unit: Some("px".into()),
            length_unit: Some("px".into()),
            pixel_size: Some(1e-5),
            pulse_separation: Some(2e-4),
            ..Default::default()
        };
        let s = raw.resolve("[input]").unwrap();
        assert_eq!(s.length_scale, 1e-5);
        assert!((s.velocity_scale - 0.05).abs() < 1e-15);
    }

    #[test]
    fn px_without_pulse_separation_is_a_usage_error() {
        let raw = RawInput {
            velocity_unit: Some("px".into()),
            pixel_size: Some(1e-5),
            ..Default::default()
        };
        let e = raw.resolve("[input]").unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.message.contains("pulse_separation"), "{e}");
    }

    #[test]
    fn run_override_keeps_campaign_columns_it_does_not_name() {
        let base = RawInput {
            columns: Some(RawColumns {
                x: Some("X".into()),
                u: Some("U".into()),
                ..Default::default()
            }),
            ..Default::default()
        };
        let over = RawInput {
            columns: Some(RawColumns {
                u: Some("Vx".into()),
                ..Default::default()
            }),
            ..Default::default()
        };
        let m = base.overridden_by(&over).resolve("x").unwrap();
        assert_eq!(m.columns.x, "X");
        assert_eq!(m.columns.u, "Vx");
        assert_eq!(m.columns.v, "v");
    }

    #[test]
    fn y_axis_down_turns_v_down_unless_v_axis_says_otherwise() {
        let raw = RawInput {
            y_axis: Some("down".into()),
            ..Default::default()
        };
        let o = raw.resolve("[input]").unwrap().orientation;
        assert!(o.y_down && o.v_down && o.stated);
        let raw = RawInput {
            v_axis: Some("up".into()),
            ..raw
        };
        let o = raw.resolve("[input]").unwrap().orientation;
        assert!(o.y_down && !o.v_down);
        let o = RawInput::default().resolve("[input]").unwrap().orientation;
        assert!(!o.y_down && !o.v_down && !o.stated);
        let e = RawInput {
            y_axis: Some("downwards".into()),
            ..Default::default()
        }
        .resolve("[input]")
        .unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.message.contains("y_axis = 'downwards'"), "{e}");
    }

    #[test]
    fn pixels_without_a_y_direction_warn() {
        let raw = RawInput {
            length_unit: Some("px".into()),
            ..Default::default()
        };
        assert!(raw
            .orientation_warning("run 'a'")
            .unwrap()
            .contains("y_axis"));
        let stated = RawInput {
            y_axis: Some("up".into()),
            ..raw
        };
        assert!(stated.orientation_warning("run 'a'").is_none());
        assert!(RawInput::default().orientation_warning("x").is_none());
    }
}
