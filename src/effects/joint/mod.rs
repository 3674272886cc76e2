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
use crate::fit::FitData;
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
/// fitter's columns: what the likelihood is evaluated on.
pub struct Patterns {
    /// Design row of each pattern.
    x: Vec<Vec<f64>>,
    /// Range of each pattern in the columns below.
    ranges: Vec<std::ops::Range<usize>>,
    time: Vec<f64>,
    events: Vec<f64>,
    total: Vec<f64>,
    /// All records pooled, for starting values.
    pooled: FitData,
}

impl Patterns {
    /// Groups the design's subjects by covariate pattern (exact equality) and collapses tied
    /// times within each.
    pub fn new(design: &Design) -> Patterns {
        let mut order: Vec<usize> = (0..design.subjects.len()).collect();
        let key =
            |i: usize| -> Vec<u64> { design.subjects[i].x.iter().map(|v| v.to_bits()).collect() };
        order.sort_by(|&a, &b| {
            key(a)
                .cmp(&key(b))
                .then(design.subjects[a].time.total_cmp(&design.subjects[b].time))
        });
        let mut p = Patterns {
            x: Vec::new(),
            ranges: Vec::new(),
            time: Vec::new(),
            events: Vec::new(),
            total: Vec::new(),
            pooled: FitData::from_records(&[Record {
                time: 1.0,
                event: true,
            }]),
        };
        let mut last_key: Option<Vec<u64>> = None;
        for &i in &order {
            let s = &design.subjects[i];
            let k = key(i);
            if last_key.as_ref() != Some(&k) {
                if let Some(r) = p.ranges.last_mut() {
                    r.end = p.time.len();
                }
                p.x.push(s.x.clone());
                p.ranges.push(p.time.len()..p.time.len());
                last_key = Some(k);
            } else if p.time.last() == Some(&s.time) {
                let j = p.time.len() - 1;
                p.total[j] += 1.0;
                p.events[j] += if s.event { 1.0 } else { 0.0 };
                continue;
            }
            p.time.push(s.time);
            p.total.push(1.0);
            p.events.push(if s.event { 1.0 } else { 0.0 });
        }
        if let Some(r) = p.ranges.last_mut() {
            r.end = p.time.len();
        }
        let mut records: Vec<Record> = design
            .subjects
            .iter()
            .map(|s| Record {
                time: s.time,
                event: s.event,
            })
            .collect();
        records.sort_by(|a, b| a.time.total_cmp(&b.time));
        if !records.is_empty() {
            p.pooled = FitData::from_records(&records);
        }
        p
    }

    /// Number of distinct covariate patterns.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Whether there are no records.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// Fills `data` with pattern `k`'s columns (no allocation once it has grown).
fn load(data: &mut FitData, p: &Patterns, k: usize) {
    let r = p.ranges[k].clone();
    data.time.clear();
    data.time.extend_from_slice(&p.time[r.clone()]);
    data.ln_time.clear();
    data.ln_time
        .extend(p.time[r.clone()].iter().map(|t| t.ln()));
    data.events.clear();
    data.events.extend_from_slice(&p.events[r.clone()]);
    data.total.clear();
    data.total.extend_from_slice(&p.total[r.clone()]);
    data.n_subjects = data.total.iter().sum();
    data.n_events = data.events.iter().sum();
    data.total_time = data.time.iter().zip(&data.total).map(|(t, n)| t * n).sum();
}

/// Log-likelihood and its gradient at `theta` (reference parameters, then coefficients).
pub fn loglik_gradient(
    family: &dyn JointFamily,
    model: Model,
    patterns: &Patterns,
    theta: &[f64],
) -> (f64, Vec<f64>) {
    let m = base_len(family);
    let one = family.family();
    let mut ll = 0.0;
    let mut g = vec![0.0; theta.len()];
    let mut data = patterns.pooled.clone();
    for k in 0..patterns.len() {
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
                    && g.iter().all(|v| v.abs() < 1e-6 * (1.0 + ll.abs()))
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
    let patterns = Patterns::new(design);
    if patterns.is_empty() {
        return None;
    }
    let p = design.p();
    let mut best: Option<(Vec<f64>, f64, bool)> = None;
    for start in starts(family, &patterns, p) {
        let Some(found) = newton(family, model, &patterns, start) else {
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
    let (theta, loglik, mut converged) = best?;
    let n = theta.len();
    let info = information(family, model, &patterns, &theta);
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
