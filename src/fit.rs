//! Maximum-likelihood fitting of the families to right-censored data.
//!
//! Identical (time, event) pairs are collapsed into weighted records; the likelihood is
//! maximised on the estimation scale with BFGS (argmin) from several data-driven starts, then
//! polished by Newton steps on a differenced Hessian of the analytic gradient. Convergence is
//! judged by the gradient norm; a family that fails is reported, the others go on.

use crate::error::{Error, Result};
use crate::families::{self, Family};
use crate::input::{Dataset, Record};
use crate::km::{KaplanMeier, MedianEstimate};
use crate::numeric::invert_positive_definite;
use crate::units::TimeUnit;
use argmin::core::{CostFunction, Executor, Gradient, State};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::quasinewton::BFGS;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Right-censored data collapsed to distinct times: at `time[i]`, `events[i]` events among
/// `total[i]` subjects whose follow-up ends there. Sorted by time; all times > 0.
#[derive(Debug, Clone)]
pub struct FitData {
    /// Distinct times (data's unit).
    pub time: Vec<f64>,
    /// ln of `time`, precomputed for the likelihood loops.
    pub ln_time: Vec<f64>,
    /// Number of events at each time.
    pub events: Vec<f64>,
    /// Number of subjects (events plus censorings) at each time.
    pub total: Vec<f64>,
    /// Number of subjects.
    pub n_subjects: f64,
    /// Number of events.
    pub n_events: f64,
    /// Total follow-up time Σ t.
    pub total_time: f64,
    /// Kaplan–Meier (ln t, S) at event times with 0 < S < 1, for starting values.
    km_points: Vec<(f64, f64)>,
}

impl FitData {
    /// Collapses sorted, validated records (times > 0, at least one event). Large inputs are
    /// collapsed in pieces in parallel, each piece cut where the time changes, so the result
    /// is the one of a single pass.
    pub fn from_records(records: &[Record]) -> FitData {
        let pieces = if records.len() < 1 << 16 { 1 } else { 16 };
        let mut bounds = vec![0];
        for k in 1..pieces {
            let mut b = (records.len() * k / pieces).max(bounds[k - 1]);
            while b > 0 && b < records.len() && records[b].time == records[b - 1].time {
                b += 1;
            }
            bounds.push(b);
        }
        bounds.push(records.len());
        let pieces: Vec<&[Record]> = bounds.windows(2).map(|w| &records[w[0]..w[1]]).collect();
        // Distinct times per piece: its first record's, and every change after it.
        let counts: Vec<usize> = pieces
            .par_iter()
            .map(|p| {
                usize::from(!p.is_empty()) + p.windows(2).filter(|w| w[0].time != w[1].time).count()
            })
            .collect();
        let n = counts.iter().sum();
        let (mut time, mut events, mut total) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        let mut slots = Vec::with_capacity(pieces.len());
        let (mut t, mut e, mut c) = (&mut time[..], &mut events[..], &mut total[..]);
        for &k in &counts {
            let (t0, t1) = std::mem::take(&mut t).split_at_mut(k);
            let (e0, e1) = std::mem::take(&mut e).split_at_mut(k);
            let (c0, c1) = std::mem::take(&mut c).split_at_mut(k);
            slots.push((t0, e0, c0));
            (t, e, c) = (t1, e1, c1);
        }
        pieces
            .into_par_iter()
            .zip(slots)
            .for_each(|(piece, (time, events, total))| {
                // Each slot written once, never read: a read of a fresh zeroed page before the
                // write would fault twice (the shared zero page, then a copy).
                let mut records = piece.iter().peekable();
                let mut slot = 0;
                while let Some(first) = records.next() {
                    let (mut e, mut n) = (f64::from(u8::from(first.event)), 1.0);
                    while let Some(r) = records.next_if(|r| r.time == first.time) {
                        e += f64::from(u8::from(r.event));
                        n += 1.0;
                    }
                    time[slot] = first.time;
                    events[slot] = e;
                    total[slot] = n;
                    slot += 1;
                }
            });
        Self::from_collapsed(time, events, total, None)
    }

    /// Builds the sums and the Kaplan–Meier points from collapsed columns; `km_points` is
    /// reused when given (a subsample keeps its parent's starting-value points).
    pub(crate) fn from_collapsed(
        time: Vec<f64>,
        events: Vec<f64>,
        total: Vec<f64>,
        km_points: Option<Vec<(f64, f64)>>,
    ) -> FitData {
        // Sums in file order, as a plain sum of each column would give them.
        let (mut n_subjects, mut n_events, mut total_time) = (0.0, 0.0, 0.0);
        for i in 0..time.len() {
            n_subjects += total[i];
            n_events += events[i];
            total_time += time[i] * total[i];
        }
        let (ln_time, walked) = rayon::join(
            || time.par_iter().map(|t| t.ln()).collect::<Vec<f64>>(),
            || {
                km_points
                    .is_none()
                    .then(|| km_points_for_starts(&events, &total, n_subjects))
            },
        );
        let km_points = match walked {
            Some(points) => points.into_iter().map(|(i, s)| (ln_time[i], s)).collect(),
            None => km_points.unwrap_or_default(),
        };
        FitData {
            time,
            ln_time,
            events,
            total,
            n_subjects,
            n_events,
            total_time,
            km_points,
        }
    }

    /// A systematic subsample of about `size` distinct times (every k-th, from the middle of
    /// the first stride): it keeps the shape of the data, so its maximum is a close start for
    /// the full data and its information, scaled by the size ratio, a close curvature.
    pub fn subsample(&self, size: usize) -> FitData {
        let stride = self.time.len().div_ceil(size.max(1)).max(1);
        let pick = |v: &[f64]| -> Vec<f64> {
            v.iter().skip(stride / 2).step_by(stride).copied().collect()
        };
        let mut sub = Self::from_collapsed(
            pick(&self.time),
            pick(&self.events),
            pick(&self.total),
            Some(self.km_points.clone()),
        );
        if sub.n_events == 0.0 {
            // Keep the subsample fittable: every family needs an event.
            if let Some(i) = self.events.iter().position(|&d| d > 0.0) {
                sub = Self::from_collapsed(
                    vec![self.time[i]],
                    vec![self.events[i]],
                    vec![self.total[i]],
                    Some(self.km_points.clone()),
                );
            }
        }
        sub
    }

    /// Least-squares line `transform(S) = slope·ln t + intercept` through the Kaplan–Meier
    /// points; used for starting values. `None` with fewer than two usable points.
    pub fn km_line(&self, transform: impl Fn(f64) -> f64) -> Option<(f64, f64)> {
        let points: Vec<(f64, f64)> = self
            .km_points
            .iter()
            .map(|&(x, s)| (x, transform(s)))
            .filter(|(_, y)| y.is_finite())
            .collect();
        if points.len() < 2 {
            return None;
        }
        let n = points.len() as f64;
        let mx = points.iter().map(|p| p.0).sum::<f64>() / n;
        let my = points.iter().map(|p| p.1).sum::<f64>() / n;
        let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
        let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
        if sxx <= 0.0 {
            return None;
        }
        let slope = sxy / sxx;
        let line = (slope, my - slope * mx);
        (line.0.is_finite() && line.1.is_finite()).then_some(line)
    }

    /// Mean and standard deviation of ln t over events (standard deviation 1 when undefined).
    pub fn event_log_time_moments(&self) -> (f64, f64) {
        let mut sum = 0.0;
        let mut sum_sq = 0.0;
        for (lt, d) in self.ln_time.iter().zip(&self.events) {
            sum += d * lt;
            sum_sq += d * lt * lt;
        }
        let mean = sum / self.n_events;
        let var = sum_sq / self.n_events - mean * mean;
        let sd = if var > 1e-12 && self.n_events > 1.0 {
            var.sqrt()
        } else {
            1.0
        };
        (mean, sd)
    }
}

/// Most Kaplan–Meier points kept for starting values; more add time, not better starts.
const MAX_KM_POINTS: usize = 2_000;

