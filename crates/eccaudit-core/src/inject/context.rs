//! What the statement must know about the model behind an audit of one companion: which
//! companion of how many, the trend, the instruments' offsets and jitters (and how the jitters
//! were decided and estimated), the χ² test of the adopted fit, the false-alarm probability of
//! the peak that found the companion, and what the simulations hold fixed.

use serde::Serialize;

use crate::fit::{Goodness, JitterMethod};
use crate::spec::{Detection, JitterMode, ModelFit};

/// Another companion of the model, held at its fitted orbit in every simulation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OtherCompanion {
    /// 1-based companion number (the fit's order).
    pub number: usize,
    /// Fitted period [d].
    pub period: f64,
    /// Fitted semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Fitted eccentricity (0 when held circular).
    pub eccentricity: f64,
}

/// One instrument's fitted offset and jitter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InstrumentNoise {
    /// Name from the table.
    pub name: String,
    /// Epochs.
    pub n_points: usize,
    /// Fitted offset γ [m/s].
    pub offset: f64,
    /// Fitted jitter [m/s] (None when no jitter was fitted).
    pub jitter: Option<f64>,
}

/// The model context of one audited companion: the statement's input beside the calibration.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AuditContext {
    /// The audited companion, 1-based (the fit's order).
    pub companion: usize,
    /// Companions in the model.
    pub n_companions: usize,
    /// The other companions (held at their fitted orbits in the simulations).
    pub others: Vec<OtherCompanion>,
    /// Fitted linear trend [m/s/d], when the model has one.
    pub trend: Option<f64>,
    /// Offsets and jitters per instrument.
    pub instruments: Vec<InstrumentNoise>,
    /// The jitter mode asked for.
    pub jitter_mode: JitterMode,
    /// True when jitters were fitted (and so simulated and refitted in every trial).
    pub jitter_fitted: bool,
    /// Their estimator, when fitted.
    pub jitter_method: Option<JitterMethod>,
    /// The jitter decision in words.
    pub jitter_reason: String,
    /// The χ² test of the jitter-free fit, when one was made (modes auto and off).
    pub jitter_free_goodness: Option<Goodness>,
    /// The χ² test of the adopted fit (the one simulated).
    pub goodness: Goodness,
    /// "uncertainties look underestimated (χ² p = …)" when the jitter-free fit fails the χ²
    /// test and no jitter was fitted (mode off); None otherwise.
    pub scatter_warning: Option<String>,
    /// How this companion was found (peak false-alarm probability and the limit).
    pub detection: Detection,
    /// Lines that must open the output (excess scatter, marginal detections), for the whole
    /// model.
    pub notes: Vec<String>,
    /// What the simulations hold fixed, each in words.
    pub held_fixed: Vec<String>,
    /// How each simulation is refitted, in words.
    pub refit: String,
}

impl AuditContext {
    /// The context of companion `audited` (0-based) of `fit`; `period_search` tells whether
    /// each simulation searches the periodogram instead of starting at the known periods.
    pub fn new(fit: &ModelFit, audited: usize, period_search: bool) -> Self {
        let solution = &fit.report.eccentric;
        let n_companions = solution.companions.len();
        let others = solution
            .companions
            .iter()
            .enumerate()
            .filter(|(i, _)| *i != audited)
            .map(|(i, c)| OtherCompanion {
                number: i + 1,
                period: c.period.value,
                semi_amplitude: c.semi_amplitude.value,
                eccentricity: c.eccentricity.value,
            })
            .collect::<Vec<_>>();
        let instruments = solution
            .instruments
            .iter()
            .map(|i| InstrumentNoise {
                name: i.name.clone(),
                n_points: i.n_points,
                offset: i.offset.value,
                jitter: i.jitter,
            })
            .collect::<Vec<_>>();
        let trend = solution.trend.map(|t| t.value);
        let scatter_warning = match (&fit.jitter.jitter_free, fit.jitter.fitted) {
            (Some(test), false) if test.excess_scatter() => Some(format!(
                "uncertainties look underestimated (chi2 p = {})",
                test.p_value
                    .map_or_else(|| "-".into(), |p| format!("{p:.2e}"))
            )),
            _ => None,
        };
        let mut held_fixed = Vec::new();
        if !others.is_empty() {
            let list: Vec<String> = others
                .iter()
                .map(|o| format!("companion {} (P = {:.4} d)", o.number, o.period))
                .collect();
            held_fixed.push(format!(
                "the other companions at their fitted orbits: {}",
                list.join(", ")
            ));
        }
        if trend.is_some() {
            held_fixed.push("the linear trend at its fitted value".into());
        }
        held_fixed.push("the instrument offsets at their fitted values".into());
        if fit.jitter.fitted {
            held_fixed.push(
                "the noise: stated uncertainties with each instrument's fitted jitter in \
                 quadrature"
                    .into(),
            );
        } else {
            held_fixed.push("the noise: the stated uncertainties".into());
        }
        if !period_search {
            held_fixed.push(
                "the starting periods of each refit (the injected and fitted periods; the \
                 periods are still fitted)"
                    .into(),
            );
        }
        let mut parts = vec![format!("{n_companions} companion(s)")];
        if trend.is_some() {
            parts.push("a linear trend".into());
        }
        parts.push("one offset per instrument".into());
        if let Some(method) = fit.jitter.method.filter(|_| fit.jitter.fitted) {
            parts.push(format!("one jitter per instrument ({})", method.label()));
        }
        let refit = format!(
            "each simulation is refitted with the model fitted to the data: {}; {}",
            parts.join(", "),
            if period_search {
                "periods found by a periodogram search in each simulation"
            } else {
                "starting at the known periods"
            }
        );
        let detection = fit.detections.get(audited).copied().unwrap_or(Detection {
            companion: audited + 1,
            period_given: true,
            peak_period: solution.companions[audited].period.value,
            false_alarm_probability: None,
            fap_limit: fit.detections.first().map_or(1.0, |d| d.fap_limit),
            marginal: false,
        });
        AuditContext {
            companion: audited + 1,
            n_companions,
            others,
            trend,
            instruments,
            jitter_mode: fit.jitter.mode,
            jitter_fitted: fit.jitter.fitted,
            jitter_method: fit.jitter.method,
            jitter_reason: fit.jitter.reason.clone(),
            jitter_free_goodness: fit.jitter.jitter_free,
            goodness: fit.goodness,
            scatter_warning,
            detection,
            notes: fit.notes.clone(),
            held_fixed,
            refit,
        }
    }
}
