//! The population report as plain text: notes first, each model's verdict and (only when it converged) its numbers with intervals and Monte-Carlo errors, the naive histograms, the stars, the methods.

use std::fmt;

use super::infer::{ModelResult, PopulationReport, Quantity};

/// A Monte-Carlo error with two significant digits (at least three decimals).
pub fn error_text(x: f64) -> String {
    if !(x.is_finite() && x > 0.0) {
        return format!("{x}");
    }
    let decimals = (1.0 - libm::floor(libm::log10(x))).max(3.0) as usize;
    format!("{x:.decimals$}")
}

fn quantity(q: &Quantity) -> String {
    format!(
        "{:.3} (68%: {:.3} to {:.3}; 95%: {:.3} to {:.3}; 95% upper limit {:.3}; MC error {})",
        q.median,
        q.lower68,
        q.upper68,
        q.lower95,
        q.upper95,
        q.upper_limit95,
        error_text(q.mc_error)
    )
}

fn model(f: &mut fmt::Formatter<'_>, title: &str, m: &ModelResult, low_e: f64) -> fmt::Result {
    let first = m.verdict.lines().next().unwrap_or("");
    writeln!(f, "{title}: {first}")?;
    for advice in m.verdict.lines().skip(1) {
        writeln!(f, "  {advice}")?;
    }
    if !m.converged {
        return writeln!(
            f,
            "  numbers withheld: the run did not meet its convergence rule (raise the budget)"
        );
    }
    for (name, q) in &m.parameters {
        writeln!(f, "  {name} = {}", quantity(q))?;
    }
    writeln!(f, "  population mean e = {}", quantity(&m.derived.mean_e))?;
    writeln!(
        f,
        "  share with e < {low_e} = {}",
        quantity(&m.derived.share_below)
    )?;
    writeln!(
        f,
        "  share of stars consistent with circular = {}",
        quantity(&m.derived.consistent_with_circular)
    )?;
    writeln!(f, "  (ESS {:.0}, {} evaluations)", m.ess, m.evaluations)
}

impl fmt::Display for PopulationReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for note in &self.notes {
            writeln!(f, "NOTE: {note}")?;
        }
        writeln!(
            f,
            "Population of e from {} companions ({} read)",
            self.n_used,
            self.stars.len()
        )?;
        let s = &self.settings;
        model(
            f,
            &format!(
                "Beta(a, b) population, a and b log-uniform on [{}, {}]",
                s.beta_range[0], s.beta_range[1]
            ),
            &self.beta,
            s.low_e,
        )?;
        model(
            f,
            &format!(
                "Histogram population, {} bins, random-walk smoothness {}",
                s.bins, s.smoothness
            ),
            &self.histogram,
            s.low_e,
        )?;
        writeln!(
            f,
            "Naive histograms (one point estimate per star; biased, shown for comparison):"
        )?;
        for h in [&self.naive_least_squares, &self.naive_posterior_median] {
            writeln!(
                f,
                "  {}: mean {:.3} ± {:.3} (standard error, n = {}); counts per bin {:?}",
                h.label, h.mean, h.standard_error, h.n, h.counts
            )?;
        }
        writeln!(f, "Companions:")?;
        for star in &self.stars {
            let status = match &star.excluded_because {
                Some(why) => format!("EXCLUDED: {why}"),
                None if star.degenerate_weights => format!(
                    "used; DEGENERATE weights ({:.1} effective draws)",
                    star.weight_ess
                ),
                None => format!("used ({:.0} effective draws)", star.weight_ess),
            };
            writeln!(
                f,
                "  {} c{}: {} draws under {}; {status}",
                star.table, star.companion, star.n_draws, star.prior
            )?;
        }
        writeln!(f, "Methods:")?;
        for m in &self.methods {
            writeln!(f, "  - {m}")?;
        }
        Ok(())
    }
}

/// The report's numbers as CSV, one row per quantity: `model,quantity,median,lower68,upper68,
/// lower95,upper95,upper_limit95,mc_error,standard_error,n`. Rows of an unconverged model are left
/// out (nothing of it is quoted); the naive histograms give their mean in `median` and its
/// standard error in `standard_error` (empty for the models); `n` = stars behind the row.
/// Numbers in their shortest round-trip form.
pub fn population_csv(report: &PopulationReport) -> String {
    let mut out = String::from(
        "model,quantity,median,lower68,upper68,lower95,upper95,upper_limit95,mc_error,standard_error,n\n",
    );
    for m in [&report.beta, &report.histogram] {
        if !m.converged {
            continue;
        }
        let d = &m.derived;
        let rows = m
            .parameters
            .iter()
            .map(|(name, q)| (name.clone(), *q))
            .chain([
                ("mean_e".to_string(), d.mean_e),
                (
                    format!("share_below_{}", report.settings.low_e),
                    d.share_below,
                ),
                (
                    "share_consistent_with_circular".to_string(),
                    d.consistent_with_circular,
                ),
            ]);
        for (name, q) in rows {
            out.push_str(&format!(
                "{},{},{},{},{},{},{},{},{},,{}\n",
                m.model,
                name.replace(' ', "_"),
                q.median,
                q.lower68,
                q.upper68,
                q.lower95,
                q.upper95,
                q.upper_limit95,
                q.mc_error,
                report.n_used
            ));
        }
    }
    for (model, h) in [
        ("naive_least_squares", &report.naive_least_squares),
        ("naive_posterior_median", &report.naive_posterior_median),
    ] {
        out.push_str(&format!(
            "{model},mean_e,{},,,,,,,{},{}\n",
            h.mean, h.standard_error, h.n
        ));
    }
    out
}
