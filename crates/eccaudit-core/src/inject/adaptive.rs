//! Adaptive trial counts: after the base trials, extra trials are added in batches only to the
//! cells the statement's numbers rest on, until those numbers reach a stated precision.
//!
//! Each cell's block of extra trial indices ([`super::design::InjectionDesign::extra_trials`])
//! has two halves: [`ExtraKind::LeastSquares`] trials run the least-squares estimator only
//! (cheap: the circular decision and a least-squares belt need nothing else),
//! [`ExtraKind::AllEstimators`] trials run every estimator. Within a half, batch b covers
//! offsets [S_b, S_b+1) with sizes first·2^b, the last one cut at the cap. The rule that asks
//! for a batch only ever sees the base trials and *complete* batches, so the sequence of
//! batches is a pure function of the settings: the same however the trials are split over
//! threads or workers, and the same after an interrupted run is resumed.

use std::collections::HashSet;
use std::ops::Range;

use super::design::{InjectionDesign, EXTRA_BLOCK};
use super::engine::TrialRecord;

/// The circular decision's target Monte-Carlo standard error of p.
pub const DECISION_TARGET_ERROR: f64 = 0.005;
/// Most circular simulations the decision may use (base + extra).
pub const DECISION_CAP: u64 = 10_000;
/// Below this upper end of its Wilson 95% interval, or above this lower end, the decision's
/// Monte-Carlo p is far from 0.05: the decision is settled and p is quoted with whatever
/// standard error it has; nearer 0.05 it is resolved to [`DECISION_TARGET_ERROR`].
pub const DECISION_FAR: [f64; 2] = [0.01, 0.2];
/// Target bootstrap standard error of each end of the quoted least-squares interval.
pub const BELT_TARGET_ERROR: f64 = 0.005;
/// Most simulations the interval rule adds up to in one cell (base + extra): past this the
/// interval's ends are quoted with the bootstrap errors they have (a coarse grid can keep them
/// above [`BELT_TARGET_ERROR`]).
pub const BELT_MAX_LEAST_SQUARES: usize = 4000;
/// Target Monte-Carlo standard error of the quoted bias.
pub const BIAS_TARGET_ERROR: f64 = 0.005;
/// Fewest simulations of the recommended estimator in each cell its interval rests on, when it
/// is least squares (cheap) or a posterior estimator.
pub const BELT_MIN_LEAST_SQUARES: usize = 250;
/// The same for an estimator that needs every estimator run (posterior outputs).
pub const BELT_MIN_ALL: usize = 100;

/// Which estimators an extra trial runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExtraKind {
    /// The least-squares estimator only (its outputs; the others are `Skipped`).
    LeastSquares,
    /// Every estimator, as a base trial.
    AllEstimators,
}

/// Batch sizes of one half-block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BatchSchedule {
    /// Size of the first batch.
    pub first: u64,
    /// Most extra trials in the half-block.
    pub cap: u64,
}

impl BatchSchedule {
    /// Offsets of batch `b` (None beyond the cap).
    pub fn batch(&self, b: u32) -> Option<Range<u64>> {
        let mut start = 0u64;
        let mut size = self.first.max(1);
        for _ in 0..b {
            start += size;
            size = size.saturating_mul(2);
        }
        if start >= self.cap {
            return None;
        }
        Some(start..(start + size).min(self.cap))
    }

    /// Number of complete batches among the offsets present, and the offset they end at.
    pub fn complete(&self, present: &HashSet<u64>) -> (u32, u64) {
        let mut b = 0;
        let mut end = 0;
        while let Some(range) = self.batch(b) {
            if range.clone().all(|o| present.contains(&o)) {
                end = range.end;
                b += 1;
            } else {
                break;
            }
        }
        (b, end)
    }
}

/// The schedule of each kind of extra trial.
pub fn schedule(kind: ExtraKind) -> BatchSchedule {
    match kind {
        ExtraKind::LeastSquares => BatchSchedule {
            first: 250,
            cap: DECISION_CAP,
        },
        ExtraKind::AllEstimators => BatchSchedule {
            first: 40,
            cap: 600,
        },
    }
}