/// The product-limit points (ln t, S) with 0 < S < 1, at most about [`MAX_KM_POINTS`] of them
/// (every stride-th); only the estimate is needed here, not its interval. The indices are
/// kept first, so this can run beside the logarithms of the times.
fn km_points_for_starts(events: &[f64], total: &[f64], n_subjects: f64) -> Vec<(usize, f64)> {
    // `visit(i, S, keep)` at every time; the estimate is multiplied by a factor of exactly 1
    // at times without events instead of branching there (event and censoring times
    // alternate unpredictably in large data).
    fn walk(events: &[f64], total: &[f64], n: f64, mut visit: impl FnMut(usize, f64, bool)) {
        let mut at_risk = n;
        let mut survival = 1.0;
        for i in 0..events.len() {
            survival *= 1.0 - events[i] / at_risk;
            visit(
                i,
                survival,
                events[i] > 0.0 && survival > 0.0 && survival < 1.0,
            );
            at_risk -= total[i];
        }
    }
    let mut count = 0usize;
    walk(events, total, n_subjects, |_, _, keep| {
        count += usize::from(keep)
    });
    let stride = count.div_ceil(MAX_KM_POINTS).max(1);
    let mut points = Vec::with_capacity(count.min(MAX_KM_POINTS));
    let (mut seen, mut next) = (0usize, 0usize);
    walk(events, total, n_subjects, |i, s, keep| {
        if keep & (seen == next) {
            points.push((i, s));
            next += stride;
        }
        seen += usize::from(keep);
    });
    points
}

/// Records per chunk of the parallel likelihood sum; the chunking is fixed so that sums are
/// identical whatever the number of threads.
const CHUNK: usize = 16_384;

/// Sums per-time log-likelihood terms and their gradients, `term(t, ln t, events, total)`,
/// in parallel over fixed chunks combined in a fixed order (bit-identical for any thread count).
pub fn sum_terms<const K: usize>(
    data: &FitData,
    term: impl Fn(f64, f64, f64, f64) -> (f64, [f64; K]) + Sync,
) -> (f64, [f64; K]) {
    let chunk_sum = |range: std::ops::Range<usize>| {
        let mut ll = 0.0;
        let mut grad = [0.0; K];
        for i in range {
            let (l, g) = term(data.time[i], data.ln_time[i], data.events[i], data.total[i]);
            ll += l;
            for k in 0..K {
                grad[k] += g[k];
            }
        }
        (ll, grad)
    };
    let n = data.time.len();
    if n <= CHUNK {
        return chunk_sum(0..n);
    }
    let partial: Vec<(f64, [f64; K])> = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| chunk_sum(c * CHUNK..((c + 1) * CHUNK).min(n)))
        .collect();
    let mut ll = 0.0;
    let mut grad = [0.0; K];
    for (l, g) in partial {
        ll += l;
        for k in 0..K {
            grad[k] += g[k];
        }
    }
    (ll, grad)
}

/// Log-likelihood with its gradient and Hessian on the estimation scale from one pass over the
/// data ([`Family::loglik_grad_hessian`]). The Hessian is exact in its leading `exact` rows and
/// columns; the other entries are not computed (differenced from the gradient instead).
#[derive(Debug, Clone)]
pub struct SecondOrder {
    /// Log-likelihood.
    pub loglik: f64,
    /// Gradient.
    pub grad: Vec<f64>,
    /// Hessian, valid in its leading `exact` × `exact` block.
    pub hessian: Vec<Vec<f64>>,
    /// Number of leading parameters with analytic second derivatives.
    pub exact: usize,
}

impl SecondOrder {
    /// A two-parameter family's sums `[g0, g1, h00, h01, h11]` as a full second-order point.
    pub fn two(loglik: f64, s: [f64; 5]) -> SecondOrder {
        SecondOrder {
            loglik,
            grad: vec![s[0], s[1]],
            hessian: vec![vec![s[2], s[3]], vec![s[3], s[4]]],
            exact: 2,
        }
    }
}

/// Covariance of the estimates on the estimation scale, as written to fit files.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Covariance {
    /// Always `"estimation"`: the scale the estimates are made on.
    pub scale: String,
    /// Estimation-scale parameter names, e.g. `ln_shape`.
    pub names: Vec<String>,
    /// Inverse observed information at the optimum.
    pub matrix: Vec<Vec<f64>>,
}

/// One family's fit to one arm, as printed and written to the fit JSON.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct FamilyFit {
    /// Family name.
    pub family: String,
    /// Arm label, `null` without `--arm-col`.
    pub arm: Option<String>,
    /// Natural parameters by name (data's time unit).
    pub params: BTreeMap<String, f64>,
    /// Maximised log-likelihood (full densities), `null` when no finite value was found.
    pub loglik: Option<f64>,
    /// 2k - 2·loglik.
    pub aic: Option<f64>,
    /// k·ln(n) - 2·loglik, n = number of subjects.
    pub bic: Option<f64>,
    /// Whether the gradient norm at the optimum met the tolerance and the information was positive definite.
    pub converged: bool,
    /// Covariance on the estimation scale; `null` when the information is not positive definite.
    pub covariance: Option<Covariance>,
    /// Estimates on the estimation scale, in `covariance.names` order.
    pub estimates: Vec<f64>,
    /// 95% intervals of the natural parameters (transformed from the estimation scale).
    pub intervals: BTreeMap<String, [f64; 2]>,
    /// AIC minus the smallest AIC among converged fits of the same arm.
    pub delta_aic: Option<f64>,
    /// Median survival time (data's unit); `null` when survival never falls to one half.
    pub median: Option<f64>,
    /// Largest absolute gradient component of the log-likelihood at the reported estimate.
    pub gradient_max: Option<f64>,
    /// Why the family did not converge, when it did not.
    pub message: Option<String>,
    /// A remark on a converged fit that changes how to read it (a cure model whose cured
    /// fraction is at its boundary 0); absent otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// Settings of a configured family (cut points, spline scale and knots); absent otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub settings: Option<families::FamilySettings>,
    /// Survival at the landmark durations with 95% intervals (years; empty for a failed fit).
    #[serde(default)]
    pub landmarks: Vec<crate::plausibility::Landmark>,
    /// Restricted mean survival to the arm's longest follow-up, years.
    #[serde(default)]
    pub rmst_followup: Option<f64>,
    /// Mean survival restricted to the mean horizon, years.
    #[serde(default)]
    pub mean_years: Option<f64>,
    /// External targets checked against this fit (with `--targets`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub targets: Vec<crate::plausibility::TargetCheck>,
    /// First time after follow-up (years since entry) at which the fit's hazard is below the
    /// general population's: absent without a life table, `null` if never within the horizon.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        with = "crate::plausibility::present_or_null"
    )]
    pub below_population_from_years: Option<Option<f64>>,
}

impl FamilyFit {
    /// The fitted family, rebuilt with its recorded settings (knots, cut points): use this, not
    /// [`families::by_name`], to turn a fit back into a curve.
    pub fn family(&self) -> std::result::Result<&'static dyn Family, String> {
        families::configured(&self.family, self.settings.as_ref())
    }

    /// Natural parameters in the family's own order.
    pub fn param_vector(&self, family: &dyn Family) -> Option<Vec<f64>> {
        family
            .param_names()
            .iter()
            .map(|n| self.params.get(*n).copied())
            .collect()
    }
}

/// Tolerance on the largest gradient component of the mean log-likelihood (per subject).
const GRADIENT_TOLERANCE: f64 = 1e-6;

/// Negative mean log-likelihood, the objective handed to argmin.
struct Objective<'a> {
    family: &'a dyn Family,
    data: &'a FitData,
}

impl Objective<'_> {
    fn value_grad(&self, theta: &[f64]) -> (f64, Vec<f64>) {
        let (ll, grad) = self.family.loglik_grad(theta, self.data);
        let n = self.data.n_subjects;
        (-ll / n, grad.iter().map(|g| -g / n).collect())
    }
}

impl CostFunction for Objective<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, theta: &Self::Param) -> std::result::Result<f64, argmin::core::Error> {
        let (v, _) = self.value_grad(theta);
        // A huge finite value keeps the line search working where the likelihood underflows.
        Ok(if v.is_finite() { v } else { 1e300 })
    }
}

