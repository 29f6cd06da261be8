//! Integrated autocorrelation time of ensemble traces (Sokal's automatic window) and the pooled FFT autocovariances behind it and the ESS.

use serde::Serialize;

use super::{common_length, mean};

/// Integrated autocorrelation time with the window actually used.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AutocorrelationEstimate {
    /// τ, in stored steps.
    pub tau: f64,
    /// Window M (lags summed).
    pub window: usize,
    /// False when no lag M ≤ n − 1 satisfied M ≥ 5τ(M): the chain is too short
    /// for a reliable τ and the returned value is a lower bound.
    pub window_found: bool,
}

/// Sokal's automatic windowing constant c (Sokal 1997, "Monte Carlo methods
/// in statistical mechanics", §3; the value 5 as in Foreman-Mackey et al. 2013).
const SOKAL_WINDOW_C: f64 = 5.0;

/// Integrated autocorrelation time τ = 1 + 2 Σ_{t=1}^{M} ρ(t) by Sokal's
/// automatic-windowing estimator (Sokal 1997, §3; Goodman & Weare 2010,
/// CAMCOS 5, 65, §4), with the normalised autocorrelation function averaged
/// over walkers before summing, as in Foreman-Mackey et al. (2013, PASP 125,
/// 306, §3 and their `autocorr` module): M is the smallest lag with
/// M ≥ 5 τ(M). Autocovariances only up to the window (direct sums, then FFT for long windows).
pub fn integrated_autocorrelation_time(traces: &[Vec<f64>]) -> AutocorrelationEstimate {
    let n = common_length(traces);
    if n < 2 {
        return AutocorrelationEstimate {
            tau: f64::NAN,
            window: 0,
            window_found: false,
        };
    }
    // Only chains with positive variance contribute; their autocorrelations ρ_c = γ_c/γ_c(0)
    // are averaged, i.e. the autocovariances are pooled with weights 1/(γ_c(0) · chains used).
    let centred = centre(traces, n);
    let variances: Vec<f64> = centred
        .iter()
        .map(|x| lag_product(x, 0) / n as f64)
        .collect();
    let n_used = variances
        .iter()
        .filter(|v| !v.is_nan() && **v > 0.0)
        .count();
    if n_used == 0 {
        return AutocorrelationEstimate {
            tau: f64::NAN,
            window: 0,
            window_found: false,
        };
    }
    let weights = variances
        .iter()
        .map(|&v| {
            if !v.is_nan() && v > 0.0 {
                1.0 / (v * n_used as f64)
            } else {
                0.0
            }
        })
        .collect();
    let pooled = PooledAutocovariance::new(centred, weights);
    let mean_rho = |lag: usize| pooled.at(lag);
    let mut tau = 1.0;
    for window in 1..n {
        tau += 2.0 * mean_rho(window);
        if window as f64 >= SOKAL_WINDOW_C * tau {
            return AutocorrelationEstimate {
                tau,
                window,
                window_found: true,
            };
        }
    }
    AutocorrelationEstimate {
        tau,
        window: n - 1,
        window_found: false,
    }
}

/// Lags summed directly before [`PooledAutocovariance`] switches to FFTs for all lags.
///
/// A direct lag costs n multiply-adds per chain, the FFTs about 5 · 2n · log₂(2n) operations per
/// pair of chains, i.e. as much as a few dozen lags; but a window that passes a dozen lags
/// usually runs to hundreds (ensemble walkers have τ of tens of steps), so the switch comes
/// early: fast-mixing chains stay on direct sums, the others pay for few wasted lags. Measured
/// on the run-until-converged checks of `bench --ess` (τ ≈ 25 steps): 4 direct lags cost less
/// than 16 (each check diagnoses every parameter twice).
const DIRECT_LAGS: usize = 4;

/// The first `n` draws of each trace, centred on their own mean.
pub(super) fn centre(traces: &[Vec<f64>], n: usize) -> Vec<Vec<f64>> {
    traces
        .iter()
        .map(|t| {
            let m = mean(&t[..n]);
            t[..n].iter().map(|x| x - m).collect()
        })
        .collect()
}

/// Σᵢ x_i x_{i+lag} over the overlap.
fn lag_product(x: &[f64], lag: usize) -> f64 {
    x[..x.len() - lag]
        .iter()
        .zip(&x[lag..])
        .map(|(a, b)| a * b)
        .sum()
}

