//! The radial-velocity least-squares problem: parameter layout, weighted residuals and the
//! analytic Jacobian in either eccentricity coordinate system.
//!
//! Parameters, per companion in order: period P [d], semi-amplitude K [m/s], two eccentricity
//! coordinates (absent for a companion held circular), mean longitude λ = M₀ + ω [rad] at the
//! reference epoch t_ref; then one offset γ per instrument [m/s]; then, optionally, a linear trend
//! [m/s/d] about t_ref. The eccentricity coordinates are either (√e cos ω, √e sin ω) — used for
//! the search — or (e cos ω, e sin ω) — used for the reported covariance, where the Jacobian is
//! regular at e = 0.

use crate::kepler::{
    eccentric_anomaly_reduced, eccentric_anomaly_reduced_fast, reduce_angle_signed,
    reduce_angle_signed_lanes, true_anomaly_cos_sin_lanes, true_anomaly_cos_sin_prepared,
    Eccentricity, Lanes, TWO_PI,
};
use crate::lsq::{DMatrix, LeastSquaresProblem};

/// Largest eccentricity the model accepts: trial points at e ≥ `MAX_ECCENTRICITY` (or P ≤ 0) get
/// NaN residuals, which the Levenberg–Marquardt solver rejects (the trust region shrinks), so the
/// search stays inside the unit disc. Common practice; the value leaves the Kepler solver well
/// inside its verified range (e ≤ 0.999).
pub const MAX_ECCENTRICITY: f64 = 0.99;

/// How the two eccentricity parameters of an eccentric companion are expressed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EccentricityCoordinates {
    /// (√e cos ω, √e sin ω): the search coordinates. The Jacobian columns vanish at e = 0.
    SqrtE,
    /// (e cos ω, e sin ω): regular at e = 0; used for the reported covariance.
    E,
}

/// The velocities to fit, with the per-point constants the model needs.
#[derive(Debug, Clone, PartialEq)]
pub struct FitData {
    times: Vec<f64>,
    velocities: Vec<f64>,
    uncertainties: Vec<f64>,
    instruments: Vec<usize>,
    instrument_names: Vec<String>,
    reference_time: f64,
    shifted_times: Vec<f64>,
}

impl FitData {
    /// Builds the data set. `instruments[i]` indexes `instrument_names`. The reference epoch
    /// t_ref (of the mean longitude and of the trend) is the middle of the time span, so that the
    /// phase and period parameters are as uncorrelated as the sampling allows (common practice).
    ///
    /// Inputs are assumed checked by the table reader; [`super::fit_orbit`] re-checks what it needs.
    pub fn new(
        times: &[f64],
        velocities: &[f64],
        uncertainties: &[f64],
        instruments: &[usize],
        instrument_names: &[String],
    ) -> Self {
        let (lo, hi) = times
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
                (lo.min(t), hi.max(t))
            });
        let reference_time = if times.is_empty() {
            0.0
        } else {
            0.5 * (lo + hi)
        };
        Self {
            times: times.to_vec(),
            velocities: velocities.to_vec(),
            uncertainties: uncertainties.to_vec(),
            instruments: instruments.to_vec(),
            instrument_names: instrument_names.to_vec(),
            reference_time,
            shifted_times: times.iter().map(|t| t - reference_time).collect(),
        }
    }

    /// From a velocity table read by [`crate::table::parse_table`].
    pub fn from_table(table: &crate::table::VelocityTable) -> Self {
        Self::new(
            table.times(),
            table.velocities(),
            table.uncertainties(),
            table.instrument_index(),
            table.instrument_names(),
        )
    }

    /// Number of epochs.
    pub fn n_points(&self) -> usize {
        self.times.len()
    }
    /// Number of instruments.
    pub fn n_instruments(&self) -> usize {
        self.instrument_names.len()
    }
    /// Times [d].
    pub fn times(&self) -> &[f64] {
        &self.times
    }
    /// Velocities [m/s].
    pub fn velocities(&self) -> &[f64] {
        &self.velocities
    }
    /// Uncertainties [m/s].
    pub fn uncertainties(&self) -> &[f64] {
        &self.uncertainties
    }
    /// Instrument index of each epoch.
    pub fn instruments(&self) -> &[usize] {
        &self.instruments
    }
    /// Instrument names.
    pub fn instrument_names(&self) -> &[String] {
        &self.instrument_names
    }
    /// Reference epoch t_ref [d] of the mean longitude and the trend.
    pub fn reference_time(&self) -> f64 {
        self.reference_time
    }
    /// t − t_ref [d] for each epoch.
    pub fn shifted_times(&self) -> &[f64] {
        &self.shifted_times
    }
}

