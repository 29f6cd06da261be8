//! The model a user asks for — companions, trend, offsets, jitter, period range, false-alarm
//! limit, which companion to audit — as one specification shared by `fit`, `priors`, `inject`,
//! `audit`, the page and the replay file; validated once here ([`ModelSpec::validate`]) and
//! fitted by [`fit_model`], which applies the jitter mode and records what the statement must
//! say (goodness of fit, false-alarm probabilities of the detections).

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::fit::{fit_orbit, FitData, FitError, FitOptions, FitReport, Goodness, JitterMethod};
use crate::periodogram::FrequencyLimits;

/// Most companions a model may have ([`crate::limits::MAX_COMPANIONS`]).
pub const MAX_COMPANIONS: usize = crate::limits::MAX_COMPANIONS as usize;

/// Whether instrument jitters are fitted (and simulated).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum JitterMode {
    /// Fit a jitter per instrument only when the jitter-free fit fails the χ² test
    /// (p < [`crate::fit::EXCESS_SCATTER_P`]).
    #[default]
    Auto,
    /// Always fit a jitter per instrument.
    Fit,
    /// Never fit one: the stated uncertainties are taken as they are (a failed χ² test is
    /// reported, never acted on).
    Off,
}

impl JitterMode {
    /// The spelling on the command line and in the replay file.
    pub fn as_str(self) -> &'static str {
        match self {
            JitterMode::Auto => "auto",
            JitterMode::Fit => "fit",
            JitterMode::Off => "off",
        }
    }
}

impl fmt::Display for JitterMode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for JitterMode {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "auto" => Ok(JitterMode::Auto),
            "fit" => Ok(JitterMode::Fit),
            "off" => Ok(JitterMode::Off),
            other => Err(format!("jitter mode `{other}`: one of auto, fit, off")),
        }
    }
}

/// The model as asked for (the raw form: what the command line, the page and the replay file
/// hold). Absent fields take [`ModelSpec::DEFAULT`]; check it with [`ModelSpec::validate`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ModelSpec {
    /// Keplerian companions, 1 to [`MAX_COMPANIONS`].
    pub companions: usize,
    /// Given periods [d] of the first companions, in order (the others are found by the
    /// periodogram of the residuals). At most one per companion.
    pub periods: Vec<f64>,
    /// Fit a linear trend [m/s/d]. (A quadratic term is not offered.)
    pub trend: bool,
    /// Instrument jitters: auto, fit or off. One offset per instrument is always fitted.
    pub jitter: JitterMode,
    /// Shortest period searched [d].
    pub min_period: f64,
    /// Longest period searched [d]; None = the time span of the data.
    pub max_period: Option<f64>,
    /// False-alarm probability above which a detection is called marginal. Marginal
    /// detections are fitted and audited all the same; the output says so first.
    pub max_fap: f64,
    /// The companion to audit (1-based); None = every companion, each with its own statement.
    pub audit_companion: Option<usize>,
}

impl ModelSpec {
    /// The defaults: one companion found by the periodogram between 1 d and the time span, no
    /// trend, jitter auto, false-alarm limit 1%, every companion audited.
    pub const DEFAULT: ModelSpec = ModelSpec {
        companions: 1,
        periods: Vec::new(),
        trend: false,
        jitter: JitterMode::Auto,
        min_period: 1.0,
        max_period: None,
        max_fap: 0.01,
        audit_companion: None,
    };

    /// Checks every field; the first problem is returned, naming the field and what it
    /// must be.
    pub fn validate(&self) -> Result<Model, ModelSpecError> {
        let bad = |field: &'static str, value: String, reason: String| {
            Err(ModelSpecError::Field {
                field,
                value,
                reason,
            })
        };
        if !(1..=MAX_COMPANIONS).contains(&self.companions) {
            return bad(
                "companions",
                self.companions.to_string(),
                format!("1 to {MAX_COMPANIONS}"),
            );
        }
        if self.periods.len() > self.companions {
            return bad(
                "periods",
                format!("{} given", self.periods.len()),
                format!("at most one per companion ({})", self.companions),
            );
        }
        if let Some(p) = self.periods.iter().find(|p| !(p.is_finite() && **p > 0.0)) {
            return bad("period", p.to_string(), "a positive number of days".into());
        }
        if !(self.min_period.is_finite() && self.min_period > 0.0) {
            return bad(
                "min_period",
                self.min_period.to_string(),
                "a positive number of days".into(),
            );
        }
        if let Some(max) = self.max_period {
            if !(max.is_finite() && max > self.min_period) {
                return bad(
                    "max_period",
                    max.to_string(),
                    format!("must be above min_period = {}", self.min_period),
                );
            }
        }
        if !(self.max_fap > 0.0 && self.max_fap <= 1.0) {
            return bad("max_fap", self.max_fap.to_string(), "in (0, 1]".into());
        }
        if let Some(c) = self.audit_companion {
            if !(1..=self.companions).contains(&c) {
                return bad(
                    "audit_companion",
                    c.to_string(),
                    format!("1 to {} (the number of companions)", self.companions),
                );
            }
        }
        Ok(Model { spec: self.clone() })
    }
}

