//! Eccentricity priors written as short text, for the command line and the page:
//! `SHAPE[(ARGS)][:E_MIN..E_MAX]`, e.g. `uniform:0..0.5`, `beta(0.867,3.03)`, `kipping2013`,
//! `rayleigh(0.3)`, `halfnormal(0.2):0..0.8`, `loguniform:0.001..0.99`, `ecosw`, `sqrtecosw`.

use crate::priors::{EccentricityPriorSettings, EccentricityShape};

use super::PosteriorError;

/// The shapes a spec may name, for error messages.
pub const SPEC_SHAPES: &str = "uniform, beta(a,b), kipping2013 (all planets), kipping2013short \
(P < 382.3 d), kipping2013long, kipping2013auto (short or long by the fitted period), \
rayleigh(sigma), halfnormal(sigma), loguniform (needs :E_MIN..E_MAX with E_MIN > 0), \
ecosw (p ∝ e), sqrtecosw, jeffreys (√det of the table's Fisher information over P, K, e, ω, λ)";

/// [`super::default_prior_set`] written as specs, in the same order (for the page's editable
/// list and the command line's help).
pub const DEFAULT_PRIOR_SPECS: [&str; 6] = [
    "uniform:0..0.99",
    "uniform:0..0.8",
    "uniform:0..0.5",
    "kipping2013",
    "rayleigh(0.3)",
    "ecosw",
];

