//! Benchmark (not a test): fitting the Royston–Parmar spline families with 3 internal knots to
//! 1,000,000 invented records. Run with `cargo bench --bench flexible_fit`; results are
//! recorded by hand in docs/benchmarks.md with the machine.
//!
//! The large-data fitter reaches its optimum through subsample warm starts, so after each fit
//! the bench evaluates the full-data gradient g once at the reported estimates and prints how
//! far that point is from the full-data maximum: max |g_i|·SE_i (the gradient in standard
//! errors) and ½·gᵀΣg (Σ the reported covariance: the log-likelihood a further Newton step on
//! the full data would gain, to second order).

use std::time::Instant;
use tunnelcast::families;
use tunnelcast::fit::{fit_family, FitData};
use tunnelcast::input::Record;

/// Invented cohort: Weibull(1.3, 15 months) times with a slower tail after month 10, by
/// inversion of a low-discrepancy sequence, censored at uniform follow-up up to 40 months.
fn records(n: usize) -> Vec<Record> {
    let mut r: Vec<Record> = (0..n)
        .map(|i| {
            let x = i as f64 + 0.5;
            let u = (x * 0.618_033_988_749_895).fract();
            let follow_up = 40.0 * (x * std::f64::consts::SQRT_2).fract();
            let t = 15.0 * (-(1.0 - u).ln()).powf(1.0 / 1.3);
            let t = if t > 10.0 { 10.0 + 0.6 * (t - 10.0) } else { t };
            Record {
                time: t.min(follow_up).max(1e-3),
                event: t < follow_up,
            }
        })
        .collect();
    r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    r
}

/// One full-data gradient at the fit's estimates, against its covariance: (max |g_i|·SE_i,
/// ½·gᵀΣg); NaN when the fit has no covariance.
fn distance_from_optimum(
    family: &dyn families::Family,
    fit: &tunnelcast::fit::FamilyFit,
    data: &FitData,
) -> (f64, f64) {
    let Some(cov) = &fit.covariance else {
        return (f64::NAN, f64::NAN);
    };
    let (_, g) = family.loglik_grad(&fit.estimates, data);
    let scaled = g
        .iter()
        .enumerate()
        .map(|(i, gi)| gi.abs() * cov.matrix[i][i].sqrt())
        .fold(0.0, f64::max);
    let gain = 0.5
        * g.iter()
            .enumerate()
            .map(|(i, gi)| {
                gi * cov.matrix[i]
                    .iter()
                    .zip(&g)
                    .map(|(c, gj)| c * gj)
                    .sum::<f64>()
            })
            .sum::<f64>();
    (scaled, gain)
}

fn main() {
    let n = 1_000_000;
    let recs = records(n);
    let start = Instant::now();
    let data = FitData::from_records(&recs);
    println!(
        "collapse {n} records to {} distinct times: {:.3} s",
        data.time.len(),
        start.elapsed().as_secs_f64()
    );
    for name in ["spline-ph-3", "spline-po-3", "spline-probit-3"] {
        let start = Instant::now();
        let family = families::by_name(name)
            .unwrap()
            .for_data(&data)
            .unwrap()
            .unwrap_or_else(|| families::by_name(name).unwrap());
        let fit = fit_family(family, &data, None);
        let seconds = start.elapsed().as_secs_f64();
        let (scaled, gain) = distance_from_optimum(family, &fit, &data);
        println!(
            "{name}: {seconds:.3} s (knots + fit), converged {}, loglik {:.6}, full-data gradient: max |g|·SE {scaled:.1e}, Newton gain {gain:.1e}",
            fit.converged,
            fit.loglik.unwrap_or(f64::NAN)
        );
    }
}
