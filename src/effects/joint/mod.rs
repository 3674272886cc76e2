//! Joint models across arms: one reference curve of a parametric family and one coefficient
//! per term (arm indicators, covariates). Proportional hazards multiplies the hazard by
//! e^(x·β), h(t|x) = h₀(t)·e^(x·β); accelerated failure time multiplies the time scale by
//! e^(x·γ), S(t|x) = S₀(t·e^(−x·γ)).
//!
//! For every family here either effect keeps a patient's curve inside the one-sample family:
//! the patient's estimation-scale parameters are the reference curve's with one of them moved
//! by the linear predictor (e.g. AFT: `ln_scale + x·γ`; exponential PH: `ln_rate + x·β`). So each
//! family is a small file behind [`JointFamily`] saying how the linear predictor moves the
//! parameters, and the likelihood, its gradient and ln S are those of the one-sample family in
//! [`crate::families`] (with their tail guards), evaluated once per distinct covariate pattern
//! on that pattern's collapsed records. The optimiser is shared: Newton–Raphson on the analytic
//! gradient (the Hessian by central differences of it), step halving, several starts;
//! covariance from the observed information.

use super::design::Design;
use crate::families::Family;
use crate::fit::{FitData, Likelihood, Point};
use crate::input::Record;
use crate::numeric::invert_positive_definite;

mod exponential;
mod gengamma;
mod gompertz;
mod loglogistic;
mod lognormal;
mod weibull;

pub use exponential::JointExponential;
pub use gengamma::JointGeneralizedGamma;
pub use gompertz::JointGompertz;
pub use loglogistic::JointLogLogistic;
pub use lognormal::JointLogNormal;
pub use weibull::JointWeibull;

/// Which model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Model {
    /// Proportional hazards (coefficients: log hazard ratios).
    Ph,
    /// Accelerated failure time (coefficients: log acceleration factors).
    Aft,
}

impl Model {
    /// `ph` or `aft`, as in the fit JSON.
    pub fn name(self) -> &'static str {
        match self {
            Model::Ph => "ph",
            Model::Aft => "aft",
        }
    }
}

/// A family that can be fitted jointly across arms: how the linear predictor η = x·coef moves
/// a patient's estimation-scale parameters away from the reference curve's.
pub trait JointFamily: Sync + Send {
    /// The one-sample family of the reference curve (its name is the joint model's `family`).
    fn family(&self) -> &'static dyn Family;

    /// The models this family supports (PH, AFT or both).
    fn models(&self) -> &'static [Model];

    /// A patient's estimation-scale parameters for linear predictor `eta`.
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64>;

    /// Chain rule: from the gradient `g` with respect to the patient's parameters (at
    /// `shift(model, base, eta)`) to the gradient with respect to `base` and to `eta`.
    fn pull_back(&self, model: Model, base: &[f64], eta: f64, g: &[f64]) -> (Vec<f64>, f64);
}

impl std::fmt::Debug for dyn JointFamily {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "JointFamily({})", self.family().name())
    }
}

/// `base` with parameter `index` moved by `delta`: the shift of every family whose effect moves
/// one parameter linearly.
pub(crate) fn moved(base: &[f64], index: usize, delta: f64) -> Vec<f64> {
    let mut theta = base.to_vec();
    theta[index] += delta;
    theta
}

/// Every joint family with the models it supports, PH families first, in the contract's order.
pub fn all() -> Vec<(&'static dyn JointFamily, Model)> {
    let families: [&'static dyn JointFamily; 6] = [
        &JointExponential,
        &JointWeibull,
        &JointGompertz,
        &JointLogNormal,
        &JointLogLogistic,
        &JointGeneralizedGamma,
    ];
    let mut out = Vec::new();
    for model in [Model::Ph, Model::Aft] {
        for f in families {
            if f.models().contains(&model) {
                out.push((f, model));
            }
        }
    }
    out
}

/// The joint family of a one-sample family name (`weibull`, `generalized-gamma`, …).
pub fn by_name(name: &str) -> Option<&'static dyn JointFamily> {
    all()
        .into_iter()
        .map(|(f, _)| f)
        .find(|f| f.family().name() == name)
}

