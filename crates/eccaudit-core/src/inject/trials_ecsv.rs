//! The injection–recovery trials as an ECSV table (astropy reads it with units), one row per
//! trial with the same columns as the trial CSV.

use super::engine::{Outcome, TrialRecord};
use super::estimators::{all_outputs, Estimator};
use crate::table::{write_ecsv, EcsvColumn, EcsvValues};

/// The trials as ECSV text: `trial`, `cell`, the injected `true_e`, `true_k` [m / s],
/// `true_omega` and `true_mean_anomaly` [rad], then per estimator output `<name>_status`
/// (`ok` or the failure), the point estimate and the 68%/95% interval ends of e, the
/// `<name>_eccentric` call (masked when the estimator makes none or failed) and its extra
/// numbers. Numbers of failed outputs are masked. `meta` goes into the table's metadata.
pub fn trials_ecsv(
    records: &[TrialRecord],
    estimators: &[&dyn Estimator],
    meta: &[(&str, String)],
) -> String {
    let float =
        |name: &str, unit: Option<&str>, description: &str, f: &dyn Fn(&TrialRecord) -> f64| {
            EcsvColumn {
                name: name.to_string(),
                unit: unit.map(str::to_string),
                description: Some(description.to_string()),
                values: EcsvValues::Float(records.iter().map(|r| Some(f(r))).collect()),
            }
        };
    let mut columns = vec![
        EcsvColumn {
            name: "trial".into(),
            unit: None,
            description: Some("trial index (its own random stream)".into()),
            values: EcsvValues::Int(records.iter().map(|r| Some(r.trial as i64)).collect()),
        },
        EcsvColumn {
            name: "cell".into(),
            unit: None,
            description: Some("grid cell index".into()),
            values: EcsvValues::Int(records.iter().map(|r| Some(r.cell as i64)).collect()),
        },
        float("true_e", None, "injected eccentricity", &|r| r.eccentricity),
        float("true_k", Some("m / s"), "injected semi-amplitude", &|r| {
            r.semi_amplitude
        }),
        float(
            "true_omega",
            Some("rad"),
            "injected argument of periastron",
            &|r| r.omega,
        ),
        float(
            "true_mean_anomaly",
            Some("rad"),
            "injected mean anomaly at the reference epoch",
            &|r| r.mean_anomaly,
        ),
    ];
    for (index, output) in all_outputs(estimators).iter().enumerate() {
        let n = &output.name;
        let outcome = |r: &TrialRecord| r.outcomes.get(index).cloned();
        columns.push(EcsvColumn {
            name: format!("{n}_status"),
            unit: None,
            description: Some(format!(
                "{}: ok, why it failed, or skipped (an extra trial this estimator does not run)",
                output.label
            )),
            values: EcsvValues::Text(
                records
                    .iter()
                    .map(|r| match outcome(r) {
                        Some(Outcome::Estimate(_)) => "ok".to_string(),
                        Some(Outcome::Failed(message)) => format!("failed: {message}"),
                        Some(Outcome::Skipped) => "skipped".to_string(),
                        None => "missing".to_string(),
                    })
                    .collect(),
            ),
        });
        let estimate_column =
            |suffix: &str, description: &str, f: &dyn Fn(&super::EccentricityEstimate) -> f64| {
                EcsvColumn {
                    name: format!("{n}_{suffix}"),
                    unit: None,
                    description: Some(description.to_string()),
                    values: EcsvValues::Float(
                        records
                            .iter()
                            .map(|r| outcome(r).and_then(|o| o.estimate().map(f)))
                            .collect(),
                    ),
                }
            };
        columns.push(estimate_column("point", "estimate of e", &|e| e.point));
        columns.push(estimate_column(
            "lower68",
            "lower end of the 68% interval of e",
            &|e| e.lower68,
        ));
        columns.push(estimate_column(
            "upper68",
            "upper end of the 68% interval of e",
            &|e| e.upper68,
        ));
        columns.push(estimate_column(
            "lower95",
            "lower end of the 95% interval of e",
            &|e| e.lower95,
        ));
        columns.push(estimate_column(
            "upper95",
            "upper end of the 95% interval of e",
            &|e| e.upper95,
        ));
        columns.push(EcsvColumn {
            name: format!("{n}_eccentric"),
            unit: None,
            description: Some(
                "whether the estimator calls the orbit eccentric at the 5% level".into(),
            ),
            values: EcsvValues::Bool(
                records
                    .iter()
                    .map(|r| outcome(r).and_then(|o| o.estimate().and_then(|e| e.calls_eccentric)))
                    .collect(),
            ),
        });
        for (extra_index, extra) in output.extra_names.iter().enumerate() {
            columns.push(EcsvColumn {
                name: format!("{n}_{extra}"),
                unit: None,
                description: None,
                values: EcsvValues::Float(
                    records
                        .iter()
                        .map(|r| {
                            outcome(r).and_then(|o| {
                                o.estimate().and_then(|e| e.extra.get(extra_index).copied())
                            })
                        })
                        .collect(),
                ),
            });
        }
    }
    write_ecsv(&columns, meta)
}
