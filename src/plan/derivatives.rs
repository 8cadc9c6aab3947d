//! `[derivatives]` and `[uncertainty]`: raw keys and their resolution into
//! `derive::Params`.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::derive::{self, quantities, Scheme, VelocityNoise};
use crate::error::{Error, Result};
use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::DiffScheme;
use crate::stencil::smooth::Smoother;

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawDerivatives {
    /// central | richardson | least-squares | circulation | auto
    /// (default least-squares). `auto` applies every candidate and keeps,
    /// per node, the one with the least estimated total error (costs one
    /// pass per candidate).
    pub scheme: Option<String>,
    /// Nodes in the least-squares fit along each axis: odd, 3 to 15
    /// (default 5; with order 1 the 4-point stencil).
    pub window: Option<usize>,
    /// Polynomial order of the least-squares fit, 1 to window - 1 (default
    /// 1). Orders 2k-1 and 2k give the same first-derivative weights.
    pub order: Option<u32>,
    /// The schemes `auto` chooses from, in tie-breaking order (default
    /// ["least-squares", "central", "richardson", "circulation"]).
    pub candidates: Option<Vec<String>>,
    /// Quantities to make besides omega (always made): any of div, exx,
    /// eyy, exy, lambda_ci, q, stretching, gamma1, gamma2 (default all).
    pub quantities: Option<Vec<String>>,
    /// Radius in nodes of the disc over which Gamma1 and Gamma2 are taken,
    /// 1 to 10 (default 2: 12 neighbours).
    pub gamma_radius: Option<usize>,
    /// Estimate each derivative's truncation error and carry it as a
    /// systematic uncertainty (default true; costs about as much as the
    /// derivatives themselves).
    pub truncation: Option<bool>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawUncertainty {
    /// "estimate" (from each frame's data, the default) | "columns"
    /// (sigma_u, sigma_v of the input) | a number in m/s.
    pub velocity_noise: Option<toml::Value>,
    /// Correlation coefficient of the errors of adjacent vectors, 0 to
    /// below 1 (default: estimated from each frame's data under the window
    /// model). Farther vectors follow the model below.
    pub neighbour_correlation: Option<f64>,
    /// The overlap of the interrogation windows as a fraction (0.5 for
    /// 50 %); under the top-hat window model it equals the adjacent
    /// correlation, so give this or `neighbour_correlation`, not both.
    pub window_overlap: Option<f64>,
    /// "window" (top-hat interrogation windows: rho(d) = max(0, 1 - (1-c) d)
    /// per axis, the default) | "adjacent" (only the four nearest
    /// neighbours correlate).
    pub correlation_model: Option<String>,
}

fn parse_scheme(s: &str, key: &str, ls: DiffScheme) -> Result<Option<DiffScheme>> {
    Ok(match s {
        "central" => Some(DiffScheme::Central),
        "richardson" => Some(DiffScheme::Richardson),
        "least-squares" => Some(ls),
        "circulation" => Some(DiffScheme::Circulation),
        "auto" => None,
        other => {
            return Err(Error::usage(format!(
                "[derivatives] {key} = '{other}': expected central, richardson, least-squares, circulation or auto"
            )))
        }
    })
}

/// Resolves `[derivatives]` and `[uncertainty]` into the derivative parameters.
pub(crate) fn resolve_derive(
    d: &RawDerivatives,
    u: &RawUncertainty,
    smoother: Smoother,
    ctx: &ResolveCtx,
) -> Result<derive::Params> {
    let _ = ctx;
    let mut p = derive::Params::default();
    let window = d.window.unwrap_or(5);
    if window % 2 == 0 || !(3..=15).contains(&window) {
        return Err(Error::usage(format!(
            "[derivatives] window = {window}: expected an odd number of nodes from 3 to 15"
        )));
    }
    let order = d.order.unwrap_or(1);
    if order == 0 || order as usize >= window {
        return Err(Error::usage(format!(
            "[derivatives] order = {order}: expected 1 to {} (below the window of {window} nodes)",
            window - 1
        )));
    }
    p.ls_window = window;
    p.ls_order = order;
    let ls = p.least_squares();
    p.scheme = match parse_scheme(d.scheme.as_deref().unwrap_or("least-squares"), "scheme", ls)? {
        Some(s) => Scheme::Fixed(s),
        None => Scheme::Auto,
    };
    p.candidates = resolve_candidates(d.candidates.as_deref(), ls)?;
    if let Some(list) = &d.quantities {
        p.quantities = resolve_quantities(list)?;
    }
    let gr = d.gamma_radius.unwrap_or(2);
    if !(1..=10).contains(&gr) {
        return Err(Error::usage(format!(
            "[derivatives] gamma_radius = {gr}: expected 1 to 10 nodes"
        )));
    }
    p.gamma_radius = gr;
    p.truncation = d.truncation.unwrap_or(true);

    p.velocity_noise = resolve_velocity_noise(u)?;
    // Without either key the correlation is estimated from each frame
    // (`derive::noise::estimate_overlap`); a given value wins.
    p.correlation_from_data = u.neighbour_correlation.is_none() && u.window_overlap.is_none();
    p.correlation = resolve_correlation(u)?;
    p.smoother = smoother;
    Ok(p)
}

/// The schemes `auto` chooses from (`candidates`; by default all four).
fn resolve_candidates(candidates: Option<&[String]>, ls: DiffScheme) -> Result<Vec<DiffScheme>> {
    Ok(match candidates {
        None => vec![
            ls,
            DiffScheme::Central,
            DiffScheme::Richardson,
            DiffScheme::Circulation,
        ],
        Some(list) => {
            let mut out = Vec::new();
            for s in list {
                match parse_scheme(s, "candidates", ls)? {
                    Some(x) if !out.contains(&x) => out.push(x),
                    Some(_) => {}
                    None => {
                        return Err(Error::usage(
                            "[derivatives] candidates: 'auto' cannot be a candidate of itself",
                        ))
                    }
                }
            }
            if out.is_empty() {
                return Err(Error::usage(
                    "[derivatives] candidates: expected at least one scheme",
                ));
            }
            out
        }
    })
}

/// The quantities named in `quantities` besides omega (always derived).
fn resolve_quantities(list: &[String]) -> Result<Vec<&'static str>> {
    let mut q = Vec::new();
    for name in list {
        if name == "omega" {
            continue;
        }
        match quantities::ALL.iter().skip(1).find(|(n, _)| n == name) {
            Some((n, _)) => q.push(*n),
            None => {
                let known: Vec<&str> = quantities::ALL.iter().map(|(n, _)| *n).collect();
                return Err(Error::usage(format!(
                    "[derivatives] quantities: unknown quantity '{name}'; expected any of {}",
                    known.join(", ")
                )));
            }
        }
    }
    Ok(q)
}