/// Which parameters the model has and where they sit in the parameter vector.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct ParameterLayout {
    /// Per companion: true when held circular (no eccentricity parameters).
    pub circular: Vec<bool>,
    /// Number of instrument offsets.
    pub n_instruments: usize,
    /// Whether a linear trend is fitted.
    pub trend: bool,
}

impl ParameterLayout {
    /// All companions eccentric.
    pub fn new(n_companions: usize, n_instruments: usize, trend: bool) -> Self {
        Self {
            circular: vec![false; n_companions],
            n_instruments,
            trend,
        }
    }

    /// Number of companions.
    pub fn n_companions(&self) -> usize {
        self.circular.len()
    }

    /// Number of parameters of companion `c` (5, or 3 when circular).
    pub fn companion_len(&self, c: usize) -> usize {
        if self.circular[c] {
            3
        } else {
            5
        }
    }

    /// Index of companion `c`'s first parameter (its period).
    pub fn companion_start(&self, c: usize) -> usize {
        (0..c).map(|i| self.companion_len(i)).sum()
    }

    /// Index of the first instrument offset.
    pub fn offsets_start(&self) -> usize {
        self.companion_start(self.n_companions())
    }

    /// Index of the trend, if fitted.
    pub fn trend_index(&self) -> Option<usize> {
        self.trend
            .then(|| self.offsets_start() + self.n_instruments)
    }

    /// Total number of parameters.
    pub fn n_params(&self) -> usize {
        self.offsets_start() + self.n_instruments + usize::from(self.trend)
    }

    /// Index of companion `c`'s mean longitude.
    pub fn lambda_index(&self, c: usize) -> usize {
        self.companion_start(c) + self.companion_len(c) - 1
    }
}

/// One companion's elements decoded from a parameter vector.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DecodedCompanion {
    /// Period [d].
    pub period: f64,
    /// Semi-amplitude [m/s] (may be negative inside the search).
    pub semi_amplitude: f64,
    /// Eccentricity.
    pub eccentricity: f64,
    /// cos ω (1 when e = 0).
    pub cos_omega: f64,
    /// sin ω (0 when e = 0).
    pub sin_omega: f64,
    /// Mean longitude λ at t_ref [rad].
    pub mean_longitude: f64,
}

impl DecodedCompanion {
    /// ω [rad] in (−π, π].
    pub fn omega(&self) -> f64 {
        libm::atan2(self.sin_omega, self.cos_omega)
    }
}

/// Decodes companion `c` of `params`.
pub fn decode_companion(
    layout: &ParameterLayout,
    coordinates: EccentricityCoordinates,
    params: &[f64],
    c: usize,
) -> DecodedCompanion {
    let start = layout.companion_start(c);
    let period = params[start];
    let semi_amplitude = params[start + 1];
    let (eccentricity, cos_omega, sin_omega, mean_longitude) = if layout.circular[c] {
        (0.0, 1.0, 0.0, params[start + 2])
    } else {
        let (a, b) = (params[start + 2], params[start + 3]);
        let (e, norm) = match coordinates {
            EccentricityCoordinates::SqrtE => {
                let e = a * a + b * b;
                (e, libm::sqrt(e))
            }
            EccentricityCoordinates::E => {
                let e = libm::hypot(a, b);
                (e, e)
            }
        };
        if norm > 0.0 {
            (e, a / norm, b / norm, params[start + 4])
        } else {
            (0.0, 1.0, 0.0, params[start + 4])
        }
    };
    DecodedCompanion {
        period,
        semi_amplitude,
        eccentricity,
        cos_omega,
        sin_omega,
        mean_longitude,
    }
}

/// One companion's elements with the phase as the mean longitude λ at t_ref.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ElementsAtEpoch {
    /// Period [d].
    pub period: f64,
    /// Semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Eccentricity.
    pub eccentricity: f64,
    /// ω [rad].
    pub omega: f64,
    /// Mean longitude λ = M₀ + ω at t_ref [rad].
    pub mean_longitude: f64,
}

impl From<DecodedCompanion> for ElementsAtEpoch {
    fn from(c: DecodedCompanion) -> Self {
        Self {
            period: c.period,
            semi_amplitude: c.semi_amplitude,
            eccentricity: c.eccentricity,
            omega: c.omega(),
            mean_longitude: c.mean_longitude,
        }
    }
}

