//! The posterior density of a Keplerian radial-velocity model: Gaussian likelihood with jitter,
//! eccentricity prior in the (√e cos ω, √e sin ω) plane, scalar priors on the rest.
//!
//! # Parameters
//!
//! Per companion, in order: period P [d], semi-amplitude K [m/s], h = √e cos ω, k = √e sin ω
//! (absent under a circular prior), mean longitude λ = M₀ + ω at the reference epoch t_ref [rad];
//! then one offset γ per instrument [m/s]; then the linear trend [m/s/d] (optional); then one
//! jitter s per instrument [m/s] (optional). The first part is exactly the layout of
//! [`crate::fit::RvProblem`] in √e coordinates, whose model evaluation is reused.
//!
//! # Priors
//!
//! Every parameter is sampled directly (P, not ln P; K, not ln K), so each scalar prior is the
//! density of the sampled parameter itself and needs no Jacobian. The eccentricity prior p(e) is
//! turned into a density in the (h, k) plane by
//! [`crate::priors::EccentricityPrior::log_density_sqrt_e_plane`], p(h, k) = p(e)/π, so that the
//! implied marginal prior on e is exactly p(e) with ω uniform (Eastman, Gaudi & Agol 2013,
//! PASP 125, 83). λ is uniform over one full turn centred on the starting value, which is the
//! uniform prior on the circle without a seam next to the likelihood peak.

use std::cell::{Cell, RefCell};

use serde::{Deserialize, Serialize};

use crate::fit::{EccentricityCoordinates, FitData, ParameterLayout, RvProblem, MAX_ECCENTRICITY};
use crate::kepler::TWO_PI;
use crate::priors::{
    EccentricityPrior, EccentricityPriorSettings, OrbitPriorSettings, OrbitPriors,
    PreparedScalarPrior, ScalarPrior,
};
use crate::sampler::LogDensity;

use super::PosteriorError;

const LN_TWO_PI: f64 = 1.837_877_066_409_345_5;

/// What is sampled and under which priors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PosteriorSettings {
    /// Priors on P, K, jitter, γ and e (every bound explicit; see [`OrbitPriorSettings`]).
    pub priors: OrbitPriorSettings,
    /// Prior on the linear trend [m/s/d], used when `trend` is set.
    pub trend_prior: ScalarPrior,
    /// Sample one jitter per instrument (added in quadrature to the uncertainties).
    pub jitter: bool,
    /// Sample a linear trend about t_ref.
    pub trend: bool,
    /// Number of Keplerian companions; the eccentricity prior applies to each.
    pub n_companions: usize,
}

impl Default for PosteriorSettings {
    /// The defaults of [`OrbitPriorSettings`], trend uniform on ±10 m/s/d (stated choice: a
    /// secular drift of 10 m/s per day is far beyond any bound companion worth fitting with a
    /// trend), jitter sampled, no trend, one companion.
    fn default() -> Self {
        Self {
            priors: OrbitPriorSettings::default(),
            trend_prior: ScalarPrior::Uniform {
                min: -10.0,
                max: 10.0,
            },
            jitter: true,
            trend: false,
            n_companions: 1,
        }
    }
}

impl PosteriorSettings {
    /// The same settings with another eccentricity prior.
    pub fn with_eccentricity(&self, eccentricity: EccentricityPriorSettings) -> Self {
        let mut out = *self;
        out.priors.eccentricity = eccentricity;
        out
    }

    /// The eccentricity prior as it acts in the model: `e_max` is lowered to
    /// [`MAX_ECCENTRICITY`] (the model's domain) when it lies above, so that the prior density
    /// used for comparisons is the one actually sampled.
    pub fn effective_eccentricity(&self) -> EccentricityPriorSettings {
        let mut e = self.priors.eccentricity;
        if e.e_max > MAX_ECCENTRICITY && e.shape != crate::priors::EccentricityShape::Circular {
            e.e_max = MAX_ECCENTRICITY;
        }
        e
    }

    /// The parameter layout of the orbital part (companions, offsets, trend).
    pub fn layout(&self, n_instruments: usize) -> ParameterLayout {
        let mut layout = ParameterLayout::new(self.n_companions, n_instruments, self.trend);
        let circular = self.priors.eccentricity.shape == crate::priors::EccentricityShape::Circular;
        for c in layout.circular.iter_mut() {
            *c = circular;
        }
        layout
    }