/// A fitted joint model.
#[derive(Debug, Clone)]
pub struct JointFit {
    /// The family of the reference curve.
    pub family: &'static dyn JointFamily,
    /// The model.
    pub model: Model,
    /// Estimates: the reference curve's estimation-scale parameters, then the coefficients.
    pub theta: Vec<f64>,
    /// Covariance of `theta`.
    pub covariance: Vec<Vec<f64>>,
    /// Log-likelihood (full densities, as the separate fits).
    pub loglik: f64,
    /// Whether Newton–Raphson converged and the information is positive definite.
    pub converged: bool,
}

impl JointFit {
    /// ln S(t | x) of the fitted model for the design row `x` (one value per term); the one
    /// place curves, draws and plots read a joint model, whatever its family.
    pub fn ln_survival(&self, t: f64, x: &[f64]) -> f64 {
        ln_survival_at(self.family, self.model, &self.theta, t, x)
    }
}

/// Number of reference-curve parameters of `family`.
fn base_len(family: &dyn JointFamily) -> usize {
    family.family().estimation_names().len()
}

fn linear_predictor(x: &[f64], coef: &[f64]) -> f64 {
    x.iter().zip(coef).map(|(a, b)| a * b).sum()
}

/// ln S(t | x) at parameters `theta` (estimation scale), for draws that perturb `theta`.
pub fn ln_survival_at(
    family: &dyn JointFamily,
    model: Model,
    theta: &[f64],
    t: f64,
    x: &[f64],
) -> f64 {
    if t <= 0.0 {
        return 0.0;
    }
    let m = base_len(family);
    let eta = linear_predictor(x, &theta[m..]);
    let one = family.family();
    one.log_survival(&one.to_natural(&family.shift(model, &theta[..m], eta)), t)
}

/// The records of a design collapsed per distinct covariate pattern, each as the one-sample
/// fitter's columns: what the likelihood is evaluated on. Subjects with the same design row
/// (arm, covariate values: exact equality) and the same time are one weighted record (events
/// and subjects at that time), so without covariates or with text covariates only the
/// likelihood runs over a few patterns of collapsed times; with a continuous covariate most
/// patterns hold one subject and only exact repeats collapse.
#[derive(Debug, Clone)]
pub struct Patterns {
    /// Design row of each pattern.
    x: Vec<Vec<f64>>,
    /// Range of each pattern in the columns below.
    ranges: Vec<std::ops::Range<usize>>,
    time: Vec<f64>,
    ln_time: Vec<f64>,
    events: Vec<f64>,
    total: Vec<f64>,
    /// Number of subjects.
    n_subjects: f64,
    /// All records pooled, for starting values.
    pooled: FitData,
}

/// Lexicographic order of design rows by [`f64::total_cmp`] (equal exactly when the bits are).
fn cmp_rows(a: &[f64], b: &[f64]) -> std::cmp::Ordering {
    a.iter()
        .zip(b)
        .map(|(u, v)| u.total_cmp(v))
        .find(|o| o.is_ne())
        .unwrap_or(std::cmp::Ordering::Equal)
}

impl Patterns {
    /// Groups the design's subjects by covariate pattern (exact equality) and collapses tied
    /// times within each.
    pub fn new(design: &Design) -> Patterns {
        Self::build(design, true)
    }

    /// The same records without collapsing tied times: one record per subject (for checking
    /// that collapsing does not change the likelihood).
    pub fn each_record(design: &Design) -> Patterns {
        Self::build(design, false)
    }

    fn build(design: &Design, collapse: bool) -> Patterns {
        use rayon::prelude::*;
        let subjects = &design.subjects;
        let p = design.p();
        // Design rows and times in flat arrays, sorted by (row, time, position): a total
        // order, so the parallel sort gives the same result whatever the number of threads.
        let rows: Vec<f64> = subjects.iter().flat_map(|s| s.x.iter().copied()).collect();
        let row = |i: usize| &rows[i * p..(i + 1) * p];
        let times: Vec<f64> = subjects.iter().map(|s| s.time).collect();
        let mut order: Vec<usize> = (0..subjects.len()).collect();
        order.par_sort_unstable_by(|&a, &b| {
            cmp_rows(row(a), row(b))
                .then(times[a].total_cmp(&times[b]))
                .then(a.cmp(&b))
        });
        let mut x: Vec<Vec<f64>> = Vec::new();
        let mut ranges: Vec<std::ops::Range<usize>> = Vec::new();
        let mut time = Vec::with_capacity(subjects.len());
        let mut events = Vec::with_capacity(subjects.len());
        let mut total = Vec::with_capacity(subjects.len());
        for &i in &order {
            let s = &subjects[i];
            let event = if s.event { 1.0 } else { 0.0 };
            if x.last().is_none_or(|last| cmp_rows(last, row(i)).is_ne()) {
                if let Some(r) = ranges.last_mut() {
                    r.end = time.len();
                }
                x.push(row(i).to_vec());
                ranges.push(time.len()..time.len());
            } else if collapse && time.last() == Some(&s.time) {
                let j = time.len() - 1;
                total[j] += 1.0;
                events[j] += event;
                continue;
            }
            time.push(s.time);
            total.push(1.0);
            events.push(event);
        }
        if let Some(r) = ranges.last_mut() {
            r.end = time.len();
        }
        Self::from_columns(x, ranges, time, events, total)
    }

