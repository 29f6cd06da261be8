//! The posterior density of a Keplerian radial-velocity model: Gaussian likelihood with jitter,
//! eccentricity prior in the (√e cos ω, √e sin ω) plane, scalar priors on the rest.
//!
//! # Parameters
//!
//! Per companion, in order: period P [d], semi-amplitude K [m/s], h = √e cos ω, k = √e sin ω
//! (absent under a circular prior), mean longitude λ = M₀ + ω at the reference epoch t_ref [rad];
//! then one offset γ per instrument [m/s]; then the linear trend [m/s/d] (optional); then one
//! jitter s per instrument [m/s] (optional). The first part is exactly the layout of
//! [`crate::model::ParameterModel`] in √e coordinates, whose model evaluation is used.
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

use crate::fit::{FitData, RvProblem};
use crate::kepler::TWO_PI;
use crate::lsq::LeastSquaresProblem;
use crate::model::{EccentricityCoordinates, ParameterLayout, ParameterModel, MAX_ECCENTRICITY};
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

/// How the parameters that enter the model linearly (one offset γ per instrument and the trend)
/// are treated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LinearParameters {
    /// Sampled like the others, under their priors.
    Sampled,
    /// Integrated out analytically under flat priors (see [`RvPosterior::marginalised`]).
    Marginalised,
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
    data: &'a FitData,
    model: ParameterModel<'a>,
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
    linear: LinearParameters,
    /// Marginalised: the sampled orbital parameters (the companions' block).
    n_sampled_orbit: usize,
    /// Marginalised: the full parameter vector with zero offsets and trend.
    full: RefCell<Vec<f64>>,
    /// Marginalised: Σ ln(prior density) of the offsets and the trend at any inside point
    /// (flat priors: −Σ ln width).
    linear_log_prior: f64,
    /// Marginalised without jitter: −½ ln det(AᵀWA) + (L/2) ln 2π, fixed.
    fixed_linear_term: f64,
    /// Marginalised: per-instrument sums (3 per instrument) and per-point weights.
    linear_scratch: RefCell<(Vec<f64>, Vec<f64>)>,
    /// 1/Σ_{i∈j} σᵢ⁻² per instrument (offsets without jitter).
    inverse_weight_sums: Vec<f64>,
    /// Under the Jeffreys prior: scratch of [`Self::jeffreys_log_density`].
    jeffreys: Option<RefCell<JeffreysScratch>>,
    /// The least-squares problem whose analytic Jacobian gives the Fisher information (built
    /// once; the Jeffreys prior and [`Self::fisher_information`] use it).
    fisher_problem: RvProblem<'a>,
    /// Translations between the separated modes the run starts in (sampled coordinates,
    /// concatenated; see [`Self::set_mode_jumps`]).
    mode_jumps: Vec<f64>,
}