    /// Names of the sampled parameters, in order.
    pub fn parameter_names(&self, instrument_names: &[String]) -> Vec<String> {
        let layout = self.layout(instrument_names.len());
        let mut names = Vec::new();
        for c in 0..layout.n_companions() {
            let tag = if layout.n_companions() > 1 {
                format!("_{}", c + 1)
            } else {
                String::new()
            };
            names.push(format!("period{tag}"));
            names.push(format!("semi_amplitude{tag}"));
            if !layout.circular[c] {
                names.push(format!("sqrt_e_cos_omega{tag}"));
                names.push(format!("sqrt_e_sin_omega{tag}"));
            }
            names.push(format!("mean_longitude{tag}"));
        }
        for name in instrument_names {
            names.push(format!("offset_{name}"));
        }
        if self.trend {
            names.push("trend".into());
        }
        if self.jitter {
            for name in instrument_names {
                names.push(format!("jitter_{name}"));
            }
        }
        names
    }
}

/// The scalar priors of [`RvPosterior`] with their constants computed once.
#[derive(Debug, Clone, Copy)]
struct PreparedPriors {
    period: PreparedScalarPrior,
    semi_amplitude: PreparedScalarPrior,
    offset: PreparedScalarPrior,
    jitter: PreparedScalarPrior,
    trend: PreparedScalarPrior,
    /// ln 2π, the normaliser of λ's uniform prior over one turn.
    ln_turn: f64,
}

/// The posterior target: log p(θ | D) up to the evidence, as a [`LogDensity`].
///
/// The log-likelihood is Gaussian with variance σᵢ² + s²(instrument of i) per point, including
/// the normalisation: ln L = −½ Σᵢ [ rᵢ²/(σᵢ² + s²) + ln(2π(σᵢ² + s²)) ] (common practice, e.g.
/// Gregory 2005, ApJ 631, 1198, eq. for the jitter-augmented likelihood, from memory). Evaluation
/// allocates nothing: the model velocities go to a scratch buffer owned by the target.
#[derive(Debug)]
pub struct RvPosterior<'a> {
    problem: RvProblem<'a>,
    priors: OrbitPriors,
    prepared: PreparedPriors,
    jitter: bool,
    n_orbit_params: usize,
    lambda_centres: Vec<f64>,
    variances: Vec<f64>,
    /// 1/σᵢ², for the χ² without jitter (a product per point instead of a division).
    inverse_variances: Vec<f64>,
    fixed_normalisation: f64,
    scratch: RefCell<Vec<f64>>,
    evaluations: Cell<u64>,
}

impl<'a> RvPosterior<'a> {
    /// Builds the target. `lambda_centres[c]` is the centre of companion c's mean-longitude
    /// window (one full turn), normally the starting value.
    pub fn new(
        data: &'a FitData,
        settings: &PosteriorSettings,
        lambda_centres: &[f64],
    ) -> Result<Self, PosteriorError> {
        if settings.n_companions == 0 {
            return Err(PosteriorError::NoCompanion);
        }
        if lambda_centres.len() != settings.n_companions
            || lambda_centres.iter().any(|l| !l.is_finite())
        {
            return Err(PosteriorError::StartLength {
                expected: settings.n_companions,
                got: lambda_centres.len(),
            });
        }
        let mut checked = *settings;
        checked.priors.eccentricity = settings.effective_eccentricity();
        let priors = checked.priors.validate()?;
        settings.trend_prior.validate("trend")?;
        let layout = settings.layout(data.n_instruments());
        let n_orbit_params = layout.n_params();
        let problem = RvProblem::new(data, layout, EccentricityCoordinates::SqrtE);
        let variances: Vec<f64> = data.uncertainties().iter().map(|s| s * s).collect();
        let fixed_normalisation = -0.5
            * variances
                .iter()
                .map(|v| LN_TWO_PI + libm::log(*v))
                .sum::<f64>();
        let prepared = PreparedPriors {
            period: priors.period.prepared(),
            semi_amplitude: priors.semi_amplitude.prepared(),
            offset: priors.offset.prepared(),
            jitter: priors.jitter.prepared(),
            trend: settings.trend_prior.prepared(),
            ln_turn: libm::log(TWO_PI),
        };
        Ok(Self {
            problem,
            priors,
            prepared,
            jitter: settings.jitter,
            n_orbit_params,
            lambda_centres: lambda_centres.to_vec(),
            inverse_variances: variances.iter().map(|v| 1.0 / v).collect(),
            variances,
            fixed_normalisation,
            scratch: RefCell::new(vec![0.0; data.n_points()]),
            evaluations: Cell::new(0),
        })
    }

    /// The checked priors (eccentricity prior as effectively used).
    pub fn priors(&self) -> &OrbitPriors {
        &self.priors
    }

    /// The eccentricity prior as effectively used.
    pub fn eccentricity_prior(&self) -> &EccentricityPrior {
        &self.priors.eccentricity
    }

