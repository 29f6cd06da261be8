//! Rank-normalised split R̂, bulk and tail effective sample sizes (Vehtari et al. 2021), the classic split R̂, the normal quantile and the crate's sample quantile.

use serde::Serialize;

use super::autocorrelation::{PooledAutocovariance, Workspace};
use super::{common_length, mean, sample_variance};
use crate::stats::{quantile_type7, standard_normal_quantile};

/// R̂ of one parameter: bulk (rank-normalised split chains), tail (the same on
/// draws folded about the median) and their maximum, the value to report
/// (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4.1, eqs. 3–4 for the
/// split R̂ and §4.2 for rank normalisation and folding). The quick diagnosis
/// ([`DiagnosisDepth::Quick`]) fills it with the classic split R̂ of the draws
/// and of the draws folded about their middle draw, without rank normalisation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RHat {
    /// Split R̂ of the rank-normalised draws.
    pub bulk: f64,
    /// Split R̂ of the rank-normalised folded draws |θ − median|.
    pub tail: f64,
    /// max(bulk, tail).
    pub max: f64,
}

/// Split rank-normalised R̂ (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4).
pub fn rank_normalized_split_r_hat(traces: &[Vec<f64>]) -> RHat {
    SplitDraws::new(traces).r_hat()
}

/// Bulk effective sample size: the ESS of the rank-normalised split chains
/// (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4.3).
pub fn ess_bulk(traces: &[Vec<f64>]) -> f64 {
    effective_sample_size(&SplitDraws::new(traces).normalized())
}

/// Tail effective sample size: the smaller ESS of the indicators
/// I(θ ≤ q₀.₀₅) and I(θ ≤ q₀.₉₅) on split chains (Vehtari et al. 2021,
/// Bayesian Analysis 16, 667, §4.3).
pub fn ess_tail(traces: &[Vec<f64>]) -> f64 {
    SplitDraws::new(traces).ess_tail()
}

/// Split chains of one quantity with their pooled ranking, sorted once and shared by R̂ (bulk
/// and folded), the bulk ESS and the tail ESS.
pub(super) struct SplitDraws {
    chains: Vec<Vec<f64>>,
    ranked: RankedDraws,
    scores: std::cell::RefCell<NormalScores>,
}

impl SplitDraws {
    pub(super) fn new<R: AsRef<[f64]>>(traces: &[R]) -> Self {
        let chains = split_chains(traces);
        let ranked = RankedDraws::new(&chains);
        let scores = std::cell::RefCell::new(NormalScores::new(ranked.len()));
        SplitDraws {
            chains,
            ranked,
            scores,
        }
    }

    /// The rank-normalised split chains.
    pub(super) fn normalized(&self) -> Vec<Vec<f64>> {
        self.ranked.normalized(&mut self.scores.borrow_mut())
    }

    /// Bulk R̂ from `normalized` (as returned by [`Self::normalized`]) and tail R̂ from the
    /// draws folded about the median.
    pub(super) fn r_hat_from(&self, normalized: &[Vec<f64>]) -> RHat {
        let bulk = split_r_hat_of(normalized);
        let median = self.ranked.quantile(0.5);
        let folded = self.ranked.folded(median);
        let tail = split_r_hat_of(&folded.normalized(&mut self.scores.borrow_mut()));
        RHat {
            bulk,
            tail,
            max: bulk.max(tail),
        }
    }

    pub(super) fn r_hat(&self) -> RHat {
        self.r_hat_from(&self.normalized())
    }

    pub(super) fn ess_tail(&self) -> f64 {
        let ess_at = |prob: f64| {
            let q = self.ranked.quantile(prob);
            let indicator: Vec<Vec<f64>> = self
                .chains
                .iter()
                .map(|c| c.iter().map(|&x| if x <= q { 1.0 } else { 0.0 }).collect())
                .collect();
            effective_sample_size(&indicator)
        };
        let (low, high) = (ess_at(0.05), ess_at(0.95));
        if low.is_nan() || high.is_nan() {
            f64::NAN
        } else {
            low.min(high)
        }
    }
}

