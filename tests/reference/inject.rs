//! Injection–recovery checked against published statistics of the least-squares eccentricity:
//! the Rayleigh law of Lucy & Sweeney (1971) for circular orbits, and the positive bias that
//! shrinks with signal-to-noise and number of epochs reported by Shen & Turner (2008).

use eccaudit_core::inject::{
    run_trials, summarise, Estimator, InjectionDesign, InjectionSummary, LeastSquaresEstimator,
    Sampling,
};

/// N epochs at exactly evenly spread phases k/N of period P (so Σcos 2λ = Σsin 2λ = 0 and the
/// e cos ω, e sin ω columns are orthogonal), each in a scrambled cycle; epochs half a period
/// apart share a cycle, which cancels the leading correlation of the period with e cos ω and
/// e sin ω.
fn even_phase_sampling(n_epochs: usize, period: f64, sigma: f64) -> Sampling {
    assert!(n_epochs.is_multiple_of(2));
    let half = n_epochs / 2;
    let times: Vec<f64> = (0..n_epochs)
        .map(|k| {
            let cycle = ((k % half) * 37 % 61) as f64;
            (cycle + k as f64 / n_epochs as f64) * period
        })
        .collect();
    Sampling::new(
        times,
        vec![sigma; n_epochs],
        vec![0; n_epochs],
        vec!["sim".into()],
    )
    .unwrap()
}

fn run(design: &InjectionDesign) -> (InjectionSummary, Vec<f64>) {
    let lsq = LeastSquaresEstimator::default();
    let estimators: [&dyn Estimator; 1] = [&lsq];
    let records = run_trials(design, &estimators, 0..design.n_trials(), &mut |_| {}).unwrap();
    let points = records
        .iter()
        .filter_map(|r| r.outcomes[0].estimate().map(|e| e.point))
        .collect();
    (summarise(design, &estimators, &records), points)
}

/// Lucy & Sweeney (1971, AJ 76, 544, section II): for a circular orbit observed at N evenly
/// spread phases with σ ≪ K, the least-squares (e cos ω, e sin ω) are independent normal with
/// variance σ_e² = 2σ²/(N K²) (from memory; it follows from the second-harmonic terms
/// e K cos(2λ − ω) of the first-order expansion), so ê follows a Rayleigh law with scale σ_e:
/// mean √(π/2) σ_e = 1.2533 σ_e, median √(2 ln 2) σ_e = 1.1774 σ_e, P(ê > √(2 ln 20) σ_e =
/// 2.4477 σ_e) = 0.05 (closed forms of the Rayleigh law).
///
/// n = 1500 trials, fixed seed. Monte-Carlo standard errors (common practice): mean
/// √((4 − π)/2) σ_e/√n = 0.0169 σ_e; median 1/(2 f(m) √n) = 0.8493 σ_e/√n = 0.0219 σ_e with
/// f(m) = 0.5887/σ_e the Rayleigh density at the median; tail share √(0.05·0.95/n) = 0.00563.
/// Tolerances: four standard errors.
#[test]
fn circular_orbits_give_the_rayleigh_law_of_lucy_and_sweeney() {
    let (n_epochs, period, sigma, k) = (40, 10.0, 1.0, 50.0);
    let design = InjectionDesign {
        sampling: even_phase_sampling(n_epochs, period, sigma),
        period,
        eccentricities: vec![0.0],
        semi_amplitudes: vec![k],
        omegas: vec![],
        jitter: 0.0,
        trials_per_cell: 1500,
        seed: 1971,
        model: Default::default(),
    };
    let (summary, mut points) = run(&design);
    let n = points.len();
    assert_eq!(n, 1500, "every fit must succeed");
    let sigma_e = (2.0 / n_epochs as f64).sqrt() * sigma / k;
    let mean = points.iter().sum::<f64>() / n as f64;
    points.sort_by(f64::total_cmp);
    let median = 0.5 * (points[n / 2 - 1] + points[n / 2]);
    let threshold = (2.0 * 20f64.ln()).sqrt() * sigma_e;
    let tail = points.iter().filter(|&&e| e > threshold).count() as f64 / n as f64;
    let root_n = (n as f64).sqrt();
    let se_mean = ((4.0 - std::f64::consts::PI) / 2.0).sqrt() * sigma_e / root_n;
    let se_median = 0.8493 * sigma_e / root_n;
    let se_tail = (0.05 * 0.95 / n as f64).sqrt();
    eprintln!(
        "Rayleigh: mean {:.4} σ_e, median {:.4} σ_e, tail {:.4}",
        mean / sigma_e,
        median / sigma_e,
        tail
    );
    assert!(
        (mean - 1.2533 * sigma_e).abs() < 4.0 * se_mean,
        "mean {mean}"
    );
    assert!(
        (median - 1.1774 * sigma_e).abs() < 4.0 * se_median,
        "median {median}"
    );
    assert!((tail - 0.05).abs() < 4.0 * se_tail, "tail share {tail}");

    // The same law, read from the engine's own summary: the Lucy–Sweeney output calls ~5%
    // eccentric (its fitted σ_e replaces the true one, which at N = 40 changes it little), and
    // the formal 95% interval excludes 0 — ê > 1.96 σ_e — in exp(−1.96²/2) = 14.65% of
    // circular orbits (Rayleigh tail); binomial s.e. 0.0056 and 0.0091, tolerance four s.e.
    let cell = &summary.cells[0];
    let lsq = &cell.outputs[0];
    let lucy = &cell.outputs[1];
    let false_lsq = lsq.false_eccentric_rate.unwrap().value;
    let false_lucy = lucy.false_eccentric_rate.unwrap().value;
    eprintln!("false-eccentric rate: formal {false_lsq:.4}, Lucy-Sweeney {false_lucy:.4}");
    assert!((false_lucy - 0.05).abs() < 4.0 * 0.0056, "{false_lucy}");
    assert!((false_lsq - 0.1465).abs() < 4.0 * 0.0091, "{false_lsq}");
    // Bias of a circular injection is the Rayleigh mean itself.
    assert!((lsq.bias - 1.2533 * sigma_e).abs() < 4.0 * se_mean);
}

