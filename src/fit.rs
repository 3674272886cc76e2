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
    /// Collapses sorted, validated records (times > 0, at least one event).
    pub fn from_records(records: &[Record]) -> FitData {
        let mut time: Vec<f64> = Vec::new();
        let mut events: Vec<f64> = Vec::new();
        let mut total: Vec<f64> = Vec::new();
        for r in records {
            if time.last() != Some(&r.time) {
                time.push(r.time);
                events.push(0.0);
                total.push(0.0);
            }
            let last = time.len() - 1;
            total[last] += 1.0;
            if r.event {
                events[last] += 1.0;
            }
        }
        let ln_time = time.iter().map(|t| t.ln()).collect();
        let n_subjects = records.len() as f64;
        let n_events = events.iter().sum();
        let total_time = time.iter().zip(&total).map(|(t, n)| t * n).sum();
        let km = KaplanMeier::from_records(records);
        let km_points = km
            .steps
            .iter()
            .filter(|s| s.events > 0 && s.survival > 0.0 && s.survival < 1.0)
            .map(|s| (s.time.ln(), s.survival))
            .collect();
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
    /// Settings of a configured family (cut points, spline scale and knots); absent otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub settings: Option<families::FamilySettings>,
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

/// Observed information (minus the Hessian) at `theta`.
fn information(family: &dyn Family, theta: &[f64], data: &FitData) -> Vec<Vec<f64>> {
    hessian(family, theta, data)
        .into_iter()
        .map(|row| row.into_iter().map(|x| -x).collect())
        .collect()
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

/// BFGS from one start; returns the best point found (or the start when the solver fails).
fn bfgs(objective: Objective<'_>, start: Vec<f64>) -> Vec<f64> {
    let k = start.len();
    let identity: Vec<Vec<f64>> = (0..k)
        .map(|i| (0..k).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
        .collect();
    let solver = match BFGS::new(MoreThuenteLineSearch::new()).with_tolerance_grad(1e-10) {
        Ok(s) => s,
        Err(_) => return start,
    };
    let solver = match solver.with_tolerance_cost(0.0) {
        Ok(s) => s,
        Err(_) => return start,
    };
    let run = Executor::new(objective, solver)
        .configure(|state| {
            state
                .param(start.clone())
                .inv_hessian(identity)
                .max_iters(300)
        })
        .run();
    match run {
        Ok(result) => result.state().get_best_param().cloned().unwrap_or(start),
        Err(_) => start,
    }
}

/// Newton steps with step halving on the differenced Hessian, from a point near the optimum.
fn newton_polish(family: &dyn Family, data: &FitData, mut theta: Vec<f64>) -> Vec<f64> {
    let (mut ll, _) = family.loglik_grad(&theta, data);
    for _ in 0..30 {
        let (_, grad) = family.loglik_grad(&theta, data);
        if max_abs(&grad) / data.n_subjects < 1e-12 {
            break;
        }
        let info = information(family, &theta, data);
        let Some(cov) = invert_positive_definite(&info) else {
            break;
        };
        let step: Vec<f64> = cov
            .iter()
            .map(|row| row.iter().zip(&grad).map(|(c, g)| c * g).sum())
            .collect();
        let mut scale = 1.0;
        let mut improved = false;
        for _ in 0..30 {
            let trial: Vec<f64> = theta
                .iter()
                .zip(&step)
                .map(|(t, s)| t + scale * s)
                .collect();
            let (trial_ll, trial_grad) = family.loglik_grad(&trial, data);
            // At the optimum the log-likelihood is flat to rounding, so a step that shrinks the
            // gradient without lowering the log-likelihood beyond rounding also counts.
            let flat = trial_ll >= ll - 1e-13 * ll.abs() && max_abs(&trial_grad) < max_abs(&grad);
            if trial_ll.is_finite() && (trial_ll >= ll || flat) {
                theta = trial;
                ll = trial_ll;
                improved = true;
                break;
            }
            scale *= 0.5;
        }
        if !improved || max_abs(&step) * scale < 1e-13 {
            break;
        }
    }
    theta
}

/// Fits one family to collapsed data; never panics, reports failure in the result.
pub fn fit_family(family: &dyn Family, data: &FitData, arm: Option<&str>) -> FamilyFit {
    let k = family.param_names().len();
    let mut best: Option<(f64, Vec<f64>)> = None;
    let mut consider = |theta: Vec<f64>| {
        let (ll, _) = family.loglik_grad(&theta, data);
        if ll.is_finite() && best.as_ref().is_none_or(|(b, _)| ll > *b) {
            best = Some((ll, theta));
        }
    };
    if let Some(theta) = family.closed_form_mle(data) {
        consider(theta);
    } else {
        for start in family.start_values(data) {
            if start.iter().any(|x| !x.is_finite()) {
                continue;
            }
            let objective = Objective { family, data };
            let theta = bfgs(objective, start);
            consider(newton_polish(family, data, theta));
        }
    }
    let names: Vec<String> = family
        .estimation_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut fit = FamilyFit {
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
        message: None,
        settings: family.settings(),
    };
    let Some((ll, theta)) = best else {
        fit.message = Some("no starting point gave a finite log-likelihood".into());
        return fit;
    };
    let params = family.to_natural(&theta);
    for (name, value) in family.param_names().iter().zip(&params) {
        fit.params.insert(name.to_string(), *value);
    }
    let (_, grad) = family.loglik_grad(&theta, data);
    let gmax = max_abs(&grad);
    fit.gradient_max = Some(gmax);
    fit.loglik = Some(ll);
    fit.aic = Some(2.0 * k as f64 - 2.0 * ll);
    fit.bic = Some(k as f64 * data.n_subjects.ln() - 2.0 * ll);
    fit.estimates = theta.clone();
    let median = family.median(&params);
    fit.median = median.is_finite().then_some(median);
    let covariance = invert_positive_definite(&information(family, &theta, data));
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
            Err(why) => failed_fit(*f, arm, why),
        })
        .collect();
    rank_by_aic(&mut fits);
    fits
}

/// The record of a family that could not be fitted to this arm at all (e.g. a piecewise
/// interval without events), so that it is reported beside the others.
fn failed_fit(family: &dyn Family, arm: Option<&str>, why: String) -> FamilyFit {
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
        message: Some(why),
        settings: family.settings(),
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
}

/// Resolves `--families` (empty = the default families: the standard five plus `gengamma`).
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
            "--knots sets the knots of the spline families; add one (e.g. spline-hazard-2) to --families".into(),
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
        let km = KaplanMeier::from_records(&arm.records);
        arms.push(ArmSummary {
            arm: arm.arm.clone(),
            n: arm.records.len(),
            events: arm.events(),
            max_time: arm.max_time(),
            km_median: km.median(),
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
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families;

    fn records(pairs: &[(f64, bool)]) -> Vec<Record> {
        let mut r: Vec<Record> = pairs
            .iter()
            .map(|&(time, event)| Record { time, event })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
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
            let (_, grad) = family.loglik_grad(&theta, &data);
            for j in 0..theta.len() {
                let h = 1e-6;
                let mut up = theta.clone();
                let mut down = theta.clone();
                up[j] += h;
                down[j] -= h;
                let numeric = (family.loglik_grad(&up, &data).0
                    - family.loglik_grad(&down, &data).0)
                    / (2.0 * h);
                assert!(
                    (numeric - grad[j]).abs() < 1e-6 * grad[j].abs().max(1.0),
                    "{name} {j}: {numeric} vs {}",
                    grad[j]
                );
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
