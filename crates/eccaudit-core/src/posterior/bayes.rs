//! Circular versus eccentric: the Bayes factor of e = 0 against e free by the Savage–Dickey
//! density ratio, estimated as a small-ball mass ratio with its Monte-Carlo uncertainty.
//!
//! # Method
//!
//! For nested models where the null fixes e = 0 and the priors of the other parameters are the
//! same in both models (true here: the priors are independent, and at e = 0 the model depends on
//! P, K, λ, γ exactly as the circular model does), the Savage–Dickey ratio gives
//! BF₀₁ = p(e = 0 | D) / p(e = 0) (Dickey 1971, Ann. Math. Stat. 42, 204; Verdinelli &
//! Wasserman 1995, JASA 90, 614, eq. 1). With samples, densities at a boundary point are
//! awkward, so the ratio is taken of masses in a small ball:
//!
//! BF₀₁ = lim_{ε→0} P_post(e < ε) / P_prior(e < ε).
//!
//! The ball {e < ε} is the disc of radius √ε about the origin of the (h, k) plane, where the
//! likelihood is continuous, so the limit equals Z_circular/Z_eccentric for *any* prior with
//! mass in every ball about 0 (also when p(e) → 0 or ∞ at 0, e.g. Beta with a ≠ 1). It is
//! undefined when e_min > 0: the prior then excludes the null and the ratio is 0/0.
//!
//! ε is chosen from a ladder of prior masses q ∈ {0.005, 0.01, 0.02, 0.05, 0.1} (ε = prior
//! quantile at q): the smallest q whose ball holds at least [`MIN_BALL_SAMPLES`] posterior
//! samples (bias from the finite ball shrinks with ε, noise grows). The uncertainty is the
//! binomial error of the posterior mass with the effective sample size in place of the number of
//! draws: σ = √(p̂(1 − p̂)/ESS)/q. When no sample falls in even the largest ball, only an upper
//! limit is given: BF₀₁ < 3/(ESS · q) at 95 % ("rule of three", Hanley & Lippman-Hand 1983,
//! JAMA 249, 1743). The ratio at the next larger ball is compared as a stability check.

use serde::{Deserialize, Serialize};

use crate::priors::EccentricityPrior;

/// Prior masses of the ladder of balls.
pub const BALL_PRIOR_MASSES: [f64; 5] = [0.005, 0.01, 0.02, 0.05, 0.1];

/// Fewest posterior samples in the chosen ball.
pub const MIN_BALL_SAMPLES: usize = 100;

/// The mass ratio at one ball.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BallRatio {
    /// Ball radius in e (ball = {e < ε}).
    pub epsilon: f64,
    /// Prior mass in the ball.
    pub prior_mass: f64,
    /// Posterior mass in the ball (fraction of samples).
    pub posterior_mass: f64,
    /// Samples in the ball.
    pub n_inside: usize,
    /// posterior_mass / prior_mass.
    pub ratio: f64,
    /// ESS-corrected binomial error of the ratio.
    pub error: f64,
}

/// How the Bayes factor came out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BayesFactorStatus {
    /// BF₀₁ estimated with its error.
    Estimated,
    /// No posterior sample near e = 0: only an upper limit on BF₀₁.
    UpperLimit,
    /// The prior excludes e = 0 (e_min > 0) or is the circular point mass: no Savage–Dickey ratio.
    Undefined,
}

/// The Bayes factor BF₀₁ (circular over eccentric) by the Savage–Dickey ball ratio.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SavageDickey {
    /// Outcome.
    pub status: BayesFactorStatus,
    /// BF₀₁ = Z(e = 0)/Z(e free): above 1 favours the circular orbit. For an upper limit, the
    /// limit; NaN when undefined.
    pub bf01: f64,
    /// 1σ Monte-Carlo error of `bf01` (NaN for limits or undefined).
    pub bf01_error: f64,
    /// The ball used (from `ladder`), when any.
    pub chosen: Option<BallRatio>,
    /// Every ball of the ladder.
    pub ladder: Vec<BallRatio>,
    /// The ratio at the next larger ball agrees within 2σ (combined); false flags a posterior
    /// density that changes within the ball, i.e. ε too large for the limit.
    pub stable: bool,
    /// Effective sample size used in the errors.
    pub effective_sample_size: f64,
    /// One sentence on how this was obtained.
    pub note: String,
}

impl SavageDickey {
    pub(crate) fn undefined(note: String) -> Self {
        Self {
            status: BayesFactorStatus::Undefined,
            bf01: f64::NAN,
            bf01_error: f64::NAN,
            chosen: None,
            ladder: Vec::new(),
            stable: false,
            effective_sample_size: f64::NAN,
            note,
        }
    }
}

/// Savage–Dickey BF₀₁ for a prior of this crate (see the module notes): undefined when the prior
/// is circular or has e_min > 0.
pub fn savage_dickey(
    e_samples: &[f64],
    effective_sample_size: f64,
    prior: &EccentricityPrior,
) -> SavageDickey {
    if prior.is_circular() {
        return SavageDickey::undefined(
            "circular prior: e is fixed at 0, nothing to compare".into(),
        );
    }
    let (e_min, _) = prior.bounds();
    if e_min > 0.0 {
        return SavageDickey::undefined(format!(
            "undefined: the prior excludes e = 0 (e_min = {e_min}), so the Savage–Dickey ratio \
             is 0/0"
        ));
    }
    savage_dickey_ball_ratio(
        e_samples,
        effective_sample_size,
        |e| prior.cdf(e),
        |q| prior.quantile(q),
    )
}