/// Shen & Turner (2008, ApJ 685, 553, figs. 4–5 and section 4): least-squares eccentricities
/// of nearly circular orbits are biased high, more so at lower K/σ and fewer epochs. A 3 × 3
/// grid (K/σ = 3, 6, 12; N = 12, 24, 48 random epochs over 20 periods) at true e = 0.1, 250
/// trials per cell, fixed seed. Checks: (1) the bias is positive wherever σ_e ≈ √(2/N)/(K/σ)
/// is at least half the true e — there by more than three Monte-Carlo standard errors; (2) it
/// falls along each axis: every step to higher K/σ or N lowers it, allowing three standard
/// errors of the difference; (3) the corner with least signal is biased more than the corner
/// with most by more than five standard errors of the difference.
#[test]
fn bias_is_positive_and_shrinks_with_signal_and_epochs() {
    let period = 10.0;
    let true_e = 0.1;
    let sigma = 1.0;
    let k_over_sigma = [3.0, 6.0, 12.0];
    let n_epochs = [12, 24, 48];
    let lsq = LeastSquaresEstimator::default();
    let estimators: [&dyn Estimator; 1] = [&lsq];
    // bias[i_n][i_k] with its standard error.
    let mut bias = [[(0.0, 0.0); 3]; 3];
    for (i_n, &n) in n_epochs.iter().enumerate() {
        let sampling = Sampling::from_schedule(
            &eccaudit_core::inject::Schedule {
                n_epochs: n,
                baseline: 20.0 * period,
                start_time: 0.0,
                spacing: eccaudit_core::inject::Spacing::Random,
                uncertainty: sigma,
            },
            2008 + n as u64,
        )
        .unwrap();
        let design = InjectionDesign {
            sampling,
            period,
            eccentricities: vec![true_e],
            semi_amplitudes: k_over_sigma.iter().map(|r| r * sigma).collect(),
            omegas: vec![],
            jitter: 0.0,
            trials_per_cell: 250,
            seed: 553,
            model: Default::default(),
        };
        let records = run_trials(&design, &estimators, 0..design.n_trials(), &mut |_| {}).unwrap();
        let summary = summarise(&design, &estimators, &records);
        for (i_k, cell) in summary.cells.iter().enumerate() {
            let o = &cell.outputs[0];
            assert!(o.n_failed <= 5, "{} failed fits", o.n_failed);
            bias[i_n][i_k] = (o.bias, o.bias_standard_error);
            eprintln!(
                "N = {n:2}, K/σ = {:4}: bias {:+.4} ± {:.4}",
                k_over_sigma[i_k], o.bias, o.bias_standard_error
            );
        }
    }
    let diff_se = |a: (f64, f64), b: (f64, f64)| (a.1 * a.1 + b.1 * b.1).sqrt();
    for (i_n, &n) in n_epochs.iter().enumerate() {
        for (i_k, &r) in k_over_sigma.iter().enumerate() {
            let sigma_e = (2.0 / n as f64).sqrt() / r;
            let (b, se) = bias[i_n][i_k];
            if sigma_e >= 0.5 * true_e {
                assert!(b > 3.0 * se, "N = {n}, K/σ = {r}: bias {b} ± {se}");
            }
            if i_k + 1 < 3 {
                let next = bias[i_n][i_k + 1];
                assert!(
                    b - next.0 > -3.0 * diff_se(bias[i_n][i_k], next),
                    "bias rises with K/σ at N = {n}"
                );
            }
            if i_n + 1 < 3 {
                let next = bias[i_n + 1][i_k];
                assert!(
                    b - next.0 > -3.0 * diff_se(bias[i_n][i_k], next),
                    "bias rises with N at K/σ = {r}"
                );
            }
        }
    }
    let (low, high) = (bias[0][0], bias[2][2]);
    assert!(low.0 - high.0 > 5.0 * diff_se(low, high));
}