/// Writes companion `c`'s parameters into `params` (for a circular companion e and ω are ignored).
pub fn encode_companion(
    layout: &ParameterLayout,
    coordinates: EccentricityCoordinates,
    params: &mut [f64],
    c: usize,
    elements: &ElementsAtEpoch,
) {
    let ElementsAtEpoch {
        period,
        semi_amplitude,
        eccentricity,
        omega,
        mean_longitude,
    } = *elements;
    let start = layout.companion_start(c);
    params[start] = period;
    params[start + 1] = semi_amplitude;
    if layout.circular[c] {
        params[start + 2] = mean_longitude;
    } else {
        let (s, co) = libm::sincos(omega);
        let radius = match coordinates {
            EccentricityCoordinates::SqrtE => libm::sqrt(eccentricity),
            EccentricityCoordinates::E => eccentricity,
        };
        params[start + 2] = radius * co;
        params[start + 3] = radius * s;
        params[start + 4] = mean_longitude;
    }
}

/// The weighted RV residual problem `r_i = (v_i − model_i) / σ_i` with
/// `σ_i² = uncertainty_i² + jitter²(instrument_i)`.
#[derive(Debug, Clone)]
pub struct RvProblem<'a> {
    data: &'a FitData,
    layout: ParameterLayout,
    coordinates: EccentricityCoordinates,
    inverse_sigma: Vec<f64>,
}

impl<'a> RvProblem<'a> {
    /// A problem without jitter.
    pub fn new(
        data: &'a FitData,
        layout: ParameterLayout,
        coordinates: EccentricityCoordinates,
    ) -> Self {
        let inverse_sigma = data.uncertainties.iter().map(|s| 1.0 / s).collect();
        Self {
            data,
            layout,
            coordinates,
            inverse_sigma,
        }
    }

    /// Sets the per-instrument jitter [m/s] added in quadrature to the uncertainties.
    pub fn set_jitter(&mut self, jitter: &[f64]) {
        for ((inv, &s), &j) in self
            .inverse_sigma
            .iter_mut()
            .zip(&self.data.uncertainties)
            .zip(&self.data.instruments)
        {
            let s_j = jitter.get(j).copied().unwrap_or(0.0);
            *inv = 1.0 / libm::sqrt(s * s + s_j * s_j);
        }
    }

    /// The parameter layout.
    pub fn layout(&self) -> &ParameterLayout {
        &self.layout
    }

    /// The eccentricity coordinates in use.
    pub fn coordinates(&self) -> EccentricityCoordinates {
        self.coordinates
    }

    /// 1/σ_i including jitter.
    pub fn inverse_sigma(&self) -> &[f64] {
        &self.inverse_sigma
    }

    /// The data.
    pub fn data(&self) -> &FitData {
        self.data
    }

    /// Model velocities [m/s] at the data epochs into `out` (no allocation). Returns false when
    /// `params` lie outside the model's domain (P ≤ 0, e ≥ [`MAX_ECCENTRICITY`], non-finite).
    pub fn model_velocities(&self, params: &[f64], out: &mut [f64]) -> bool {
        self.model_velocities_unchecked(params, out) && out.iter().all(|v| v.is_finite())
    }

    /// [`Self::model_velocities`] without the final check that every velocity is finite (for
    /// callers that check a sum of them instead); false still for parameters outside the
    /// domain.
    pub fn model_velocities_unchecked(&self, params: &[f64], out: &mut [f64]) -> bool {
        let layout = &self.layout;
        let offsets = layout.offsets_start();
        let trend = layout.trend_index().map_or(0.0, |i| params[i]);
        for ((slot, &dt), &inst) in out
            .iter_mut()
            .zip(&self.data.shifted_times)
            .zip(&self.data.instruments)
        {
            *slot = params[offsets + inst] + trend * dt;
        }
        for c in 0..layout.n_companions() {
            let comp = decode_companion(layout, self.coordinates, params, c);
            let Some(prepared) = Prepared::new(&comp) else {
                return false;
            };
            let k = comp.semi_amplitude;
            prepared.for_each_true_anomaly_group(
                &self.data.shifted_times,
                |start, cos_nu, sin_nu| {
                    // No branch in this loop: it runs on the solver's vector registers.
                    let group = &mut out[start..start + cos_nu.len()];
                    for ((slot, &cos), &sin) in group.iter_mut().zip(cos_nu).zip(sin_nu) {
                        *slot += k * prepared.terms(cos, sin).velocity_shape;
                    }
                },
            );
        }
        true
    }
}

/// Constants of one companion at one parameter point.
struct Prepared {
    eccentricity: Eccentricity,
    e: f64,
    s: f64,
    mean_motion: f64,
    mean_anomaly_at_reference: f64,
    cos_omega: f64,
    sin_omega: f64,
}