    /// Fills in the logarithms, the count of subjects and the pooled records.
    fn from_columns(
        x: Vec<Vec<f64>>,
        ranges: Vec<std::ops::Range<usize>>,
        time: Vec<f64>,
        events: Vec<f64>,
        total: Vec<f64>,
    ) -> Patterns {
        let ln_time = time.iter().map(|t| t.ln()).collect();
        let n_subjects = total.iter().sum();
        // Pooled over patterns: merge the collapsed records by time.
        let mut pooled: Vec<(f64, f64, f64)> = time
            .iter()
            .zip(&events)
            .zip(&total)
            .map(|((&t, &d), &n)| (t, d, n))
            .collect();
        pooled.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        let (mut pt, mut pd, mut pn) = (Vec::new(), Vec::new(), Vec::new());
        for (t, d, n) in pooled {
            if pt.last() == Some(&t) {
                let j = pt.len() - 1;
                pd[j] += d;
                pn[j] += n;
            } else {
                pt.push(t);
                pd.push(d);
                pn.push(n);
            }
        }
        let pooled = if pt.is_empty() {
            FitData::from_records(&[Record {
                time: 1.0,
                event: true,
            }])
        } else {
            FitData::from_collapsed(pt, pd, pn, None)
        };
        Patterns {
            x,
            ranges,
            time,
            ln_time,
            events,
            total,
            n_subjects,
            pooled,
        }
    }

    /// A seeded random subsample of about `size` collapsed records (each kept with the same
    /// probability, whatever its pattern), with at least one event: a warm start for the full
    /// data, as [`FitData::subsample`] is for the separate fits.
    pub fn subsample(&self, size: usize, seed: u64) -> Patterns {
        use rand_chacha::rand_core::{Rng, SeedableRng};
        let n = self.time.len();
        if n <= size {
            return self.clone();
        }
        let keep = size as f64 / n as f64;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let mut x = Vec::new();
        let mut ranges: Vec<std::ops::Range<usize>> = Vec::new();
        let (mut time, mut events, mut total) = (Vec::new(), Vec::new(), Vec::new());
        for (k, range) in self.ranges.iter().enumerate() {
            let start = time.len();
            for i in range.clone() {
                if ((rng.next_u64() >> 11) as f64) * (1.0 / (1u64 << 53) as f64) < keep {
                    time.push(self.time[i]);
                    events.push(self.events[i]);
                    total.push(self.total[i]);
                }
            }
            if time.len() > start {
                x.push(self.x[k].clone());
                ranges.push(start..time.len());
            }
        }
        if !events.iter().any(|&d| d > 0.0) {
            // Keep the subsample fittable: add the first record with an event.
            if let Some(i) = self.events.iter().position(|&d| d > 0.0) {
                let k = self.ranges.iter().position(|r| r.contains(&i)).unwrap_or(0);
                x.push(self.x[k].clone());
                ranges.push(time.len()..time.len() + 1);
                time.push(self.time[i]);
                events.push(self.events[i]);
                total.push(self.total[i]);
            }
        }
        Self::from_columns(x, ranges, time, events, total)
    }

    /// Number of distinct covariate patterns.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Whether there are no records.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }

    /// Number of collapsed records (what one pass of the likelihood runs over).
    pub fn records(&self) -> usize {
        self.time.len()
    }
}