/// The belt interval of the least-squares ê (Neyman 1937 with the Feldman & Cousins 1998, PRD
/// 57, 3873, ordering; see `eccaudit_core::inject::belt`) covers the true e at its nominal 95%
/// on simulations independent of the belt: the belt from 300 trials at each e = 0, 0.05, …,
/// 0.6 (30 random epochs over 200 d, σ = 3 m/s, K = 15 m/s, K/σ = 5), then 200 fresh trials
/// (another seed) at each of three true e between grid points, 0.025, 0.125 and 0.275.
/// Binomial standard error per e √(0.95·0.05/200) = 0.0154, pooled (600) 0.0089 (common
/// practice); the belt's own Monte-Carlo error (300 simulations per grid e) moves coverage by
/// about ±0.015 (the binomial error of its 5% cut, √(0.05·0.95/300) = 0.0126, rounded up).
/// Tolerances: three standard errors plus 0.015, per e and pooled. Also: at true e = 0 most
/// intervals are upper limits, and no interval is empty.
#[test]
fn least_squares_belt_covers_at_its_level_off_the_grid() {
    use eccaudit_core::inject::{Belt, BeltCellInput, Schedule, Spacing};
    let sampling = Sampling::from_schedule(
        &Schedule {
            n_epochs: 30,
            baseline: 200.0,
            start_time: 0.0,
            spacing: Spacing::Random,
            uncertainty: 3.0,
        },
        1937,
    )
    .unwrap();
    let grid: Vec<f64> = (0..=12).map(|i| f64::from(i) / 20.0).collect();
    let design = |eccentricities: Vec<f64>, trials_per_cell: usize, seed: u64| InjectionDesign {
        sampling: sampling.clone(),
        period: 11.3,
        eccentricities,
        semi_amplitudes: vec![15.0],
        omegas: vec![],
        jitter: 0.0,
        trials_per_cell,
        seed,
        model: Default::default(),
    };
    let lsq = LeastSquaresEstimator::default();
    let estimators: [&dyn Estimator; 1] = [&lsq];
    let points_by_cell = |d: &InjectionDesign| -> Vec<Vec<f64>> {
        let records = run_trials(d, &estimators, 0..d.n_trials(), &mut |_| {}).unwrap();
        (0..d.n_cells())
            .map(|c| {
                records
                    .iter()
                    .filter(|r| r.cell == c)
                    .filter_map(|r| r.outcomes[0].estimate().map(|e| e.point))
                    .collect()
            })
            .collect()
    };
    let belt_design = design(grid.clone(), 300, 1998);
    let belt_points = points_by_cell(&belt_design);
    let inputs: Vec<BeltCellInput> = grid
        .iter()
        .zip(&belt_points)
        .map(|(&e, v)| BeltCellInput { e, estimates: v })
        .collect();
    let belt = Belt::new(&inputs, 0.95, 0.0).unwrap();

    let truths = [0.025, 0.125, 0.275];
    let fresh = points_by_cell(&design(truths.to_vec(), 200, 3873));
    let (mut hits_all, mut n_all) = (0, 0);
    for (&truth, points) in truths.iter().zip(&fresh) {
        let hits = points
            .iter()
            .filter(|&&x| {
                let i = belt.interval(x);
                assert!(i.lower <= i.upper, "empty interval at x = {x}: {i:?}");
                i.lower <= truth && truth <= i.upper
            })
            .count();
        let share = hits as f64 / points.len() as f64;
        eprintln!(
            "belt coverage at true e = {truth}: {share:.4} ({} trials)",
            points.len()
        );
        assert!(points.len() >= 195, "{} fits", points.len());
        assert!(
            (share - 0.95).abs() < 3.0 * 0.0154 + 0.015,
            "e = {truth}: {share}"
        );
        hits_all += hits;
        n_all += points.len();
    }
    let pooled = hits_all as f64 / n_all as f64;
    assert!(
        (pooled - 0.95).abs() < 3.0 * 0.0089 + 0.015,
        "pooled {pooled}"
    );
    // Circular truth: the interval is an upper limit for most simulated data sets.
    let limits = belt_points[0]
        .iter()
        .filter(|&&x| belt.interval(x).upper_limit)
        .count();
    eprintln!(
        "upper limits at e = 0: {limits} of {}",
        belt_points[0].len()
    );
    assert!(limits as f64 > 0.8 * belt_points[0].len() as f64);
}

