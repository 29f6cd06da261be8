//! The population of e (Hogg, Myers & Bovy 2010) on simulated surveys with known truth: each star's posterior sampled by the core under a uniform prior, its draws saved and read back in the `eccaudit-samples` format, the population inferred; checks coverage of the true Beta(a, b), the upward bias of the naive least-squares histogram, and the pile-up at e ≈ 0 of an all-circular survey.

use eccaudit_core::fit::FitData;
use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::population::{
    infer_population, parse_samples_ecsv, samples_from_run, write_samples_ecsv,
    EccentricitySamples, PopulationData, PopulationReport, PopulationSettings,
};
use eccaudit_core::posterior::{prior_sensitivity, SensitivityRequest};
use eccaudit_core::priors::{EccentricityPriorSettings, EccentricityShape};
use eccaudit_core::random::{normal, stream_rng};
use eccaudit_core::sampler::Steer;
use eccaudit_core::spec::{JitterMode, ModelSpec};
use eccaudit_core::table::{parse_table, ReadOptions};
use rand::RngExt;

/// One simulated star: true e, a table as text. Realistic sampling: 2–3 observing seasons of
/// 120 nights a year, 12–30 epochs on random nights inside them, error bars 2–4 m/s, K of
/// 5–40 m/s (K/σ ≈ 2–13), period 4–150 d log-uniform, one instrument with an offset.
fn star(index: u64, seed: u64, e: f64) -> String {
    let mut rng = stream_rng(seed, index);
    let period = libm::exp(rng.random_range(libm::log(4.0)..libm::log(150.0)));
    let k = rng.random_range(5.0..40.0);
    let omega = rng.random_range(0.0..std::f64::consts::TAU);
    let t0 = 2_460_000.0;
    let tp = t0 + rng.random_range(0.0..period);
    let seasons = rng.random_range(2..=3);
    let n = rng.random_range(12..=30);
    let model = RvModel::new(
        vec![OrbitalElements::new(period, k, e, omega, tp).unwrap()],
        vec![7.5],
        0.0,
        t0,
    )
    .unwrap();
    let mut times: Vec<f64> = (0..n)
        .map(|_| {
            let season = rng.random_range(0..seasons) as f64;
            t0 + 365.25 * season + rng.random_range(0.0..120.0f64).floor() + 0.7
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times.dedup();
    let mut text =
        format!("# star {index}: P = {period} d, K = {k} m/s, e = {e}\nbjd,rv [m/s],sigma [m/s]\n");
    for t in times {
        let sigma = rng.random_range(2.0..4.0);
        let v = normal(&mut rng, model.velocity(t, 0).unwrap(), sigma);
        text.push_str(&format!("{t},{v},{sigma}\n"));
    }
    text
}

/// Period of star `index` (the same draw as in [`star`]): the survey's known planets are
/// sampled at their catalogued periods (the period search is not what is tested here).
fn period_of(index: u64, seed: u64) -> f64 {
    let mut rng = stream_rng(seed, index);
    libm::exp(rng.random_range(libm::log(4.0)..libm::log(150.0)))
}

/// Samples star `index`'s posterior under uniform:0..0.99 (the `priors` defaults: 4 ensembles
/// of 16 walkers, run until converged), saves its draws in the samples format and reads them
/// back, as `eccaudit population` would.
fn samples_of(index: u64, seed: u64, e: f64) -> EccentricitySamples {
    let text = star(index, seed, e);
    let name = format!("star-{index}.csv");
    let table = parse_table(
        &text,
        &ReadOptions {
            source_name: name.clone(),
            ..ReadOptions::default()
        },
    )
    .unwrap();
    let data = FitData::from_table(&table);
    let request = SensitivityRequest {
        priors: vec!["uniform:0..0.99".into()],
        seed: 7 + index,
        model: ModelSpec {
            periods: vec![period_of(index, seed)],
            jitter: JitterMode::Off,
            ..ModelSpec::DEFAULT
        },
        ..SensitivityRequest::default()
    };
    let settings = request.to_settings().unwrap();
    let report = prior_sensitivity(&data, &settings, &mut |_| Steer::Continue).unwrap();
    let samples =
        samples_from_run(&name, 1, &report.runs[0], Some(report.least_squares.e)).unwrap();
    parse_samples_ecsv(&write_samples_ecsv(&samples), &name).unwrap()
}

fn survey(n: u64, seed: u64, true_e: impl Fn(u64) -> f64) -> (Vec<f64>, Vec<EccentricitySamples>) {
    let truths: Vec<f64> = (0..n).map(&true_e).collect();
    let samples = (0..n)
        .map(|i| samples_of(i, seed, truths[i as usize]))
        .collect();
    (truths, samples)
}

fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

fn report(samples: &[EccentricitySamples]) -> PopulationReport {
    let report = infer_population(samples, &PopulationSettings::default(), &mut || {
        Steer::Continue
    })
    .unwrap();
    println!("{report}");
    assert!(report.beta.converged, "{}", report.beta.verdict);
    assert!(report.histogram.converged, "{}", report.histogram.verdict);
    report
}

#[test]
fn sixty_stars_from_a_beta_population_cover_the_truth_and_show_the_naive_bias() {
    let (a, b) = (1.5, 5.0);
    let truth = EccentricityPriorSettings {
        shape: EccentricityShape::Beta { a, b },
        e_min: 0.0,
        e_max: 1.0,
    }
    .validate()
    .unwrap();
    let mut rng = stream_rng(2166, 999);
    let draws: Vec<f64> = (0..60).map(|_| truth.draw(&mut rng)).collect();
    let (truths, samples) = survey(60, 2166, |i| draws[i as usize]);
    let report = report(&samples);
    let used: Vec<&EccentricitySamples> = samples.iter().filter(|s| s.converged).collect();
    // Runs that miss the convergence rule within the `priors` budget are excluded (and listed
    // by the report); on this survey 50 of 60 converge (measured, seed 2166,
    // with the posterior starts of main 1c19422; 51 before). At least three
    // quarters must enter the population for the test to mean anything.
    assert!(used.len() >= 45, "only {} of 60 runs converged", used.len());
    // The truth inside the 95 % highest-posterior-density region of (a, b): fewer than 95 % of
    // the posterior draws have a higher density than the truth (common practice). With 1000
    // draws the share's Monte-Carlo error is ≤ 0.016 (binomial).
    let data = PopulationData::new(&used, &report.settings);
    let at_truth = data.beta_ln_posterior(libm::log(a), libm::log(b));
    let higher = report
        .beta
        .draws
        .iter()
        .filter(|p| data.beta_ln_posterior(libm::log(p[0]), libm::log(p[1])) > at_truth)
        .count() as f64
        / report.beta.draws.len() as f64;
    println!("share of posterior draws denser than the truth: {higher}");
    assert!(higher < 0.95, "truth outside the 95% region: {higher}");
    // The naive least-squares histogram's mean lies above the mean of the true e of the same
    // stars by more than its standard error (the test; the least-squares e of a
    // noisy orbit is biased upward: Lucy & Sweeney 1971).
    let true_mean = mean(
        &samples
            .iter()
            .zip(&truths)
            .filter(|(s, _)| s.converged)
            .map(|(_, &t)| t)
            .collect::<Vec<_>>(),
    );
    let naive = &report.naive_least_squares;
    println!(
        "true mean {true_mean}; naive least-squares mean {} ± {}",
        naive.mean, naive.standard_error
    );
    assert!(
        naive.mean - true_mean > naive.standard_error,
        "naive mean {} not above the true mean {true_mean} by its error {}",
        naive.mean,
        naive.standard_error
    );
    // The population mean a/(a + b) inside the inferred 95 % interval.
    let q = report.beta.derived.mean_e;
    assert!(q.lower95 < a / (a + b) && a / (a + b) < q.upper95, "{q:?}");
}

#[test]
fn an_all_circular_survey_piles_up_at_zero() {
    let (_, samples) = survey(40, 725, |_| 0.0);
    let report = report(&samples);
    let q = report.beta.derived.mean_e;
    let h = report.histogram.derived.mean_e;
    println!(
        "all circular: Beta mean e upper limit {}, histogram {}; naive LS mean {}",
        q.upper_limit95, h.upper_limit95, report.naive_least_squares.mean
    );
    // Stated upper limit: the population mean e is below 0.1 at 95 % for the Beta population,
    // while the naive least-squares mean of the same stars sits higher.
    assert!(q.upper_limit95 < 0.1, "{q:?}");
    assert!(report.naive_least_squares.mean > q.upper_limit95);
    // Most of the population below e = 0.1.
    assert!(report.beta.derived.share_below.median > 0.7);
}