    /// The orbital parameter layout.
    pub fn layout(&self) -> &ParameterLayout {
        self.problem.layout()
    }

    /// Index of the first jitter, when sampled.
    pub fn jitter_start(&self) -> Option<usize> {
        self.jitter.then_some(self.n_orbit_params)
    }

    /// Log-density evaluations so far.
    pub fn evaluations(&self) -> u64 {
        self.evaluations.get()
    }

    /// The log-prior: sum of the independent priors (−∞ outside any support).
    pub fn log_prior(&self, x: &[f64]) -> f64 {
        let layout = self.problem.layout();
        let prepared = &self.prepared;
        let mut lp = 0.0;
        for c in 0..layout.n_companions() {
            let start = layout.companion_start(c);
            lp += prepared.period.log_density(x[start]);
            lp += prepared.semi_amplitude.log_density(x[start + 1]);
            if !layout.circular[c] {
                lp += self
                    .priors
                    .eccentricity
                    .log_density_sqrt_e_plane(x[start + 2], x[start + 3]);
            }
            let lambda = x[layout.lambda_index(c)];
            let within = (lambda - self.lambda_centres[c]).abs() <= core::f64::consts::PI;
            if !within {
                return f64::NEG_INFINITY;
            }
            lp -= prepared.ln_turn;
        }
        let offsets = layout.offsets_start();
        for j in 0..layout.n_instruments {
            lp += prepared.offset.log_density(x[offsets + j]);
        }
        if let Some(t) = layout.trend_index() {
            lp += prepared.trend.log_density(x[t]);
        }
        if self.jitter {
            for j in 0..layout.n_instruments {
                lp += prepared.jitter.log_density(x[self.n_orbit_params + j]);
            }
        }
        lp
    }

    /// The log-likelihood (normalised Gaussian, see the type's notes); −∞ outside the model's
    /// domain.
    pub fn log_likelihood(&self, x: &[f64]) -> f64 {
        let mut model = self.scratch.borrow_mut();
        // A non-finite model velocity makes the sum below non-finite (the data are finite),
        // which is caught at the end instead of by a separate pass.
        if !self.problem.model_velocities_unchecked(x, &mut model) {
            return f64::NEG_INFINITY;
        }
        let data = self.problem.data();
        if self.jitter {
            let jitters = &x[self.n_orbit_params..];
            let mut sum = 0.0;
            for (((m, v), var), &inst) in model
                .iter()
                .zip(data.velocities())
                .zip(&self.variances)
                .zip(data.instruments())
            {
                let s = jitters[inst];
                let total = var + s * s;
                let r = v - m;
                sum += r * r / total + libm::log(total);
            }
            if !sum.is_finite() {
                return f64::NEG_INFINITY;
            }
            -0.5 * (sum + LN_TWO_PI * model.len() as f64)
        } else {
            let mut chi2 = 0.0;
            for ((m, v), w) in model
                .iter()
                .zip(data.velocities())
                .zip(&self.inverse_variances)
            {
                let r = v - m;
                chi2 += r * r * w;
            }
            if !chi2.is_finite() {
                return f64::NEG_INFINITY;
            }
            self.fixed_normalisation - 0.5 * chi2
        }
    }
}