/// Parses one prior spec and validates it. Without a truncation the range is [0, 0.99] (the
/// model's domain).
pub fn parse_prior_spec(spec: &str) -> Result<EccentricityPriorSettings, PosteriorError> {
    let bad = |reason: String| PosteriorError::PriorSpec {
        spec: spec.to_string(),
        reason,
    };
    let text = spec.trim().to_ascii_lowercase();
    let (shape_text, range_text) = match text.rsplit_once(':') {
        Some((s, r)) => (s.trim(), Some(r.trim())),
        None => (text.as_str(), None),
    };
    let (name, args) = match shape_text.split_once('(') {
        Some((name, rest)) => {
            let inner = rest
                .strip_suffix(')')
                .ok_or_else(|| bad("missing `)` after the shape's arguments".into()))?;
            let values = inner
                .split(',')
                .map(|a| {
                    a.trim()
                        .parse::<f64>()
                        .map_err(|_| bad(format!("argument `{}` is not a number", a.trim())))
                })
                .collect::<Result<Vec<f64>, _>>()?;
            (name.trim(), values)
        }
        None => (shape_text, Vec::new()),
    };
    let want = |n: usize| -> Result<(), PosteriorError> {
        if args.len() == n {
            Ok(())
        } else {
            Err(bad(format!(
                "`{name}` takes {n} argument(s), {} given",
                args.len()
            )))
        }
    };
    let shape = match name {
        "uniform" => {
            want(0)?;
            EccentricityShape::Uniform
        }
        "sqrtecosw" => {
            want(0)?;
            EccentricityShape::UniformInSqrtECosOmega
        }
        "ecosw" => {
            want(0)?;
            EccentricityShape::UniformInECosOmega
        }
        "loguniform" => {
            want(0)?;
            EccentricityShape::LogUniform
        }
        "kipping2013" | "kipping2013all" => {
            want(0)?;
            EccentricityShape::KIPPING_2013_ALL
        }
        "kipping2013short" => {
            want(0)?;
            EccentricityShape::KIPPING_2013_SHORT_PERIOD
        }
        "kipping2013long" => {
            want(0)?;
            EccentricityShape::KIPPING_2013_LONG_PERIOD
        }
        "kipping2013auto" => {
            want(0)?;
            EccentricityShape::Kipping2013ByPeriod
        }
        "jeffreys" => {
            want(0)?;
            EccentricityShape::Jeffreys
        }
        "beta" => {
            want(2)?;
            EccentricityShape::Beta {
                a: args[0],
                b: args[1],
            }
        }
        "rayleigh" => {
            want(1)?;
            EccentricityShape::Rayleigh { sigma: args[0] }
        }
        "halfnormal" => {
            want(1)?;
            EccentricityShape::HalfNormal { sigma: args[0] }
        }
        other => {
            return Err(bad(format!(
                "unknown shape `{other}`; expected one of {SPEC_SHAPES}"
            )))
        }
    };
    let (e_min, e_max) = match range_text {
        None => (0.0, crate::fit::MAX_ECCENTRICITY),
        Some(range) => {
            let (lo, hi) = range
                .split_once("..")
                .ok_or_else(|| bad(format!("truncation `{range}` must read E_MIN..E_MAX")))?;
            let number = |s: &str| {
                s.trim()
                    .parse::<f64>()
                    .map_err(|_| bad(format!("truncation bound `{}` is not a number", s.trim())))
            };
            (number(lo)?, number(hi)?)
        }
    };
    let settings = EccentricityPriorSettings {
        shape,
        e_min,
        e_max,
    };
    // The by-period shape is checked with a period on either side of the split.
    for period in [1.0, 1.0e3] {
        settings
            .for_period(period)
            .validate()
            .map_err(|e| bad(e.to_string()))?;
    }
    Ok(settings)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_specs_read_as_the_default_set() {
        let parsed: Vec<_> = DEFAULT_PRIOR_SPECS
            .iter()
            .map(|s| parse_prior_spec(s).unwrap())
            .collect();
        assert_eq!(parsed, super::super::default_prior_set());
    }

    #[test]
    fn specs_parse_to_the_named_shapes() {
        let p = parse_prior_spec("uniform:0..0.5").unwrap();
        assert_eq!(
            (p.shape, p.e_min, p.e_max),
            (EccentricityShape::Uniform, 0.0, 0.5)
        );
        let p = parse_prior_spec(" Beta(0.867, 3.03) ").unwrap();
        assert_eq!(p.shape, EccentricityShape::KIPPING_2013_ALL);
        assert_eq!(p.e_max, 0.99);
        let p = parse_prior_spec("rayleigh(0.3):0..0.8").unwrap();
        assert_eq!(p.shape, EccentricityShape::Rayleigh { sigma: 0.3 });
        assert!(parse_prior_spec("loguniform:0.001..0.99").is_ok());
    }

    /// Kipping (2013) by name, and by the fitted period: short below 382.3 d, long above
    /// (values from memory, see `EccentricityShape::KIPPING_2013_SHORT_PERIOD`).
    #[test]
    fn kipping_variants_by_name_and_by_period() {
        let short = parse_prior_spec("kipping2013short").unwrap();
        assert_eq!(short.shape, EccentricityShape::Beta { a: 0.697, b: 3.27 });
        let long = parse_prior_spec("kipping2013long").unwrap();
        assert_eq!(long.shape, EccentricityShape::Beta { a: 1.12, b: 3.09 });
        let auto = parse_prior_spec("kipping2013auto:0..0.9").unwrap();
        assert!(auto.validate().is_err());
        assert_eq!(auto.for_period(23.7).shape, short.shape);
        assert_eq!(auto.for_period(1200.0).shape, long.shape);
        assert_eq!(auto.for_period(23.7).e_max, 0.9);
        assert_eq!(short.for_period(1200.0), short);
    }

    #[test]
    fn bad_specs_say_what_is_wrong() {
        let cases = [
            ("gamma(2)", "unknown shape `gamma`"),
            ("beta(1)", "takes 2 argument(s), 1 given"),
            ("uniform:0.5", "must read E_MIN..E_MAX"),
            ("uniform:0..1.5", "exceeds 1"),
            ("loguniform", "positive lower bound"),
            ("rayleigh(x)", "`x` is not a number"),
        ];
        for (spec, expected) in cases {
            let message = parse_prior_spec(spec).unwrap_err().to_string();
            assert!(message.contains(expected), "{spec}: {message}");
            assert!(!message.contains('\n'));
        }
    }
}