/// Where a half-block starts inside a cell's extra block.
fn half_offset(kind: ExtraKind) -> u64 {
    match kind {
        ExtraKind::LeastSquares => 0,
        ExtraKind::AllEstimators => EXTRA_BLOCK / 2,
    }
}

/// The trial indices of batch `b` of `kind` in cell `cell`.
pub fn batch_trials(
    design: &InjectionDesign,
    cell: usize,
    kind: ExtraKind,
    b: u32,
) -> Option<Range<u64>> {
    let start = design.extra_trials(cell).start + half_offset(kind);
    schedule(kind)
        .batch(b)
        .map(|r| start + r.start..start + r.end)
}

/// Which half-block an extra trial belongs to (None for a base trial).
pub fn kind_of_trial(design: &InjectionDesign, trial: u64) -> Option<ExtraKind> {
    if trial < design.n_trials() {
        return None;
    }
    let offset = (trial - design.n_trials()) % EXTRA_BLOCK;
    Some(if offset < EXTRA_BLOCK / 2 {
        ExtraKind::LeastSquares
    } else {
        ExtraKind::AllEstimators
    })
}

/// The state of the extra trials: complete batches per cell and kind.
#[derive(Debug, Clone)]
pub struct ExtraState {
    /// (complete batches, end offset) per cell, least-squares half.
    pub least_squares: Vec<(u32, u64)>,
    /// The same, every-estimator half.
    pub all: Vec<(u32, u64)>,
}

impl ExtraState {
    /// The state of `records`.
    pub fn of(design: &InjectionDesign, records: &[TrialRecord]) -> Self {
        let n_cells = design.n_cells();
        let mut ls: Vec<HashSet<u64>> = vec![HashSet::new(); n_cells];
        let mut all: Vec<HashSet<u64>> = vec![HashSet::new(); n_cells];
        for r in records {
            let Some(kind) = kind_of_trial(design, r.trial) else {
                continue;
            };
            let cell = design.cell_of_trial(r.trial);
            if cell >= n_cells {
                continue;
            }
            let offset = r.trial - design.extra_trials(cell).start - half_offset(kind);
            match kind {
                ExtraKind::LeastSquares => ls[cell].insert(offset),
                ExtraKind::AllEstimators => all[cell].insert(offset),
            };
        }
        ExtraState {
            least_squares: ls
                .iter()
                .map(|p| schedule(ExtraKind::LeastSquares).complete(p))
                .collect(),
            all: all
                .iter()
                .map(|p| schedule(ExtraKind::AllEstimators).complete(p))
                .collect(),
        }
    }

    /// True when the record is a base trial or belongs to a complete batch.
    pub fn counts(&self, design: &InjectionDesign, record: &TrialRecord) -> bool {
        let Some(kind) = kind_of_trial(design, record.trial) else {
            return true;
        };
        let cell = design.cell_of_trial(record.trial);
        let offset = record.trial - design.extra_trials(cell).start - half_offset(kind);
        let table = match kind {
            ExtraKind::LeastSquares => &self.least_squares,
            ExtraKind::AllEstimators => &self.all,
        };
        table.get(cell).is_some_and(|&(_, end)| offset < end)
    }

    /// The next batch of `kind` in `cell` (None at the cap).
    pub fn next(
        &self,
        design: &InjectionDesign,
        cell: usize,
        kind: ExtraKind,
    ) -> Option<Range<u64>> {
        let table = match kind {
            ExtraKind::LeastSquares => &self.least_squares,
            ExtraKind::AllEstimators => &self.all,
        };
        batch_trials(design, cell, kind, table.get(cell)?.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn batches_double_and_stop_at_the_cap() {
        let s = BatchSchedule {
            first: 250,
            cap: 10_000,
        };
        assert_eq!(s.batch(0), Some(0..250));
        assert_eq!(s.batch(1), Some(250..750));
        assert_eq!(s.batch(4), Some(3750..7750));
        assert_eq!(s.batch(5), Some(7750..10_000));
        assert_eq!(s.batch(6), None);
        let mut present: HashSet<u64> = (0..750).collect();
        present.insert(800);
        assert_eq!(s.complete(&present), (2, 750));
    }
}
