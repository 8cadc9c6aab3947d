//! The gradient stage's resolved parameters in plain words (`curlew check`,
//! the report) and the readable manifest form of `Scheme`.

use super::{Params, Scheme, VelocityNoise};
use crate::describe::num;
use crate::stencil::derivatives::DiffScheme;

/// A fixed scheme serialises as its `DiffScheme` (`{"name":
/// "least-squares", "window": 5, "order": 1}`); auto as `{"name": "auto"}`
/// (its candidates are `Params::candidates`).
impl serde::Serialize for Scheme {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self {
            Scheme::Fixed(d) => d.serialize(s),
            Scheme::Auto => {
                use serde::ser::SerializeMap;
                let mut m = s.serialize_map(Some(1))?;
                m.serialize_entry("name", "auto")?;
                m.end()
            }
        }
    }
}

impl Params {
    /// The scheme, the noise model, the error correlation and the
    /// truncation estimate, separated by "; ": "least squares, window 5,
    /// order 1; noise estimated per frame; error correlation estimated from
    /// the data; truncation estimated".
    pub(crate) fn describe(&self) -> String {
        let scheme = match self.scheme {
            Scheme::Fixed(d) => d.describe(),
            Scheme::Auto => format!(
                "auto: per node the candidate with the least estimated error among [{}], chosen once from a pilot of up to {} frames (one map for the means, one for the per-frame fields)",
                self.candidates
                    .iter()
                    .map(DiffScheme::describe)
                    .collect::<Vec<_>>()
                    .join(" | "),
                super::choice::PILOT_FRAMES
            ),
        };
        let noise = match self.velocity_noise {
            VelocityNoise::Estimate => "noise estimated per frame".to_string(),
            VelocityNoise::Columns => "noise from the sigma_u, sigma_v columns".to_string(),
            VelocityNoise::Value(v) => format!("noise {} m/s per component", num(v, 3)),
        };
        let corr = if self.correlation_from_data {
            "error correlation estimated from the data".to_string()
        } else {
            self.correlation.describe()
        };
        let trunc = if self.truncation {
            "truncation estimated"
        } else {
            "truncation not estimated"
        };
        format!("{scheme}; {noise}; {corr}; {trunc}")
    }

    /// The quantities made, omega first: "omega, div, exx, …, gamma2
    /// (Gamma discs of radius 2 nodes)".
    pub(crate) fn describe_quantities(&self) -> String {
        let mut q = vec!["omega"];
        q.extend(self.quantities.iter().copied());
        let mut s = q.join(", ");
        if q.iter().any(|n| n.starts_with("gamma")) {
            s.push_str(&format!(
                " (Gamma discs of radius {} nodes)",
                self.gamma_radius
            ));
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stencil::correlation::Correlation;

    #[test]
    fn the_default_reads_in_plain_words_and_serialises_by_name() {
        let p = Params::default();
        assert_eq!(
            p.describe(),
            "least squares, window 5, order 1; noise estimated per frame; \
             error correlation estimated from the data; truncation estimated"
        );
        let v = serde_json::to_value(&p).unwrap();
        assert_eq!(
            v["scheme"],
            serde_json::json!({"name": "least-squares", "window": 5, "order": 1})
        );
        assert_eq!(v["candidates"][1], serde_json::json!({"name": "central"}));
        assert_eq!(v["velocity_noise"], "estimate");
        assert_eq!(
            v["correlation"],
            serde_json::json!({"model": "independent"})
        );
        assert_eq!(v["smoother"], serde_json::json!({"method": "none"}));
    }

    #[test]
    fn auto_a_fixed_noise_and_a_given_correlation_read_and_serialise() {
        let p = Params {
            scheme: Scheme::Auto,
            candidates: vec![DiffScheme::Central, DiffScheme::Richardson],
            velocity_noise: VelocityNoise::Value(0.002),
            correlation: Correlation::Window(0.5),
            correlation_from_data: false,
            truncation: false,
            quantities: vec!["div", "gamma1"],
            ..Params::default()
        };
        assert_eq!(
            p.describe(),
            "auto: per node the candidate with the least estimated error among [central differences | \
             fourth-order central differences (Richardson)], chosen once from a pilot of up to \
             32 frames (one map for the means, one for the per-frame fields); \
             noise 0.002 m/s per component; \
             errors correlated as interrogation windows overlapping by 50 %; truncation not estimated"
        );
        assert_eq!(
            p.describe_quantities(),
            "omega, div, gamma1 (Gamma discs of radius 2 nodes)"
        );
        let v = serde_json::to_value(&p).unwrap();
        assert_eq!(v["scheme"], serde_json::json!({"name": "auto"}));
        assert_eq!(v["velocity_noise"], 0.002);
        assert_eq!(
            v["correlation"],
            serde_json::json!({"model": "window", "overlap": 0.5})
        );
        let nan = Params {
            velocity_noise: VelocityNoise::Value(f64::NAN),
            ..Params::default()
        };
        // non-finite floats become null, never a panic
        assert!(serde_json::to_value(&nan).unwrap()["velocity_noise"].is_null());
    }
}