/// Fills `data` with pattern `k`'s columns (no allocation once it has grown).
fn load(data: &mut FitData, p: &Patterns, k: usize) {
    let r = p.ranges[k].clone();
    data.time.clear();
    data.time.extend_from_slice(&p.time[r.clone()]);
    data.ln_time.clear();
    data.ln_time.extend_from_slice(&p.ln_time[r.clone()]);
    data.events.clear();
    data.events.extend_from_slice(&p.events[r.clone()]);
    data.total.clear();
    data.total.extend_from_slice(&p.total[r.clone()]);
    data.n_subjects = data.total.iter().sum();
    data.n_events = data.events.iter().sum();
    data.total_time = data.time.iter().zip(&data.total).map(|(t, n)| t * n).sum();
}

/// Patterns per chunk of the parallel likelihood sum: fixed, so that sums are identical
/// whatever the number of threads (as [`crate::fit::sum_terms`]).
const PATTERN_CHUNK: usize = 2_048;

/// Log-likelihood and gradient over patterns `range` (serial).
fn loglik_gradient_range(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
    theta: &[f64],
    range: std::ops::Range<usize>,
) -> (f64, Vec<f64>) {
    let m = base_len(family);
    let one = family.family();
    let mut ll = 0.0;
    let mut g = vec![0.0; theta.len()];
    let mut data = FitData::from_collapsed(vec![1.0], vec![1.0], vec![1.0], Some(Vec::new()));
    for k in range {
        load(&mut data, patterns, k);
        let x = &patterns.x[k];
        let eta = linear_predictor(x, &theta[m..]);
        let shifted = family.shift(model, &theta[..m], eta);
        let (l, gi) = one.loglik_grad(&shifted, &data);
        ll += l;
        let (g_base, g_eta) = family.pull_back(model, &theta[..m], eta, &gi);
        for j in 0..m {
            g[j] += g_base[j];
        }
        for (j, xj) in x.iter().enumerate() {
            g[m + j] += g_eta * xj;
        }
    }
    (ll, g)
}

/// Log-likelihood and its gradient at `theta` (reference parameters, then coefficients).
/// Few large patterns are summed in turn (each pattern's sum is parallel inside the family);
/// many small ones (a continuous covariate) in parallel over fixed chunks of patterns.
pub fn loglik_gradient(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
    theta: &[f64],
) -> (f64, Vec<f64>) {
    use rayon::prelude::*;
    let n = patterns.len();
    if n <= PATTERN_CHUNK {
        return loglik_gradient_range(family, model, patterns, theta, 0..n);
    }
    let partial: Vec<(f64, Vec<f64>)> = (0..n.div_ceil(PATTERN_CHUNK))
        .into_par_iter()
        .map(|c| {
            let range = c * PATTERN_CHUNK..((c + 1) * PATTERN_CHUNK).min(n);
            loglik_gradient_range(family, model, patterns, theta, range)
        })
        .collect();
    let mut ll = 0.0;
    let mut g = vec![0.0; theta.len()];
    for (l, gc) in partial {
        ll += l;
        for (a, b) in g.iter_mut().zip(&gc) {
            *a += b;
        }
    }
    (ll, g)
}

/// A joint model's likelihood on some patterns, for the shared Newton iterations of
/// [`crate::fit`].
struct JointLikelihood<'a> {
    family: &'a dyn JointFamily,
    model: Model,
    patterns: &'a Patterns,
}

