//! Random numbers that are identical in the native command line and in the browser.
//!
//! Uniform deviates come from `rand_xoshiro`'s xoshiro256++ (bit-exact on every
//! platform); Gaussian deviates are made here from them with `libm`'s `log`
//! and `sqrt`, because the usual ziggurat samplers call the platform's own
//! `exp`/`ln`, whose last bit may differ between native and wasm builds.

use rand::{Rng, RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// The generator every simulation in eccaudit uses.
pub type SimRng = Xoshiro256PlusPlus;

/// A generator seeded from a master seed and a stream index (e.g. a trial
/// number), so that each trial's numbers depend only on `(seed, stream)` and
/// not on which thread or worker ran it or in which order.
///
/// The pair is mixed with SplitMix64 (Steele, Lea & Flood 2014, "Fast
/// splittable pseudorandom number generators", OOPSLA) before seeding.
pub fn stream_rng(seed: u64, stream: u64) -> SimRng {
    let mixed = splitmix64(seed ^ splitmix64(stream.wrapping_add(0x9E37_79B9_7F4A_7C15)));
    SimRng::seed_from_u64(mixed)
}

/// One step of SplitMix64 (Steele, Lea & Flood 2014), used as a hash.
fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// A standard normal deviate by the polar method of Marsaglia & Bray (1964,
/// SIAM Review 6, 260), using `libm` so every platform gives the same bits.
pub fn standard_normal<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    loop {
        let u = 2.0 * rng.random::<f64>() - 1.0;
        let v = 2.0 * rng.random::<f64>() - 1.0;
        let s = u * u + v * v;
        if s > 0.0 && s < 1.0 {
            return u * libm::sqrt(-2.0 * libm::log(s) / s);
        }
    }
}

/// A normal deviate with the given mean and standard deviation.
pub fn normal<R: Rng + ?Sized>(rng: &mut R, mean: f64, sigma: f64) -> f64 {
    mean + sigma * standard_normal(rng)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_seed_and_stream_give_the_same_numbers_and_streams_differ() {
        let draw = |seed, stream| {
            let mut rng = stream_rng(seed, stream);
            (0..4)
                .map(|_| standard_normal(&mut rng))
                .collect::<Vec<_>>()
        };
        assert_eq!(draw(7, 3), draw(7, 3));
        assert_ne!(draw(7, 3), draw(7, 4));
        assert_ne!(draw(7, 3), draw(8, 3));
    }

    /// Moments of 200 000 deviates. Standard errors: mean σ/√n = 0.0022,
    /// variance √(2/n) = 0.0032, fourth moment √(96/n) = 0.022 (normal
    /// theory, common practice); the tolerances are five standard errors.
    #[test]
    fn moments_match_the_standard_normal() {
        let n = 200_000;
        let mut rng = stream_rng(20261202, 0);
        let xs: Vec<f64> = (0..n).map(|_| standard_normal(&mut rng)).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        let m4 = xs.iter().map(|x| (x - mean).powi(4)).sum::<f64>() / n as f64;
        assert!(mean.abs() < 5.0 * 0.0022, "mean {mean}");
        assert!((var - 1.0).abs() < 5.0 * 0.0032, "variance {var}");
        assert!((m4 - 3.0).abs() < 5.0 * 0.022, "fourth moment {m4}");
        // Tail share beyond 1.96σ: 5% with binomial s.e. √(0.05·0.95/n) = 0.00049.
        let tail = xs.iter().filter(|x| x.abs() > 1.959_964).count() as f64 / n as f64;
        assert!((tail - 0.05).abs() < 5.0 * 0.000_49, "tail share {tail}");
    }
}