/// The ball-ratio estimator of the module notes for any prior on e ≥ 0 with mass near 0, given
/// by its CDF and quantile function. `e_samples` are posterior draws of e;
/// `effective_sample_size` scales the binomial errors.
pub fn savage_dickey_ball_ratio(
    e_samples: &[f64],
    effective_sample_size: f64,
    prior_cdf: impl Fn(f64) -> f64,
    prior_quantile: impl Fn(f64) -> f64,
) -> SavageDickey {
    let n = e_samples.len();
    if n == 0 {
        return SavageDickey::undefined("no samples".into());
    }
    let ess = if effective_sample_size.is_finite() && effective_sample_size > 0.0 {
        effective_sample_size.min(n as f64)
    } else {
        n as f64
    };
    let ladder: Vec<BallRatio> = BALL_PRIOR_MASSES
        .iter()
        .map(|&q| {
            let epsilon = prior_quantile(q);
            let prior_mass = prior_cdf(epsilon);
            let n_inside = e_samples.iter().filter(|&&e| e < epsilon).count();
            let posterior_mass = n_inside as f64 / n as f64;
            let ratio = posterior_mass / prior_mass;
            let error = libm::sqrt(posterior_mass * (1.0 - posterior_mass) / ess) / prior_mass;
            BallRatio {
                epsilon,
                prior_mass,
                posterior_mass,
                n_inside,
                ratio,
                error,
            }
        })
        .collect();
    // A ball with no sample below a ball with many means the posterior density rises steeply
    // away from e = 0: the larger ball is no approximation of the limit, and the honest
    // statement is the upper limit from the largest empty ball.
    if let Some(empty) = ladder.iter().rposition(|b| b.n_inside == 0) {
        let ball = ladder[empty];
        let limit = 3.0 / (ess * ball.prior_mass);
        return SavageDickey {
            status: BayesFactorStatus::UpperLimit,
            bf01: limit,
            bf01_error: f64::NAN,
            chosen: Some(ball),
            ladder,
            stable: false,
            effective_sample_size: ess,
            note: format!(
                "no posterior sample with e < {:.4}: BF01 < {limit:.3e} (95 %, rule of three)",
                ball.epsilon
            ),
        };
    }
    // Every ball holds samples: the smallest with enough of them, else the largest.
    let index = ladder
        .iter()
        .position(|b| b.n_inside >= MIN_BALL_SAMPLES)
        .unwrap_or(ladder.len() - 1);
    let chosen = ladder[index];
    let stable = match ladder.get(index + 1) {
        Some(next) => {
            (chosen.ratio - next.ratio).abs()
                <= 2.0 * libm::sqrt(chosen.error * chosen.error + next.error * next.error)
        }
        None => false,
    };
    let note = format!(
        "Savage–Dickey ball ratio at e < {:.4} (prior mass {}, {} samples inside, ESS {:.0}){}",
        chosen.epsilon,
        chosen.prior_mass,
        chosen.n_inside,
        ess,
        if stable {
            ""
        } else {
            "; the next larger ball disagrees: treat as approximate"
        }
    );
    SavageDickey {
        status: BayesFactorStatus::Estimated,
        bf01: chosen.ratio,
        bf01_error: chosen.error,
        chosen: Some(chosen),
        ladder,
        stable,
        effective_sample_size: ess,
        note,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::priors::{EccentricityPriorSettings, EccentricityShape};
    use crate::random::stream_rng;
    use rand::RngExt;

    #[test]
    fn prior_draws_give_a_bayes_factor_of_one() {
        // If the data say nothing, posterior = prior and BF01 = 1 exactly in expectation
        // (Dickey 1971). 200 000 i.i.d. draws from Beta(0.867, 3.03): tolerance 4σ.
        let prior = EccentricityPriorSettings {
            shape: EccentricityShape::KIPPING_2013_ALL,
            e_min: 0.0,
            e_max: 1.0,
        }
        .validate()
        .unwrap();
        let mut rng = stream_rng(5, 0);
        let draws: Vec<f64> = (0..200_000).map(|_| prior.draw(&mut rng)).collect();
        let sd = savage_dickey(&draws, draws.len() as f64, &prior);
        assert_eq!(sd.status, BayesFactorStatus::Estimated);
        assert!((sd.bf01 - 1.0).abs() < 4.0 * sd.bf01_error, "{sd:?}");
        assert!(sd.stable);
    }

    #[test]
    fn truncated_prior_is_undefined_and_far_posterior_gives_a_limit() {
        let prior = EccentricityPriorSettings {
            shape: EccentricityShape::LogUniform,
            e_min: 1e-3,
            e_max: 0.99,
        }
        .validate()
        .unwrap();
        assert_eq!(
            savage_dickey(&[0.5; 10], 10.0, &prior).status,
            BayesFactorStatus::Undefined
        );
        let uniform = EccentricityPriorSettings::default().validate().unwrap();
        let mut rng = stream_rng(6, 0);
        let far: Vec<f64> = (0..1000).map(|_| 0.6 + 0.1 * rng.random::<f64>()).collect();
        let sd = savage_dickey(&far, 500.0, &uniform);
        assert_eq!(sd.status, BayesFactorStatus::UpperLimit);
        // Rule of three with ESS 500 and prior mass 0.1: 3/50.
        assert!((sd.bf01 - 0.06).abs() < 1e-12);
    }
}
