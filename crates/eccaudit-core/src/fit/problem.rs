//! The radial-velocity least-squares problem: weighted residuals of the model of
//! [`crate::model::ParameterModel`] and their analytic Jacobian in either eccentricity coordinate
//! system (the parameters are described in [`crate::model::parameters`]).

use super::FitData;
use crate::lsq::{DMatrix, LeastSquaresProblem};
use crate::model::parameters::EpochCompanion;
use crate::model::{decode_companion, EccentricityCoordinates, ParameterLayout, ParameterModel};

/// The weighted RV residual problem `r_i = (v_i − model_i) / σ_i` with
/// `σ_i² = uncertainty_i² + jitter²(instrument_i)`.
#[derive(Debug, Clone)]
pub struct RvProblem<'a> {
    data: &'a FitData,
    model: ParameterModel<'a>,
    inverse_sigma: Vec<f64>,
}

impl<'a> RvProblem<'a> {
    /// A problem without jitter.
    pub fn new(
        data: &'a FitData,
        layout: ParameterLayout,
        coordinates: EccentricityCoordinates,
    ) -> Self {
        let inverse_sigma = data.uncertainties().iter().map(|s| 1.0 / s).collect();
        Self {
            data,
            model: ParameterModel::new(
                data.shifted_times(),
                data.instruments(),
                layout,
                coordinates,
            ),
            inverse_sigma,
        }
    }

    /// Sets the per-instrument jitter [m/s] added in quadrature to the uncertainties.
    pub fn set_jitter(&mut self, jitter: &[f64]) {
        for ((inv, &s), &j) in self
            .inverse_sigma
            .iter_mut()
            .zip(self.data.uncertainties())
            .zip(self.data.instruments())
        {
            let s_j = jitter.get(j).copied().unwrap_or(0.0);
            *inv = 1.0 / libm::sqrt(s * s + s_j * s_j);
        }
    }

    /// The parameter layout.
    pub fn layout(&self) -> &ParameterLayout {
        self.model.layout()
    }

    /// The eccentricity coordinates in use.
    pub fn coordinates(&self) -> EccentricityCoordinates {
        self.model.coordinates()
    }

    /// 1/σ_i including jitter.
    pub fn inverse_sigma(&self) -> &[f64] {
        &self.inverse_sigma
    }

    /// The data.
    pub fn data(&self) -> &FitData {
        self.data
    }

    /// The model whose velocities the residuals compare with the data.
    pub fn model(&self) -> &ParameterModel<'a> {
        &self.model
    }

    /// Model velocities [m/s] at the data epochs into `out` (no allocation): the model's
    /// [`ParameterModel::velocities`]. Returns false when `params` lie outside the model's
    /// domain (P ≤ 0, e ≥ [`crate::model::MAX_ECCENTRICITY`], non-finite).
    pub fn model_velocities(&self, params: &[f64], out: &mut [f64]) -> bool {
        self.model.velocities(params, out)
    }
}

