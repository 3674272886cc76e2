//! Survival at landmark durations with 95% intervals.
//!
//! Delta method: g(θ) = ln(−ln S(t; θ)) (the complementary log-log of survival, which keeps
//! the interval inside (0, 1); common practice), its gradient in the estimation-scale
//! parameters θ by central differences, Var g ≈ ∇gᵀ Σ ∇g with Σ the fit's covariance, and
//! S = exp(−exp(g ± 1.96·se)). Draws: the 2.5 and 97.5 percentiles of S(t) over parameter
//! sets drawn from the same normal approximation ([`crate::draws::Sampler`]).

use crate::draws::{percentile, Sampler};
use crate::families::Family;
use crate::fit::FamilyFit;
use crate::units::TimeUnit;
use serde::{Deserialize, Serialize};

/// The normal quantile of a two-sided 95% interval.
const Z95: f64 = 1.959_963_984_540_054;

/// How landmark intervals are made.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntervalMethod {
    /// Delta method on the complementary log-log scale.
    Delta,
    /// Percentiles over `count` parameter draws from `seed`.
    Draws {
        /// Number of draws.
        count: usize,
        /// Seed of the random stream.
        seed: u64,
    },
}

/// Survival at one landmark, as written to the fit JSON.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Landmark {
    /// Time since entry, years.
    pub time_years: f64,
    /// S(t) at the estimates.
    pub survival: f64,
    /// Lower end of the 95% interval (`null` without a covariance).
    pub lower: Option<f64>,
    /// Upper end of the 95% interval (`null` without a covariance).
    pub upper: Option<f64>,
}

/// ln(−ln S(t)) at estimation-scale parameters `theta`.
fn cloglog(family: &dyn Family, theta: &[f64], t: f64) -> f64 {
    let params = family.to_natural(theta);
    (-family.log_survival(&params, t)).ln()
}

/// Delta-method 95% interval of S(t) (data's unit) from estimation-scale `theta` and
/// covariance `cov`; `None` where the transform or its gradient is not finite (S = 0 or 1).
pub fn delta_interval(
    family: &dyn Family,
    theta: &[f64],
    cov: &[Vec<f64>],
    t: f64,
) -> Option<(f64, f64)> {
    let g = cloglog(family, theta, t);
    if !g.is_finite() {
        return None;
    }
    let k = theta.len();
    let mut grad = vec![0.0; k];
    for i in 0..k {
        let h = 1e-5 * theta[i].abs().max(1.0);
        let mut up = theta.to_vec();
        let mut down = theta.to_vec();
        up[i] += h;
        down[i] -= h;
        grad[i] = (cloglog(family, &up, t) - cloglog(family, &down, t)) / (2.0 * h);
    }
    let mut variance = 0.0;
    for i in 0..k {
        for j in 0..k {
            variance += grad[i] * cov[i][j] * grad[j];
        }
    }
    if !(variance.is_finite() && variance >= 0.0) {
        return None;
    }
    let se = variance.sqrt();
    let survival = |g: f64| (-g.exp()).exp();
    Some((survival(g + Z95 * se), survival(g - Z95 * se)))
}

/// Landmarks of one converged fit at `years` (data in `unit`).
pub fn landmarks(
    fit: &FamilyFit,
    years: &[f64],
    unit: TimeUnit,
    method: IntervalMethod,
) -> Vec<Landmark> {
    let Ok(family) = fit.family() else {
        return Vec::new();
    };
    let Some(params) = fit.param_vector(family) else {
        return Vec::new();
    };
    let per_year = TimeUnit::Years.factor_to(unit);
    let times: Vec<f64> = years.iter().map(|y| y * per_year).collect();
    let intervals: Vec<Option<(f64, f64)>> = match method {
        IntervalMethod::Delta => match &fit.covariance {
            Some(cov) if fit.estimates.len() == cov.matrix.len() => times
                .iter()
                .map(|&t| delta_interval(family, &fit.estimates, &cov.matrix, t))
                .collect(),
            _ => vec![None; times.len()],
        },
        IntervalMethod::Draws { count, seed } => match Sampler::from_fit(family, fit) {
            Ok(sampler) => percentile_intervals(&sampler, &times, count, seed),
            Err(_) => vec![None; times.len()],
        },
    };
    years
        .iter()
        .zip(&times)
        .zip(intervals)
        .map(|((&y, &t), interval)| Landmark {
            time_years: y,
            survival: family.survival(&params, t),
            lower: interval.map(|i| i.0),
            upper: interval.map(|i| i.1),
        })
        .collect()
}

/// 2.5 and 97.5 percentiles of S at each time over `count` draws from `seed`.
pub fn percentile_intervals(
    sampler: &Sampler,
    times: &[f64],
    count: usize,
    seed: u64,
) -> Vec<Option<(f64, f64)>> {
    let draws = sampler.draw_natural(count, seed);
    times
        .iter()
        .map(|&t| {
            let mut values: Vec<f64> = draws
                .iter()
                .map(|p| sampler.family.survival(p, t))
                .filter(|s| s.is_finite())
                .collect();
            if values.is_empty() {
                return None;
            }
            Some((
                percentile(&mut values, 0.025),
                percentile(&mut values, 0.975),
            ))
        })
        .collect()
}
