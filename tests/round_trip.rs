//! Round trip: data simulated from each family with known parameters (n = 20,000, seeded,
//! uniform censoring) is fitted, and every parameter is recovered within 3 standard errors
//! taken from the fit's own covariance (on the estimation scale). Three standard errors is
//! common practice for a check that should fail about once in 370 per parameter by chance;
//! the seeds are fixed, so the outcome is reproducible.

mod support;

use tunnelcast::families;
use tunnelcast::fit::fit_family;
use tunnelcast::fit::FitData;

/// Fits `family` to simulated data and checks each estimation-scale parameter against the truth.
fn recovers(name: &str, truth: &[f64], censor_max: f64, seed: u64) {
    let family = families::by_name(name).unwrap();
    let records = support::simulate(family, truth, 20_000, censor_max, seed);
    let events = records.iter().filter(|r| r.event).count();
    // The design must leave both events and censorings to be a real censored-data check.
    assert!(events > 2_000 && events < 19_000, "{name}: {events} events");
    let data = FitData::from_records(&records);
    let fit = fit_family(family, &data, None);
    assert!(fit.converged, "{name}: {:?}", fit.message);
    let covariance = fit.covariance.as_ref().unwrap();
    let true_theta = family.to_estimation(truth);
    for (i, (estimate, target)) in fit.estimates.iter().zip(&true_theta).enumerate() {
        let se = covariance.matrix[i][i].sqrt();
        assert!(se > 0.0 && se < 0.5, "{name}: se {se}");
        assert!(
            (estimate - target).abs() <= 3.0 * se,
            "{name} {}: estimate {estimate}, truth {target}, se {se}",
            covariance.names[i]
        );
    }
}

#[test]
fn exponential_round_trip() {
    recovers("exponential", &[0.05], 40.0, 11);
}

#[test]
fn weibull_round_trip() {
    recovers("weibull", &[1.3, 12.0], 30.0, 12);
}

#[test]
fn weibull_decreasing_hazard_round_trip() {
    recovers("weibull", &[0.6, 200.0], 500.0, 13);
}

#[test]
fn lognormal_round_trip() {
    recovers("lognormal", &[2.0, 0.8], 15.0, 14);
}

#[test]
fn loglogistic_round_trip() {
    recovers("loglogistic", &[1.8, 10.0], 25.0, 15);
}

#[test]
fn gompertz_round_trip() {
    recovers("gompertz", &[0.08, 0.02], 40.0, 16);
}

#[test]
fn gompertz_negative_shape_round_trip() {
    // Survival levels off at exp(rate/shape) = exp(-0.5) ≈ 0.61.
    recovers("gompertz", &[-0.1, 0.05], 60.0, 17);
}

#[test]
fn large_data_path_recovers_parameters_and_curvature() {
    // Above 60,000 distinct times the fitter starts from subsamples, then takes Newton steps
    // on the full data, with each family's analytic Hessian (the generalized gamma's included,
    // whose q row carries the incomplete gamma's second derivative); its covariance must agree
    // with central differences at the same optimum (common practice: two difference schemes
    // agreeing to 1e-4 relative), and the parameters must still be recovered.
    for (name, truth, censor_max, seed) in [
        ("weibull", vec![0.8, 50.0], 150.0, 21),
        ("lognormal", vec![3.0, 1.2], 60.0, 22),
        ("loglogistic", vec![2.2, 15.0], 40.0, 23),
        ("gompertz", vec![-0.02, 0.03], 200.0, 24),
        ("generalized-gamma", vec![2.5, 0.7, -0.4], 40.0, 25),
    ] {
        let family = families::by_name(name).unwrap();
        let records = support::simulate(family, &truth, 100_000, censor_max, seed);
        let data = FitData::from_records(&records);
        let fit = fit_family(family, &data, None);
        assert!(fit.converged, "{name}: {:?}", fit.message);
        let covariance = &fit.covariance.as_ref().unwrap().matrix;
        let central = tunnelcast::fit::hessian(family, &fit.estimates, &data);
        let central_cov = tunnelcast::numeric::invert_positive_definite(
            &central
                .iter()
                .map(|row| row.iter().map(|x| -x).collect())
                .collect::<Vec<Vec<f64>>>(),
        )
        .unwrap();
        let true_theta = family.to_estimation(&truth);
        for i in 0..truth.len() {
            for j in 0..truth.len() {
                let scale = (central_cov[i][i] * central_cov[j][j]).sqrt();
                assert!(
                    (covariance[i][j] - central_cov[i][j]).abs() <= 1e-4 * scale,
                    "{name} covariance [{i}][{j}]: {} vs {}",
                    covariance[i][j],
                    central_cov[i][j]
                );
            }
            let se = covariance[i][i].sqrt();
            assert!(
                (fit.estimates[i] - true_theta[i]).abs() <= 3.0 * se,
                "{name} {i}: {} vs {} (se {se})",
                fit.estimates[i],
                true_theta[i]
            );
        }
    }
}

#[test]
fn large_data_weibull_estimate_is_at_the_maximum_of_the_likelihood_equations() {
    // The censored Weibull maximum-likelihood equations (Lawless, 2003, Statistical Models and
    // Methods for Lifetime Data, section 5.2): the shape k solves
    // Σ t^k ln t / Σ t^k − 1/k − (1/d) Σ_events ln t = 0 (increasing in k), and then
    // scale = (Σ t^k / d)^(1/k). Solved here by bisection, independently of the fitter. The
    // large-data path stops its Newton steps once a step would gain at most 1e-8 in
    // log-likelihood, i.e. within √(2e-8) ≈ 1.4e-4 standard errors of the maximiser.
    let family = families::by_name("weibull").unwrap();
    let records = support::simulate(family, &[1.3, 400.0], 100_000, 1000.0, 31);
    let data = FitData::from_records(&records);
    let fit = fit_family(family, &data, None);
    assert!(fit.converged, "{:?}", fit.message);
    let ln_t: Vec<f64> = records.iter().map(|r| r.time.ln()).collect();
    let top = ln_t.iter().cloned().fold(f64::MIN, f64::max);
    let events = records.iter().filter(|r| r.event).count() as f64;
    let mean_event_ln_t = records
        .iter()
        .zip(&ln_t)
        .filter(|(r, _)| r.event)
        .map(|(_, l)| l)
        .sum::<f64>()
        / events;
    // Sums of t^k scaled by t_max^k (no overflow); the scaling cancels in the ratio.
    let sums = |k: f64| {
        ln_t.iter().fold((0.0, 0.0), |(s, sl), &l| {
            let w = (k * (l - top)).exp();
            (s + w, sl + w * l)
        })
    };
    let equation = |k: f64| {
        let (s, sl) = sums(k);
        sl / s - 1.0 / k - mean_event_ln_t
    };
    let (mut lo, mut hi) = (0.5, 3.0);
    assert!(equation(lo) < 0.0 && equation(hi) > 0.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if equation(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let k = 0.5 * (lo + hi);
    let (s, _) = sums(k);
    let ln_scale = top + (s / events).ln() / k;
    let covariance = &fit.covariance.as_ref().unwrap().matrix;
    for (i, reference) in [k.ln(), ln_scale].into_iter().enumerate() {
        let se = covariance[i][i].sqrt();
        assert!(
            (fit.estimates[i] - reference).abs() <= 2e-4 * se,
            "parameter {i}: {} vs {reference} (se {se})",
            fit.estimates[i]
        );
    }
}