/// A weighted sum over chains of biased autocovariances,
/// Γ(t) = Σ_c w_c γ_c(t) with γ_c(t) = (1/n) Σ_{i<n−t} (x_i − x̄)(x_{i+t} − x̄),
/// each lag computed when asked for.
///
/// Every window that uses it (Sokal's for τ, Geyer's initial sequence for the ESS) needs only the
/// pooled sum, and stops after a few autocorrelation times. Short lags are summed directly; the
/// first lag beyond [`DIRECT_LAGS`] gets all lags at once by the Wiener–Khinchin theorem, with
/// the power spectra summed before a single inverse transform, and two real chains packed into
/// each complex forward transform (|A(k)|² + |B(k)|² = (|Z(k)|² + |Z(N−k)|²)/2 for z = a + ib,
/// Press et al. 2007, Numerical Recipes, 3rd ed., §12.3.2, "FFT of two real functions
/// simultaneously" — section number from memory).
///
/// The transforms are zero-padded to at least n + L points, which leaves lags ≤ L free of
/// wrap-around: first with L = n/4 (windows rarely reach further; half the size of a full
/// transform), and to 2n only when a longer lag is asked for.
pub(super) struct PooledAutocovariance {
    centred: Vec<Vec<f64>>,
    weights: Vec<f64>,
    n: usize,
    short_lags: std::cell::OnceCell<Vec<f64>>,
    all_lags: std::cell::OnceCell<Vec<f64>>,
}

impl PooledAutocovariance {
    /// `centred[c]` (all of one length n, centred on their means) with weights `weights[c]` ≥ 0.
    pub(super) fn new(centred: Vec<Vec<f64>>, weights: Vec<f64>) -> Self {
        let n = centred.first().map_or(0, Vec::len);
        PooledAutocovariance {
            centred,
            weights,
            n,
            short_lags: std::cell::OnceCell::new(),
            all_lags: std::cell::OnceCell::new(),
        }
    }

    /// Γ(lag); 0 beyond the last lag.
    pub(super) fn at(&self, lag: usize) -> f64 {
        if lag >= self.n {
            return 0.0;
        }
        if lag < DIRECT_LAGS {
            return self
                .centred
                .iter()
                .zip(&self.weights)
                .filter(|(_, &w)| w != 0.0)
                .map(|(x, &w)| w * lag_product(x, lag))
                .sum::<f64>()
                / self.n as f64;
        }
        // Short chains (n/4 below the direct lags) go straight to all lags.
        if self.n / 4 >= DIRECT_LAGS {
            let short = self.short_lags.get_or_init(|| self.lags_up_to(self.n / 4));
            if lag < short.len() {
                return short[lag];
            }
        }
        self.all_lags.get_or_init(|| self.lags_up_to(self.n - 1))[lag]
    }

    /// Γ(t) for t = 0..=max_lag by FFTs zero-padded to at least n + max_lag points (see the
    /// type's notes).
    fn lags_up_to(&self, max_lag: usize) -> Vec<f64> {
        let n = self.n;
        let size = (n + max_lag).next_power_of_two();
        let mut power = vec![0.0; size];
        let mut re = vec![0.0; size];
        let mut im = vec![0.0; size];
        let fft = Fft::new(size);
        let used: Vec<(&Vec<f64>, f64)> = self
            .centred
            .iter()
            .zip(self.weights.iter().copied())
            .filter(|&(_, w)| w != 0.0)
            .collect();
        for pair in used.chunks(2) {
            re.fill(0.0);
            im.fill(0.0);
            let scaled = |x: &Vec<f64>, w: f64, out: &mut [f64]| {
                let s = libm::sqrt(w);
                for (o, v) in out.iter_mut().zip(x) {
                    *o = s * v;
                }
            };
            scaled(pair[0].0, pair[0].1, &mut re);
            if let Some(&(x, w)) = pair.get(1) {
                scaled(x, w, &mut im);
            }
            fft.transform(&mut re, &mut im, false);
            for (k, p) in power.iter_mut().enumerate() {
                let j = (size - k) & (size - 1);
                *p += 0.5 * (re[k] * re[k] + im[k] * im[k] + re[j] * re[j] + im[j] * im[j]);
            }
        }
        im.fill(0.0);
        fft.transform(&mut power, &mut im, true);
        power.truncate(max_lag + 1);
        for p in &mut power {
            *p /= (size * n) as f64;
        }
        power
    }
}