impl Gradient for Objective<'_> {
    type Param = Vec<f64>;
    type Gradient = Vec<f64>;
    fn gradient(&self, theta: &Self::Param) -> std::result::Result<Vec<f64>, argmin::core::Error> {
        let (_, g) = self.value_grad(theta);
        Ok(g.into_iter()
            .map(|x| if x.is_finite() { x } else { 0.0 })
            .collect())
    }
}

/// Hessian of the log-likelihood by central differences of the analytic gradient, symmetrised.
pub fn hessian(family: &dyn Family, theta: &[f64], data: &FitData) -> Vec<Vec<f64>> {
    let k = theta.len();
    let mut h = vec![vec![0.0; k]; k];
    for j in 0..k {
        let step = 1e-5 * theta[j].abs().max(1.0);
        let mut up = theta.to_vec();
        let mut down = theta.to_vec();
        up[j] += step;
        down[j] -= step;
        let (_, gu) = family.loglik_grad(&up, data);
        let (_, gd) = family.loglik_grad(&down, data);
        for i in 0..k {
            h[i][j] = (gu[i] - gd[i]) / (2.0 * step);
        }
    }
    for i in 0..k {
        for j in 0..i {
            let avg = 0.5 * (h[i][j] + h[j][i]);
            h[i][j] = avg;
            h[j][i] = avg;
        }
    }
    h
}

/// Observed information (minus the Hessian) at `theta`: analytic where the family has all
/// second derivatives, else by central differences of the gradient.
fn information(family: &dyn Family, theta: &[f64], data: &FitData) -> Vec<Vec<f64>> {
    match family.loglik_grad_hessian(theta, data) {
        Some(second) => {
            let point = Point::from_second(theta.to_vec(), second);
            information_at(family, data, &point, None)
        }
        // Central differences need no evaluation at `theta` itself.
        None => negated(hessian(family, theta, data)),
    }
}

/// Observed information at an evaluated point: its analytic block where it has one, the other
/// columns by differences of the gradient (forward with `steps`, else central).
fn information_at(
    family: &dyn Family,
    data: &FitData,
    point: &Point,
    steps: Option<&[f64]>,
) -> Vec<Vec<f64>> {
    let k = point.theta.len();
    let exact = point.curvature.as_ref().map_or(0, |c| c.exact.min(k));
    let mut h = match &point.curvature {
        Some(c) => c.hessian.clone(),
        None => vec![vec![0.0; k]; k],
    };
    for j in exact..k {
        let column: Vec<f64> = match steps {
            Some(steps) => {
                let mut up = point.theta.clone();
                up[j] += steps[j];
                let (_, grad) = family.loglik_grad(&up, data);
                (0..k)
                    .map(|i| (grad[i] - point.grad[i]) / steps[j])
                    .collect()
            }
            None => {
                let step = 1e-5 * point.theta[j].abs().max(1.0);
                let mut up = point.theta.clone();
                let mut down = point.theta.clone();
                up[j] += step;
                down[j] -= step;
                let (_, gu) = family.loglik_grad(&up, data);
                let (_, gd) = family.loglik_grad(&down, data);
                (0..k).map(|i| (gu[i] - gd[i]) / (2.0 * step)).collect()
            }
        };
        for i in 0..k {
            h[i][j] = column[i];
        }
    }
    // The differenced columns give the analytic rows' cross terms; their own block is symmetrised.
    for i in 0..k {
        for j in 0..i {
            if i >= exact && j >= exact {
                let avg = 0.5 * (h[i][j] + h[j][i]);
                h[i][j] = avg;
                h[j][i] = avg;
            } else if i >= exact {
                h[i][j] = h[j][i];
            } else {
                h[j][i] = h[i][j];
            }
        }
    }
    negated(h)
}

/// The matrix with every entry negated (information from a Hessian).
fn negated(h: Vec<Vec<f64>>) -> Vec<Vec<f64>> {
    h.into_iter()
        .map(|row| row.into_iter().map(|x| -x).collect())
        .collect()
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

/// A point on the estimation scale with its log-likelihood and gradient, so that no
/// evaluation over the data is repeated.
#[derive(Debug, Clone)]
pub(crate) struct Point {
    /// Estimation-scale parameters.
    pub(crate) theta: Vec<f64>,
    /// Log-likelihood there.
    pub(crate) loglik: f64,
    /// Its gradient.
    pub(crate) grad: Vec<f64>,
    /// Analytic second derivatives from the same pass, where the family has them.
    pub(crate) curvature: Option<SecondOrder>,
}

/// A log-likelihood on the estimation scale, for the shared Newton iterations and the
/// large-data path: one family on collapsed records here ([`OneSample`]), a joint model
/// across arms in [`crate::effects::joint`].
pub(crate) trait Likelihood: Sync {
    /// Log-likelihood, gradient (and analytic curvature where there is one) at `theta`.
    fn evaluate(&self, theta: Vec<f64>) -> Point;
    /// Log-likelihood and gradient at `theta`, without curvature where leaving it out is
    /// cheaper (the start of the large-data Newton steps, whose first step uses the
    /// subsample's curvature).
    fn evaluate_first_order(&self, theta: Vec<f64>) -> Point {
        self.evaluate(theta)
    }
    /// Observed information at an evaluated point (differences forward with `steps`, else
    /// central, where it has no analytic curvature).
    fn information_at(&self, point: &Point, steps: Option<&[f64]>) -> Vec<Vec<f64>>;
    /// Number of subjects (scales the gradient tolerance and the subsample's curvature).
    fn n_subjects(&self) -> f64;
}

/// One family on collapsed records.
struct OneSample<'a> {
    family: &'a dyn Family,
    data: &'a FitData,
}

impl Likelihood for OneSample<'_> {
    fn evaluate(&self, theta: Vec<f64>) -> Point {
        evaluate(self.family, self.data, theta)
    }
    fn evaluate_first_order(&self, theta: Vec<f64>) -> Point {
        let (loglik, grad) = self.family.loglik_grad(&theta, self.data);
        Point {
            theta,
            loglik,
            grad,
            curvature: None,
        }
    }
    fn information_at(&self, point: &Point, steps: Option<&[f64]>) -> Vec<Vec<f64>> {
        information_at(self.family, self.data, point, steps)
    }
    fn n_subjects(&self) -> f64 {
        self.data.n_subjects
    }
}

impl Point {
    /// The point at `theta` from a second-order evaluation there.
    fn from_second(theta: Vec<f64>, second: SecondOrder) -> Point {
        Point {
            theta,
            loglik: second.loglik,
            grad: second.grad.clone(),
            curvature: Some(second),
        }
    }

    /// The full analytic Hessian, when the family gives every second derivative.
    fn full_hessian(&self) -> Option<&[Vec<f64>]> {
        self.curvature
            .as_ref()
            .filter(|c| c.exact >= self.theta.len())
            .map(|c| c.hessian.as_slice())
    }
}

fn evaluate(family: &dyn Family, data: &FitData, theta: Vec<f64>) -> Point {
    match family.loglik_grad_hessian(&theta, data) {
        Some(second) => Point::from_second(theta, second),
        None => {
            let (loglik, grad) = family.loglik_grad(&theta, data);
            Point {
                theta,
                loglik,
                grad,
                curvature: None,
            }
        }
    }
}