/// Effective sample size of several chains (no splitting, no rank
/// normalisation): the multi-chain autocorrelation estimate of Vehtari et al.
/// (2021, Bayesian Analysis 16, 667, §3.2, eqs. 10–11) truncated and made
/// monotone by Geyer's initial monotone sequence (Geyer 1992, Statistical
/// Science 7, 473), as implemented in Stan and the `posterior` R package
/// (`ess_rfun`, from memory), including the cap τ̂ ≥ 1/log₁₀(MN).
pub fn effective_sample_size(traces: &[Vec<f64>]) -> f64 {
    let n = common_length(traces);
    let m = traces.len();
    if m == 0 || n < 4 {
        return f64::NAN;
    }
    let chain_means: Vec<f64> = traces.iter().map(|t| mean(&t[..n])).collect();
    let mut ws = Workspace::default();
    ws.load_centred(traces, n);
    ws.weights = vec![1.0 / m as f64; m];
    let mut pooled = PooledAutocovariance::new(&mut ws, n);
    let nf = n as f64;
    let mean_var = pooled.at(0) * nf / (nf - 1.0);
    let mut var_plus = mean_var * (nf - 1.0) / nf;
    if m > 1 {
        var_plus += sample_variance(&chain_means);
    }
    if var_plus.is_nan() || var_plus <= 0.0 || !mean_var.is_finite() {
        return f64::NAN;
    }
    let mut rho_at = |t: usize| 1.0 - (mean_var - pooled.at(t)) / var_plus;
    let mut rho = vec![0.0; n];
    rho[0] = 1.0;
    let mut rho_even = 1.0;
    let mut rho_odd = rho_at(1);
    rho[1] = rho_odd;
    let mut t = 0usize;
    while t + 5 < n && (rho_even + rho_odd) > 0.0 {
        t += 2;
        rho_even = rho_at(t);
        rho_odd = rho_at(t + 1);
        if rho_even + rho_odd >= 0.0 {
            rho[t] = rho_even;
            rho[t + 1] = rho_odd;
        }
    }
    let max_t = t;
    if rho_even > 0.0 {
        rho[max_t] = rho_even;
    }
    // Geyer's initial monotone sequence on the pair sums.
    let mut t = 0usize;
    while t + 4 <= max_t {
        t += 2;
        if rho[t] + rho[t + 1] > rho[t - 2] + rho[t - 1] {
            let average = (rho[t - 2] + rho[t - 1]) / 2.0;
            rho[t] = average;
            rho[t + 1] = average;
        }
    }
    let total = (m * n) as f64;
    let tau = -1.0 + 2.0 * rho[..max_t].iter().sum::<f64>() + rho[max_t];
    let tau = tau.max(1.0 / libm::log10(total));
    total / tau
}

/// Classic split R̂ (Gelman et al. 2013, BDA3 §11.4) of the draws and of the draws folded about
/// their middle draw, for [`DiagnosisDepth::Quick`]: no ranks, no full sort.
pub(super) fn classic_split_r_hat<R: AsRef<[f64]>>(traces: &[R], pooled: &mut Vec<f64>) -> RHat {
    let n = common_length(traces);
    let half = n / 2;
    // The split chains are slices of the traces: no copies.
    let split: Vec<&[f64]> = traces
        .iter()
        .flat_map(|t| {
            let t = t.as_ref();
            [&t[..half], &t[n - half..n]]
        })
        .collect();
    let bulk = split_r_hat_by(&split, |x| x);
    pooled.clear();
    pooled.extend(split.iter().flat_map(|c| c.iter().copied()));
    let tail = if pooled.is_empty() || pooled.iter().any(|x| x.is_nan()) {
        f64::NAN
    } else {
        let middle = pooled.len() / 2;
        let median = *pooled.select_nth_unstable_by(middle, f64::total_cmp).1;
        // The folded draws |x − median|, computed where they are summed.
        split_r_hat_by(&split, |x| (x - median).abs())
    };
    RHat {
        bulk,
        tail,
        max: bulk.max(tail),
    }
}

/// Each trace cut into its first and last halves (the middle draw dropped
/// when the length is odd), Vehtari et al. 2021, §4.1.
pub(super) fn split_chains<R: AsRef<[f64]>>(traces: &[R]) -> Vec<Vec<f64>> {
    let n = common_length(traces);
    let half = n / 2;
    traces
        .iter()
        .flat_map(|t| {
            let t = t.as_ref();
            [t[..half].to_vec(), t[n - half..n].to_vec()]
        })
        .collect()
}