/// Each companion's belt interval covers its true e on a realistic model: 100 simulated tables
/// of two companions (P = 11.3 d, K = 14 m/s, e = 0.15; P = 47.2 d, K = 20 m/s, e = 0.3), a
/// linear trend and two instruments with their own offsets and uncertainties (2 and 3 m/s), 60
/// random epochs over 400 d (fixed seeds), each audited in full by the audit's own pipeline
/// (`AuditPlan::all`: model fitted, background and offsets held at the fit, every companion's
/// simulations refitted with the whole model; `finish`: the statement's belt interval of
/// `lsq`). Reduced configuration, the same method: least squares only (no posterior
/// estimators), the 30 base trials per injected e = 0, 0.1, …, 0.6 and no adaptive extra
/// batches (fewer simulations per cell: the conformal cut keeps the level at any number,
/// wider). Runs in about 4 minutes on 2 loaded cores (180 s CPU, load 12).
/// At nominal 95% each companion's interval must cover its truth in at least 90% of the
/// tables (the requirement): with 100 tables the binomial standard error at 95% is
/// 0.022 (common practice), so 90% is 2.3 standard errors below nominal. Measured: companion 1
/// 99/100, companion 2 100/100 (before the leave-one-out conformal cut: 26/30 and 29/30; before
/// inverting on interpolated acceptance bounds: 65/100 for companion 1).
#[test]
fn every_companion_is_covered_in_a_two_companion_trend_two_instrument_model() {
    use eccaudit_core::audit::{
        AuditPlan, AuditSettings, InjectionSettings, PosteriorInjectionSettings,
    };
    use eccaudit_core::orbit::OrbitalElements;
    use eccaudit_core::random::{standard_normal, stream_rng};
    use eccaudit_core::spec::{JitterMode, ModelSpec};
    use eccaudit_core::table::{parse_table, ReadOptions};
    use rand::RngExt;
    use rayon::prelude::*;

    let truths = [(11.3, 14.0, 0.15, 0.7), (47.2, 20.0, 0.3, 3.5)];
    let orbits: Vec<OrbitalElements> = truths
        .iter()
        .map(|&(p, k, e, w)| OrbitalElements::new(p, k, e, w, 2_460_003.0).unwrap())
        .collect();
    let mut rng = stream_rng(3873, 0);
    let mut times: Vec<f64> = (0..60)
        .map(|_| 2_460_000.0 + 400.0 * rng.random::<f64>())
        .collect();
    times.sort_by(f64::total_cmp);
    let settings = AuditSettings {
        model: ModelSpec {
            companions: 2,
            trend: true,
            jitter: JitterMode::Off,
            ..ModelSpec::DEFAULT
        },
        injection: InjectionSettings {
            eccentricities: (0..=6).map(|i| f64::from(i) / 10.0).collect(),
            trials_per_cell: 30,
            posterior: PosteriorInjectionSettings {
                priors: Vec::new(),
                ..PosteriorInjectionSettings::default()
            },
            ..InjectionSettings::default()
        },
        seed: 1937,
        ..AuditSettings::default()
    };
    let n_tables = 100;
    // (companion index, covered) for every table and companion.
    let outcomes: Vec<Vec<(usize, bool)>> = (0..n_tables)
        .into_par_iter()
        .map(|i| {
            let mut noise = stream_rng(1998, i);
            let mut text = String::from("bjd,rv [m/s],sigma [m/s],instrument\n");
            for (j, &t) in times.iter().enumerate() {
                let (name, sigma, offset) = if j % 2 == 0 {
                    ("A", 2.0, -5.0)
                } else {
                    ("B", 3.0, 20.0)
                };
                let v: f64 = orbits.iter().map(|o| o.radial_velocity(t)).sum::<f64>()
                    + offset
                    + 0.02 * (t - 2_460_200.0)
                    + sigma * standard_normal(&mut noise);
                text.push_str(&format!("{t:.5},{v:.4},{sigma},{name}\n"));
            }
            let table = parse_table(&text, &ReadOptions::new("two.csv")).unwrap();
            let plans = AuditPlan::all(&table, &settings).unwrap();
            plans
                .iter()
                .map(|plan| {
                    let records = plan.run_trials(0..plan.n_trials(), &mut |_| {}).unwrap();
                    let report = plan.finish(&records).unwrap();
                    let period = plan.design().period;
                    let which = if (period / 11.3 - 1.0).abs() < 0.05 {
                        0
                    } else {
                        1
                    };
                    let row = report
                        .statement
                        .rows
                        .iter()
                        .find(|r| r.name == "lsq")
                        .unwrap();
                    let interval = row.interval.unwrap();
                    let truth = truths[which].2;
                    (which, interval.lower <= truth && truth <= interval.upper)
                })
                .collect()
        })
        .collect();
    for companion in 0..2 {
        let hits: Vec<bool> = outcomes
            .iter()
            .flatten()
            .filter(|(c, _)| *c == companion)
            .map(|(_, h)| *h)
            .collect();
        let share = hits.iter().filter(|&&h| h).count() as f64 / hits.len() as f64;
        eprintln!(
            "companion {}: belt coverage {share:.3} over {} tables",
            companion + 1,
            hits.len()
        );
        assert!(
            hits.len() >= 95,
            "companion {} audited {} times",
            companion + 1,
            hits.len()
        );
        assert!(
            share >= 0.90,
            "companion {}: coverage {share}",
            companion + 1
        );
    }
}