fn identity(k: usize) -> Vec<Vec<f64>> {
    (0..k)
        .map(|i| (0..k).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
        .collect()
}

/// BFGS from one start; returns the best point found (or the start when the solver fails).
/// The first inverse Hessian is the inverse information per subject at the start when that
/// is positive definite, so that badly scaled parameters (a Gompertz shape per day beside a
/// log rate) do not cost the line search dozens of evaluations.
fn bfgs(objective: Objective<'_>, start: Vec<f64>) -> Vec<f64> {
    let k = start.len();
    let n = objective.data.n_subjects;
    let inv_hessian =
        invert_positive_definite(&information(objective.family, &start, objective.data))
            .filter(|c| c.iter().flatten().all(|x| x.is_finite()))
            .map(|c| {
                c.into_iter()
                    .map(|row| row.into_iter().map(|x| x * n).collect())
                    .collect()
            })
            .unwrap_or_else(|| identity(k));
    let solver = match BFGS::new(MoreThuenteLineSearch::new()).with_tolerance_grad(1e-9) {
        Ok(s) => s,
        Err(_) => return start,
    };
    // The Newton polish that follows does the last digits; BFGS stops once the mean
    // log-likelihood no longer moves in the 13th digit.
    let solver = match solver.with_tolerance_cost(1e-13) {
        Ok(s) => s,
        Err(_) => return start,
    };
    let run = Executor::new(objective, solver)
        .configure(|state| {
            state
                .param(start.clone())
                .inv_hessian(inv_hessian)
                .max_iters(200)
        })
        .run();
    match run {
        Ok(result) => result.state().get_best_param().cloned().unwrap_or(start),
        Err(_) => start,
    }
}

/// Largest number of Newton iterations.
const MAX_NEWTON: usize = 50;

/// Newton stops once the largest gradient component per subject is this small, a thousand
/// times inside [`GRADIENT_TOLERANCE`], so that the convergence test never sits on its edge.
const NEWTON_GRADIENT_TOLERANCE: f64 = 1e-3 * GRADIENT_TOLERANCE;

/// On large data, where each step is a pass over a million records, Newton also stops once a
/// full step would gain at most this much log-likelihood (half the Newton decrement): the
/// estimates are then within √(2·1e-8) ≈ 1.4e-4 standard errors of the maximiser, far inside
/// any reported digit of a standard error. Small data are polished to the gradient tolerance.
const NEWTON_DECREMENT_TOLERANCE: f64 = 1e-8;

/// Newton iterations with step halving from a point near the optimum. The curvature is the
/// observed information at each iterate (analytic where the point carries its full Hessian,
/// else differenced), or, at iterates without a full Hessian, when `fixed_covariance` is given,
/// that inverse information refined after each accepted step by the BFGS secant update (one
/// evaluation over the data per iteration, as used on large data with a subsample's
/// curvature: the update corrects the subsample's curvature along the steps taken, so the
/// steps approach full-data Newton steps). Stops when the gradient is well inside the
/// convergence tolerance or a step no longer gains: with a Newton decrement (expected gain in
/// log-likelihood, doubled) below rounding of the log-likelihood, a full step that does not
/// gain in log-likelihood nor shrink the gradient ends the search without halving.
fn newton(
    family: &dyn Family,
    data: &FitData,
    point: Point,
    fixed_covariance: Option<&[Vec<f64>]>,
) -> Point {
    newton_of(&OneSample { family, data }, point, fixed_covariance, None)
}

/// [`newton`] on any [`Likelihood`]; with `enough`, also stopping, where the step comes from
/// the point's own curvature, once it would gain at most `enough` (see
/// [`NEWTON_DECREMENT_TOLERANCE`]).
pub(crate) fn newton_of(
    lik: &dyn Likelihood,
    mut point: Point,
    fixed_covariance: Option<&[Vec<f64>]>,
    enough: Option<f64>,
) -> Point {
    let n_subjects = lik.n_subjects();
    let mut secant: Option<Vec<Vec<f64>>> = fixed_covariance.map(<[Vec<f64>]>::to_vec);
    for _ in 0..MAX_NEWTON {
        if !point.loglik.is_finite() || point.grad.iter().any(|g| !g.is_finite()) {
            break;
        }
        if max_abs(&point.grad) / n_subjects < NEWTON_GRADIENT_TOLERANCE {
            break;
        }
        // A point's own full analytic Hessian comes before the secant-refined covariance,
        // which still serves where that Hessian is not negative definite.
        // `own`: the covariance is this point's inverse information (analytic or differenced).
        let exact = point.full_hessian().is_some();
        let (covariance, own) = match (&secant, exact) {
            (Some(c), false) => (c.clone(), false),
            (fallback, _) => match invert_positive_definite(&lik.information_at(&point, None)) {
                Some(c) => (c, true),
                None => match fallback {
                    Some(c) => (c.clone(), false),
                    None => break,
                },
            },
        };
        let step: Vec<f64> = covariance
            .iter()
            .map(|row| row.iter().zip(&point.grad).map(|(c, g)| c * g).sum())
            .collect();
        let decrement: f64 = step.iter().zip(&point.grad).map(|(s, g)| s * g).sum();
        if decrement.is_nan() || decrement <= 0.0 {
            break;
        }
        // With the curvature of this point (not a secant approximation) the log-likelihood is
        // within decrement/2 of its maximum to second order, and the estimates within
        // √decrement standard errors of the maximiser: a step worth less is not worth
        // another pass over the data (Boyd and Vandenberghe, 2004, section 9.5.1), provided
        // the gradient is also ten times inside the convergence verdict's tolerance.
        if own
            && enough.is_some_and(|e| decrement / 2.0 <= e)
            && max_abs(&point.grad) / n_subjects < 0.1 * GRADIENT_TOLERANCE
        {
            break;
        }
        // Below rounding of the log-likelihood, progress is judged by the gradient instead
        // (its size in the metric of the covariance), which still carries information there.
        let near_floor = decrement < 1e-9 * point.loglik.abs().max(1.0);
        let metric = |g: &[f64]| -> f64 {
            covariance
                .iter()
                .zip(g)
                .map(|(row, gi)| gi * row.iter().zip(g).map(|(c, gj)| c * gj).sum::<f64>())
                .sum()
        };
        let mut scale = 1.0;
        let mut accepted = None;
        for _ in 0..40 {
            let theta: Vec<f64> = point
                .theta
                .iter()
                .zip(&step)
                .map(|(t, s)| t + scale * s)
                .collect();
            let trial = lik.evaluate(theta);
            let gains = trial.loglik > point.loglik
                || (near_floor
                    && trial.loglik >= point.loglik - 1e-13 * point.loglik.abs()
                    && trial.grad.iter().all(|g| g.is_finite())
                    && metric(&trial.grad) < decrement);
            if trial.loglik.is_finite() && gains {
                accepted = Some(trial);
                break;
            }
            // Near the optimum a full step that does not gain is rounding, not overshoot.
            if near_floor {
                break;
            }
            scale *= 0.5;
        }
        match accepted {
            Some(trial) => {
                // The gradient keeps its digits below the rounding floor of the log-likelihood;
                // a change in it near its own rounding (relative 1e-16 of n terms) is skipped.
                let change = point
                    .grad
                    .iter()
                    .zip(&trial.grad)
                    .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()));
                if let Some(c) = secant.as_mut().filter(|_| trial.full_hessian().is_none()) {
                    if change / n_subjects > SECANT_MIN_CHANGE {
                        secant_update(c, &point, &trial);
                    }
                }
                point = trial;
            }
            None => break,
        }
    }
    point
}

/// Smallest change in the gradient per subject that the secant update uses: well above the
/// rounding of a gradient summed over the data (about 1e-16 per subject).
const SECANT_MIN_CHANGE: f64 = 1e-13;

/// BFGS update of `c`, an inverse Hessian of the negative log-likelihood, from the step
/// between two evaluated points (Nocedal and Wright, 2006, eq. 6.17); skipped unless the
/// curvature along the step is positive, so `c` stays positive definite.
fn secant_update(c: &mut [Vec<f64>], from: &Point, to: &Point) {
    let k = c.len();
    let s: Vec<f64> = (0..k).map(|i| to.theta[i] - from.theta[i]).collect();
    // Change in the gradient of the negative log-likelihood.
    let y: Vec<f64> = (0..k).map(|i| from.grad[i] - to.grad[i]).collect();
    let sy: f64 = s.iter().zip(&y).map(|(a, b)| a * b).sum();
    if !(sy > 0.0 && sy.is_finite()) {
        return;
    }
    let rho = 1.0 / sy;
    let cy: Vec<f64> = c
        .iter()
        .map(|row| row.iter().zip(&y).map(|(a, b)| a * b).sum())
        .collect();
    let ycy: f64 = y.iter().zip(&cy).map(|(a, b)| a * b).sum();
    let ss = rho * rho * ycy + rho;
    for i in 0..k {
        for j in 0..k {
            c[i][j] += ss * s[i] * s[j] - rho * (s[i] * cy[j] + cy[i] * s[j]);
        }
    }
}

