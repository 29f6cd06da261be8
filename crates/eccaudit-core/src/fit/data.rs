//! The velocities to fit ([`FitData`]), with the per-point constants the model needs.

/// The velocities to fit, with the per-point constants the model needs.
#[derive(Debug, Clone, PartialEq)]
pub struct FitData {
    times: Vec<f64>,
    velocities: Vec<f64>,
    uncertainties: Vec<f64>,
    instruments: Vec<usize>,
    instrument_names: Vec<String>,
    reference_time: f64,
    shifted_times: Vec<f64>,
}

impl FitData {
    /// Builds the data set. `instruments[i]` indexes `instrument_names`. The reference epoch
    /// t_ref (of the mean longitude and of the trend) is the middle of the time span, so that the
    /// phase and period parameters are as uncorrelated as the sampling allows (common practice).
    ///
    /// Inputs are assumed checked by the table reader; [`super::fit_orbit`] re-checks what it needs.
    pub fn new(
        times: &[f64],
        velocities: &[f64],
        uncertainties: &[f64],
        instruments: &[usize],
        instrument_names: &[String],
    ) -> Self {
        let (lo, hi) = times
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
                (lo.min(t), hi.max(t))
            });
        let reference_time = if times.is_empty() {
            0.0
        } else {
            0.5 * (lo + hi)
        };
        Self {
            times: times.to_vec(),
            velocities: velocities.to_vec(),
            uncertainties: uncertainties.to_vec(),
            instruments: instruments.to_vec(),
            instrument_names: instrument_names.to_vec(),
            reference_time,
            shifted_times: times.iter().map(|t| t - reference_time).collect(),
        }
    }

    /// From a velocity table read by [`crate::table::parse_table`].
    pub fn from_table(table: &crate::table::VelocityTable) -> Self {
        Self::new(
            table.times(),
            table.velocities(),
            table.uncertainties(),
            table.instrument_index(),
            table.instrument_names(),
        )
    }

    /// Number of epochs.
    pub fn n_points(&self) -> usize {
        self.times.len()
    }
    /// Number of instruments.
    pub fn n_instruments(&self) -> usize {
        self.instrument_names.len()
    }
    /// Times [d].
    pub fn times(&self) -> &[f64] {
        &self.times
    }
    /// Velocities [m/s].
    pub fn velocities(&self) -> &[f64] {
        &self.velocities
    }
    /// Uncertainties [m/s].
    pub fn uncertainties(&self) -> &[f64] {
        &self.uncertainties
    }
    /// Instrument index of each epoch.
    pub fn instruments(&self) -> &[usize] {
        &self.instruments
    }
    /// Instrument names.
    pub fn instrument_names(&self) -> &[String] {
        &self.instrument_names
    }
    /// Reference epoch t_ref [d] of the mean longitude and the trend.
    pub fn reference_time(&self) -> f64 {
        self.reference_time
    }
    /// t − t_ref [d] for each epoch.
    pub fn shifted_times(&self) -> &[f64] {
        &self.shifted_times
    }
}