impl LogDensity for RvPosterior<'_> {
    fn dim(&self) -> usize {
        self.n_orbit_params
            + if self.jitter {
                self.problem.layout().n_instruments
            } else {
                0
            }
    }

    fn log_density(&self, x: &[f64]) -> f64 {
        self.evaluations.set(self.evaluations.get() + 1);
        let lp = self.log_prior(x);
        if lp == f64::NEG_INFINITY || lp.is_nan() {
            return f64::NEG_INFINITY;
        }
        lp + self.log_likelihood(x)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::RvModel;
    use crate::orbit::OrbitalElements;
    use approx::assert_relative_eq;

    fn data() -> FitData {
        let times: Vec<f64> = (0..30)
            .map(|i| 2_459_000.0 + 6.1 * i as f64 + 1.7 * libm::sin(0.9 * i as f64))
            .collect();
        let velocities: Vec<f64> = (0..30).map(|i| 20.0 * libm::cos(0.5 * i as f64)).collect();
        let errors: Vec<f64> = (0..30).map(|i| 1.5 + 0.2 * (i % 4) as f64).collect();
        let instruments: Vec<usize> = (0..30).map(|i| i % 2).collect();
        FitData::new(
            &times,
            &velocities,
            &errors,
            &instruments,
            &["a".into(), "b".into()],
        )
    }

    #[test]
    fn likelihood_matches_a_direct_sum_over_an_independent_model() {
        // Independent path: crate::model::RvModel with T_p = t_ref − M₀P/2π, and the Gaussian
        // log-likelihood summed term by term (common practice). Tolerance: the model paths agree
        // to ~1e-7 m/s (see fit::problem tests), i.e. ~1e-7 in ln L for residuals ~30σ.
        let data = data();
        let settings = PosteriorSettings {
            trend: true,
            ..PosteriorSettings::default()
        };
        let (p, k, e, w, lambda) = (17.3, 25.0, 0.3, 1.1, 0.4);
        let x = [
            p,
            k,
            libm::sqrt(e) * libm::cos(w),
            libm::sqrt(e) * libm::sin(w),
            lambda,
            3.0,
            -4.0,
            0.01,
            2.0,
            0.5,
        ];
        let target = RvPosterior::new(&data, &settings, &[0.0]).unwrap();
        assert_eq!(target.dim(), 10);
        let t_ref = data.reference_time();
        let elements =
            OrbitalElements::from_mean_anomaly_at_epoch(p, k, e, w, lambda - w, t_ref).unwrap();
        let model = RvModel::new(vec![elements], vec![3.0, -4.0], 0.01, t_ref).unwrap();
        let mut v = vec![0.0; 30];
        model
            .velocities(data.times(), data.instruments(), &mut v)
            .unwrap();
        let jit: [f64; 2] = [2.0, 0.5];
        let expected: f64 = (0..30)
            .map(|i| {
                let var = data.uncertainties()[i].powi(2) + jit[data.instruments()[i]].powi(2);
                let r = data.velocities()[i] - v[i];
                -0.5 * (r * r / var + libm::log(2.0 * std::f64::consts::PI * var))
            })
            .sum();
        assert_relative_eq!(target.log_likelihood(&x), expected, epsilon = 1e-6);
        // Without jitter the fixed normalisation path gives the same as jitter = 0.
        let no_jitter = PosteriorSettings {
            jitter: false,
            ..settings
        };
        let t2 = RvPosterior::new(&data, &no_jitter, &[0.0]).unwrap();
        let mut x0 = x.to_vec();
        x0[8] = 0.0;
        x0[9] = 0.0;
        assert_relative_eq!(
            t2.log_likelihood(&x[..8]),
            target.log_likelihood(&x0),
            epsilon = 1e-9
        );
    }

    #[test]
    fn prior_is_the_sum_of_the_named_densities() {
        // Each term is the documented density of the sampled parameter (no Jacobians; module
        // notes) plus ln p(e) − ln π in the (h, k) plane (Eastman et al. 2013, PASP 125, 83).
        let data = data();
        let settings = PosteriorSettings::default();
        let target = RvPosterior::new(&data, &settings, &[0.3]).unwrap();
        let x = [17.3, 25.0, 0.3, -0.2, 0.4, 3.0, -4.0, 2.0, 0.5];
        let pr = target.priors();
        let expected = pr.period.log_density(17.3)
            + pr.semi_amplitude.log_density(25.0)
            + pr.eccentricity.log_density(0.13)
            - libm::log(std::f64::consts::PI)
            - libm::log(2.0 * std::f64::consts::PI)
            + pr.offset.log_density(3.0)
            + pr.offset.log_density(-4.0)
            + pr.jitter.log_density(2.0)
            + pr.jitter.log_density(0.5);
        assert_relative_eq!(target.log_prior(&x), expected, epsilon = 1e-12);
        // Outside: K < 0, jitter < 0, λ more than π from the centre, e above the model's domain.
        for (i, bad) in [(1, -1.0), (7, -0.1), (4, 0.3 + 3.2), (2, 0.999)] {
            let mut y = x;
            y[i] = bad;
            assert_eq!(target.log_density(&y), f64::NEG_INFINITY, "index {i}");
        }
        assert_eq!(target.evaluations(), 4);
    }

    #[test]
    fn circular_prior_drops_the_eccentricity_coordinates() {
        let data = data();
        let settings = PosteriorSettings::default().with_eccentricity(EccentricityPriorSettings {
            shape: crate::priors::EccentricityShape::Circular,
            e_min: 0.0,
            e_max: 1.0,
        });
        let target = RvPosterior::new(&data, &settings, &[0.0]).unwrap();
        assert_eq!(target.dim(), 3 + 2 + 2);
        assert_eq!(
            settings.parameter_names(data.instrument_names())[2],
            "mean_longitude"
        );
        assert!(target
            .log_density(&[17.3, 25.0, 0.4, 3.0, -4.0, 2.0, 0.5])
            .is_finite());
    }

    #[test]
    fn e_max_above_the_model_domain_is_lowered() {
        let s = PosteriorSettings::default();
        assert_eq!(s.effective_eccentricity().e_max, MAX_ECCENTRICITY);
    }
}