/// Distinct times above which a family is fitted first to a subsample (see [`FitData::subsample`]).
pub(crate) const SUBSAMPLE_ABOVE: usize = 60_000;

/// Distinct times in that subsample.
pub(crate) const SUBSAMPLE_SIZE: usize = 20_000;

/// Distinct times in the smaller subsample on which every start is tried.
pub(crate) const COARSE_SIZE: usize = 2_000;

/// The best of the family's starts: closed form where there is one, else BFGS then Newton
/// from each data-driven start. `None` when no start gives a finite log-likelihood.
fn maximise_from_starts(family: &dyn Family, data: &FitData) -> Option<Point> {
    let mut best: Option<Point> = None;
    let mut consider = |point: Point| {
        if point.loglik.is_finite() && best.as_ref().is_none_or(|b| point.loglik > b.loglik) {
            best = Some(point);
        }
    };
    if let Some(theta) = family.closed_form_mle(data) {
        consider(evaluate(family, data, theta));
        return best;
    }
    for start in family.start_values(data) {
        if start.iter().any(|x| !x.is_finite()) {
            continue;
        }
        let objective = Objective { family, data };
        let theta = bfgs(objective, start);
        let point = evaluate(family, data, theta);
        consider(newton(family, data, point, None));
    }
    best
}

/// Maximum on large data: the family is fitted to a subsample with every start, then the
/// full-data maximum is reached by Newton steps that reuse the subsample's information scaled
/// to the full size (each step one pass over the data instead of 2k + 1). Falls back to the
/// full search when the subsample gives no usable curvature.
fn maximise_large(family: &dyn Family, data: &FitData) -> Option<(Point, Option<Vec<f64>>)> {
    // Every start on a small subsample finds the basin; Newton on a larger one sharpens the
    // estimate and gives the curvature used on the full data.
    let coarse = maximise_from_starts(family, &data.subsample(COARSE_SIZE))?;
    let sub = data.subsample(SUBSAMPLE_SIZE);
    warm_newton(
        &OneSample { family, data },
        &OneSample { family, data: &sub },
        coarse.theta,
    )
    .or_else(|| maximise_from_starts(family, data).map(|p| (p, None)))
}

/// The large-data step shared by the separate and the joint fits: Newton from `start` on the
/// subsample `sub`, then Newton on the `full` likelihood: exact steps (one pass each) where the
/// likelihood has analytic curvature, else with the subsample's information scaled to the
/// full size, refined by secant updates (one pass per step instead of 2k + 1). Returns the
/// maximum and, on the secant path, difference steps for the covariance; `None` when the
/// subsample gives no usable curvature or the start no finite full-data log-likelihood (the
/// caller then searches the full data).
pub(crate) fn warm_newton(
    full: &dyn Likelihood,
    sub: &dyn Likelihood,
    start: Vec<f64>,
) -> Option<(Point, Option<Vec<f64>>)> {
    let sub_best = newton_of(sub, sub.evaluate(start), None, None);
    let ratio = full.n_subjects() / sub.n_subjects();
    if let Some(hessian) = sub_best.full_hessian() {
        // Analytic curvature: exact Newton steps on the full data, one pass each, and the
        // covariance from the last. The first step, from a start evaluated without curvature
        // (a cheaper pass), takes the subsample's Hessian scaled to the full size.
        let first = invert_positive_definite(&negated(hessian.to_vec())).map(|c| {
            c.into_iter()
                .map(|row| row.into_iter().map(|x| x / ratio).collect())
                .collect::<Vec<Vec<f64>>>()
        });
        let start = match first {
            Some(_) => full.evaluate_first_order(sub_best.theta),
            None => full.evaluate(sub_best.theta),
        };
        if !start.loglik.is_finite() {
            return None;
        }
        return Some((
            newton_of(
                full,
                start,
                first.as_deref(),
                Some(NEWTON_DECREMENT_TOLERANCE),
            ),
            None,
        ));
    }
    let sub_covariance = invert_positive_definite(&sub.information_at(&sub_best, None))?;
    let covariance: Vec<Vec<f64>> = sub_covariance
        .into_iter()
        .map(|row| row.into_iter().map(|x| x / ratio).collect())
        .collect();
    let start = full.evaluate(sub_best.theta);
    if !start.loglik.is_finite() {
        return None;
    }
    let best = newton_of(full, start, Some(&covariance), None);
    // Difference steps of a thousandth of a standard error: small against the curvature's
    // change, large against the rounding of a sum over the data.
    let steps = (0..covariance.len())
        .map(|j| 1e-3 * covariance[j][j].sqrt())
        .collect();
    Some((best, Some(steps)))
}

/// Fits one family to collapsed data; never panics, reports failure in the result.
pub fn fit_family(family: &dyn Family, data: &FitData, arm: Option<&str>) -> FamilyFit {
    family
        .fit_on_boundary(data, arm)
        .unwrap_or_else(|| fit_family_searched(family, data, arm))
}

/// [`fit_family`] by the general search (starts, BFGS, Newton), without the family's own
/// boundary check.
pub fn fit_family_searched(family: &dyn Family, data: &FitData, arm: Option<&str>) -> FamilyFit {
    let (best, forward_steps) =
        if data.time.len() > SUBSAMPLE_ABOVE && family.closed_form_mle(data).is_none() {
            match maximise_large(family, data) {
                Some((point, steps)) => (Some(point), steps),
                None => (None, None),
            }
        } else {
            (maximise_from_starts(family, data), None)
        };
    report_fit(family, data, arm, best, forward_steps)
}

/// [`fit_family`] by Newton steps on the full data (differenced information at each iterate)
/// from a start the family knows to be close, e.g. a cure model's start from its base
/// family's fit; no search over starts.
pub fn fit_family_from(
    family: &dyn Family,
    data: &FitData,
    arm: Option<&str>,
    start: Vec<f64>,
) -> FamilyFit {
    let start = evaluate(family, data, start);
    let best = start
        .loglik
        .is_finite()
        .then(|| newton(family, data, start, None));
    report_fit(family, data, arm, best, None)
}

/// The fit record at the best point found (intervals, covariance, convergence verdict).
fn report_fit(
    family: &dyn Family,
    data: &FitData,
    arm: Option<&str>,
    best: Option<Point>,
    forward_steps: Option<Vec<f64>>,
) -> FamilyFit {
    let k = family.param_names().len();
    let names: Vec<String> = family
        .estimation_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let Some(best) = best else {
        let why = "no starting point gave a finite log-likelihood";
        return empty_fit(family, arm, Some(why.into()));
    };
    let mut fit = empty_fit(family, arm, None);
    let info = information_at(family, data, &best, forward_steps.as_deref());
    let Point {
        theta,
        loglik: ll,
        grad,
        ..
    } = best;
    let params = family.to_natural(&theta);
    for (name, value) in family.param_names().iter().zip(&params) {
        fit.params.insert(name.to_string(), *value);
    }
    let gmax = max_abs(&grad);
    fit.gradient_max = Some(gmax);
    fit.loglik = Some(ll);
    fit.aic = Some(2.0 * k as f64 - 2.0 * ll);
    fit.bic = Some(k as f64 * data.n_subjects.ln() - 2.0 * ll);
    fit.estimates = theta.clone();
    let median = family.median(&params);
    fit.median = median.is_finite().then_some(median);
    let covariance = invert_positive_definite(&info);
    let params_ok = family.check_params(&params).is_ok();
    let gradient_ok = gmax / data.n_subjects < GRADIENT_TOLERANCE;
    match &covariance {
        Some(cov) => {
            for (i, name) in family.param_names().iter().enumerate() {
                let se = cov[i][i].sqrt();
                let mut lo = theta.clone();
                let mut hi = theta.clone();
                lo[i] -= 1.959_963_984_540_054 * se;
                hi[i] += 1.959_963_984_540_054 * se;
                let a = family.to_natural(&lo)[i];
                let b = family.to_natural(&hi)[i];
                fit.intervals.insert(name.to_string(), [a.min(b), a.max(b)]);
            }
            fit.covariance = Some(Covariance {
                scale: "estimation".into(),
                names,
                matrix: cov.clone(),
            });
        }
        None => {
            fit.message = Some(format!(
                "the observed information is not positive definite at {} (the optimum may lie on a boundary of the parameter space)",
                describe(family, &theta)
            ));
        }
    }
    if !gradient_ok && fit.message.is_none() {
        fit.message = Some(format!(
            "did not converge: largest gradient component {gmax:.3e} at {} (the estimate may be running to a boundary)",
            describe(family, &theta)
        ));
    }
    if let (Err(why), None) = (family.check_params(&params), &fit.message) {
        fit.message = Some(format!(
            "estimates out of range at {}: {why}",
            describe(family, &theta)
        ));
    }
    fit.converged = covariance.is_some() && gradient_ok && params_ok;
    keep_finite(&mut fit);
    fit
}