/// Iterative radix-2 Cooley–Tukey FFT (Cooley & Tukey 1965, Math. Comp. 19, 297) of one
/// power-of-two size, with its twiddle factors e^(−2πik/len) computed once (by `libm`, so the
/// same bits natively and in WebAssembly) for all the transforms of that size, laid out stage by
/// stage so that every butterfly loop runs over contiguous slices.
struct Fft {
    /// Stage with blocks of length `len` = 2, 4, …, n: entries `len/2 − 1 .. len − 1`.
    cos: Vec<f64>,
    sin: Vec<f64>,
}

impl Fft {
    /// Twiddles for transforms of size `n` (a power of two).
    fn new(n: usize) -> Self {
        let mut cos = Vec::with_capacity(n);
        let mut sin = Vec::with_capacity(n);
        let mut len = 2;
        while len <= n {
            for k in 0..len / 2 {
                let (s, c) = libm::sincos(-2.0 * core::f64::consts::PI * k as f64 / len as f64);
                cos.push(c);
                sin.push(s);
            }
            len <<= 1;
        }
        Fft { cos, sin }
    }

    /// Transforms (`re`, `im`) in place; `inverse` flips the sign of the exponent and does not
    /// scale.
    fn transform(&self, re: &mut [f64], im: &mut [f64], inverse: bool) {
        let n = re.len();
        debug_assert_eq!(n, self.cos.len() + 1);
        let mut j = 0;
        for i in 1..n {
            let mut bit = n >> 1;
            while j & bit != 0 {
                j ^= bit;
                bit >>= 1;
            }
            j |= bit;
            if i < j {
                re.swap(i, j);
                im.swap(i, j);
            }
        }
        let sign = if inverse { -1.0 } else { 1.0 };
        let mut len = 2;
        while len <= n {
            let half = len / 2;
            let w_re = &self.cos[half - 1..len - 1];
            let w_sin = &self.sin[half - 1..len - 1];
            for (block_re, block_im) in re.chunks_exact_mut(len).zip(im.chunks_exact_mut(len)) {
                let (a_re, b_re) = block_re.split_at_mut(half);
                let (a_im, b_im) = block_im.split_at_mut(half);
                for k in 0..half {
                    let (wr, wi) = (w_re[k], sign * w_sin[k]);
                    let t_re = b_re[k] * wr - b_im[k] * wi;
                    let t_im = b_re[k] * wi + b_im[k] * wr;
                    b_re[k] = a_re[k] - t_re;
                    b_im[k] = a_im[k] - t_im;
                    a_re[k] += t_re;
                    a_im[k] += t_im;
                }
            }
            len <<= 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The pooled autocovariance is Σ_c w_c γ_c(t) of the biased estimator
    /// γ(t) = (1/n) Σ (x_i − x̄)(x_{i+t} − x̄) (definition, common practice), by direct sums below
    /// DIRECT_LAGS and by paired FFTs above, for odd and even chain counts, and 0 beyond the last
    /// lag. Tolerance: FFT rounding, ~1e-15 of Σ x², far below 1e-12.
    #[test]
    fn pooled_autocovariance_is_the_weighted_biased_estimator() {
        let n = 137;
        let chains: Vec<Vec<f64>> = (0..3)
            .map(|c| {
                (0..n)
                    .map(|i| libm::sin(i as f64 * (0.7 + 0.1 * c as f64)) + 0.01 * (i * c) as f64)
                    .collect()
            })
            .collect();
        for n_chains in [1, 2, 3] {
            let traces = &chains[..n_chains];
            let weights: Vec<f64> = (0..n_chains).map(|c| 0.5 + c as f64).collect();
            let pooled = PooledAutocovariance::new(centre(traces, n), weights.clone());
            for t in [0, 1, 5, 15, 16, 47, 48, 100, 136] {
                let direct: f64 = traces
                    .iter()
                    .zip(&weights)
                    .map(|(x, w)| {
                        let m = mean(x);
                        w * (0..n - t).map(|i| (x[i] - m) * (x[i + t] - m)).sum::<f64>() / n as f64
                    })
                    .sum();
                assert!(
                    (pooled.at(t) - direct).abs() < 1e-12,
                    "{n_chains} chains, lag {t}: {} vs {direct}",
                    pooled.at(t)
                );
            }
            assert_eq!(pooled.at(n), 0.0);
        }
    }
}
