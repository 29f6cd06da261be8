//! Upper bounds on every count that an input controls, so that no table, flag or replay file
//! can make eccaudit allocate without bound (and abort with "memory allocation failed").
//!
//! Each bound is far above any run the method is meant for (the reference injection job is
//! 7 cells × 200 trials, 30 epochs, 32 walkers × 2,000 steps) and low enough that the memory a
//! bounded input asks for stays well under a browser tab's 4 GiB of WebAssembly memory. The
//! settings validations (injection design, schedule, fit options, sampler settings) call
//! [`check_count`] before they allocate; the command line checks file sizes with
//! [`MAX_INPUT_BYTES`]. An input over a bound gets one line: what, the value, the bound.

use thiserror::Error;

/// Most trials in one cell of an injection grid. The Monte-Carlo error of a cell's bias
/// falls as 1/√n: a million trials already resolve it far below any other error.
pub const MAX_TRIALS_PER_CELL: u64 = 1_000_000;

/// Most cells of an injection grid (true e × K × ω).
pub const MAX_GRID_CELLS: u64 = 100_000;

/// Most trials of a whole injection run (cells × trials per cell); each trial keeps one
/// record of about 100 bytes until the summary, so this bounds a run's records near 1 GiB.
pub const MAX_TRIALS: u64 = 10_000_000;

/// Most epochs of a planned schedule, and most rows of a table used by a design or a fit.
pub const MAX_EPOCHS: u64 = 1_000_000;

/// Most walkers of an ensemble run.
pub const MAX_WALKERS: u64 = 10_000;

/// Most steps of an ensemble run (burn-in and stored steps counted together).
pub const MAX_STEPS: u64 = 10_000_000;

/// Most stored draws of one ensemble run (walkers × stored steps); each stores one f64 per
/// parameter, so at 13 parameters (two companions, two instruments with jitter) this bounds
/// the chains near 1 GiB.
pub const MAX_STORED_DRAWS: u64 = 10_000_000;

/// Most Keplerian companions of a model or a fit (the model specification's 1 to 3).
pub const MAX_COMPANIONS: u64 = 3;

/// Most starting points of one fit option (periodogram peaks, ω values, random starts,
/// starting eccentricities, phases scanned).
pub const MAX_STARTS: u64 = 10_000;

/// Largest input file (velocity table, replay settings, trial file) the command line reads.
pub const MAX_INPUT_BYTES: u64 = 1 << 30;

/// A count above its bound.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
#[error("{what} = {value} is more than eccaudit allows ({limit})")]
pub struct LimitError {
    /// What was counted, in the words of the settings ("trials per cell").
    pub what: &'static str,
    /// The count asked for.
    pub value: u64,
    /// The bound (one of this module's constants).
    pub limit: u64,
}

/// `Ok` when `value ≤ limit`, else the [`LimitError`] naming `what`.
pub fn check_count(what: &'static str, value: u64, limit: u64) -> Result<(), LimitError> {
    if value <= limit {
        Ok(())
    } else {
        Err(LimitError { what, value, limit })
    }
}

/// The counts of an ensemble run: `walkers`, `n_burn + n_steps` steps, and the
/// walkers × `n_steps / thin` draws it stores (`thin` ≥ 1).
pub fn check_sampler_counts(
    walkers: usize,
    n_burn: usize,
    n_steps: usize,
    thin: usize,
) -> Result<(), LimitError> {
    let walkers = walkers as u64;
    check_count("walkers", walkers, MAX_WALKERS)?;
    let steps = (n_burn as u64).saturating_add(n_steps as u64);
    check_count("steps (burn-in and stored)", steps, MAX_STEPS)?;
    let stored = product(&[walkers, (n_steps / thin.max(1)) as u64]);
    check_count(
        "stored draws (walkers × stored steps)",
        stored,
        MAX_STORED_DRAWS,
    )
}

/// Product of counts, saturating at `u64::MAX` (so a product of bounded factors cannot wrap
/// round to a small number and slip past a bound).
pub fn product(counts: &[u64]) -> u64 {
    counts
        .iter()
        .fold(1u64, |total, &count| total.saturating_mul(count))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_at_the_bound_pass_and_above_it_fail_with_one_line() {
        assert_eq!(check_count("walkers", MAX_WALKERS, MAX_WALKERS), Ok(()));
        let err = check_count("trials per cell", 100_000_000_000, MAX_TRIALS_PER_CELL).unwrap_err();
        assert_eq!(
            err.to_string(),
            "trials per cell = 100000000000 is more than eccaudit allows (1000000)"
        );
    }

    #[test]
    fn products_saturate_instead_of_wrapping() {
        assert_eq!(product(&[7, 200]), 1400);
        assert_eq!(product(&[u64::MAX, 2]), u64::MAX);
        assert_eq!(product(&[]), 1);
    }
}