/// Scratch of the Jeffreys prior: the full orbital vector, the Jacobian and F.
#[derive(Debug)]
struct JeffreysScratch {
    full: Vec<f64>,
    jacobian: nalgebra::DMatrix<f64>,
    fisher: Vec<f64>,
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
        let model = ParameterModel::new(
            data.shifted_times(),
            data.instruments(),
            layout.clone(),
            EccentricityCoordinates::SqrtE,
        );
        let fisher_problem = RvProblem::new(data, layout, EccentricityCoordinates::SqrtE);
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
        let full = RefCell::new(vec![0.0; n_orbit_params]);
        let mut weight_sums = vec![0.0; data.n_instruments()];
        for (v, &j) in variances.iter().zip(data.instruments()) {
            weight_sums[j] += 1.0 / v;
        }
        let inverse_weight_sums = weight_sums.iter().map(|s| 1.0 / s).collect();
        Ok(Self {
            data,
            model,
            fisher_problem,
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
            linear: LinearParameters::Sampled,
            n_sampled_orbit: n_orbit_params,
            full,
            linear_log_prior: 0.0,
            fixed_linear_term: 0.0,
            linear_scratch: RefCell::new((
                vec![0.0; 3 * data.n_instruments()],
                vec![0.0; data.n_points()],
            )),
            inverse_weight_sums,
            mode_jumps: Vec::new(),
            jeffreys: (settings.priors.eccentricity.shape
                == crate::priors::EccentricityShape::Jeffreys)
                .then(|| {
                    RefCell::new(JeffreysScratch {
                        full: vec![0.0; n_orbit_params],
                        jacobian: nalgebra::DMatrix::zeros(data.n_points(), n_orbit_params),
                        fisher: vec![0.0; n_orbit_params * n_orbit_params],
                    })
                }),
        })
    }

    /// The Fisher information F = JᵀΣ⁻¹J of the mean model at `full` (the full orbital layout:
    /// companions, offsets, trend; no jitters), p × p row-major, J the analytic Jacobian of
    /// [`RvProblem`] in (P, K, √e cos ω, √e sin ω, λ) per companion and the linear parameters,
    /// Σ = diag(σᵢ²) the table's stated uncertainties (the jitter is not part of it). `None`
    /// outside the model's domain.
    pub fn fisher_information(&self, full: &[f64]) -> Option<Vec<f64>> {
        let p = self.n_orbit_params;
        let mut jacobian = nalgebra::DMatrix::zeros(self.data.n_points(), p);
        let mut fisher = vec![0.0; p * p];
        fisher_into(&self.fisher_problem, &full[..p], &mut jacobian, &mut fisher).then_some(fisher)
    }

    /// ln of the posterior mass of the mode at `full` (full orbital layout, jitters last as in
    /// [`Self::sampled_point`]) by Laplace's method at the least-squares point (Kass & Raftery
    /// 1995, JASA 90, 773, §4.1): ln p(θ̂ | D) + ½ ln det(2π Σ̂) up to the evidence, Σ̂ the
    /// least-squares covariance of the sampled orbital parameters with the offsets and trend
    /// integrated out, i.e. the inverse of the Schur complement S = F_θθ − F_θb F_bb⁻¹ F_bθ of
    /// the Fisher information F ([`Self::fisher_information`]; ln det S = ln det F − ln det
    /// F_bb). Everything is in the sampled (√e cos ω, √e sin ω) coordinates, so the result is the
    /// same as in (e cos ω, e sin ω), where the likelihood is regular at e = 0: the Jacobian
    /// 2e of the density cancels that of the volume. The jitters are held at their values in
    /// `full` (their volume is left out, the same for optima that share them). NaN where F is
    /// singular (e = 0 exactly) or outside the domain.
    pub fn laplace_log_mass(&self, full: &[f64]) -> f64 {
        self.laplace_log_mass_given(full, self.log_density(&self.sampled_point(full)))
    }

    /// [`Self::laplace_log_mass`] at `full` where the log-posterior there, `value` (=
    /// `self.log_density(&self.sampled_point(full))`), is already known.
    pub fn laplace_log_mass_given(&self, full: &[f64], value: f64) -> f64 {
        let p = self.n_orbit_params;
        let Some(mut fisher) = self.fisher_information(full) else {
            return f64::NAN;
        };
        let first_linear = self.model.layout().offsets_start();
        let n_linear = p - first_linear;
        let mut linear: Vec<f64> = (first_linear..p)
            .flat_map(|a| (first_linear..p).map(move |b| (a, b)))
            .map(|(a, b)| fisher[a * p + b])
            .collect();
        let ln_det_linear = ln_det_cholesky(&mut linear, n_linear);
        let ln_det = ln_det_cholesky(&mut fisher, p);
        let ln_det_schur = ln_det - ln_det_linear;
        if !(value.is_finite() && ln_det_schur.is_finite()) {
            return f64::NAN;
        }
        value - 0.5 * ln_det_schur + 0.5 * first_linear as f64 * LN_TWO_PI
    }

    /// ln of the unnormalised Jeffreys (1946) prior, ½ ln det F(θ), at sampled point `x` (see
    /// [`Self::fisher_information`]); −∞ where F is singular (e = 0 exactly, where the
    /// (√e cos ω, √e sin ω) coordinates are singular) or outside the domain.
    ///
    /// What it covers: P, K, √e cos ω, √e sin ω and λ of every companion, jointly. The linear
    /// parameters (offsets, trend) enter the model through a design matrix A that does not
    /// depend on θ, so with them in F, det F(θ, b) = det(AᵀΣ⁻¹A) · det S(θ), S the Schur
    /// complement (the information on θ with b unknown): the joint Jeffreys prior is ∝ √det S(θ)
    /// times a constant in b, i.e. exactly a flat prior on b — the flat prior under which they
    /// are integrated out ([`Self::marginalised`]). F is computed with the linear columns in,
    /// which gives the same density up to that constant. The jitters are not covered (they
    /// keep their own prior) and F uses the stated uncertainties. The prior is invariant under
    /// reparametrisation; in these coordinates it already is the density the sampler needs.
    /// Because the model is linear in K, F = D G D with D = diag(K) on the P, h, k, λ rows, so
    /// √det F ∝ K⁴ per companion: it favours large K, the known behaviour of Jeffreys' joint
    /// rule for a scale-like parameter; K's prior bound (`k_max`) keeps it proper.
    pub fn jeffreys_log_density(&self, x: &[f64]) -> f64 {
        let Some(scratch) = &self.jeffreys else {
            return 0.0;
        };
        let mut scratch = scratch.borrow_mut();
        let JeffreysScratch {
            full,
            jacobian,
            fisher,
        } = &mut *scratch;
        full[..self.n_sampled_orbit].copy_from_slice(&x[..self.n_sampled_orbit]);
        if self.linear == LinearParameters::Sampled {
            full.copy_from_slice(&x[..self.n_orbit_params]);
        }
        if !fisher_into(&self.fisher_problem, full, jacobian, fisher) {
            return f64::NEG_INFINITY;
        }
        0.5 * ln_det_cholesky(fisher, self.n_orbit_params)
    }

    /// The target with the offsets (and the trend, when modelled) integrated out analytically
    /// (Gregory 2005, ApJ 631, 1198, §3 and appendix, for the offset; the same Gaussian integral
    /// for any set of linear parameters). The sampled vector is the companions' block followed
    /// by the jitters; offsets and trend are absent.
    ///
    /// With the model v = f(θ) + A b, A the n × L design matrix of the linear parameters b
    /// (A_ij = 1 when point i belongs to instrument j; t_i − t_ref in the trend column), the
    /// per-point weights w_i = 1/(σ_i² + s²_inst(i)) (s the jitter, 0 when not sampled), r = v − f
    /// and W = diag(w), the likelihood is Gaussian in b:
    ///
    /// ln L(θ, b) = −½ (r − Ab)ᵀW(r − Ab) − ½ Σᵢ ln(2π/wᵢ).
    ///
    /// Under a flat prior p(b) = Π_j 1/Δ_j (the offsets' uniform prior; the trend's) wide
    /// enough to hold the likelihood (±3·10⁵ m/s by default: the truncation is neglected),
    /// completing the square with N = AᵀWA, b̂ = N⁻¹AᵀWr gives
    ///
    /// ln ∫ L p db = −½ χ²_min − ½ ln det N + (L/2) ln 2π − ½ Σᵢ ln(2π/wᵢ) − Σ_j ln Δ_j,
    ///
    /// χ²_min = rᵀWr − (AᵀWr)ᵀ N⁻¹ (AᵀWr). With a jitter, N depends on it through the weights,
    /// so the ln det N term (for offsets alone, Σ_j ln Σ_{i∈j} wᵢ) must be kept: it is what
    /// makes the marginal posterior of the jitter correct (dropping it biases s low). Without a
    /// jitter N is fixed and the term is a constant. N is diagonal without a trend; with a trend
    /// it is solved by Cholesky (L ≤ instruments + 1).
    pub fn marginalised(
        data: &'a FitData,
        settings: &PosteriorSettings,
        lambda_centres: &[f64],
    ) -> Result<Self, PosteriorError> {
        let mut target = Self::new(data, settings, lambda_centres)?;
        let layout = target.model.layout().clone();
        target.linear = LinearParameters::Marginalised;
        target.n_sampled_orbit = layout.offsets_start();
        let width = |prior: &ScalarPrior| {
            let (lo, hi) = prior.bounds();
            -libm::log(hi - lo)
        };
        target.linear_log_prior = layout.n_instruments as f64 * width(&settings.priors.offset)
            + if layout.trend_index().is_some() {
                width(&settings.trend_prior)
            } else {
                0.0
            };
        if !target.jitter {
            let weights = target.inverse_variances.clone();
            let mut sums = vec![0.0; 3 * layout.n_instruments];
            let (_, ln_det) =
                target.normal_solution(&weights, &vec![0.0; weights.len()], &mut sums);
            let n_linear = layout.n_params() - layout.offsets_start();
            target.fixed_linear_term = -0.5 * ln_det + 0.5 * n_linear as f64 * LN_TWO_PI;
        }
        Ok(target)
    }

    /// Sets the translations between known separated modes, given as their centres in sampled
    /// coordinates: every difference c_j − c_i (i < j) becomes a mode jump of the sampler
    /// ([`LogDensity::mode_jumps`]); fewer than two centres set none. The density itself is
    /// unchanged.
    pub fn set_mode_jumps(&mut self, centres: &[Vec<f64>]) {
        self.mode_jumps.clear();
        for (i, a) in centres.iter().enumerate() {
            for b in &centres[i + 1..] {
                self.mode_jumps.extend(b.iter().zip(a).map(|(y, x)| y - x));
            }
        }
    }

    /// How the linear parameters are treated.
    pub fn linear_parameters(&self) -> LinearParameters {
        self.linear
    }

    /// The sampled coordinates of a point given in the full layout (companions, offsets, trend,
    /// jitters): itself when the linear parameters are sampled, without them when marginalised.
    pub fn sampled_point(&self, full: &[f64]) -> Vec<f64> {
        match self.linear {
            LinearParameters::Sampled => full.to_vec(),
            LinearParameters::Marginalised => full[..self.n_sampled_orbit]
                .iter()
                .chain(&full[self.n_orbit_params..])
                .copied()
                .collect(),
        }
    }

    /// Names of the sampled parameters (`names` of the full layout, e.g.
    /// [`PosteriorSettings::parameter_names`]).
    pub fn sampled_names(&self, names: &[String]) -> Vec<String> {
        match self.linear {
            LinearParameters::Sampled => names.to_vec(),
            LinearParameters::Marginalised => names[..self.n_sampled_orbit]
                .iter()
                .chain(&names[self.n_orbit_params..])
                .cloned()
                .collect(),
        }
    }

    /// (bᵀN⁻¹b with b = AᵀWr, ln det N) for weights `w` and residuals `r` in the design of
    /// [`Self::marginalised`]; `sums` holds 3 entries per instrument of scratch.
    fn normal_solution(&self, w: &[f64], r: &[f64], sums: &mut [f64]) -> (f64, f64) {
        let layout = self.model.layout();
        let n_inst = layout.n_instruments;
        let data = self.data;
        sums.fill(0.0);
        let (weight, rest) = sums.split_at_mut(n_inst);
        let (rhs, cross) = rest.split_at_mut(n_inst);
        let (mut stt, mut bt) = (0.0, 0.0);
        if layout.trend_index().is_some() {
            for (((&wi, &ri), &inst), &t) in w
                .iter()
                .zip(r)
                .zip(data.instruments())
                .zip(data.shifted_times())
            {
                weight[inst] += wi;
                rhs[inst] += wi * ri;
                cross[inst] += wi * t;
                stt += wi * t * t;
                bt += wi * ri * t;
            }
        } else {
            for ((&wi, &ri), &inst) in w.iter().zip(r).zip(data.instruments()) {
                weight[inst] += wi;
                rhs[inst] += wi * ri;
            }
        }
        let mut quad = 0.0;
        let mut ln_det = 0.0;
        for j in 0..n_inst {
            quad += rhs[j] * rhs[j] / weight[j];
            ln_det += libm::log(weight[j]);
        }
        if layout.trend_index().is_some() {
            // Block elimination of the arrow matrix [[diag(S), c], [cᵀ, S_tt]]: the Schur
            // complement of the diagonal block is S_tt − Σ c_j²/S_j, the right-hand side
            // B_t − Σ c_j B_j/S_j; det N = Π S_j · Schur.
            let mut schur = stt;
            let mut reduced = bt;
            for j in 0..n_inst {
                schur -= cross[j] * cross[j] / weight[j];
                reduced -= cross[j] * rhs[j] / weight[j];
            }
            quad += reduced * reduced / schur;
            ln_det += libm::log(schur);
        }
        (quad, ln_det)
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
        self.model.layout()
    }

    /// Index of the first jitter in the sampled vector, when sampled.
    pub fn jitter_start(&self) -> Option<usize> {
        self.jitter.then_some(self.n_sampled_orbit)
    }

    /// Log-density evaluations so far.
    pub fn evaluations(&self) -> u64 {
        self.evaluations.get()
    }

    /// The log-prior: sum of the independent priors (−∞ outside any support); under the
    /// Jeffreys prior, P and K contribute their bounds only and ½ ln det F is added
    /// ([`Self::jeffreys_log_density`]).
    pub fn log_prior(&self, x: &[f64]) -> f64 {
        let layout = self.model.layout();
        let prepared = &self.prepared;
        let mut lp = 0.0;
        let jeffreys = self.jeffreys.is_some();
        for c in 0..layout.n_companions() {
            let start = layout.companion_start(c);
            let p = prepared.period.log_density(x[start]);
            let k = prepared.semi_amplitude.log_density(x[start + 1]);
            if jeffreys {
                if p == f64::NEG_INFINITY || k == f64::NEG_INFINITY || p.is_nan() || k.is_nan() {
                    return f64::NEG_INFINITY;
                }
            } else {
                lp += p + k;
            }
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
        if self.linear == LinearParameters::Sampled {
            let offsets = layout.offsets_start();
            for j in 0..layout.n_instruments {
                lp += prepared.offset.log_density(x[offsets + j]);
            }
            if let Some(t) = layout.trend_index() {
                lp += prepared.trend.log_density(x[t]);
            }
        } else {
            lp += self.linear_log_prior;
        }
        if self.jitter {
            for j in 0..layout.n_instruments {
                lp += prepared.jitter.log_density(x[self.n_sampled_orbit + j]);
            }
        }
        if jeffreys && lp > f64::NEG_INFINITY {
            lp += self.jeffreys_log_density(x);
        }
        lp
    }

    /// The log marginal likelihood of [`Self::marginalised`] at sampled point `x`.
    fn marginal_log_likelihood(&self, x: &[f64]) -> f64 {
        let mut full = self.full.borrow_mut();
        full[..self.n_sampled_orbit].copy_from_slice(&x[..self.n_sampled_orbit]);
        let mut model = self.scratch.borrow_mut();
        if !self.model.velocities_unchecked(&full, &mut model) {
            return f64::NEG_INFINITY;
        }
        let data = self.data;
        let mut scratch = self.linear_scratch.borrow_mut();
        let (sums, weights) = &mut *scratch;
        let n_inst = self.model.layout().n_instruments;
        let n_linear = self.n_orbit_params - self.n_sampled_orbit;
        if self.model.layout().trend_index().is_none() {
            // Offsets only: N is diagonal, so one pass gives χ² and the per-instrument sums
            // (Σ w, Σ w r) of the closed form (see [`Self::marginalised`]).
            sums[..2 * n_inst].fill(0.0);
            let (weight, rhs) = sums[..2 * n_inst].split_at_mut(n_inst);
            let value = if self.jitter {
                let jitters = &x[self.n_sampled_orbit..];
                let (mut q, mut ln_var) = (0.0, 0.0);
                for (((m, v), var), &inst) in model
                    .iter()
                    .zip(data.velocities())
                    .zip(&self.variances)
                    .zip(data.instruments())
                {
                    let s = jitters[inst];
                    let total = var + s * s;
                    let w = 1.0 / total;
                    let r = v - m;
                    let wr = w * r;
                    q += wr * r;
                    weight[inst] += w;
                    rhs[inst] += wr;
                    ln_var += libm::log(total);
                }
                let (mut quad, mut ln_det) = (0.0, 0.0);
                for j in 0..n_inst {
                    quad += rhs[j] * rhs[j] / weight[j];
                    ln_det += libm::log(weight[j]);
                }
                -0.5 * (q - quad + ln_var + LN_TWO_PI * model.len() as f64) - 0.5 * ln_det
                    + 0.5 * n_linear as f64 * LN_TWO_PI
            } else {
                let mut q = 0.0;
                for (((m, v), w), &inst) in model
                    .iter()
                    .zip(data.velocities())
                    .zip(&self.inverse_variances)
                    .zip(data.instruments())
                {
                    let r = v - m;
                    let wr = w * r;
                    q += wr * r;
                    rhs[inst] += wr;
                }
                let quad: f64 = rhs
                    .iter()
                    .zip(&self.inverse_weight_sums)
                    .map(|(b, inv)| b * b * inv)
                    .sum();
                self.fixed_normalisation - 0.5 * (q - quad) + self.fixed_linear_term
            };
            return if value.is_finite() {
                value
            } else {
                f64::NEG_INFINITY
            };
        }
        // With a trend: the residuals overwrite the model velocities, then the arrow system.
        for (m, v) in model.iter_mut().zip(data.velocities()) {
            *m = v - *m;
        }
        let residuals: &[f64] = &model;
        let value = if self.jitter {
            let jitters = &x[self.n_sampled_orbit..];
            let mut q = 0.0;
            let mut ln_var = 0.0;
            for (((r, var), &inst), w) in residuals
                .iter()
                .zip(&self.variances)
                .zip(data.instruments())
                .zip(weights.iter_mut())
            {
                let s = jitters[inst];
                let total = var + s * s;
                *w = 1.0 / total;
                q += r * r * *w;
                ln_var += libm::log(total);
            }
            let (quad, ln_det) = self.normal_solution(weights, residuals, sums);
            -0.5 * (q - quad + ln_var + LN_TWO_PI * residuals.len() as f64) - 0.5 * ln_det
                + 0.5 * n_linear as f64 * LN_TWO_PI
        } else {
            let mut q = 0.0;
            for (r, w) in residuals.iter().zip(&self.inverse_variances) {
                q += r * r * w;
            }
            let (quad, _) = self.normal_solution(&self.inverse_variances, residuals, sums);
            self.fixed_normalisation - 0.5 * (q - quad) + self.fixed_linear_term
        };
        if value.is_finite() {
            value
        } else {
            f64::NEG_INFINITY
        }
    }

    /// The log-likelihood (normalised Gaussian, see the type's notes); −∞ outside the model's
    /// domain.
    pub fn log_likelihood(&self, x: &[f64]) -> f64 {
        if self.linear == LinearParameters::Marginalised {
            return self.marginal_log_likelihood(x);
        }
        let mut model = self.scratch.borrow_mut();
        // A non-finite model velocity makes the sum below non-finite (the data are finite),
        // which is caught at the end instead of by a separate pass.
        if !self.model.velocities_unchecked(x, &mut model) {
            return f64::NEG_INFINITY;
        }
        let data = self.data;
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
        self.n_sampled_orbit
            + if self.jitter {
                self.model.layout().n_instruments
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

    fn mode_jumps(&self) -> &[f64] {
        &self.mode_jumps
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::RvModel;
    use crate::orbit::OrbitalElements;
    use approx::assert_relative_eq;

    /// 30 uneven epochs, two instruments, uneven σ (also the Jeffreys tests' table).
    pub(super) fn data() -> FitData {
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

    /// The marginal likelihood of [`RvPosterior::marginalised`] equals the sampled likelihood
    /// integrated over the offsets and the trend numerically, with the flat prior density:
    /// ∫∫∫ L(θ, γ_a, γ_b, β) dγ_a dγ_b dβ / (Δγ² Δβ), by the trapezoid rule on ±8 conditional
    /// standard deviations around the maximum (the integrand is Gaussian in the linear
    /// parameters, so 3 nested 161-point rules are exact to ~1e-9 relative). Checked with a
    /// sampled jitter (per-point weights, the ln det term) and without one. The maximum and the
    /// widths come from the sampled likelihood itself (Newton on the quadratic), not from the
    /// code under test.
    #[test]
    #[allow(clippy::needless_range_loop)] // index loops mirror the matrix formulas
    fn marginal_likelihood_equals_the_numerical_integral_over_offsets_and_trend() {
        let data = data();
        for jitter in [true, false] {
            let settings = PosteriorSettings {
                trend: true,
                jitter,
                ..PosteriorSettings::default()
            };
            let sampled = RvPosterior::new(&data, &settings, &[0.0]).unwrap();
            let marginal = RvPosterior::marginalised(&data, &settings, &[0.0]).unwrap();
            let orbit = [17.3, 25.0, 0.3, -0.2, 0.4];
            let jit = [2.0, 0.5];
            let point = |b: [f64; 3]| {
                let mut x = orbit.to_vec();
                x.extend_from_slice(&b);
                if jitter {
                    x.extend_from_slice(&jit);
                }
                x
            };
            let ll = |b: [f64; 3]| sampled.log_likelihood(&point(b));
            // ln L is exactly quadratic in b: gradient and Hessian by central differences of
            // step 1 (exact for a quadratic up to rounding), then one Newton step.
            let b0 = [0.0; 3];
            let mut grad = [0.0; 3];
            let mut hess = [[0.0; 3]; 3];
            let shifted = |i: usize, di: f64, j: usize, dj: f64| {
                let mut b = b0;
                b[i] += di;
                b[j] += dj;
                ll(b)
            };
            for i in 0..3 {
                grad[i] = (shifted(i, 1.0, i, 0.0) - shifted(i, -1.0, i, 0.0)) / 2.0;
                for j in 0..3 {
                    hess[i][j] = (shifted(i, 1.0, j, 1.0)
                        - shifted(i, 1.0, j, -1.0)
                        - shifted(i, -1.0, j, 1.0)
                        + shifted(i, -1.0, j, -1.0))
                        / 4.0;
                }
            }
            // Solve H δ = −g by Cramer's rule.
            let det3 = |m: [[f64; 3]; 3]| {
                m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
                    - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
                    + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
            };
            let d = det3(hess);
            let mut best = [0.0; 3];
            for (k, v) in best.iter_mut().enumerate() {
                let mut m = hess;
                for r in 0..3 {
                    m[r][k] = -grad[r];
                }
                *v = det3(m) / d;
            }
            let peak = ll(best);
            let sd: Vec<f64> = (0..3).map(|i| (-1.0 / hess[i][i]).sqrt()).collect();
            let n = 161;
            let half = 8.0;
            let mut integral = 0.0;
            for i in 0..n {
                let a = best[0] + sd[0] * half * (2.0 * i as f64 / (n - 1) as f64 - 1.0);
                for j in 0..n {
                    let b = best[1] + sd[1] * half * (2.0 * j as f64 / (n - 1) as f64 - 1.0);
                    for k in 0..n {
                        let t = best[2] + sd[2] * half * (2.0 * k as f64 / (n - 1) as f64 - 1.0);
                        let w = |idx: usize| if idx == 0 || idx == n - 1 { 0.5 } else { 1.0 };
                        integral += w(i) * w(j) * w(k) * libm::exp(ll([a, b, t]) - peak);
                    }
                }
            }
            let cell: f64 = sd.iter().map(|s| s * 2.0 * half / (n - 1) as f64).product();
            let log_integral = peak + libm::log(integral * cell);
            let (lo, hi) = settings.priors.offset.bounds();
            let (tlo, thi) = settings.trend_prior.bounds();
            let log_prior = -2.0 * libm::log(hi - lo) - libm::log(thi - tlo);
            let mut y = orbit.to_vec();
            if jitter {
                y.extend_from_slice(&jit);
            }
            let expected = log_integral + log_prior;
            let got = marginal.log_likelihood(&y) + marginal.linear_log_prior;
            assert!(
                (got - expected).abs() < 1e-6,
                "jitter {jitter}: {got} vs {expected}"
            );
            assert_eq!(marginal.dim(), 5 + if jitter { 2 } else { 0 });
        }
    }

    #[test]
    fn e_max_above_the_model_domain_is_lowered() {
        let s = PosteriorSettings::default();
        assert_eq!(s.effective_eccentricity().e_max, MAX_ECCENTRICITY);
    }
}

/// F = JᵀJ of the weighted Jacobian of `problem` at `full` into `fisher` (p × p row-major);
/// false outside the model's domain. Own loops in a fixed order (no BLAS, no FMA), so the
/// bits are the same native and in wasm.
fn fisher_into(
    problem: &RvProblem<'_>,
    full: &[f64],
    jacobian: &mut nalgebra::DMatrix<f64>,
    fisher: &mut [f64],
) -> bool {
    if !problem.jacobian(full, jacobian) {
        return false;
    }
    let n = jacobian.nrows();
    let p = jacobian.ncols();
    let columns = jacobian.as_slice();
    for a in 0..p {
        let ca = &columns[a * n..(a + 1) * n];
        for b in 0..=a {
            let cb = &columns[b * n..(b + 1) * n];
            let mut sum = 0.0;
            for (u, v) in ca.iter().zip(cb) {
                sum += u * v;
            }
            fisher[a * p + b] = sum;
            fisher[b * p + a] = sum;
        }
    }
    fisher.iter().all(|v| v.is_finite())
}

/// ln det of the symmetric positive-definite p × p matrix `m` (row-major) by Cholesky
/// factorisation in place of a copy's lower triangle; −∞ when it is not positive definite.
fn ln_det_cholesky(m: &mut [f64], p: usize) -> f64 {
    let mut ln_det = 0.0;
    for j in 0..p {
        let mut d = m[j * p + j];
        for k in 0..j {
            d -= m[j * p + k] * m[j * p + k];
        }
        if d.is_nan() || d <= 0.0 {
            return f64::NEG_INFINITY;
        }
        let l = libm::sqrt(d);
        m[j * p + j] = l;
        ln_det += 2.0 * libm::log(l);
        for i in j + 1..p {
            let mut s = m[i * p + j];
            for k in 0..j {
                s -= m[i * p + k] * m[j * p + k];
            }
            m[i * p + j] = s / l;
        }
    }
    ln_det
}

#[cfg(test)]
mod jeffreys_tests {
    use super::tests::data;
    use super::*;
    use crate::priors::EccentricityShape;

    fn jeffreys_settings(jitter: bool, trend: bool) -> PosteriorSettings {
        let mut s = PosteriorSettings {
            jitter,
            trend,
            ..PosteriorSettings::default()
        };
        s.priors.eccentricity = crate::priors::EccentricityPriorSettings {
            shape: EccentricityShape::Jeffreys,
            e_min: 0.0,
            e_max: 0.99,
        };
        s
    }

    fn hk(e: f64, w: f64) -> (f64, f64) {
        (libm::sqrt(e) * libm::cos(w), libm::sqrt(e) * libm::sin(w))
    }

    #[test]
    fn fisher_matrix_matches_finite_differences() {
        // F from the analytic Jacobian against F from central differences of the model
        // velocities (step 10⁻⁶ relative; truncation error O(h²) ≈ 10⁻¹², rounding ≈ 10⁻¹⁰/h,
        // so 10⁻⁵ relative to the largest entry of each row is loose; common practice).
        let data = data();
        let settings = jeffreys_settings(false, true);
        let target = RvPosterior::new(&data, &settings, &[0.0]).unwrap();
        let (h, k) = hk(0.4, 2.2);
        let full = [17.3, 25.0, h, k, 0.4, 3.0, -4.0, 0.01];
        let fisher = target.fisher_information(&full).unwrap();
        let p = full.len();
        let n = data.n_points();
        let problem = RvProblem::new(
            &data,
            settings.layout(2),
            crate::fit::EccentricityCoordinates::SqrtE,
        );
        let mut columns = vec![vec![0.0; n]; p];
        for (a, column) in columns.iter_mut().enumerate() {
            let step = 1e-6 * full[a].abs().max(1e-2);
            let (mut up, mut down) = (full.to_vec(), full.to_vec());
            up[a] += step;
            down[a] -= step;
            let (mut vu, mut vd) = (vec![0.0; n], vec![0.0; n]);
            assert!(problem.model_velocities(&up, &mut vu));
            assert!(problem.model_velocities(&down, &mut vd));
            for i in 0..n {
                column[i] = (vu[i] - vd[i]) / (2.0 * step) / data.uncertainties()[i];
            }
        }
        for a in 0..p {
            let scale = (0..p).map(|b| fisher[a * p + b].abs()).fold(0.0, f64::max);
            for b in 0..p {
                let fd: f64 = (0..n).map(|i| columns[a][i] * columns[b][i]).sum();
                assert!(
                    (fisher[a * p + b] - fd).abs() <= 1e-5 * scale,
                    "F[{a}][{b}] = {} vs {fd}",
                    fisher[a * p + b]
                );
            }
        }
    }

    #[test]
    fn laplace_mass_uses_the_covariance_of_the_orbit_with_offsets_integrated_out() {
        // Identity (Schur complement; common practice): with the offsets integrated out, the
        // covariance of the orbital parameters is the (θ, θ) block of F⁻¹, so
        // ln mass − ln p(θ̂) = ½ ln det(2π (F⁻¹)_θθ). Computed here by another route (nalgebra's
        // full inverse, then the block's LU determinant) than the Cholesky factors of
        // `laplace_log_mass`; the two agree to rounding (1e-8 nats on determinants of ~1e10).
        let data = data();
        let mut settings = jeffreys_settings(false, true);
        settings.priors.eccentricity.shape = EccentricityShape::Uniform;
        let target = RvPosterior::marginalised(&data, &settings, &[0.0]).unwrap();
        let (h, k) = hk(0.4, 2.2);
        let full = [17.3, 25.0, h, k, 0.4, 3.0, -4.0, 0.01];
        let got = target.laplace_log_mass(&full) - target.log_density(&target.sampled_point(&full));
        let p = full.len();
        let first_linear = target.model.layout().offsets_start();
        let fisher = target.fisher_information(&full).unwrap();
        let inverse = nalgebra::DMatrix::from_row_slice(p, p, &fisher)
            .try_inverse()
            .unwrap();
        let block = inverse
            .view((0, 0), (first_linear, first_linear))
            .into_owned();
        let expected = 0.5 * (first_linear as f64 * LN_TWO_PI + libm::log(block.determinant()));
        assert!((got - expected).abs() < 1e-8, "{got} vs {expected}");
        // A mode twice as narrow in every orbital direction holds 2^-n as much mass at the same
        // peak: scale all uncertainties by ½ and the peak term aside, ½ ln det changes by
        // −n ln 2 (F scales by 4, the offsets' block cancels in the Schur complement).
        let half: Vec<f64> = data.uncertainties().iter().map(|s| 0.5 * s).collect();
        let sharper = FitData::new(
            data.times(),
            data.velocities(),
            &half,
            data.instruments(),
            data.instrument_names(),
        );
        let sharp_target = RvPosterior::marginalised(&sharper, &settings, &[0.0]).unwrap();
        let sharp = sharp_target.laplace_log_mass(&full)
            - sharp_target.log_density(&sharp_target.sampled_point(&full));
        let n = first_linear as f64;
        assert!(
            (sharp - got + n * libm::log(2.0)).abs() < 1e-8,
            "{sharp} vs {got}"
        );
    }

    #[test]
    fn sinusoid_limit_has_the_closed_form_determinant() {
        // Closed form (derived here). At e = 0 with M = λ − ω + 2π(t − t_ref)/P and
        // θ = M + ω = λ + 2π(t − t_ref)/P, Kepler's ν ≈ M + 2e sin M to first order in e, so
        // v = K[cos(ν + ω) + e cos ω] ≈ K cos θ − Ke[cos ω − cos(2θ − ω)] + Ke cos ω
        //   = K cos θ + K x cos 2θ + K y sin 2θ,   (x, y) = (e cos ω, e sin ω).
        // Hence at x = y = 0 exactly: ∂v/∂K = cos θ, ∂v/∂λ = −K sin θ, ∂v/∂x = K cos 2θ,
        // ∂v/∂y = K sin 2θ, ∂v/∂γ = 1. For N ≥ 5 epochs at equally spaced phases and one σ,
        // these five columns are orthogonal with squared norms N, N/2, N/2·K², N/2·K², N/2·K²
        // (over σ²), so the (K, x, y, λ, γ) block of F has determinant N⁵K⁶/(16σ¹⁰).
        let (n, period, k, sigma) = (12usize, 10.0, 7.0, 2.0);
        let times: Vec<f64> = (0..n)
            .map(|i| 2_459_000.0 + period * i as f64 / n as f64)
            .collect();
        let v = vec![0.0; n];
        let data = FitData::new(&times, &v, &vec![sigma; n], &vec![0; n], &["a".into()]);
        let layout = ParameterLayout::new(1, 1, false);
        let e_problem = RvProblem::new(&data, layout, crate::fit::EccentricityCoordinates::E);
        let full = [period, k, 0.0, 0.0, 0.3, 0.0];
        let mut jacobian = nalgebra::DMatrix::zeros(n, 6);
        let mut fisher = vec![0.0; 36];
        assert!(fisher_into(&e_problem, &full, &mut jacobian, &mut fisher));
        // Block without P (index 0): K, x, y, λ, γ = indices 1..6.
        let mut block: Vec<f64> = (1..6)
            .flat_map(|a| (1..6).map(move |b| (a, b)))
            .map(|(a, b)| fisher[a * 6 + b])
            .collect();
        let expected = 5.0 * libm::log(n as f64) + 6.0 * libm::log(k)
            - libm::log(16.0)
            - 10.0 * libm::log(sigma);
        let got = ln_det_cholesky(&mut block, 5);
        // Exact up to rounding (sums of 12 cosines): 1e-9.
        assert!((got - expected).abs() < 1e-9, "{got} vs {expected}");
    }

    #[test]
    fn jeffreys_density_obeys_its_exact_identities() {
        let data = data();
        let settings = jeffreys_settings(false, false);
        let target = RvPosterior::marginalised(&data, &settings, &[0.0]).unwrap();
        let (e, w) = (0.3, 1.1);
        let (h, k) = hk(e, w);
        let at = |kk: f64| target.jeffreys_log_density(&[17.3, kk, h, k, 0.4]);
        // 1. The model is linear in K: √det F ∝ K⁴ (four K-proportional columns) — exact.
        assert!((at(50.0) - at(25.0) - 4.0 * libm::log(2.0)).abs() < 1e-9);
        // 2. Invariance: in (h, k) = (√e cos ω, √e sin ω) the density is |∂(x, y)/∂(h, k)| = 2e
        //    times the density in (x, y) = (e cos ω, e sin ω) — exact chain rule.
        let layout = ParameterLayout::new(1, 2, false);
        let e_problem = RvProblem::new(&data, layout, crate::fit::EccentricityCoordinates::E);
        let full_e = [
            17.3,
            25.0,
            e * libm::cos(w),
            e * libm::sin(w),
            0.4,
            0.0,
            0.0,
        ];
        let mut jacobian = nalgebra::DMatrix::zeros(30, 7);
        let mut fisher = vec![0.0; 49];
        assert!(fisher_into(&e_problem, &full_e, &mut jacobian, &mut fisher));
        let in_e = 0.5 * ln_det_cholesky(&mut fisher, 7);
        assert!(
            (at(25.0) - in_e - libm::log(2.0 * e)).abs() < 1e-8,
            "{} vs {}",
            at(25.0),
            in_e + libm::log(2.0 * e)
        );
        // 3. The log-prior replaces the P and K densities by √det F and keeps their bounds.
        let x = [17.3, 25.0, h, k, 0.4];
        let uniform_hk = -libm::log(0.99) - 1.144_729_885_849_400_2;
        let expected = uniform_hk - libm::log(crate::kepler::TWO_PI) + target.linear_log_prior;
        assert!((target.log_prior(&x) - expected - at(25.0)).abs() < 1e-9);
        assert_eq!(
            target.log_prior(&[17.3, -1.0, h, k, 0.4]),
            f64::NEG_INFINITY
        );
    }
}