/// Per-epoch quantities of one companion.
struct PointTerms {
    /// cos(ν + ω) + e cos ω.
    velocity_shape: f64,
    /// sin(ν + ω).
    sin_nu_omega: f64,
    cos_nu: f64,
    sin_nu: f64,
}

impl Prepared {
    fn new(comp: &DecodedCompanion) -> Option<Self> {
        let valid = comp.period > 0.0
            && comp.period.is_finite()
            && comp.eccentricity < MAX_ECCENTRICITY
            && comp.semi_amplitude.is_finite()
            && comp.mean_longitude.is_finite();
        if !valid {
            return None;
        }
        let e = comp.eccentricity;
        Some(Self {
            eccentricity: Eccentricity::new(e).ok()?,
            e,
            s: libm::sqrt((1.0 - e) * (1.0 + e)),
            mean_motion: TWO_PI / comp.period,
            mean_anomaly_at_reference: comp.mean_longitude - comp.omega(),
            cos_omega: comp.cos_omega,
            sin_omega: comp.sin_omega,
        })
    }

    /// The mean anomaly at `dt` = t − t_ref, reduced to [−π, π].
    #[inline(always)]
    fn mean_anomaly(&self, dt: f64) -> f64 {
        reduce_angle_signed(self.mean_anomaly_at_reference + self.mean_motion * dt)
    }

    /// (cos ν, sin ν) at one epoch: Kepler's equation by [`eccentric_anomaly_reduced`]
    /// (Markley 1995) and the true anomaly from E without cancellation
    /// ([`crate::kepler::true_anomaly_cos_sin`]; Murray & Dermott 1999, eqs. 2.43–2.44).
    #[inline(always)]
    fn true_anomaly(&self, dt: f64) -> (f64, f64) {
        let anomaly = eccentric_anomaly_reduced(self.mean_anomaly(dt), self.eccentricity);
        true_anomaly_cos_sin_prepared(&anomaly, self.e, self.s)
    }

    /// Calls `visit(i, cos ν_i, sin ν_i)` for every epoch of `shifted_times`, `N` epochs at a
    /// time on the Kepler solver's branch-free lane path; the last, partial group is padded with
    /// copies of its first epoch (their results are dropped). Lanes the fast path does not cover
    /// take [`Self::true_anomaly`], whose common path performs the same operations, so the values
    /// do not depend on the lane count.
    #[inline(always)]
    fn for_each_true_anomaly_lanes<const N: usize>(
        &self,
        shifted_times: &[f64],
        visit: &mut impl FnMut(usize, &[f64], &[f64]),
    ) {
        for (group, chunk) in shifted_times.chunks(N).enumerate() {
            let start = group * N;
            let dt: Lanes<N> = Lanes(core::array::from_fn(|i| *chunk.get(i).unwrap_or(&chunk[0])));
            // The operations of `Self::mean_anomaly`, lane by lane.
            let (mean_anomaly, in_range) =
                reduce_angle_signed_lanes(dt * self.mean_motion + self.mean_anomaly_at_reference);
            let (_, sin_e, cos_e, solved) = eccentric_anomaly_reduced_fast(mean_anomaly, self.e);
            let valid = solved & in_range;
            let (Lanes(mut cos_nu), Lanes(mut sin_nu)) =
                true_anomaly_cos_sin_lanes(sin_e, cos_e, self.e, self.s);
            if !valid.all() {
                for (i, &dt) in chunk.iter().enumerate() {
                    if !valid.lane(i) {
                        (cos_nu[i], sin_nu[i]) = self.true_anomaly(dt);
                    }
                }
            }
            visit(start, &cos_nu[..chunk.len()], &sin_nu[..chunk.len()]);
        }
    }

    /// Calls `visit(i, cos ν_i, sin ν_i)` for every epoch, through
    /// [`Self::for_each_true_anomaly_group`] (lane counts chosen there).
    #[inline]
    fn for_each_true_anomaly(&self, shifted_times: &[f64], mut visit: impl FnMut(usize, f64, f64)) {
        self.for_each_true_anomaly_group(shifted_times, |start, cos_nu, sin_nu| {
            for (i, (&cos, &sin)) in cos_nu.iter().zip(sin_nu).enumerate() {
                visit(start + i, cos, sin);
            }
        });
    }