impl Default for ModelSpec {
    fn default() -> Self {
        Self::DEFAULT
    }
}

/// A bad model specification.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
pub enum ModelSpecError {
    /// A field out of range.
    #[error("{field} = {value}: {reason}")]
    Field {
        /// The field (as spelt in the replay file; the command-line flag is the same with
        /// `-` for `_`).
        field: &'static str,
        /// The value given.
        value: String,
        /// What it must be.
        reason: String,
    },
}

/// A checked [`ModelSpec`]: only [`ModelSpec::validate`] makes one.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    spec: ModelSpec,
}

impl Model {
    /// The specification.
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// Companions.
    pub fn companions(&self) -> usize {
        self.spec.companions
    }

    /// The 0-based companions to audit, in order.
    pub fn audited(&self) -> Vec<usize> {
        match self.spec.audit_companion {
            Some(c) => vec![c - 1],
            None => (0..self.spec.companions).collect(),
        }
    }

    /// The period search range.
    pub fn limits(&self) -> FrequencyLimits {
        match self.spec.max_period {
            Some(max_period) => FrequencyLimits::PeriodRange {
                min_period: self.spec.min_period,
                max_period,
            },
            None => FrequencyLimits::MaxFrequency(1.0 / self.spec.min_period),
        }
    }

    /// The least-squares options of this model, with or without jitters. The false-alarm
    /// limit does not stop the fit (marginal detections are fitted and flagged by
    /// [`fit_model`]); `base` supplies everything the model does not decide (starts, seed,
    /// stellar mass, solver settings).
    pub fn fit_options(&self, jitter: bool, base: &FitOptions) -> FitOptions {
        FitOptions {
            n_companions: self.spec.companions,
            trend: self.spec.trend,
            limits: self.limits(),
            initial_periods: self.spec.periods.clone(),
            max_false_alarm_probability: 1.0,
            jitter,
            jitter_method: JitterMethod::ModifiedLikelihood,
            ..base.clone()
        }
    }
}

/// How a companion was found.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Detection {
    /// 1-based companion number.
    pub companion: usize,
    /// True when its period was given (no false-alarm probability then).
    pub period_given: bool,
    /// The period of the periodogram peak that found it [d] (or the given period).
    pub peak_period: f64,
    /// Baluev (2008) false-alarm probability of that peak (None when the period was given).
    pub false_alarm_probability: Option<f64>,
    /// The limit in force ([`ModelSpec::max_fap`]).
    pub fap_limit: f64,
    /// True when the false-alarm probability is above the limit.
    pub marginal: bool,
}

/// What the jitter mode decided and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JitterDecision {
    /// The mode asked for.
    pub mode: JitterMode,
    /// True when jitters were fitted (and so are simulated and fitted in every trial).
    pub fitted: bool,
    /// The estimator of the jitters, when fitted.
    pub method: Option<JitterMethod>,
    /// The χ² test of the jitter-free fit (eccentric solution), when one was made (modes auto
    /// and off).
    pub jitter_free: Option<Goodness>,
    /// The reason in words.
    pub reason: String,
}

/// The fit of a [`Model`] to a data set, with everything a report must say first.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelFit {
    /// The least-squares fit adopted (with jitters when the mode decided so); its fields are
    /// serialised at the top level, beside the ones below.
    #[serde(flatten)]
    pub report: FitReport,
    /// The χ² test of the adopted solution.
    pub goodness: Goodness,
    /// What the jitter mode decided.
    pub jitter: JitterDecision,
    /// One per companion.
    pub detections: Vec<Detection>,
    /// Lines a report must open with: excess scatter, marginal detections (empty when none).
    pub notes: Vec<String>,
}

/// What a report must say about the model beside its own results (the parts of [`ModelFit`]
/// other than the fit report), e.g. for the posterior report of `priors`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelCheck {
    /// The χ² test of the adopted least-squares solution.
    pub goodness: Goodness,
    /// What the jitter mode decided.
    pub jitter: JitterDecision,
    /// One per companion.
    pub detections: Vec<Detection>,
    /// Lines a report must open with.
    pub notes: Vec<String>,
}

