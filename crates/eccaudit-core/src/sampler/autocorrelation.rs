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
    integrated_autocorrelation_time_in(traces, &mut Workspace::default())
}

/// [`integrated_autocorrelation_time`] of traces given as any slices, with the buffers of `ws`
/// (the same arithmetic in the same order, so the same bits).
pub(super) fn integrated_autocorrelation_time_in<R: AsRef<[f64]>>(
    traces: &[R],
    ws: &mut Workspace,
) -> AutocorrelationEstimate {
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
    ws.load_centred(traces, n);
    let mut n_used = 0usize;
    ws.weights.clear();
    for products in ws.direct.chunks_exact(DIRECT_LAGS) {
        let v = products[0] / n as f64;
        if !v.is_nan() && v > 0.0 {
            n_used += 1;
        }
        ws.weights.push(v);
    }
    if n_used == 0 {
        return AutocorrelationEstimate {
            tau: f64::NAN,
            window: 0,
            window_found: false,
        };
    }
    for w in &mut ws.weights {
        let v = *w;
        *w = if !v.is_nan() && v > 0.0 {
            1.0 / (v * n_used as f64)
        } else {
            0.0
        };
    }
    let mut pooled = PooledAutocovariance::new(ws, n);
    let mut tau = 1.0;
    for window in 1..n {
        tau += 2.0 * pooled.at(window);
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

/// Reusable buffers of the autocorrelation estimates: the centred draws (one row of n per
/// chain), their weights, the FFT arrays, the pooled lags and the twiddle tables of each
/// transform size. Repeated estimates (every quantity of every convergence check) reuse them
/// instead of allocating and faulting in fresh memory each time; the arithmetic is the same.
#[derive(Debug, Default)]
pub(super) struct Workspace {
    centred: Vec<f64>,
    /// Lag products of each centred row for lags 0..DIRECT_LAGS.
    direct: Vec<f64>,
    pub(super) weights: Vec<f64>,
    re: Vec<f64>,
    im: Vec<f64>,
    power: Vec<f64>,
    short_lags: Vec<f64>,
    all_lags: Vec<f64>,
    ffts: Vec<Fft>,
}

impl Workspace {
    /// Loads the first `n` draws of each trace, centred on their own mean, and their lag
    /// products Σᵢ x_i x_{i+t} for t < [`DIRECT_LAGS`] (in one pass over each trace, each sum
    /// accumulated in the same order as [`lag_product`]'s).
    pub(super) fn load_centred<R: AsRef<[f64]>>(&mut self, traces: &[R], n: usize) {
        self.centred.clear();
        self.direct.clear();
        for t in traces {
            let t = &t.as_ref()[..n];
            let m = mean(t);
            let start = self.centred.len();
            self.centred.extend(t.iter().map(|x| x - m));
            let x = &self.centred[start..];
            // −0.0 is the starting value of `Iterator::sum` for floats.
            let mut sums = [-0.0f64; DIRECT_LAGS];
            let full = n.saturating_sub(DIRECT_LAGS - 1);
            for window in x.windows(DIRECT_LAGS).take(full) {
                for (sum, &later) in sums.iter_mut().zip(window) {
                    *sum += window[0] * later;
                }
            }
            for i in full..n {
                for (lag, sum) in sums.iter_mut().enumerate() {
                    if i + lag < n {
                        *sum += x[i] * x[i + lag];
                    }
                }
            }
            self.direct.extend_from_slice(&sums);
        }
    }

    /// Γ(t) for t = 0..=max_lag by FFTs zero-padded to at least n + max_lag points (see
    /// [`PooledAutocovariance`]), into `all_lags` or `short_lags`.
    fn lags_up_to(&mut self, n: usize, max_lag: usize, all: bool) {
        let size = (n + max_lag).next_power_of_two();
        let Workspace {
            centred,
            direct: _,
            weights,
            re,
            im,
            power,
            short_lags,
            all_lags,
            ffts,
        } = self;
        let index = match ffts.iter().position(|f| f.size() == size) {
            Some(i) => i,
            None => {
                ffts.push(Fft::new(size));
                ffts.len() - 1
            }
        };
        let fft = &ffts[index];
        for buffer in [&mut *power, &mut *re, &mut *im] {
            buffer.clear();
            buffer.resize(size, 0.0);
        }
        let scaled = |x: &[f64], w: f64, out: &mut [f64]| {
            let s = libm::sqrt(w);
            for (o, v) in out.iter_mut().zip(x) {
                *o = s * v;
            }
        };
        let mut used = centred
            .chunks_exact(n)
            .zip(weights.iter().copied())
            .filter(|&(_, w)| w != 0.0);
        while let Some((a, w_a)) = used.next() {
            re.fill(0.0);
            im.fill(0.0);
            scaled(a, w_a, re);
            if let Some((b, w_b)) = used.next() {
                scaled(b, w_b, im);
            }
            fft.transform(re, im, false);
            for (k, p) in power.iter_mut().enumerate() {
                let j = (size - k) & (size - 1);
                *p += 0.5 * (re[k] * re[k] + im[k] * im[k] + re[j] * re[j] + im[j] * im[j]);
            }
        }
        im.fill(0.0);
        fft.transform(power, im, true);
        let out = if all { all_lags } else { short_lags };
        out.clear();
        out.extend(power[..=max_lag].iter().map(|p| p / (size * n) as f64));
    }
}

/// Σᵢ x_i x_{i+lag} over the overlap (the definition [`Workspace::load_centred`] tabulates).
#[cfg(test)]
fn lag_product(x: &[f64], lag: usize) -> f64 {
    x[..x.len() - lag]
        .iter()
        .zip(&x[lag..])
        .map(|(a, b)| a * b)
        .sum()
}

/// A weighted sum over chains of biased autocovariances,
/// Γ(t) = Σ_c w_c γ_c(t) with γ_c(t) = (1/n) Σ_{i<n−t} (x_i − x̄)(x_{i+t} − x̄),
/// each lag computed when asked for, over the chains loaded into a [`Workspace`]
/// ([`Workspace::load_centred`], weights in [`Workspace::weights`]).
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
pub(super) struct PooledAutocovariance<'w> {
    ws: &'w mut Workspace,
    n: usize,
    short_ready: bool,
    all_ready: bool,
}

impl<'w> PooledAutocovariance<'w> {
    /// The chains loaded into `ws` (rows of `n`, centred) with the weights in `ws.weights`
    /// (one per chain, ≥ 0).
    pub(super) fn new(ws: &'w mut Workspace, n: usize) -> Self {
        PooledAutocovariance {
            ws,
            n,
            short_ready: false,
            all_ready: false,
        }
    }

    /// Γ(lag); 0 beyond the last lag.
    pub(super) fn at(&mut self, lag: usize) -> f64 {
        let n = self.n;
        if lag >= n {
            return 0.0;
        }
        if lag < DIRECT_LAGS {
            return self
                .ws
                .direct
                .chunks_exact(DIRECT_LAGS)
                .zip(&self.ws.weights)
                .filter(|(_, &w)| w != 0.0)
                .map(|(products, &w)| w * products[lag])
                .sum::<f64>()
                / n as f64;
        }
        // Short chains (n/4 below the direct lags) go straight to all lags.
        if n / 4 >= DIRECT_LAGS {
            if !self.short_ready {
                self.ws.lags_up_to(n, n / 4, false);
                self.short_ready = true;
            }
            if lag < self.ws.short_lags.len() {
                return self.ws.short_lags[lag];
            }
        }
        if !self.all_ready {
            self.ws.lags_up_to(n, n - 1, true);
            self.all_ready = true;
        }
        self.ws.all_lags[lag]
    }
}

/// Iterative radix-2 Cooley–Tukey FFT (Cooley & Tukey 1965, Math. Comp. 19, 297) of one
/// power-of-two size, with its twiddle factors e^(−2πik/len) computed once (by `libm`, so the
/// same bits natively and in WebAssembly) for all the transforms of that size, laid out stage by
/// stage so that every butterfly loop runs over contiguous slices, and the bit-reversal swaps
/// tabulated.
#[derive(Debug)]
struct Fft {
    /// Stage with blocks of length `len` = 2, 4, …, n: entries `len/2 − 1 .. len − 1`.
    cos: Vec<f64>,
    sin: Vec<f64>,
    /// The pairs (i, j), i < j, exchanged by the bit-reversal permutation.
    swaps: Vec<(u32, u32)>,
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
        let mut swaps = Vec::new();
        let mut j = 0;
        for i in 1..n {
            let mut bit = n >> 1;
            while j & bit != 0 {
                j ^= bit;
                bit >>= 1;
            }
            j |= bit;
            if i < j {
                swaps.push((i as u32, j as u32));
            }
        }
        Fft { cos, sin, swaps }
    }

    /// One stage with blocks of 2·HALF points (HALF = 1, 2, 4), as in [`Self::transform`].
    fn small_stage<const HALF: usize>(&self, re: &mut [f64], im: &mut [f64], sign: f64) {
        let mut w_re = [0.0; HALF];
        let mut w_im = [0.0; HALF];
        for k in 0..HALF {
            w_re[k] = self.cos[HALF - 1 + k];
            w_im[k] = sign * self.sin[HALF - 1 + k];
        }
        for (block_re, block_im) in re
            .chunks_exact_mut(2 * HALF)
            .zip(im.chunks_exact_mut(2 * HALF))
        {
            for k in 0..HALF {
                let (wr, wi) = (w_re[k], w_im[k]);
                let (b_re, b_im) = (block_re[HALF + k], block_im[HALF + k]);
                let t_re = b_re * wr - b_im * wi;
                let t_im = b_re * wi + b_im * wr;
                block_re[HALF + k] = block_re[k] - t_re;
                block_im[HALF + k] = block_im[k] - t_im;
                block_re[k] += t_re;
                block_im[k] += t_im;
            }
        }
    }

    /// The transform size.
    fn size(&self) -> usize {
        self.cos.len() + 1
    }

    /// Transforms (`re`, `im`) in place; `inverse` flips the sign of the exponent and does not
    /// scale.
    fn transform(&self, re: &mut [f64], im: &mut [f64], inverse: bool) {
        let n = re.len();
        debug_assert_eq!(n, self.size());
        for &(i, j) in &self.swaps {
            re.swap(i as usize, j as usize);
            im.swap(i as usize, j as usize);
        }
        let sign = if inverse { -1.0 } else { 1.0 };
        // The first stages have one, two and four butterflies per block: written out for
        // their block sizes (the same operations as the general loop below, without its
        // per-block overhead).
        let mut len = 2;
        if len <= n {
            self.small_stage::<1>(re, im, sign);
            len <<= 1;
        }
        if len <= n {
            self.small_stage::<2>(re, im, sign);
            len <<= 1;
        }
        if len <= n {
            self.small_stage::<4>(re, im, sign);
            len <<= 1;
        }
        while len <= n {
            let half = len / 2;
            let w_re = &self.cos[half - 1..len - 1];
            let w_sin = &self.sin[half - 1..len - 1];
            for (block_re, block_im) in re.chunks_exact_mut(len).zip(im.chunks_exact_mut(len)) {
                let (a_re, b_re) = block_re.split_at_mut(half);
                let (a_im, b_im) = block_im.split_at_mut(half);
                // Zipped slices (no index checks) so that the butterflies vectorise; the same
                // operations in the same order as one at a time.
                for (((a_re, a_im), (b_re, b_im)), (&wr, &w_sin)) in a_re
                    .iter_mut()
                    .zip(a_im.iter_mut())
                    .zip(b_re.iter_mut().zip(b_im.iter_mut()))
                    .zip(w_re.iter().zip(w_sin))
                {
                    let wi = sign * w_sin;
                    let t_re = *b_re * wr - *b_im * wi;
                    let t_im = *b_re * wi + *b_im * wr;
                    *b_re = *a_re - t_re;
                    *b_im = *a_im - t_im;
                    *a_re += t_re;
                    *a_im += t_im;
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
            let mut ws = Workspace::default();
            ws.load_centred(traces, n);
            ws.weights = weights.clone();
            let mut pooled = PooledAutocovariance::new(&mut ws, n);
            for t in [0, 1, 5, 15, 16, 47, 48, 100, 136] {
                let direct: f64 = traces
                    .iter()
                    .zip(&weights)
                    .map(|(x, w)| {
                        let m = mean(x);
                        w * (0..n - t).map(|i| (x[i] - m) * (x[i + t] - m)).sum::<f64>() / n as f64
                    })
                    .sum();
                let at = pooled.at(t);
                assert!(
                    (at - direct).abs() < 1e-12,
                    "{n_chains} chains, lag {t}: {at} vs {direct}"
                );
            }
            assert_eq!(pooled.at(n), 0.0);
        }
    }

    /// The lag products tabulated in one pass per trace equal Σᵢ x_i x_{i+t} summed lag by lag
    /// in index order, bit for bit (the same additions in the same order; definition), for
    /// traces shorter and longer than the direct lags.
    #[test]
    fn one_pass_lag_products_equal_the_lag_by_lag_sums() {
        for n in [1, 2, 3, 4, 5, 37] {
            let traces: Vec<Vec<f64>> = (0..3)
                .map(|c| {
                    (0..n)
                        .map(|i| libm::cos(1.3 * i as f64 + c as f64))
                        .collect()
                })
                .collect();
            let mut ws = Workspace::default();
            ws.load_centred(&traces, n);
            for (c, x) in ws.centred.chunks_exact(n).enumerate() {
                for lag in 0..DIRECT_LAGS {
                    let expected = if lag < n { lag_product(x, lag) } else { -0.0 };
                    assert_eq!(
                        ws.direct[c * DIRECT_LAGS + lag].to_bits(),
                        expected.to_bits(),
                        "n {n}, trace {c}, lag {lag}"
                    );
                }
            }
        }
    }
}