/// The velocity noise of `[uncertainty]`: estimated, from columns, or given.
fn resolve_velocity_noise(u: &RawUncertainty) -> Result<VelocityNoise> {
    Ok(match &u.velocity_noise {
        None => VelocityNoise::Estimate,
        Some(toml::Value::String(s)) if s == "estimate" => VelocityNoise::Estimate,
        Some(toml::Value::String(s)) if s == "columns" => VelocityNoise::Columns,
        Some(toml::Value::Float(x)) if x.is_finite() && *x >= 0.0 => VelocityNoise::Value(*x),
        Some(toml::Value::Integer(x)) if *x >= 0 => VelocityNoise::Value(*x as f64),
        Some(other) => {
            return Err(Error::usage(format!(
                "[uncertainty] velocity_noise = {other}: expected \"estimate\", \"columns\" or a non-negative number in m/s"
            )))
        }
    })
}

/// The correlation model of neighbouring vectors' noise in `[uncertainty]`.
fn resolve_correlation(u: &RawUncertainty) -> Result<Correlation> {
    let c = match (u.neighbour_correlation, u.window_overlap) {
        (Some(_), Some(_)) => {
            return Err(Error::usage(
                "[uncertainty] give neighbour_correlation or window_overlap, not both (under the window model they are the same number)",
            ))
        }
        (Some(c), None) => ("neighbour_correlation", c),
        (None, Some(c)) => ("window_overlap", c),
        (None, None) => ("neighbour_correlation", 0.0),
    };
    if !(0.0..1.0).contains(&c.1) {
        return Err(Error::usage(format!(
            "[uncertainty] {} = {}: expected a number from 0 to below 1",
            c.0, c.1
        )));
    }
    let correlation = match u.correlation_model.as_deref().unwrap_or("window") {
        _ if c.1 == 0.0 => Correlation::Independent,
        "window" => Correlation::Window(c.1),
        "adjacent" => Correlation::Adjacent(c.1),
        other => {
            return Err(Error::usage(format!(
                "[uncertainty] correlation_model = '{other}': expected window or adjacent"
            )))
        }
    };
    if let Some(m) = u.correlation_model.as_deref() {
        if m != "window" && m != "adjacent" {
            return Err(Error::usage(format!(
                "[uncertainty] correlation_model = '{m}': expected window or adjacent"
            )));
        }
    }
    Ok(correlation)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ctx() -> ResolveCtx {
        ResolveCtx {
            velocity_scale: 1.0,
            px_velocity: None,
            length_scale: 1.0,
        }
    }

    fn parse(d: &str, u: &str) -> Result<derive::Params> {
        let d: RawDerivatives = toml::from_str(d).unwrap();
        let u: RawUncertainty = toml::from_str(u).unwrap();
        resolve_derive(&d, &u, Smoother::None, &ctx())
    }

    #[test]
    fn defaults_are_the_four_point_least_squares_with_estimated_noise() {
        let p = parse("", "").unwrap();
        assert_eq!(p, derive::Params::default());
        assert_eq!(
            p.scheme,
            Scheme::Fixed(DiffScheme::LeastSquares {
                window: 5,
                order: 1
            })
        );
        assert_eq!(p.velocity_noise, VelocityNoise::Estimate);
        assert_eq!(p.correlation, Correlation::Independent);
        assert!(p.correlation_from_data);
        let given = parse("", "neighbour_correlation = 0.0").unwrap();
        assert!(!given.correlation_from_data, "a given correlation wins");
    }

    #[test]
    fn keys_resolve() {
        let p = parse(
            "scheme = \"auto\"\nwindow = 7\norder = 3\ncandidates = [\"central\", \"least-squares\"]\nquantities = [\"q\"]",
            "velocity_noise = 0.02\nwindow_overlap = 0.5",
        )
        .unwrap();
        assert_eq!(p.scheme, Scheme::Auto);
        assert_eq!(
            p.candidates,
            vec![
                DiffScheme::Central,
                DiffScheme::LeastSquares {
                    window: 7,
                    order: 3
                }
            ]
        );
        assert_eq!(p.quantities, vec!["q"]);
        assert_eq!(derive::quantity_names(&p), vec!["omega", "q"]);
        assert_eq!(p.velocity_noise, VelocityNoise::Value(0.02));
        assert_eq!(p.correlation, Correlation::Window(0.5));
        let p = parse("", "velocity_noise = \"columns\"\nneighbour_correlation = 0.3\ncorrelation_model = \"adjacent\"").unwrap();
        assert_eq!(p.velocity_noise, VelocityNoise::Columns);
        assert_eq!(p.correlation, Correlation::Adjacent(0.3));
    }

    #[test]
    fn bad_values_name_the_key_and_what_was_expected() {
        let cases = [
            ("scheme = \"sobel\"", "", "scheme = 'sobel'"),
            ("window = 4", "", "window = 4"),
            ("order = 5", "", "order = 5"),
            ("quantities = [\"vort\"]", "", "unknown quantity 'vort'"),
            ("gamma_radius = 0", "", "gamma_radius = 0"),
            ("", "velocity_noise = \"guess\"", "velocity_noise"),
            ("", "velocity_noise = -1.0", "velocity_noise"),
            (
                "",
                "neighbour_correlation = 1.0",
                "neighbour_correlation = 1",
            ),
            (
                "",
                "neighbour_correlation = 0.5\nwindow_overlap = 0.5",
                "not both",
            ),
            (
                "",
                "correlation_model = \"gauss\"",
                "correlation_model = 'gauss'",
            ),
        ];
        for (d, u, want) in cases {
            let e = parse(d, u).unwrap_err();
            assert_eq!(e.kind, crate::ErrorKind::Usage);
            assert!(
                e.message.contains(want),
                "'{}' should contain '{want}'",
                e.message
            );
        }
    }
}