    /// [`Self::for_each_true_anomaly`] a group of epochs at a time:
    /// `visit(start, cos ν[start..start + len], sin ν[start..start + len])`, the groups in order.
    #[inline]
    fn for_each_true_anomaly_group(
        &self,
        shifted_times: &[f64],
        mut visit: impl FnMut(usize, &[f64], &[f64]),
    ) {
        #[cfg(target_arch = "x86_64")]
        {
            if std::is_x86_feature_detected!("avx512f") {
                // One group for up to 32 epochs: four independent registers per operation keep
                // the solver's long dependency chains busy (measured: 20 % faster per
                // log-density at 30 epochs than groups of 8; no faster at 12 or 100 epochs,
                // where the padding or the register pressure eat the gain).
                // SAFETY: the processor supports AVX-512F, checked just above.
                unsafe {
                    match shifted_times.len() {
                        17..=32 => {
                            self.for_each_true_anomaly_avx512::<32>(shifted_times, &mut visit)
                        }
                        9..=16 => {
                            self.for_each_true_anomaly_avx512::<16>(shifted_times, &mut visit)
                        }
                        _ => self.for_each_true_anomaly_avx512::<8>(shifted_times, &mut visit),
                    }
                }
                return;
            }
            if std::is_x86_feature_detected!("avx2") {
                // SAFETY: the processor supports AVX2, checked just above.
                unsafe { self.for_each_true_anomaly_avx2(shifted_times, &mut visit) };
                return;
            }
        }
        self.for_each_true_anomaly_lanes::<ANOMALY_LANES>(shifted_times, &mut visit);
    }

    /// [`Self::for_each_true_anomaly_lanes`] compiled for AVX-512F (eight lanes to a register;
    /// the same IEEE operations, so the same bits).
    ///
    /// # Safety
    /// The processor must support AVX-512F.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx512f")]
    unsafe fn for_each_true_anomaly_avx512<const N: usize>(
        &self,
        shifted_times: &[f64],
        visit: &mut impl FnMut(usize, &[f64], &[f64]),
    ) {
        self.for_each_true_anomaly_lanes::<N>(shifted_times, visit);
    }

    /// [`Self::for_each_true_anomaly_lanes`] compiled for AVX2.
    ///
    /// # Safety
    /// The processor must support AVX2.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn for_each_true_anomaly_avx2(
        &self,
        shifted_times: &[f64],
        visit: &mut impl FnMut(usize, &[f64], &[f64]),
    ) {
        self.for_each_true_anomaly_lanes::<ANOMALY_LANES_AVX2>(shifted_times, visit);
    }

    /// The per-epoch quantities from the true anomaly.
    #[inline(always)]
    fn terms(&self, cos_nu: f64, sin_nu: f64) -> PointTerms {
        let cos_nu_omega = cos_nu * self.cos_omega - sin_nu * self.sin_omega;
        let sin_nu_omega = sin_nu * self.cos_omega + cos_nu * self.sin_omega;
        PointTerms {
            velocity_shape: cos_nu_omega + self.e * self.cos_omega,
            sin_nu_omega,
            cos_nu,
            sin_nu,
        }
    }
}

/// Epochs solved side by side by [`Prepared::for_each_true_anomaly`] without AVX: two SSE2
/// registers on x86-64, four WebAssembly SIMD registers in wasm (measured with
/// `scripts/bench-reference-job.mjs`: 81 ms per reference trial with 8 lanes, 93 ms with 4,
/// 117 ms with 16).
#[cfg(not(target_arch = "wasm32"))]
const ANOMALY_LANES: usize = 4;
#[cfg(target_arch = "wasm32")]
const ANOMALY_LANES: usize = 8;

/// The lane count of [`Prepared::for_each_true_anomaly`] with AVX2 (two 256-bit registers).
#[cfg(target_arch = "x86_64")]
const ANOMALY_LANES_AVX2: usize = 8;

