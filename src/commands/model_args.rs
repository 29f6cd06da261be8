//! The model options every fitting subcommand shares (`fit`, `priors`, `inject`, `audit`):
//! one clap struct, spelt the same everywhere, defaults from the core's [`ModelSpec::DEFAULT`].

use eccaudit_core::spec::{JitterMode, ModelSpec};

/// The model fitted to the data (flattened into each subcommand that fits one).
#[derive(Debug, Clone, clap::Args)]
pub struct ModelArgs {
    /// Keplerian companions (1 to 3).
    #[arg(long, value_name = "N", default_value_t = ModelSpec::DEFAULT.companions)]
    pub companions: usize,
    /// Period [d] of a companion instead of the period search (still fitted); repeat once per
    /// companion, in order.
    #[arg(long = "period", value_name = "DAYS")]
    pub periods: Vec<f64>,
    /// Fit a linear trend.
    #[arg(long)]
    pub trend: bool,
    /// Instrument jitters: auto (fitted when the jitter-free fit fails the chi2 test, p < 0.01),
    /// fit (always) or off (never; a failed chi2 test is reported). Estimated by the modified
    /// likelihood of Baluev (2009).
    #[arg(long, value_name = "MODE", default_value_t = ModelSpec::DEFAULT.jitter)]
    pub jitter: JitterMode,
    /// Shortest period searched [d].
    #[arg(long, value_name = "DAYS", default_value_t = ModelSpec::DEFAULT.min_period)]
    pub min_period: f64,
    /// Longest period searched [d] (default: the time span of the data).
    #[arg(long, value_name = "DAYS")]
    pub max_period: Option<f64>,
    /// False-alarm probability above which a periodogram detection is called marginal; a
    /// marginal detection is fitted (and audited) all the same, and the output says so first.
    #[arg(long, value_name = "P", default_value_t = ModelSpec::DEFAULT.max_fap)]
    pub max_fap: f64,
}

impl ModelArgs {
    /// The model specification (not yet validated), auditing `audit_companion` (1-based; None
    /// = every companion).
    pub fn spec(&self, audit_companion: Option<usize>) -> ModelSpec {
        ModelSpec {
            companions: self.companions,
            periods: self.periods.clone(),
            trend: self.trend,
            jitter: self.jitter,
            min_period: self.min_period,
            max_period: self.max_period,
            max_fap: self.max_fap,
            audit_companion,
        }
    }
}