impl LeastSquaresProblem for RvProblem<'_> {
    fn n_params(&self) -> usize {
        self.layout().n_params()
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
            .zip(self.data.velocities())
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
        let layout = self.layout();
        let n = self.data.n_points();
        let offsets = layout.offsets_start();
        for c in 0..layout.n_companions() {
            let comp = decode_companion(layout, self.coordinates(), params, c);
            let start = layout.companion_start(c);
            let Some(prepared) = EpochCompanion::new(&comp) else {
                out.fill(f64::NAN);
                return true;
            };
            let k = comp.semi_amplitude;
            let (e, s) = (prepared.e(), prepared.sqrt_one_minus_e2());
            let s3 = s * s * s;
            let g_over_e = e * (1.0 + s + s * s) / ((1.0 + s) * s3);
            let (a, b) = if layout.circular[c] {
                (0.0, 0.0)
            } else {
                (params[start + 2], params[start + 3])
            };
            let shifted_times = self.data.shifted_times();
            prepared
                .keplerian
                .for_each(shifted_times, |i, cos_nu, sin_nu| {
                    let dt = shifted_times[i];
                    let w = -self.inverse_sigma[i];
                    let p = prepared.terms(cos_nu, sin_nu);
                    let one_plus = 1.0 + e * p.cos_nu;
                    let dnu_dm = one_plus * one_plus / s3;
                    let dv_dm = -k * p.sin_nu_omega * dnu_dm;
                    out[(i, start)] = w * dv_dm * (-prepared.mean_motion() * dt / comp.period);
                    out[(i, start + 1)] = w * p.velocity_shape;
                    let lambda_col = start + layout.companion_len(c) - 1;
                    out[(i, lambda_col)] = w * dv_dm;
                    if !layout.circular[c] {
                        let dnu_de = p.sin_nu * (2.0 + e * p.cos_nu) / (s * s);
                        let dv_de = -k * p.sin_nu_omega * dnu_de + k * prepared.cos_omega;
                        let ratio = 2.0 * p.cos_nu
                            + e * p.cos_nu * p.cos_nu
                            + one_plus * one_plus * g_over_e;
                        let d = k * (p.sin_nu_omega * ratio - prepared.sin_omega);
                        let (da, db) = match self.coordinates() {
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
                out[(i, offsets + j)] = if self.data.instruments()[i] == j {
                    -self.inverse_sigma[i]
                } else {
                    0.0
                };
            }
        }
        if let Some(t) = layout.trend_index() {
            for i in 0..n {
                out[(i, t)] = -self.inverse_sigma[i] * self.data.shifted_times()[i];
            }
        }
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::{encode_companion, ElementsAtEpoch, RvModel};
    use crate::orbit::OrbitalElements;
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

    /// Central differences with step h and h/2 combined by Richardson extrapolation,
    /// (4 D(h/2) − D(h))/3, which cancels the h² truncation term (Press et al. 2007, Numerical
    /// Recipes 3rd ed., §5.7). Plain central differences with h = 1e-6·|p| are not accurate
    /// enough near periastron of an eccentric orbit: for e = 0.89, P = 5.7 d and an epoch 90 d
    /// from t_ref, ∂r/∂P is 43 and its h²·∂³r/∂P³/6 truncation error is 1e-3 (measured: the
    /// deviation fell exactly as h², 2.5e-5 of max |J| at h = 1e-6·P, 2.5e-7 at 1e-7·P).
    fn central_difference(problem: &RvProblem, params: &[f64]) -> DMatrix<f64> {
        let (m, n) = (problem.n_residuals(), problem.n_params());
        let mut out = DMatrix::zeros(m, n);
        let (mut plus, mut minus) = (vec![0.0; m], vec![0.0; m]);
        let mut difference = |j: usize, h: f64, column: &mut [f64]| {
            let mut p = params.to_vec();
            p[j] += h;
            problem.residuals(&p, &mut plus);
            p[j] -= 2.0 * h;
            problem.residuals(&p, &mut minus);
            for i in 0..m {
                column[i] = (plus[i] - minus[i]) / (2.0 * h);
            }
        };
        let (mut coarse, mut fine) = (vec![0.0; m], vec![0.0; m]);
        for j in 0..n {
            let h = 1e-5 * params[j].abs().max(1e-3);
            difference(j, h, &mut coarse);
            difference(j, 0.5 * h, &mut fine);
            for i in 0..m {
                out[(i, j)] = (4.0 * fine[i] - coarse[i]) / 3.0;
            }
        }
        out
    }

    proptest! {
        // Analytic vs finite-difference Jacobian in both coordinate systems and with one
        // companion circular. The Richardson-extrapolated central differences of
        // `central_difference` (h = 1e-5·|p|, floor 1e-8) have truncation error ~h⁴·|∂⁵r|/30
        // and rounding ~ε|r|/h ≲ 2.2e-16 · 30 / 1e-8 ≈ 7e-7 (absolute; Press et al. 2007,
        // §5.7); 1e-6 of the largest |J| entry (≈ 40 here) bounds both up to e = 0.9.
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
            prop_assert!(worst < 1e-6, "worst relative deviation {worst}");
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