/// Drops non-finite numbers from a fit (JSON has no NaN or infinity, and a `null` where a
/// number is expected would make the fit file unreadable); a fit that loses any is not converged.
fn keep_finite(fit: &mut FamilyFit) {
    let finite = |x: &f64| x.is_finite();
    let mut lost = false;
    let before = fit.params.len();
    fit.params.retain(|_, v| v.is_finite());
    lost |= fit.params.len() != before;
    if !fit.estimates.iter().all(finite) {
        fit.estimates.clear();
        lost = true;
    }
    fit.intervals
        .retain(|_, [a, b]| a.is_finite() && b.is_finite());
    if fit
        .covariance
        .as_ref()
        .is_some_and(|c| !c.matrix.iter().flatten().all(finite))
    {
        fit.covariance = None;
        lost = true;
    }
    for value in [
        &mut fit.loglik,
        &mut fit.aic,
        &mut fit.bic,
        &mut fit.median,
        &mut fit.gradient_max,
    ] {
        *value = value.filter(finite);
    }
    if lost && fit.converged {
        fit.converged = false;
    }
    if lost && fit.message.is_none() {
        fit.message =
            Some("an estimate is not a finite number (over- or underflow at extreme times)".into());
    }
}

fn describe(family: &dyn Family, theta: &[f64]) -> String {
    family
        .estimation_names()
        .iter()
        .zip(theta)
        .map(|(n, v)| format!("{n} = {v:.6}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Fits several families to one arm (in parallel), sorted by AIC with ΔAIC filled in;
/// families that did not converge come last.
pub fn fit_arm(
    families: &[&'static dyn Family],
    records: &[Record],
    arm: Option<&str>,
) -> Vec<FamilyFit> {
    let data = FitData::from_records(records);
    let mut fits: Vec<FamilyFit> = families
        .par_iter()
        .map(|f| match f.for_data(&data) {
            Ok(configured) => fit_family(configured.unwrap_or(*f), &data, arm),
            Err(why) => empty_fit(*f, arm, Some(why)),
        })
        .collect();
    rank_by_aic(&mut fits);
    fits
}

/// A record of `family` on this arm with nothing estimated: with the reason, a family that
/// could not be fitted (e.g. a piecewise interval without events, or no finite starting point),
/// reported beside the others; without, the record a successful fit fills in.
fn empty_fit(family: &dyn Family, arm: Option<&str>, why: Option<String>) -> FamilyFit {
    FamilyFit {
        family: family.name().to_string(),
        arm: arm.map(str::to_string),
        params: BTreeMap::new(),
        loglik: None,
        aic: None,
        bic: None,
        converged: false,
        covariance: None,
        estimates: Vec::new(),
        intervals: BTreeMap::new(),
        delta_aic: None,
        median: None,
        gradient_max: None,
        message: why,
        note: None,
        settings: family.settings(),
        landmarks: Vec::new(),
        rmst_followup: None,
        mean_years: None,
        targets: Vec::new(),
        below_population_from_years: None,
    }
}

/// Sorts fits by AIC (converged first) and sets ΔAIC against the best converged fit; a fit
/// that did not converge gets no ΔAIC (its AIC is not a maximum, so a difference would mislead).
pub fn rank_by_aic(fits: &mut [FamilyFit]) {
    let key = |f: &FamilyFit| (!f.converged, f.aic.unwrap_or(f64::INFINITY));
    fits.sort_by(|a, b| {
        let (ca, aa) = key(a);
        let (cb, ab) = key(b);
        ca.cmp(&cb).then(aa.total_cmp(&ab))
    });
    let best = fits
        .iter()
        .filter(|f| f.converged)
        .filter_map(|f| f.aic)
        .fold(f64::INFINITY, f64::min);
    for f in fits.iter_mut() {
        f.delta_aic = match (f.aic, best.is_finite()) {
            (Some(aic), true) if f.converged => Some(aic - best),
            _ => None,
        };
    }
}

/// Version of the fit-file layout; fit files from tunnelcast versions with another major.minor are refused.
pub fn compatible_version(version: &str) -> bool {
    let key = |v: &str| v.split('.').take(2).collect::<Vec<_>>().join(".");
    key(version) == key(crate::VERSION)
}

impl FitFile {
    /// Reads and checks a fit file written by `fit --json`.
    pub fn load(path: &std::path::Path) -> Result<FitFile> {
        let name = path.display().to_string();
        let text = std::fs::read_to_string(path)
            .map_err(|e| Error::input(&name, format!("cannot read: {e}")))?;
        let file: FitFile = serde_json::from_str(&text).map_err(|e| {
            Error::at(
                &name,
                e.line() as u64,
                e.column(),
                "json",
                format!("not a tunnelcast fit file: {e}"),
            )
        })?;
        if !compatible_version(&file.tool_version) {
            return Err(Error::input(
                &name,
                format!(
                    "written by tunnelcast {}, which this version ({}) cannot read; refit the data",
                    file.tool_version,
                    crate::VERSION
                ),
            ));
        }
        Ok(file)
    }

    /// The fit of `family` (and `arm`, required when the file has several arms).
    pub fn find(&self, family: &str, arm: Option<&str>) -> std::result::Result<&FamilyFit, String> {
        let arms: Vec<Option<&str>> = self.data.arms.iter().map(|a| a.arm.as_deref()).collect();
        let arm = match (arm, arms.as_slice()) {
            (Some(a), _) => Some(a),
            (None, [only]) => *only,
            (None, _) => {
                let names: Vec<&str> = arms.iter().flatten().copied().collect();
                return Err(format!(
                    "the fit file has several arms ({}); choose one with --arm",
                    names.join(", ")
                ));
            }
        };
        self.fits
            .iter()
            .find(|f| f.family == family && f.arm.as_deref() == arm)
            .ok_or_else(|| {
                let present: Vec<&str> = self
                    .fits
                    .iter()
                    .filter(|f| f.arm.as_deref() == arm)
                    .map(|f| f.family.as_str())
                    .collect();
                match arm {
                    Some(a) if !arms.contains(&Some(a)) => {
                        format!("the fit file has no arm \"{a}\"")
                    }
                    _ => format!(
                        "family {family} is not in the fit file (it has: {})",
                        present.join(", ")
                    ),
                }
            })
    }
}

/// Kaplan–Meier summary of one arm, written beside the fits.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ArmSummary {
    /// Arm label (`null` without an arm column).
    pub arm: Option<String>,
    /// Subjects.
    pub n: usize,
    /// Events.
    pub events: usize,
    /// Longest follow-up (data's unit).
    pub max_time: f64,
    /// Kaplan–Meier median and its 95% interval (data's unit).
    pub km_median: MedianEstimate,
}

/// The data block of the fit file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct DataInfo {
    /// Data file as given.
    pub file: String,
    /// SHA-256 of the data file.
    pub sha256: String,
    /// Subjects.
    pub n: usize,
    /// Events.
    pub events: usize,
    /// Time unit of the data and of every fitted parameter.
    pub time_unit: TimeUnit,
    /// Zero times replaced by `--zero-time` (and the replacement), when any.
    pub zero_time: Option<f64>,
    /// Per-arm Kaplan–Meier summaries.
    pub arms: Vec<ArmSummary>,
}

/// The fit file written by `fit --json` and read by the curve options of later commands.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct FitFile {
    /// Version of tunnelcast that wrote the file.
    pub tool_version: String,
    /// What was fitted.
    pub data: DataInfo,
    /// Fits, sorted by AIC within each arm.
    pub fits: Vec<FamilyFit>,
    /// Settings of the plausibility checks (landmarks, mean horizon, targets, population).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub plausibility: Option<crate::plausibility::Record>,
    /// The Cox model across arms and its test of proportional hazards (`fit --effects`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cox: Option<crate::effects::report::CoxSummary>,
    /// Joint models across arms (`fit --effects`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub effects: Vec<crate::effects::report::JointSummary>,
    /// What curves from the joint models need: arms, terms, covariates and the distinct
    /// covariate patterns per arm with counts (`fit --effects`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub effects_design: Option<crate::effects::curve::DesignRecord>,
}

/// Resolves `--families` (empty = the default families: the standard five plus `generalized-gamma`).
pub fn select_families(names: &[String]) -> Result<Vec<&'static dyn Family>> {
    select_families_with(names, &families::FamilyOptions::default())
}

