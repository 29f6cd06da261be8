//! The model in the fit's parameters: where each parameter sits ([`ParameterLayout`]), the two
//! eccentricity coordinate systems, decoding and encoding a companion, and [`ParameterModel`],
//! the model velocities at a parameter vector, which the least-squares problem, the posterior and
//! the injection engine share.
//!
//! Parameters, per companion in order: period P [d], semi-amplitude K [m/s], two eccentricity
//! coordinates (absent for a companion held circular), mean longitude λ = M₀ + ω [rad] at the
//! reference epoch t_ref; then one offset γ per instrument [m/s]; then, optionally, a linear trend
//! [m/s/d] about t_ref. The eccentricity coordinates are either (√e cos ω, √e sin ω) — used for
//! the search — or (e cos ω, e sin ω) — used for the reported covariance, where the Jacobian is
//! regular at e = 0.

use super::keplerian::{FromEpoch, Keplerian};
use crate::kepler::{Eccentricity, TWO_PI};
use crate::lanes::Isa;

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
    let Some(companion) = EpochCompanion::new(&comp) else {
        return false;
    };
    companion
        .keplerian
        .for_each(shifted_times, |i, cos_nu, sin_nu| {
            out[i] = companion.terms(cos_nu, sin_nu).velocity_shape;
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

/// One companion at one parameter point, ready for the evaluator: its [`Keplerian`] in the
/// mean-longitude phase and cos ω, sin ω.
#[derive(Debug, Clone, Copy)]
pub(crate) struct EpochCompanion {
    /// The evaluator of the companion's true anomaly at shifted times t − t_ref.
    pub(crate) keplerian: Keplerian<FromEpoch>,
    /// cos ω.
    pub(crate) cos_omega: f64,
    /// sin ω.
    pub(crate) sin_omega: f64,
}

/// Per-epoch quantities of one companion.
pub(crate) struct PointTerms {
    /// cos(ν + ω) + e cos ω.
    pub(crate) velocity_shape: f64,
    /// sin(ν + ω).
    pub(crate) sin_nu_omega: f64,
    /// cos ν.
    pub(crate) cos_nu: f64,
    /// sin ν.
    pub(crate) sin_nu: f64,
}

impl EpochCompanion {
    /// `None` outside the model's domain (P ≤ 0, e ≥ [`MAX_ECCENTRICITY`], non-finite values).
    pub(crate) fn new(comp: &DecodedCompanion) -> Option<Self> {
        let valid = comp.period > 0.0
            && comp.period.is_finite()
            && comp.eccentricity < MAX_ECCENTRICITY
            && comp.semi_amplitude.is_finite()
            && comp.mean_longitude.is_finite();
        if !valid {
            return None;
        }
        let phase = FromEpoch {
            mean_motion: TWO_PI / comp.period,
            mean_anomaly_at_reference: comp.mean_longitude - comp.omega(),
        };
        Some(Self {
            keplerian: Keplerian::new(phase, Eccentricity::new(comp.eccentricity).ok()?),
            cos_omega: comp.cos_omega,
            sin_omega: comp.sin_omega,
        })
    }

    /// e.
    #[inline(always)]
    pub(crate) fn e(&self) -> f64 {
        self.keplerian.e()
    }

    /// √((1 − e)(1 + e)).
    #[inline(always)]
    pub(crate) fn sqrt_one_minus_e2(&self) -> f64 {
        self.keplerian.sqrt_one_minus_e2()
    }

    /// n = 2π/P [rad/d].
    #[inline(always)]
    pub(crate) fn mean_motion(&self) -> f64 {
        self.keplerian.phase().mean_motion
    }

    /// The per-epoch quantities from the true anomaly.
    #[inline(always)]
    pub(crate) fn terms(&self, cos_nu: f64, sin_nu: f64) -> PointTerms {
        let cos_nu_omega = cos_nu * self.cos_omega - sin_nu * self.sin_omega;
        let sin_nu_omega = sin_nu * self.cos_omega + cos_nu * self.sin_omega;
        PointTerms {
            velocity_shape: cos_nu_omega + self.e() * self.cos_omega,
            sin_nu_omega,
            cos_nu,
            sin_nu,
        }
    }
}

/// The model velocities at a parameter vector: Σ_c K_c [cos(ν_c + ω_c) + e_c cos ω_c] + γ of
/// each epoch's instrument + trend · (t − t_ref), at the epochs of one data set. Shared by the
/// least-squares problem ([`crate::fit::RvProblem`]), the posterior and the injection engine.
#[derive(Debug, Clone)]
pub struct ParameterModel<'a> {
    shifted_times: &'a [f64],
    instruments: &'a [usize],
    layout: ParameterLayout,
    coordinates: EccentricityCoordinates,
}

impl<'a> ParameterModel<'a> {
    /// The model at epochs t − t_ref = `shifted_times` [d] observed by `instruments` (indices
    /// below `layout.n_instruments`; equal lengths).
    pub fn new(
        shifted_times: &'a [f64],
        instruments: &'a [usize],
        layout: ParameterLayout,
        coordinates: EccentricityCoordinates,
    ) -> Self {
        debug_assert_eq!(shifted_times.len(), instruments.len());
        debug_assert!(instruments.iter().all(|&i| i < layout.n_instruments));
        Self {
            shifted_times,
            instruments,
            layout,
            coordinates,
        }
    }

    /// The parameter layout.
    pub fn layout(&self) -> &ParameterLayout {
        &self.layout
    }

    /// The eccentricity coordinates of the parameter vectors.
    pub fn coordinates(&self) -> EccentricityCoordinates {
        self.coordinates
    }

    /// t − t_ref [d] of each epoch.
    pub fn shifted_times(&self) -> &'a [f64] {
        self.shifted_times
    }

    /// The instrument index of each epoch.
    pub fn instruments(&self) -> &'a [usize] {
        self.instruments
    }

    /// Model velocities [m/s] at the epochs into `out` (no allocation). Returns false when
    /// `params` lie outside the model's domain (P ≤ 0, e ≥ [`MAX_ECCENTRICITY`], non-finite).
    pub fn velocities(&self, params: &[f64], out: &mut [f64]) -> bool {
        self.velocities_unchecked(params, out) && out.iter().all(|v| v.is_finite())
    }

    /// [`Self::velocities`] without the final check that every velocity is finite (for callers
    /// that check a sum of them instead); false still for parameters outside the domain.
    #[inline]
    pub fn velocities_unchecked(&self, params: &[f64], out: &mut [f64]) -> bool {
        self.velocities_unchecked_on(Isa::detected(), params, out)
    }

    /// [`Self::velocities_unchecked`] compiled for `isa` (for the tests of every path).
    #[inline]
    pub(crate) fn velocities_unchecked_on(
        &self,
        isa: Isa,
        params: &[f64],
        out: &mut [f64],
    ) -> bool {
        let layout = &self.layout;
        let offsets = layout.offsets_start();
        let trend = layout.trend_index().map_or(0.0, |i| params[i]);
        for ((slot, &dt), &inst) in out.iter_mut().zip(self.shifted_times).zip(self.instruments) {
            *slot = params[offsets + inst] + trend * dt;
        }
        for c in 0..layout.n_companions() {
            let comp = decode_companion(layout, self.coordinates, params, c);
            let Some(companion) = EpochCompanion::new(&comp) else {
                return false;
            };
            let k = comp.semi_amplitude;
            companion.keplerian.for_each_group_on(
                isa,
                self.shifted_times,
                |start, cos_nu, sin_nu| {
                    // No branch in this loop: it runs on the solver's vector registers.
                    let group = &mut out[start..start + cos_nu.len()];
                    for ((slot, &cos), &sin) in group.iter_mut().zip(cos_nu).zip(sin_nu) {
                        *slot += k * companion.terms(cos, sin).velocity_shape;
                    }
                },
            );
        }
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

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

    #[test]
    fn every_instruction_set_gives_the_same_model_velocities() {
        // Two companions (one near e = 0.98, where lanes fall back to the scalar solver), two
        // instruments, a trend; lengths that use every group size of every instruction set.
        let times: Vec<f64> = (0..75).map(|i| -60.0 + 1.71 * i as f64).collect();
        let instruments: Vec<usize> = (0..75).map(|i| i % 2).collect();
        let layout = ParameterLayout::new(2, 2, true);
        let coordinates = EccentricityCoordinates::SqrtE;
        let mut params = vec![0.0; layout.n_params()];
        for (c, (period, e)) in [(6.1, 0.98), (41.0, 0.2)].into_iter().enumerate() {
            let elements = ElementsAtEpoch {
                period,
                semi_amplitude: 20.0 / (c + 1) as f64,
                eccentricity: e,
                omega: 1.1,
                mean_longitude: -0.4,
            };
            encode_companion(&layout, coordinates, &mut params, c, &elements);
        }
        let o = layout.offsets_start();
        params[o..].copy_from_slice(&[3.0, -4.0, 0.05]);
        for n in [1, 7, 12, 30, 33, 75] {
            let model =
                ParameterModel::new(&times[..n], &instruments[..n], layout.clone(), coordinates);
            let mut portable = vec![0.0; n];
            assert!(model.velocities_unchecked_on(Isa::Portable, &params, &mut portable));
            for isa in Isa::available() {
                let mut lanes = vec![0.0; n];
                assert!(model.velocities_unchecked_on(isa, &params, &mut lanes));
                for (a, b) in lanes.iter().zip(&portable) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{isa:?}, n = {n}");
                }
            }
        }
    }
}