/// The audit's calibrated 5% decision holds its level when the stated uncertainties are half
/// the real noise: 300 freshly simulated circular tables (P = 11.3 d, K = 12 m/s, e = 0; 40
/// random epochs over 200 d; stated σ = 2 m/s, real noise 4 m/s, so the jitter-free reduced
/// χ² is about 4), each audited with the default model (jitter auto: the χ² test fails, a
/// jitter is fitted by Baluev's 2009 modified likelihood and simulated). The decision is the
/// one the real audit quotes, computed exactly as it computes it (`AuditPlan::next_batch`
/// loop, then `finish`: the Monte-Carlo p of the Wald statistic against the circular
/// simulations of the fitted model, p = (k+1)/(n+1)); the configuration is reduced only where
/// the decision does not depend on it: least squares only (no posterior estimators), one
/// injected e (0), 20 base trials and at most 200 circular simulations (the first adaptive
/// batch of 250 then ends the loop). A Monte-Carlo p from any number of simulations is a valid
/// p-value, so the smaller cap keeps the level and only makes p coarser.
/// Tolerance: the issue asks for 5% ± 3%; the binomial standard error over 300 tables is
/// √(0.05·0.95/300) = 0.0126 (common practice), so ±0.03 is 2.4 standard errors.
#[test]
fn calibrated_decision_holds_five_percent_with_noise_twice_the_stated_uncertainties() {
    use eccaudit_core::audit::{
        AuditPlan, AuditSettings, InjectionSettings, PosteriorInjectionSettings,
    };
    use eccaudit_core::orbit::OrbitalElements;
    use eccaudit_core::random::{standard_normal, stream_rng};
    use eccaudit_core::table::{parse_table, ReadOptions};
    use rand::RngExt;
    use rayon::prelude::*;

    let orbit = OrbitalElements::new(11.3, 12.0, 0.0, 0.0, 2_460_003.0).unwrap();
    let settings = |seed: u64| AuditSettings {
        injection: InjectionSettings {
            eccentricities: vec![0.0],
            trials_per_cell: 20,
            posterior: PosteriorInjectionSettings {
                priors: Vec::new(),
                ..PosteriorInjectionSettings::default()
            },
            max_circular_trials: 200,
            ..InjectionSettings::default()
        },
        seed,
        ..AuditSettings::default()
    };
    let n_tables = 300u64;
    // (eccentric called, jitter fitted, circular simulations used) per table.
    let outcomes: Vec<(bool, bool, usize)> = (0..n_tables)
        .into_par_iter()
        .map(|i| {
            let mut rng = stream_rng(20_261_203, i);
            let mut times: Vec<f64> = (0..40)
                .map(|_| 2_460_000.0 + 200.0 * rng.random::<f64>())
                .collect();
            times.sort_by(f64::total_cmp);
            let mut text = String::from("bjd,rv [m/s],sigma [m/s]\n");
            for t in &times {
                let v = orbit.radial_velocity(*t) + 4.0 * standard_normal(&mut rng);
                text.push_str(&format!("{t:.5},{v:.4},2\n"));
            }
            let table = parse_table(&text, &ReadOptions::new("circular.csv")).unwrap();
            let plan = AuditPlan::new(&table, &settings(1000 + i)).unwrap();
            let mut records = Vec::new();
            while let Some(batch) = plan.next_batch(&records) {
                records.extend(plan.run_trials(batch, &mut |_| {}).unwrap());
            }
            let report = plan.finish(&records).unwrap();
            let decision = report.statement.decision.expect("a decision");
            (
                decision.circular_excluded,
                report.context.jitter_fitted,
                decision.p.n,
            )
        })
        .collect();
    let called = outcomes.iter().filter(|o| o.0).count();
    let jittered = outcomes.iter().filter(|o| o.1).count();
    let share = called as f64 / n_tables as f64;
    let mean_n = outcomes.iter().map(|o| o.2).sum::<usize>() as f64 / n_tables as f64;
    eprintln!(
        "noise 2x sigma: eccentric called in {called} of {n_tables} ({share:.3}); jitter fitted \
         in {jittered}; {mean_n:.0} circular simulations per decision on average"
    );
    // A reduced χ² near 4 over 40 epochs fails the χ² test (p < 0.01) essentially always.
    assert!(jittered as f64 >= 0.95 * n_tables as f64, "{jittered}");
    assert!((share - 0.05).abs() <= 0.03, "share {share}");
}