/// Classic split-R̂ formula on already split chains (Vehtari et al. 2021,
/// eqs. 3–4): √(((N−1)/N W + B/N) / W).
pub(super) fn split_r_hat_of<R: AsRef<[f64]>>(chains: &[R]) -> f64 {
    split_r_hat_by(chains, |x| x)
}

/// [`split_r_hat_of`] of `f` applied to every draw (the same sums in the same order as on a
/// copy of the mapped draws, without the copy).
fn split_r_hat_by<R: AsRef<[f64]>>(chains: &[R], f: impl Fn(f64) -> f64) -> f64 {
    let n = common_length(chains);
    let m = chains.len();
    if m < 2 || n < 2 {
        return f64::NAN;
    }
    let mean_by = |c: &[f64]| c.iter().map(|&x| f(x)).sum::<f64>() / c.len() as f64;
    let means: Vec<f64> = chains.iter().map(|c| mean_by(&c.as_ref()[..n])).collect();
    let between = n as f64 * sample_variance(&means);
    let within = chains
        .iter()
        .map(|c| {
            let c = &c.as_ref()[..n];
            let m = mean_by(c);
            c.iter().map(|&x| (f(x) - m) * (f(x) - m)).sum::<f64>() / (c.len() as f64 - 1.0)
        })
        .sum::<f64>()
        / m as f64;
    let nf = n as f64;
    let var_plus = (nf - 1.0) / nf * within + between / nf;
    libm::sqrt(var_plus / within)
}

/// Pooled draws of several equal-length chains in ascending order, each with its place
/// (chain · n + index), sorted once.
struct RankedDraws {
    order: Vec<(f64, usize)>,
    n: usize,
}

impl RankedDraws {
    fn new(chains: &[Vec<f64>]) -> Self {
        let n = common_length(chains);
        let mut order: Vec<(f64, usize)> = chains
            .iter()
            .enumerate()
            .flat_map(|(c, chain)| {
                chain[..n]
                    .iter()
                    .enumerate()
                    .map(move |(i, &x)| (x, c * n + i))
            })
            .collect();
        // Equal values need no particular order: they share their averaged rank.
        order.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        RankedDraws { order, n }
    }

    fn len(&self) -> usize {
        self.order.len()
    }

    /// Quantile of the pooled draws ([`quantile_type7`]).
    fn quantile(&self, prob: f64) -> f64 {
        quantile_type7(self.order.len(), |i| self.order[i].0, prob)
    }

    /// The draws folded about `centre`, |x − centre|, ranked by merging the two monotone runs
    /// below and above the centre (no second sort); with non-finite draws or centre, by sorting.
    fn folded(&self, centre: f64) -> RankedDraws {
        let order = &self.order;
        let fold = |&(x, place): &(f64, usize)| ((x - centre).abs(), place);
        // Non-finite values break the two monotone runs (∞ − ∞ is NaN): sort those instead.
        if !centre.is_finite() || order.iter().any(|(x, _)| !x.is_finite()) {
            let mut folded: Vec<(f64, usize)> = order.iter().map(fold).collect();
            folded.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
            return RankedDraws {
                order: folded,
                n: self.n,
            };
        }
        let split = order.partition_point(|&(x, _)| x < centre);
        let mut below = order[..split].iter().rev().map(fold).peekable();
        let mut above = order[split..].iter().map(fold).peekable();
        let mut merged = Vec::with_capacity(order.len());
        loop {
            let next = match (below.peek(), above.peek()) {
                (Some(b), Some(a)) => {
                    if b.0 <= a.0 {
                        below.next()
                    } else {
                        above.next()
                    }
                }
                (Some(_), None) => below.next(),
                (None, Some(_)) => above.next(),
                (None, None) => break,
            };
            merged.extend(next);
        }
        RankedDraws {
            order: merged,
            n: self.n,
        }
    }

    /// Rank normalisation (Vehtari et al. 2021, eq. 14): pooled ranks r (ties averaged) mapped
    /// to Φ⁻¹((r − 3/8)/(S + 1/4)), returned chain by chain.
    fn normalized(&self, scores: &mut NormalScores) -> Vec<Vec<f64>> {
        let order = &self.order;
        let total = order.len();
        let mut z = vec![0.0; total];
        let mut i = 0;
        while i < total {
            let mut j = i;
            while j + 1 < total && order[j + 1].0 == order[i].0 {
                j += 1;
            }
            // Ranks i+1 ..= j+1 share their average (i + j)/2 + 1, i.e. twice it is i + j + 2.
            let value = scores.at_twice_rank(i + j + 2);
            for item in &order[i..=j] {
                z[item.1] = value;
            }
            i = j + 1;
        }
        z.chunks(self.n.max(1)).map(<[f64]>::to_vec).collect()
    }
}