impl Likelihood for JointLikelihood<'_> {
    fn evaluate(&self, theta: Vec<f64>) -> Point {
        let (loglik, grad) = loglik_gradient(self.family, self.model, self.patterns, &theta);
        Point {
            theta,
            loglik,
            grad,
            curvature: None,
        }
    }
    fn information_at(&self, point: &Point, steps: Option<&[f64]>) -> Vec<Vec<f64>> {
        let Some(steps) = steps else {
            return information(self.family, self.model, self.patterns, &point.theta);
        };
        // Forward differences of the gradient: k passes instead of 2k, for large data.
        let k = point.theta.len();
        let mut h = vec![vec![0.0; k]; k];
        for j in 0..k {
            let mut up = point.theta.clone();
            up[j] += steps[j];
            let (_, grad) = loglik_gradient(self.family, self.model, self.patterns, &up);
            for i in 0..k {
                h[i][j] = -(grad[i] - point.grad[i]) / steps[j];
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
    fn n_subjects(&self) -> f64 {
        self.patterns.n_subjects
    }
}

/// Observed information −∂²ℓ by central differences of the analytic gradient, symmetrised.
fn information(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
    theta: &[f64],
) -> Vec<Vec<f64>> {
    let n = theta.len();
    let mut h = vec![vec![0.0; n]; n];
    for j in 0..n {
        let step = 1e-5 * (1.0 + theta[j].abs());
        let mut a = theta.to_vec();
        let mut b = theta.to_vec();
        a[j] += step;
        b[j] -= step;
        let ga = loglik_gradient(family, model, patterns, &a).1;
        let gb = loglik_gradient(family, model, patterns, &b).1;
        for i in 0..n {
            h[i][j] = -(ga[i] - gb[i]) / (2.0 * step);
        }
    }
    for i in 0..n {
        for j in 0..i {
            let m = 0.5 * (h[i][j] + h[j][i]);
            h[i][j] = m;
            h[j][i] = m;
        }
    }
    h
}

/// Newton–Raphson with step halving from `start`: (theta, loglik, converged).
fn newton(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
    start: Vec<f64>,
) -> Option<(Vec<f64>, f64, bool)> {
    let n = start.len();
    let mut theta = start;
    let (mut ll, mut g) = loglik_gradient(family, model, patterns, &theta);
    if !ll.is_finite() || g.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let mut converged = false;
    for _ in 0..200 {
        let info = information(family, model, patterns, &theta);
        // Newton step when the information is positive definite, else a gradient step.
        let step: Vec<f64> = match invert_positive_definite(&info) {
            Some(inv) => (0..n)
                .map(|i| (0..n).map(|j| inv[i][j] * g[j]).sum())
                .collect(),
            None => {
                let norm = g.iter().map(|v| v * v).sum::<f64>().sqrt().max(1.0);
                g.iter().map(|v| 0.1 * v / norm).collect()
            }
        };
        let mut scale = 1.0;
        let mut moved = false;
        for _ in 0..50 {
            let trial: Vec<f64> = theta
                .iter()
                .zip(&step)
                .map(|(t, s)| t + scale * s)
                .collect();
            let (tl, tg) = loglik_gradient(family, model, patterns, &trial);
            if tl.is_finite()
                && tg.iter().all(|v| v.is_finite())
                && tl >= ll - 1e-12 * (1.0 + ll.abs())
            {
                let change = tl - ll;
                theta = trial;
                ll = tl;
                g = tg;
                moved = true;
                if change.abs() < 1e-12 * (1.0 + ll.abs())
                    && g.iter()
                        .all(|v| v.abs() < GRADIENT_TOLERANCE * (1.0 + ll.abs()))
                {
                    converged = true;
                }
                break;
            }
            scale /= 2.0;
        }
        if converged || !moved {
            break;
        }
    }
    Some((theta, ll, converged))
}

/// Starting points: the one-sample fit to the pooled records (coefficients 0), then the
/// family's own data-driven starts on the pooled records.
fn starts(family: &dyn JointFamily, patterns: &Patterns, p: usize) -> Vec<Vec<f64>> {
    let one = family.family();
    let pooled = crate::fit::fit_family(one, &patterns.pooled, None);
    let mut out = Vec::new();
    if pooled.estimates.len() == base_len(family) && pooled.estimates.iter().all(|v| v.is_finite())
    {
        out.push(pooled.estimates.clone());
    }
    out.extend(one.start_values(&patterns.pooled));
    out.into_iter()
        .map(|mut s| {
            s.resize(s.len() + p, 0.0);
            s
        })
        .collect()
}

/// Fits a joint model; `None` when no start gives a finite log-likelihood (reported by the
/// caller), never a panic. Non-convergence is carried in [`JointFit::converged`].
pub fn fit_with(
    family: &'static dyn JointFamily,
    model: Model,
    design: &Design,
) -> Option<JointFit> {
    fit_patterns(family, model, &Patterns::new(design))
}

/// [`fit_with`] on patterns already built (build them once for all models of a design). Above
/// the separate fits' threshold of collapsed records ([`crate::fit::SUBSAMPLE_ABOVE`]) the
/// model is fitted as the separate fits are on large data: every start on a seeded small
/// subsample, Newton on a larger one, then a few Newton passes over the full data with the
/// subsample's curvature; [`fit_plain`] when that path gives no converged fit.
pub fn fit_patterns(
    family: &'static dyn JointFamily,
    model: Model,
    patterns: &Patterns,
) -> Option<JointFit> {
    if patterns.is_empty() {
        return None;
    }
    if patterns.records() > crate::fit::SUBSAMPLE_ABOVE {
        if let Some(fit) = fit_large(family, model, patterns) {
            return Some(fit);
        }
    }
    fit_plain(family, model, patterns)
}

/// Seeds of the two subsamples of the large-data path (fixed: the fit is reproducible).
const COARSE_SEED: u64 = 20_261_204;
const SUBSAMPLE_SEED: u64 = 20_261_205;

/// The large-data path of [`fit_patterns`]; `None` when it does not reach a converged fit.
fn fit_large(
    family: &'static dyn JointFamily,
    model: Model,
    patterns: &Patterns,
) -> Option<JointFit> {
    let coarse = patterns.subsample(crate::fit::COARSE_SIZE, COARSE_SEED);
    let (start, _, _) = search(family, model, &coarse)?;
    let sub = patterns.subsample(crate::fit::SUBSAMPLE_SIZE, SUBSAMPLE_SEED);
    let full = JointLikelihood {
        family,
        model,
        patterns,
    };
    let sub_lik = JointLikelihood {
        family,
        model,
        patterns: &sub,
    };
    let (best, steps) = crate::fit::warm_newton(&full, &sub_lik, start)?;
    if !best.loglik.is_finite()
        || best
            .grad
            .iter()
            .any(|g| !g.is_finite() || g.abs() >= GRADIENT_TOLERANCE * (1.0 + best.loglik.abs()))
    {
        return None;
    }
    let info = full.information_at(&best, steps.as_deref());
    let covariance = invert_positive_definite(&info)?;
    if !covariance.iter().flatten().all(|v| v.is_finite()) {
        return None;
    }
    Some(JointFit {
        family,
        model,
        theta: best.theta,
        covariance,
        loglik: best.loglik,
        converged: true,
    })
}

/// Largest gradient component, relative to 1 + |loglik|, of a converged joint fit.
const GRADIENT_TOLERANCE: f64 = 1e-6;

/// Every start on `patterns`, Newton from each: the best (theta, loglik, converged).
fn search(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
) -> Option<(Vec<f64>, f64, bool)> {
    let p = patterns.x.first().map_or(0, Vec::len);
    let mut best: Option<(Vec<f64>, f64, bool)> = None;
    for start in starts(family, patterns, p) {
        let Some(found) = newton(family, model, patterns, start) else {
            continue;
        };
        let better = match &best {
            None => true,
            Some(b) => (found.2 && !b.2) || (found.2 == b.2 && found.1 > b.1 + 1e-9),
        };
        if better {
            best = Some(found);
        }
        // The pooled start reaches the maximum in almost every case: stop at the first
        // converged one.
        if best.as_ref().is_some_and(|b| b.2) {
            break;
        }
    }
    best
}

/// Fits a joint model on the full data from every start (Newton with the differenced
/// information at each iterate): the path below the large-data threshold.
pub fn fit_plain(
    family: &'static dyn JointFamily,
    model: Model,
    patterns: &Patterns,
) -> Option<JointFit> {
    if patterns.is_empty() {
        return None;
    }
    let (theta, loglik, mut converged) = search(family, model, patterns)?;
    let n = theta.len();
    let info = information(family, model, patterns, &theta);
    let covariance = match invert_positive_definite(&info) {
        Some(c) => c,
        None => {
            converged = false;
            vec![vec![f64::NAN; n]; n]
        }
    };
    Some(JointFit {
        family,
        model,
        theta,
        covariance,
        loglik,
        converged,
    })
}

/// Fits the joint Weibull model (kept for callers written before the other families).
pub fn fit(design: &Design, model: Model) -> JointFit {
    fit_with(&JointWeibull, model, design).unwrap_or_else(|| JointFit {
        family: &JointWeibull,
        model,
        theta: vec![f64::NAN; 2 + design.p()],
        covariance: vec![vec![f64::NAN; 2 + design.p()]; 2 + design.p()],
        loglik: f64::NAN,
        converged: false,
    })
}

#[cfg(test)]
mod tests;
