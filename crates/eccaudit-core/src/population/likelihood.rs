//! The importance-sampling likelihood of a population of eccentricities from each star's posterior draws (Hogg, Myers & Bovy 2010, ApJ 725, 2166, eq. 9), for a Beta population and a histogram population, in log-sum-exp form, with the effective number of draws behind each star's sum.

/// Draws of e below this (or above 1 − this) are evaluated at this distance from the end: a
/// Beta density with a < 1 or b < 1 is infinite at the end itself but integrable, and a draw
/// that close to 0 says "circular" to any precision the data have (a stated choice).
pub const E_FLOOR: f64 = 1e-6;

/// ln Σ exp(xᵢ), safe against overflow and underflow, in one pass (the running maximum
/// rescales the sum when it grows; common practice); −∞ for an empty or all −∞ input, NaN
/// when an input is NaN.
pub fn log_sum_exp(values: impl Iterator<Item = f64>) -> f64 {
    let mut max = f64::NEG_INFINITY;
    let mut sum = 0.0;
    for v in values {
        if v.is_nan() {
            return f64::NAN;
        }
        if v <= max {
            if v > f64::NEG_INFINITY {
                sum += libm::exp(v - max);
            }
        } else if v == f64::INFINITY {
            return f64::INFINITY;
        } else {
            sum = if max == f64::NEG_INFINITY {
                1.0
            } else {
                sum * libm::exp(max - v) + 1.0
            };
            max = v;
        }
    }
    if max == f64::NEG_INFINITY {
        return max;
    }
    max + libm::log(sum)
}

/// ln B(a, b) = ln Γ(a) + ln Γ(b) − ln Γ(a + b) (defined in [`crate::stats::ln_beta`]).
pub use crate::stats::ln_beta as ln_beta_function;

/// Bins of the histogram population on [0, 1).
#[derive(Debug, Clone, PartialEq)]
pub struct Bins {
    /// Edges, increasing, first 0 and last 1.
    pub edges: Vec<f64>,
}

impl Bins {
    /// `n` equal bins on [0, 1).
    pub fn equal(n: usize) -> Self {
        Bins {
            edges: (0..=n).map(|i| i as f64 / n as f64).collect(),
        }
    }

    /// Number of bins.
    pub fn len(&self) -> usize {
        self.edges.len() - 1
    }

    /// True when there are no bins.
    pub fn is_empty(&self) -> bool {
        self.edges.len() < 2
    }

    /// Index of the bin holding e (e ≥ 1 goes to the last bin).
    pub fn index(&self, e: f64) -> usize {
        let n = self.len();
        self.edges[1..n].partition_point(|&edge| edge <= e)
    }

    /// Width of bin j.
    pub fn width(&self, j: usize) -> f64 {
        self.edges[j + 1] - self.edges[j]
    }
}

/// One star's draws, prepared for repeated likelihood evaluations.
#[derive(Debug, Clone)]
pub struct PreparedStar {
    e: Vec<f64>,
    ln_e: Vec<f64>,
    ln_one_minus_e: Vec<f64>,
    ln_prior: Vec<f64>,
    ln_n: f64,
    /// ln[(1/N) Σ_{n in bin j} 1/p₀(e_n)], −∞ for an empty bin.
    ln_bin_weight: Vec<f64>,
}

impl PreparedStar {
    /// From draws `e` and their prior log-densities `ln_prior` (equal lengths, at least one).
    pub fn new(e: &[f64], ln_prior: &[f64], bins: &Bins) -> Self {
        let clamp = |x: f64| x.clamp(E_FLOOR, 1.0 - E_FLOOR);
        let ln_bin_weight = (0..bins.len())
            .map(|j| {
                let inside = e
                    .iter()
                    .zip(ln_prior)
                    .filter(|(&x, _)| bins.index(x) == j)
                    .map(|(_, &lp)| -lp);
                log_sum_exp(inside) - libm::log(e.len() as f64)
            })
            .collect();
        PreparedStar {
            e: e.to_vec(),
            ln_e: e.iter().map(|&x| libm::log(clamp(x))).collect(),
            ln_one_minus_e: e.iter().map(|&x| libm::log(1.0 - clamp(x))).collect(),
            ln_prior: ln_prior.to_vec(),
            ln_n: libm::log(e.len() as f64),
            ln_bin_weight,
        }
    }

    /// The draws.
    pub fn draws(&self) -> &[f64] {
        &self.e
    }