impl ModelFit {
    /// Everything but the fit report.
    pub fn check(&self) -> ModelCheck {
        ModelCheck {
            goodness: self.goodness,
            jitter: self.jitter.clone(),
            detections: self.detections.clone(),
            notes: self.notes.clone(),
        }
    }
}

impl fmt::Display for ModelCheck {
    /// The notes, then one line with the χ² test and one with the jitter decision.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for note in &self.notes {
            writeln!(f, "NOTE: {note}")?;
        }
        writeln!(
            f,
            "Least-squares chi2 = {:.2} for {} degrees of freedom, p = {}",
            self.goodness.chi_squared,
            self.goodness.dof,
            fmt_p(self.goodness.p_value)
        )?;
        writeln!(f, "Jitter: {}", self.jitter.reason)
    }
}

fn fmt_p(p: Option<f64>) -> String {
    match p {
        Some(p) if p >= 1e-3 => format!("{p:.3}"),
        Some(p) => format!("{p:.2e}"),
        None => "-".into(),
    }
}

/// Fits `model` to `data`: the least-squares fit of [`fit_orbit`] with the model's options
/// (`base` supplies the rest), first without jitters unless the mode is `fit`; in mode `auto`
/// a fit failing the χ² test (p < [`crate::fit::EXCESS_SCATTER_P`], eccentric solution) is
/// redone with one jitter per instrument (Baluev 2009 modified likelihood). Peaks above the
/// false-alarm limit are fitted and reported as marginal in `notes`.
pub fn fit_model(data: &FitData, model: &Model, base: &FitOptions) -> Result<ModelFit, FitError> {
    let spec = model.spec();
    let method = JitterMethod::ModifiedLikelihood;
    let (report, jitter) = match spec.jitter {
        JitterMode::Fit => (
            fit_orbit(data, &model.fit_options(true, base))?,
            JitterDecision {
                mode: spec.jitter,
                fitted: true,
                method: Some(method),
                jitter_free: None,
                reason: "jitter fit (asked for)".into(),
            },
        ),
        JitterMode::Off | JitterMode::Auto => {
            let first = fit_orbit(data, &model.fit_options(false, base))?;
            let test = Goodness::new(first.eccentric.chi_squared, first.eccentric.dof);
            let p = fmt_p(test.p_value);
            if spec.jitter == JitterMode::Auto && test.excess_scatter() {
                let second = fit_orbit(data, &model.fit_options(true, base))?;
                (
                    second,
                    JitterDecision {
                        mode: spec.jitter,
                        fitted: true,
                        method: Some(method),
                        jitter_free: Some(test),
                        reason: format!(
                            "jitter auto: the jitter-free fit fails the chi2 test (chi2 = {:.1} \
                             for {} degrees of freedom, p = {p} < {}), so one jitter per \
                             instrument is fitted and simulated",
                            test.chi_squared,
                            test.dof,
                            crate::fit::EXCESS_SCATTER_P
                        ),
                    },
                )
            } else {
                let reason = match (spec.jitter, test.excess_scatter()) {
                    (JitterMode::Off, true) => format!(
                        "jitter off (asked for), although the uncertainties look underestimated \
                         (chi2 = {:.1} for {} degrees of freedom, p = {p})",
                        test.chi_squared, test.dof
                    ),
                    (JitterMode::Off, false) => format!("jitter off (asked for); chi2 p = {p}"),
                    _ => format!(
                        "jitter auto: none fitted, the jitter-free fit passes the chi2 test \
                         (p = {p})"
                    ),
                };
                (
                    first,
                    JitterDecision {
                        mode: spec.jitter,
                        fitted: false,
                        method: None,
                        jitter_free: Some(test),
                        reason,
                    },
                )
            }
        }
    };
    let adopted = report.adopted_solution();
    let goodness = Goodness::new(adopted.chi_squared, adopted.dof);
    let mut notes = Vec::new();
    if let Some(test) = jitter.jitter_free.filter(|t| t.excess_scatter()) {
        let p = fmt_p(test.p_value);
        notes.push(if jitter.fitted {
            format!(
                "excess scatter: without jitter chi2 = {:.1} for {} degrees of freedom (p = {p}); \
                 a jitter per instrument was fitted (--jitter auto; Baluev 2009 modified \
                 likelihood)",
                test.chi_squared, test.dof
            )
        } else {
            format!(
                "excess scatter: chi2 = {:.1} for {} degrees of freedom (p = {p}) with no jitter \
                 fitted: the stated uncertainties look underestimated; --jitter auto or fit \
                 fits one",
                test.chi_squared, test.dof
            )
        });
    }
    if jitter.fitted && goodness.excess_scatter() {
        notes.push(format!(
            "poor fit even with jitter: chi2 = {:.1} for {} degrees of freedom (p = {}); the \
             model may miss a companion or a trend",
            goodness.chi_squared,
            goodness.dof,
            fmt_p(goodness.p_value)
        ));
    }
    let detections: Vec<Detection> = report
        .period_search
        .iter()
        .map(|s| {
            let fap = s.false_alarm_probability.filter(|_| !s.given);
            Detection {
                companion: s.companion,
                period_given: s.given,
                peak_period: s
                    .best_period
                    .or_else(|| s.candidate_periods.first().copied())
                    .unwrap_or(f64::NAN),
                false_alarm_probability: fap,
                fap_limit: spec.max_fap,
                marginal: fap.is_some_and(|f| f > spec.max_fap),
            }
        })
        .collect();
    for d in detections.iter().filter(|d| d.marginal) {
        notes.push(format!(
            "marginal detection: companion {} comes from the periodogram peak at P = {:.4} d \
             with false-alarm probability {}, above the limit {} (--max-fap); it is fitted \
             all the same",
            d.companion,
            d.peak_period,
            fmt_p(d.false_alarm_probability),
            d.fap_limit
        ));
    }
    Ok(ModelFit {
        report,
        goodness,
        jitter,
        detections,
        notes,
    })
}