impl LeastSquaresProblem for RvProblem<'_> {
    fn n_params(&self) -> usize {
        self.layout.n_params()
    }

    fn n_residuals(&self) -> usize {
        self.data.n_points()
    }

    fn residuals(&self, params: &[f64], out: &mut [f64]) {
        if !self.model_velocities(params, out) {
            out.fill(f64::NAN);
            return;
        }
        for ((r, &v), &inv) in out
            .iter_mut()
            .zip(&self.data.velocities)
            .zip(&self.inverse_sigma)
        {
            *r = (v - *r) * inv;
        }
    }

    /// Analytic Jacobian of the weighted residuals, `J = −(∂v/∂p)/σ`, with, for
    /// v = K [cos(ν + ω) + e cos ω] and M = λ − ω + 2π (t − t_ref)/P (textbook derivatives,
    /// e.g. Murray & Dermott 1999, Solar System Dynamics, §2.4–2.5):
    ///
    /// * dν/dM = (1 + e cos ν)² / (1 − e²)^{3/2}, dν/de|_M = sin ν (2 + e cos ν)/(1 − e²);
    /// * ∂v/∂P = K sin(ν+ω) dν/dM · 2π(t − t_ref)/P², ∂v/∂λ = −K sin(ν+ω) dν/dM;
    /// * ∂v/∂e|_{λ,ω} = −K sin(ν+ω) dν/de + K cos ω;
    /// * D = (1/e) ∂v/∂ω|_{λ,e} = K [sin(ν+ω) (dν/dM − 1)/e − sin ω], with
    ///   (dν/dM − 1)/e = 2 cos ν + e cos²ν + (1 + e cos ν)² e (1+s+s²)/((1+s) s³), s = √(1−e²),
    ///   written without cancellation so that it is finite at e = 0;
    /// * (√e cos ω, √e sin ω) = (h, k): ∂v/∂h = 2h ∂v/∂e − k D, ∂v/∂k = 2k ∂v/∂e + h D;
    /// * (e cos ω, e sin ω) = (x, y): ∂v/∂x = cos ω ∂v/∂e − sin ω D,
    ///   ∂v/∂y = sin ω ∂v/∂e + cos ω D.
    fn jacobian(&self, params: &[f64], out: &mut DMatrix<f64>) -> bool {
        let layout = &self.layout;
        let n = self.data.n_points();
        let offsets = layout.offsets_start();
        for c in 0..layout.n_companions() {
            let comp = decode_companion(layout, self.coordinates, params, c);
            let start = layout.companion_start(c);
            let Some(prepared) = Prepared::new(&comp) else {
                out.fill(f64::NAN);
                return true;
            };
            let k = comp.semi_amplitude;
            let (e, s) = (prepared.e, prepared.s);
            let s3 = s * s * s;
            let g_over_e = e * (1.0 + s + s * s) / ((1.0 + s) * s3);
            let (a, b) = if layout.circular[c] {
                (0.0, 0.0)
            } else {
                (params[start + 2], params[start + 3])
            };
            prepared.for_each_true_anomaly(&self.data.shifted_times, |i, cos_nu, sin_nu| {
                let dt = self.data.shifted_times[i];
                let w = -self.inverse_sigma[i];
                let p = prepared.terms(cos_nu, sin_nu);
                let one_plus = 1.0 + e * p.cos_nu;
                let dnu_dm = one_plus * one_plus / s3;
                let dv_dm = -k * p.sin_nu_omega * dnu_dm;
                out[(i, start)] = w * dv_dm * (-prepared.mean_motion * dt / comp.period);
                out[(i, start + 1)] = w * p.velocity_shape;
                let lambda_col = start + layout.companion_len(c) - 1;
                out[(i, lambda_col)] = w * dv_dm;
                if !layout.circular[c] {
                    let dnu_de = p.sin_nu * (2.0 + e * p.cos_nu) / (s * s);
                    let dv_de = -k * p.sin_nu_omega * dnu_de + k * prepared.cos_omega;
                    let ratio =
                        2.0 * p.cos_nu + e * p.cos_nu * p.cos_nu + one_plus * one_plus * g_over_e;
                    let d = k * (p.sin_nu_omega * ratio - prepared.sin_omega);
                    let (da, db) = match self.coordinates {
                        EccentricityCoordinates::SqrtE => {
                            (2.0 * a * dv_de - b * d, 2.0 * b * dv_de + a * d)
                        }
                        EccentricityCoordinates::E => (
                            prepared.cos_omega * dv_de - prepared.sin_omega * d,
                            prepared.sin_omega * dv_de + prepared.cos_omega * d,
                        ),
                    };
                    out[(i, start + 2)] = w * da;
                    out[(i, start + 3)] = w * db;
                }
            });
        }
        for j in 0..layout.n_instruments {
            for i in 0..n {
                out[(i, offsets + j)] = if self.data.instruments[i] == j {
                    -self.inverse_sigma[i]
                } else {
                    0.0
                };
            }
        }
        if let Some(t) = layout.trend_index() {
            for i in 0..n {
                out[(i, t)] = -self.inverse_sigma[i] * self.data.shifted_times[i];
            }
        }
        true
    }
}