/// The normal scores Φ⁻¹((r − 3/8)/(S + 1/4)) of S pooled draws (Blom's scores, as in Vehtari
/// et al. 2021, eq. 14), computed once per rank r (half ranks included, for ties) and shared by
/// the bulk and the folded rank normalisation. Ranks above the middle take the negated score of
/// rank S + 1 − r (Φ⁻¹(1 − p) = −Φ⁻¹(p)), which also keeps the upper tail as accurate as the
/// lower one.
struct NormalScores {
    total: usize,
    /// By twice the rank; NaN until computed.
    by_twice_rank: Vec<f64>,
}

impl NormalScores {
    fn new(total: usize) -> Self {
        NormalScores {
            total,
            by_twice_rank: vec![f64::NAN; 2 * total + 3],
        }
    }

    /// The score of rank `twice_rank / 2` (1 ≤ rank ≤ S).
    fn at_twice_rank(&mut self, twice_rank: usize) -> f64 {
        let mirror = 2 * (self.total + 1) - twice_rank;
        if twice_rank > mirror {
            return -self.at_twice_rank(mirror);
        }
        let cached = self.by_twice_rank[twice_rank];
        if !cached.is_nan() {
            return cached;
        }
        let rank = twice_rank as f64 / 2.0;
        let value = standard_normal_quantile((rank - 0.375) / (self.total as f64 + 0.25));
        self.by_twice_rank[twice_rank] = value;
        value
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Ranking the folded draws by merging the runs below and above the centre gives exactly
    /// the normal scores of ranking them by a sort (ties across the centre included), and the
    /// shared score table (which mirrors ranks above the middle) gives the scores computed one by
    /// one, to rounding (definition of the rank normalisation, Vehtari et al. 2021, eq. 14).
    #[test]
    fn folded_ranking_by_merge_equals_sorting() {
        // Values on a coarse grid so that ties are common, also |x − c| ties across c.
        let chains: Vec<Vec<f64>> = (0..5)
            .map(|c| {
                (0..201)
                    .map(|i| (((i * 37 + c * 11) % 23) as f64 - 11.0) * 0.25)
                    .collect()
            })
            .collect();
        let ranked = RankedDraws::new(&chains);
        for centre in [ranked.quantile(0.5), 0.0, 0.125, -3.0, 10.0] {
            let merged = ranked.folded(centre);
            let mut sorted: Vec<(f64, usize)> = ranked
                .order
                .iter()
                .map(|&(x, place)| ((x - centre).abs(), place))
                .collect();
            sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
            let by_sort = RankedDraws {
                order: sorted,
                n: ranked.n,
            };
            let values = |r: &RankedDraws| r.order.iter().map(|p| p.0).collect::<Vec<_>>();
            assert_eq!(values(&merged), values(&by_sort), "centre {centre}");
            let total = ranked.len();
            assert_eq!(
                merged.normalized(&mut NormalScores::new(total)),
                by_sort.normalized(&mut NormalScores::new(total)),
                "centre {centre}"
            );
        }
        let mut scores = NormalScores::new(1001);
        for twice_rank in [2, 3, 500, 1001, 1002, 1003, 1500, 2002] {
            let rank = twice_rank as f64 / 2.0;
            let p = (rank - 0.375) / 1001.25;
            let direct = standard_normal_quantile(p);
            assert!(
                (scores.at_twice_rank(twice_rank) - direct).abs() < 1e-12,
                "rank {rank}"
            );
        }
    }

    #[test]
    fn ranks_with_ties_are_averaged() {
        let chains = [vec![1.0, 2.0], vec![2.0, 3.0]];
        let ranked = RankedDraws::new(&chains);
        let z = ranked.normalized(&mut NormalScores::new(ranked.len()));
        assert_eq!(z[0][1], z[1][0]);
        assert!(z[0][0] < z[0][1] && z[1][0] < z[1][1]);
        assert_relative_eq!(z[0][1], 0.0, epsilon = 1e-15);
    }
}