impl fmt::Display for ModelFit {
    /// The notes first, then the fit report and the jitter decision.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for note in &self.notes {
            writeln!(f, "NOTE: {note}")?;
        }
        write!(f, "{}", self.report)?;
        writeln!(f, "Jitter: {}", self.jitter.reason)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn validation_names_the_field_and_the_range() {
        let message = |spec: ModelSpec| spec.validate().unwrap_err().to_string();
        assert_eq!(
            message(ModelSpec {
                companions: 4,
                ..ModelSpec::DEFAULT
            }),
            "companions = 4: 1 to 3"
        );
        assert_eq!(
            message(ModelSpec {
                companions: 0,
                ..ModelSpec::DEFAULT
            }),
            "companions = 0: 1 to 3"
        );
        assert_eq!(
            message(ModelSpec {
                periods: vec![3.0, 5.0],
                ..ModelSpec::DEFAULT
            }),
            "periods = 2 given: at most one per companion (1)"
        );
        assert_eq!(
            message(ModelSpec {
                periods: vec![-2.5],
                ..ModelSpec::DEFAULT
            }),
            "period = -2.5: a positive number of days"
        );
        assert_eq!(
            message(ModelSpec {
                max_period: Some(0.5),
                ..ModelSpec::DEFAULT
            }),
            "max_period = 0.5: must be above min_period = 1"
        );
        assert_eq!(
            message(ModelSpec {
                max_fap: 0.0,
                ..ModelSpec::DEFAULT
            }),
            "max_fap = 0: in (0, 1]"
        );
        assert_eq!(
            message(ModelSpec {
                companions: 2,
                audit_companion: Some(3),
                ..ModelSpec::DEFAULT
            }),
            "audit_companion = 3: 1 to 2 (the number of companions)"
        );
        let model = ModelSpec {
            companions: 3,
            audit_companion: Some(2),
            ..ModelSpec::DEFAULT
        }
        .validate()
        .unwrap();
        assert_eq!(model.audited(), vec![1]);
        assert_eq!(
            ModelSpec {
                companions: 2,
                ..ModelSpec::DEFAULT
            }
            .validate()
            .unwrap()
            .audited(),
            vec![0, 1]
        );
        assert_eq!("FIT".parse::<JitterMode>(), Ok(JitterMode::Fit));
        assert!("sometimes".parse::<JitterMode>().is_err());
    }

    #[test]
    fn json_round_trip_with_defaults_and_typos() {
        let spec: ModelSpec =
            serde_json::from_str(r#"{"companions": 2, "jitter": "off"}"#).unwrap();
        assert_eq!(spec.companions, 2);
        assert_eq!(spec.jitter, JitterMode::Off);
        assert_eq!(spec.max_fap, ModelSpec::DEFAULT.max_fap);
        assert!(serde_json::from_str::<ModelSpec>(r#"{"companion": 2}"#).is_err());
    }
}