/// The unit-amplitude Keplerian shape cos(ν + ω) + e cos ω at each of `shifted_times`
/// (t − t_ref) into `out`, for M = λ − ω + 2π (t − t_ref)/P. Returns false outside the model's
/// domain (P ≤ 0, e ≥ [`MAX_ECCENTRICITY`]).
pub fn keplerian_shape(
    shifted_times: &[f64],
    period: f64,
    eccentricity: f64,
    omega: f64,
    mean_longitude: f64,
    out: &mut [f64],
) -> bool {
    let (sin_omega, cos_omega) = libm::sincos(omega);
    let comp = DecodedCompanion {
        period,
        semi_amplitude: 1.0,
        eccentricity,
        cos_omega,
        sin_omega,
        mean_longitude,
    };
    let Some(prepared) = Prepared::new(&comp) else {
        return false;
    };
    prepared.for_each_true_anomaly(shifted_times, |i, cos_nu, sin_nu| {
        out[i] = prepared.terms(cos_nu, sin_nu).velocity_shape;
    });
    true
}

/// Converts a parameter vector between eccentricity coordinate systems (same layout).
pub fn convert_coordinates(
    layout: &ParameterLayout,
    from: EccentricityCoordinates,
    to: EccentricityCoordinates,
    params: &[f64],
) -> Vec<f64> {
    let mut out = params.to_vec();
    if from == to {
        return out;
    }
    for c in 0..layout.n_companions() {
        let comp = decode_companion(layout, from, params, c);
        encode_companion(layout, to, &mut out, c, &comp.into());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::RvModel;
    use crate::orbit::OrbitalElements;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    fn sample_data() -> FitData {
        let times: Vec<f64> = (0..25)
            .map(|i| 2_459_000.0 + 7.3 * i as f64 + 2.0 * libm::sin(1.3 * i as f64))
            .collect();
        let instruments: Vec<usize> = (0..25).map(|i| i % 2).collect();
        let velocities: Vec<f64> = (0..25).map(|i| 3.0 * libm::cos(0.7 * i as f64)).collect();
        let errors: Vec<f64> = (0..25).map(|i| 1.0 + 0.1 * (i % 3) as f64).collect();
        FitData::new(
            &times,
            &velocities,
            &errors,
            &instruments,
            &["a".into(), "b".into()],
        )
    }

    #[test]
    fn model_matches_the_core_rv_model() {
        // Independent check against crate::model::RvModel (same equations, other code path).
        // RvModel goes through T_p = t_ref − M₀P/2π, whose rounding at t ~ 2.46e6 d
        // (ulp 4.7e-10 d) times |dv/dt| ≲ 60 m/s/d here gives up to ~3e-8 m/s: tolerance 1e-7.
        let data = sample_data();
        let layout = ParameterLayout::new(2, 2, true);
        let mut params = vec![0.0; layout.n_params()];
        let t_ref = data.reference_time();
        let elements = [(12.3, 40.0, 0.45, 2.1, 0.7), (61.0, 15.0, 0.1, -0.8, 4.0)];
        let mut companions = Vec::new();
        for (c, &(p, k, e, w, lambda)) in elements.iter().enumerate() {
            encode_companion(
                &layout,
                EccentricityCoordinates::SqrtE,
                &mut params,
                c,
                &ElementsAtEpoch {
                    period: p,
                    semi_amplitude: k,
                    eccentricity: e,
                    omega: w,
                    mean_longitude: lambda,
                },
            );
            companions.push(
                OrbitalElements::from_mean_anomaly_at_epoch(p, k, e, w, lambda - w, t_ref).unwrap(),
            );
        }
        let o = layout.offsets_start();
        params[o] = 5.0;
        params[o + 1] = -7.0;
        params[o + 2] = 0.02;
        let model = RvModel::new(companions, vec![5.0, -7.0], 0.02, t_ref).unwrap();
        let mut expected = vec![0.0; data.n_points()];
        model
            .velocities(data.times(), data.instruments(), &mut expected)
            .unwrap();
        let problem = RvProblem::new(&data, layout, EccentricityCoordinates::SqrtE);
        let mut got = vec![0.0; data.n_points()];
        assert!(problem.model_velocities(&params, &mut got));
        for (g, e) in got.iter().zip(&expected) {
            assert!((g - e).abs() < 1e-7, "{g} vs {e}");
        }
    }

    #[test]
    fn outside_the_domain_gives_nan_residuals() {
        let data = sample_data();
        let layout = ParameterLayout::new(1, 2, false);
        let problem = RvProblem::new(&data, layout, EccentricityCoordinates::SqrtE);
        let mut out = vec![0.0; data.n_points()];
        problem.residuals(&[10.0, 5.0, 0.9, 0.5, 0.0, 0.0, 0.0], &mut out);
        assert!(out.iter().all(|r| r.is_nan()));
        problem.residuals(&[-1.0, 5.0, 0.1, 0.1, 0.0, 0.0, 0.0], &mut out);
        assert!(out.iter().all(|r| r.is_nan()));
    }

    #[test]
    fn coordinate_conversion_round_trips() {
        let layout = ParameterLayout::new(1, 1, false);
        let p = [5.0, 3.0, 0.3, -0.4, 1.0, 2.0];
        let e = convert_coordinates(
            &layout,
            EccentricityCoordinates::SqrtE,
            EccentricityCoordinates::E,
            &p,
        );
        assert_relative_eq!(libm::hypot(e[2], e[3]), 0.25, max_relative = 1e-14);
        let back = convert_coordinates(
            &layout,
            EccentricityCoordinates::E,
            EccentricityCoordinates::SqrtE,
            &e,
        );
        for (x, y) in p.iter().zip(&back) {
            assert_relative_eq!(x, y, max_relative = 1e-14);
        }
    }

    fn central_difference(problem: &RvProblem, params: &[f64]) -> DMatrix<f64> {
        let (m, n) = (problem.n_residuals(), problem.n_params());
        let mut out = DMatrix::zeros(m, n);
        let (mut plus, mut minus) = (vec![0.0; m], vec![0.0; m]);
        for j in 0..n {
            let h = 1e-6 * params[j].abs().max(1e-3);
            let mut p = params.to_vec();
            p[j] += h;
            problem.residuals(&p, &mut plus);
            p[j] -= 2.0 * h;
            problem.residuals(&p, &mut minus);
            for i in 0..m {
                out[(i, j)] = (plus[i] - minus[i]) / (2.0 * h);
            }
        }
        out
    }

    proptest! {
        // Analytic vs central-difference Jacobian in both coordinate systems and with one
        // companion circular. Central differences with h = 1e-6·|p| have truncation error
        // ~h²·|∂³r| and rounding ~ε|r|/h (Press et al. 2007, Numerical Recipes 3rd ed., §5.7);
        // relative to the largest |J| entry 1e-5 covers curvature up to e = 0.9.
        #[test]
        fn analytic_jacobian_matches_finite_differences(
            e1 in 0.0f64..0.9, w1 in -3.1f64..3.1, l1 in -3.0f64..3.0,
            e2 in 0.001f64..0.6, w2 in -3.1f64..3.1, p1 in 3.0f64..40.0,
            sqrt_coords in any::<bool>(), second_circular in any::<bool>(),
        ) {
            let data = sample_data();
            let mut layout = ParameterLayout::new(2, 2, true);
            layout.circular[1] = second_circular;
            let coords = if sqrt_coords { EccentricityCoordinates::SqrtE } else { EccentricityCoordinates::E };
            // e = 0 exactly would make the sqrt-e central difference straddle the origin; keep a floor.
            let e1 = e1.max(1e-3);
            let mut params = vec![0.0; layout.n_params()];
            encode_companion(&layout, coords, &mut params, 0, &ElementsAtEpoch { period: p1, semi_amplitude: 30.0, eccentricity: e1, omega: w1, mean_longitude: l1 });
            encode_companion(&layout, coords, &mut params, 1, &ElementsAtEpoch { period: 77.0, semi_amplitude: 12.0, eccentricity: e2, omega: w2, mean_longitude: 0.4 });
            let o = layout.offsets_start();
            params[o] = 1.0; params[o + 1] = -2.0; params[o + 2] = 0.01;
            let problem = RvProblem::new(&data, layout, coords);
            let mut analytic = DMatrix::zeros(data.n_points(), problem.n_params());
            prop_assert!(problem.jacobian(&params, &mut analytic));
            let numeric = central_difference(&problem, &params);
            let scale = analytic.amax();
            let worst = (&numeric - &analytic).amax() / scale;
            prop_assert!(worst < 1e-5, "worst relative deviation {worst}");
        }
    }

    #[test]
    fn e_coordinates_jacobian_is_regular_at_zero_eccentricity() {
        // At e = 0 the (e cos ω, e sin ω) columns are K[cos 2L-type] terms, not zero
        // (common practice: the RV curve is analytic in e cos ω, e sin ω). Central differences
        // straddle the origin symmetrically in these coordinates, so they apply here.
        let data = sample_data();
        let layout = ParameterLayout::new(1, 2, false);
        let params = [11.0, 20.0, 0.0, 0.0, 0.3, 0.0, 0.0];
        let problem = RvProblem::new(&data, layout, EccentricityCoordinates::E);
        let mut analytic = DMatrix::zeros(data.n_points(), 7);
        problem.jacobian(&params, &mut analytic);
        let numeric = central_difference(&problem, &params);
        assert!(analytic.column(2).amax() > 1.0);
        let worst = (&numeric - &analytic).amax() / analytic.amax();
        assert!(worst < 1e-6, "{worst}");
    }
}