    /// ln w_n = ln f(e_n) − ln p₀(e_n) for a Beta(a, b) population (the importance weights).
    fn beta_log_weights(&self, a: f64, b: f64) -> impl Iterator<Item = f64> + Clone + '_ {
        let ln_b = ln_beta_function(a, b);
        self.ln_e
            .iter()
            .zip(&self.ln_one_minus_e)
            .zip(&self.ln_prior)
            .map(move |((&le, &l1), &lp)| (a - 1.0) * le + (b - 1.0) * l1 - ln_b - lp)
    }

    /// ln[(1/N) Σ_n f_{a,b}(e_n)/p₀(e_n)]: this star's factor of the likelihood of Beta(a, b)
    /// (Hogg, Myers & Bovy 2010, eq. 9).
    pub fn ln_likelihood_beta(&self, a: f64, b: f64) -> f64 {
        log_sum_exp(self.beta_log_weights(a, b)) - self.ln_n
    }

    /// The same for a histogram population with bin probabilities exp(`ln_mass[j]`) on `bins`
    /// (density mass/width inside each bin).
    pub fn ln_likelihood_histogram(&self, ln_mass: &[f64], bins: &Bins) -> f64 {
        log_sum_exp(
            self.ln_bin_weight
                .iter()
                .enumerate()
                .map(|(j, &w)| ln_mass[j] - libm::log(bins.width(j)) + w),
        )
    }

    /// Kish's effective number of draws behind the sum under Beta(a, b): (Σw)²/Σw² (Kish
    /// 1965, Survey Sampling; common practice for importance weights). Near 1 when one draw
    /// dominates: the star's sum is then a poor estimate.
    pub fn weight_ess_beta(&self, a: f64, b: f64) -> f64 {
        let w = self.beta_log_weights(a, b);
        let ln_sum = log_sum_exp(w.clone());
        let ln_sum_sq = log_sum_exp(w.map(|x| 2.0 * x));
        libm::exp(2.0 * ln_sum - ln_sum_sq)
    }

    /// The star's posterior probability that e < `e_c` when the population Beta(a, b) is its
    /// prior: the importance-weighted share of its draws below `e_c`.
    pub fn probability_below_beta(&self, a: f64, b: f64, e_c: f64) -> f64 {
        let w = self.beta_log_weights(a, b);
        let all = log_sum_exp(w.clone());
        let below = log_sum_exp(
            w.zip(&self.e)
                .map(move |(x, &e)| if e < e_c { x } else { f64::NEG_INFINITY }),
        );
        libm::exp(below - all)
    }

    /// The same for a histogram population.
    pub fn probability_below_histogram(&self, ln_mass: &[f64], bins: &Bins, e_c: f64) -> f64 {
        let w = self.e.iter().zip(&self.ln_prior).map(|(&e, &lp)| {
            let j = bins.index(e);
            ln_mass[j] - libm::log(bins.width(j)) - lp
        });
        let all = log_sum_exp(w.clone());
        let below = log_sum_exp(
            w.zip(&self.e)
                .map(move |(x, &e)| if e < e_c { x } else { f64::NEG_INFINITY }),
        );
        libm::exp(below - all)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::priors::EccentricityPriorSettings;
    use crate::random::stream_rng;

    #[test]
    fn log_sum_exp_is_stable() {
        let v = [1000.0, 1000.0];
        assert!((log_sum_exp(v.iter().copied()) - (1000.0 + libm::log(2.0))).abs() < 1e-12);
        let v = [-1000.0, -1000.0 - libm::log(3.0)];
        assert!((log_sum_exp(v.iter().copied()) - (-1000.0 + libm::log(4.0 / 3.0))).abs() < 1e-12);
        assert_eq!(
            log_sum_exp([f64::NEG_INFINITY].into_iter()),
            f64::NEG_INFINITY
        );
        assert_eq!(log_sum_exp(std::iter::empty()), f64::NEG_INFINITY);
    }

    #[test]
    fn bins_index_edges() {
        let bins = Bins::equal(10);
        assert_eq!(bins.index(0.0), 0);
        assert_eq!(bins.index(0.0999), 0);
        assert_eq!(bins.index(0.1), 1);
        assert_eq!(bins.index(0.95), 9);
        assert_eq!(bins.index(1.0), 9);
    }

    /// Analytic case (derivation in this comment). Let a star's posterior under the prior
    /// p₀ = Beta(a₀, b₀) be Beta(a₀ + s, b₀ + t) — the conjugate form of a likelihood
    /// e^s (1 − e)^t. Its marginal likelihood under a population Beta(a, b) relative to the
    /// one under p₀ is
    ///   ∫ f_{a,b}(e) / p₀(e) · post(e) de = B(a + s, b + t) B(a₀, b₀) / [B(a, b) B(a₀ + s, b₀ + t)],
    /// which is what the importance-sampling sum (1/N) Σ f(e_n)/p₀(e_n) estimates from draws
    /// e_n ~ post. Its relative Monte-Carlo error is √(Var(w)/N)/E(w); with N = 200,000 draws
    /// and the values below the weights' coefficient of variation is below 2, so the error of
    /// the log is below 2/√200000 ≈ 0.0045; the assert allows 0.02 (4σ).
    #[test]
    fn importance_sum_matches_the_conjugate_beta_marginal_likelihood() {
        let (a0, b0, s, t) = (1.0, 1.0, 2.0, 6.0);
        let prior = EccentricityPriorSettings::default().validate().unwrap();
        let posterior = crate::priors::EccentricityPriorSettings {
            shape: crate::priors::EccentricityShape::Beta {
                a: a0 + s,
                b: b0 + t,
            },
            e_min: 0.0,
            e_max: 1.0,
        }
        .validate()
        .unwrap();
        let mut rng = stream_rng(2010, 0);
        let draws: Vec<f64> = (0..200_000).map(|_| posterior.draw(&mut rng)).collect();
        let ln_p0: Vec<f64> = draws.iter().map(|&e| prior.log_density(e)).collect();
        let star = PreparedStar::new(&draws, &ln_p0, &Bins::equal(10));
        for (a, b) in [(1.0, 1.0), (0.867, 3.03), (2.0, 5.0), (3.0, 2.0)] {
            let exact = ln_beta_function(a + s, b + t) + ln_beta_function(a0, b0)
                - ln_beta_function(a, b)
                - ln_beta_function(a0 + s, b0 + t);
            let estimate = star.ln_likelihood_beta(a, b);
            assert!(
                (estimate - exact).abs() < 0.02,
                "Beta({a}, {b}): {estimate} vs exact {exact}"
            );
        }
        // The histogram population with masses equal to Beta(2, 5)'s in 10 bins: exact value
        // Σ_j (m_j/Δ) ∫_bin post(e)/p₀(e) de, p₀ = 1, i.e. Σ_j (m_j/Δ) P_post(bin j);
        // Monte-Carlo error of each P_post(bin j) ≤ 0.5/√200000 ≈ 0.0011, so the log
        // agrees within 0.01 (a sum of ten such terms, relative error well below that).
        let bins = Bins::equal(10);
        let cdf = |a: f64, b: f64, x: f64| crate::stats::regularized_incomplete_beta(a, b, x);
        let masses: Vec<f64> = (0..10)
            .map(|j| cdf(2.0, 5.0, bins.edges[j + 1]) - cdf(2.0, 5.0, bins.edges[j]))
            .collect();
        let exact: f64 = (0..10)
            .map(|j| {
                masses[j] / bins.width(j)
                    * (cdf(a0 + s, b0 + t, bins.edges[j + 1]) - cdf(a0 + s, b0 + t, bins.edges[j]))
            })
            .sum();
        let ln_mass: Vec<f64> = masses.iter().map(|&m| libm::log(m)).collect();
        let estimate = star.ln_likelihood_histogram(&ln_mass, &bins);
        assert!(
            (estimate - libm::log(exact)).abs() < 0.01,
            "{estimate} vs {}",
            libm::log(exact)
        );
    }

    #[test]
    fn weight_ess_falls_when_one_draw_dominates() {
        let draws: Vec<f64> = (1..=100).map(|i| i as f64 / 101.0).collect();
        let ln_p0 = vec![0.0; 100];
        let star = PreparedStar::new(&draws, &ln_p0, &Bins::equal(10));
        // Population = the prior: all weights equal, ESS = N.
        assert!((star.weight_ess_beta(1.0, 1.0) - 100.0).abs() < 1e-9);
        // A population piled at 0 gives the smallest draw nearly all the weight.
        assert!(star.weight_ess_beta(0.05, 50.0) < 3.0);
        assert!(star.probability_below_beta(0.05, 50.0, 0.05) > 0.9);
    }
}