/// Resolves `--families` and configures the flexible ones with `--cuts`/`--knots` (data's
/// time unit); an option that no selected family uses is an error rather than silently ignored.
pub fn select_families_with(
    names: &[String],
    options: &families::FamilyOptions,
) -> Result<Vec<&'static dyn Family>> {
    let selected = if names.is_empty() {
        families::defaults()
    } else {
        let mut out: Vec<&'static dyn Family> = Vec::new();
        for name in names {
            let family = families::by_name(name).map_err(Error::Usage)?;
            if !out.iter().any(|f| f.name() == family.name()) {
                out.push(family);
            }
        }
        out
    };
    if options.cuts.is_some() && !selected.iter().any(|f| f.name() == "piecewise") {
        return Err(Error::Usage(
            "--cuts sets the cut points of the piecewise family; add piecewise to --families"
                .into(),
        ));
    }
    if options.knots.is_some() && !selected.iter().any(|f| f.name().starts_with("spline-")) {
        return Err(Error::Usage(
            "--knots sets the knots of the spline families; add one (e.g. spline-ph-2) to --families".into(),
        ));
    }
    selected
        .into_iter()
        .map(|f| families::with_options(f, options).map_err(Error::Usage))
        .collect()
}

/// Fits every selected family to every arm of a validated dataset.
pub fn fit_dataset(
    data: &Dataset,
    families: &[&'static dyn Family],
    time_unit: TimeUnit,
    zero_time: Option<f64>,
) -> FitFile {
    let mut fits = Vec::new();
    let mut arms = Vec::new();
    for arm in &data.arms {
        arms.push(ArmSummary {
            arm: arm.arm.clone(),
            n: arm.records.len(),
            events: arm.events(),
            max_time: arm.max_time(),
            km_median: KaplanMeier::median_of(&arm.records),
        });
        fits.extend(fit_arm(families, &arm.records, arm.arm.as_deref()));
    }
    FitFile {
        tool_version: crate::VERSION.to_string(),
        data: DataInfo {
            file: data.file.clone(),
            sha256: data.sha256.clone(),
            n: data.n(),
            events: data.events(),
            time_unit,
            zero_time: (data.zero_times_replaced > 0)
                .then_some(zero_time)
                .flatten(),
            arms,
        },
        fits,
        plausibility: None,
        cox: None,
        effects: Vec::new(),
        effects_design: None,
    }
}

/// Test support: asserts that `family`'s analytic gradient at `theta` matches central
/// differences of its log-likelihood (step 1e-6) within `tolerance`, relative to max(1, |g|).
#[cfg(test)]
pub(crate) fn assert_gradient_matches_differences(
    family: &dyn Family,
    theta: &[f64],
    data: &FitData,
    tolerance: f64,
) {
    let (_, grad) = family.loglik_grad(theta, data);
    for j in 0..theta.len() {
        let h = 1e-6;
        let mut up = theta.to_vec();
        let mut down = theta.to_vec();
        up[j] += h;
        down[j] -= h;
        let numeric =
            (family.loglik_grad(&up, data).0 - family.loglik_grad(&down, data).0) / (2.0 * h);
        assert!(
            (numeric - grad[j]).abs() < tolerance * grad[j].abs().max(1.0),
            "{} {j}: {numeric} vs {}",
            family.name(),
            grad[j]
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families;

    #[test]
    fn collapsing_in_pieces_counts_every_time_once() {
        // Against counts kept in an ordered map (a reference written here): ties long enough
        // to straddle the pieces' nominal cuts, a single time, and all-distinct times.
        for (n, distinct) in [
            (200_000usize, 7u64),
            (200_000, 5_000),
            (100_000, 1),
            (70_000, u64::MAX),
        ] {
            let mut state = n as u64;
            let mut next = || {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                state
            };
            let pairs: Vec<(f64, bool)> = (0..n)
                .map(|_| (1.0 + (next() % distinct) as f64 / 8.0, next() % 3 == 0))
                .collect();
            let data = FitData::from_records(&records(&pairs));
            let mut counts: std::collections::BTreeMap<u64, (f64, f64)> = Default::default();
            for &(t, e) in &pairs {
                let c = counts.entry(t.to_bits()).or_default();
                c.0 += f64::from(u8::from(e));
                c.1 += 1.0;
            }
            let time: Vec<f64> = counts.keys().map(|&b| f64::from_bits(b)).collect();
            let events: Vec<f64> = counts.values().map(|c| c.0).collect();
            let total: Vec<f64> = counts.values().map(|c| c.1).collect();
            assert_eq!(data.time, time, "{n} {distinct}");
            assert_eq!(data.events, events, "{n} {distinct}");
            assert_eq!(data.total, total, "{n} {distinct}");
            assert_eq!(data.n_subjects, n as f64);
        }
    }

    fn records(pairs: &[(f64, bool)]) -> Vec<Record> {
        let mut r: Vec<Record> = pairs
            .iter()
            .map(|&(time, event)| Record { time, event })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
    }

    /// ℓ(θ) = θ²/2 - θ⁴/4 with its exact Hessian 1 - 3θ²: a maximum at θ = 1 (ℓ'' = -2), but
    /// a positive second derivative, so no Newton step, for |θ| < 1/√3 (calculus, by hand).
    struct Quartic;

    impl Likelihood for Quartic {
        fn evaluate(&self, theta: Vec<f64>) -> Point {
            let t = theta[0];
            let second = SecondOrder {
                loglik: t * t / 2.0 - t.powi(4) / 4.0,
                grad: vec![t - t.powi(3)],
                hessian: vec![vec![1.0 - 3.0 * t * t]],
                exact: 1,
            };
            Point::from_second(theta, second)
        }
        fn information_at(&self, point: &Point, _steps: Option<&[f64]>) -> Vec<Vec<f64>> {
            negated(point.curvature.as_ref().unwrap().hessian.clone())
        }
        fn n_subjects(&self) -> f64 {
            1.0
        }
    }

    #[test]
    fn newton_falls_back_on_the_given_covariance_where_the_exact_hessian_is_not_negative() {
        // From θ = 0.5 (ℓ'' = 0.25) the exact curvature gives no step; the given covariance
        // (as the subsample's on large data) does, and exact steps then reach θ = 1.
        let best = newton_of(
            &Quartic,
            Quartic.evaluate(vec![0.5]),
            Some(&[vec![0.5]]),
            None,
        );
        assert!((best.theta[0] - 1.0).abs() < 1e-9, "{:?}", best.theta);
        // Without it Newton stops where it started.
        let stuck = newton_of(&Quartic, Quartic.evaluate(vec![0.5]), None, None);
        assert_eq!(stuck.theta, vec![0.5]);
    }

    #[test]
    fn secant_update_meets_the_secant_equation() {
        // BFGS (Nocedal and Wright, 2006, eq. 6.17): the updated inverse Hessian maps the
        // change in the gradient of -loglik onto the step, C·y = s, and stays symmetric.
        let mut c = vec![
            vec![2.0, 0.3, 0.1],
            vec![0.3, 1.0, -0.2],
            vec![0.1, -0.2, 0.5],
        ];
        let from = Point {
            theta: vec![1.0, 2.0, 3.0],
            loglik: -10.0,
            grad: vec![0.5, -0.4, 0.9],
            curvature: None,
        };
        let to = Point {
            theta: vec![1.2, 1.9, 3.05],
            loglik: -9.0,
            grad: vec![0.1, -0.3, 0.6],
            curvature: None,
        };
        secant_update(&mut c, &from, &to);
        let s = [0.2, -0.1, 0.05];
        let y = [0.4, -0.1, 0.3];
        for i in 0..3 {
            let cy: f64 = (0..3).map(|j| c[i][j] * y[j]).sum();
            assert!((cy - s[i]).abs() < 1e-12, "row {i}: {cy} vs {}", s[i]);
            for j in 0..3 {
                assert!((c[i][j] - c[j][i]).abs() < 1e-15);
            }
        }
        // Negative curvature along the step: no update.
        let before = c.clone();
        let away = Point {
            grad: vec![0.9, -0.5, 1.2],
            ..to.clone()
        };
        secant_update(&mut c, &from, &away);
        assert_eq!(c, before);
    }

    #[test]
    fn collapses_identical_records() {
        let data = FitData::from_records(&records(&[
            (1.0, true),
            (1.0, true),
            (1.0, false),
            (2.0, false),
        ]));
        assert_eq!(data.time, vec![1.0, 2.0]);
        assert_eq!(data.events, vec![2.0, 0.0]);
        assert_eq!(data.total, vec![3.0, 1.0]);
        assert_eq!(data.total_time, 5.0);
    }

    #[test]
    fn analytic_gradients_match_differences() {
        let data = FitData::from_records(&records(&[
            (0.5, true),
            (1.2, false),
            (2.0, true),
            (3.3, true),
            (4.1, false),
            (7.5, true),
            (9.0, false),
        ]));
        let points: [(&str, Vec<f64>); 5] = [
            ("exponential", vec![-1.3]),
            ("weibull", vec![0.2, 1.1]),
            ("lognormal", vec![1.0, -0.2]),
            ("loglogistic", vec![0.3, 1.2]),
            ("gompertz", vec![0.05, -2.0]),
        ];
        for (name, theta) in points {
            let family = families::by_name(name).unwrap();
            assert_gradient_matches_differences(family, &theta, &data, 1e-6);
        }
    }

    #[test]
    fn analytic_hessians_match_differences_of_the_gradient() {
        // Each family's analytic second derivatives (the whole Hessian) against central
        // differences of its analytic gradient, which the gradient test above ties to the
        // log-likelihood; points in both tails of every curve, the Gompertz on both sides of its
        // series switch (|shape·t| = 0.2) and the generalized gamma for q < 0 and q > 0, on both
        // sides of its Stirling-series switch (q² = 0.1) and of its uniform-expansion switch
        // (|q| = 0.01), and at q = 0; its censored records at these points fall on both sides
        // of the series / continued-fraction switch of the incomplete gamma function.
        let data = FitData::from_records(&records(&[
            (0.05, true),
            (0.5, true),
            (1.2, false),
            (2.0, true),
            (3.3, true),
            (4.1, false),
            (7.5, true),
            (9.0, false),
            (30.0, false),
        ]));
        let points: [(&str, Vec<f64>); 18] = [
            ("weibull", vec![0.2, 1.1]),
            ("weibull", vec![-0.7, 2.5]),
            ("lognormal", vec![1.0, -0.2]),
            ("lognormal", vec![-1.0, -0.9]),
            ("loglogistic", vec![0.3, 1.2]),
            ("gompertz", vec![0.05, -2.0]),
            ("gompertz", vec![-0.3, -1.0]),
            ("generalized-gamma", vec![1.2, -0.1, 0.8]),
            ("generalized-gamma", vec![1.0, 0.2, -0.6]),
            ("generalized-gamma", vec![1.1, -0.3, 0.004]),
            ("generalized-gamma", vec![1.1, -0.3, 2.5]),
            ("generalized-gamma", vec![0.9, 0.4, -1.7]),
            ("generalized-gamma", vec![1.3, -0.5, 0.3]),
            ("generalized-gamma", vec![1.3, -0.5, -0.35]),
            ("generalized-gamma", vec![1.0, 0.1, 0.0101]),
            ("generalized-gamma", vec![1.0, 0.1, -0.0099]),
            ("generalized-gamma", vec![1.0, 0.1, -0.004]),
            ("generalized-gamma", vec![1.0, 0.1, 0.0]),
        ];
        for (name, theta) in points {
            let family = families::by_name(name).unwrap();
            let second = family.loglik_grad_hessian(&theta, &data).unwrap();
            let (ll, grad) = family.loglik_grad(&theta, &data);
            assert!(
                (second.loglik - ll).abs() <= 1e-12 * ll.abs(),
                "{name} loglik"
            );
            // The same sums, except that the generalized gamma's continued fraction may take a
            // step more for its second derivative (the first then moves in its last digits).
            for (a, b) in second.grad.iter().zip(&grad) {
                assert!(
                    (a - b).abs() <= 1e-13 * b.abs().max(1.0),
                    "{name} at {theta:?} gradient: {a} vs {b}"
                );
            }
            let central = hessian(family, &theta, &data);
            for i in 0..second.exact {
                for j in 0..second.exact {
                    let (a, b) = (second.hessian[i][j], central[i][j]);
                    assert!(
                        (a - b).abs() <= 1e-6 * b.abs().max(1.0),
                        "{name} at {theta:?} [{i}][{j}]: {a} vs {b}"
                    );
                }
            }
        }
    }

    #[test]
    fn families_running_to_a_boundary_are_reported_while_others_fit() {
        // Every subject has its event at the same time: the likelihood of every two-parameter
        // family grows without bound as the curve sharpens into a step (shape → ∞ or
        // sigma → 0), while the exponential has its closed-form estimate 8 events / 40 days.
        let recs = records(&[(5.0, true); 8]);
        let fits = fit_arm(&families::STANDARD, &recs, None);
        assert_eq!(fits.len(), 5);
        assert_eq!(fits[0].family, "exponential");
        assert!(fits[0].converged);
        assert!((fits[0].params["rate"] - 0.2).abs() < 1e-12);
        assert_eq!(fits[0].delta_aic, Some(0.0));
        for fit in &fits[1..] {
            assert!(!fit.converged, "{} converged", fit.family);
            assert_eq!(
                fit.delta_aic, None,
                "{}: ΔAIC for a fit that did not converge",
                fit.family
            );
            let message = fit.message.as_deref().unwrap_or_default();
            assert!(!message.is_empty(), "{}: no reason given", fit.family);
        }
    }

    #[test]
    fn gompertz_running_away_is_reported() {
        // All events come after every censoring, at the last time: the Gompertz hazard can
        // concentrate there without limit (shape → ∞); the fit must say so.
        let recs = records(&[
            (1.0, false),
            (2.0, false),
            (3.0, false),
            (4.0, false),
            (10.0, true),
            (10.0, true),
        ]);
        let data = FitData::from_records(&recs);
        let fit = fit_family(families::by_name("gompertz").unwrap(), &data, None);
        assert!(!fit.converged);
        assert!(fit.message.is_some());
    }

    #[test]
    fn loglik_matches_density_and_survival_sums() {
        let recs = records(&[
            (0.5, true),
            (1.2, false),
            (2.0, true),
            (7.5, true),
            (9.0, false),
        ]);
        let data = FitData::from_records(&recs);
        for family in families::all() {
            let params = &families::tests::examples(family.name())[0];
            let theta = family.to_estimation(params);
            let (ll, _) = family.loglik_grad(&theta, &data);
            let direct: f64 = recs
                .iter()
                .map(|r| {
                    if r.event {
                        family.log_density(params, r.time)
                    } else {
                        family.log_survival(params, r.time)
                    }
                })
                .sum();
            assert!(
                (ll - direct).abs() < 1e-9 * direct.abs(),
                "{}",
                family.name()
            );
        }
    }
}
