//! Royston–Parmar spline families (Royston and Parmar, 2002): a natural cubic spline s(x) in
//! x = ln t for the log cumulative hazard (`spline-ph-K`: S = exp(-e^s)), the log
//! cumulative odds (`spline-po-K`: S = 1/(1 + e^s)) or the probit (`spline-probit-K`:
//! S = 1 - Φ(s)), with K = 0–3 internal knots. Parameters `c0` … `c{K+1}` (estimated
//! as they are); knots are settings, recorded in the fit file as times.
//!
//! Basis (Royston and Parmar, 2002, eq. 2): 1, x, and for each internal knot k_j,
//! v_j(x) = (x - k_j)³₊ - λ_j (x - k_min)³₊ - (1 - λ_j)(x - k_max)³₊ with
//! λ_j = (k_max - k_j)/(k_max - k_min); linear beyond the boundary knots. Default knots: the
//! boundary knots at the smallest and largest uncensored log times, internal knots at equally
//! spaced centiles of the uncensored log times (linear interpolation between order statistics).
//! With 0 knots the three scales are the Weibull, log-logistic and log-normal.
//!
//! Survival must fall: s must increase in x everywhere. [`Family::check_params`] checks the
//! slope exactly (it is quadratic between knots, constant outside) and rejects any parameter
//! set where it is not positive, naming the time where survival would rise.

use super::{intern, quantile_by_bisection, Family, FamilyOptions, FamilySettings, ParamUnit};
use crate::fit::{sum_terms, FitData, SecondOrder};
use crate::numeric::LN_SQRT_2PI;
use crate::numeric::{inverse_mills, log_normal_sf, logistic, normal_quantile, softplus};

/// The scale on which the spline models the curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SplineScale {
    /// ln H(t) = s(ln t): proportional hazards (`ph`).
    ProportionalHazards,
    /// ln((1 - S)/S) = s(ln t): proportional odds (`po`).
    ProportionalOdds,
    /// Φ⁻¹(1 - S) = s(ln t): probit (`probit`).
    Probit,
}

impl SplineScale {
    fn word(self) -> &'static str {
        match self {
            SplineScale::ProportionalHazards => "ph",
            SplineScale::ProportionalOdds => "po",
            SplineScale::Probit => "probit",
        }
    }

    /// (ln S, d ln S/ds, ln g, d ln g/ds) at s, where g = -dS/ds.
    #[inline]
    fn terms(self, s: f64) -> (f64, f64, f64, f64) {
        match self {
            SplineScale::ProportionalHazards => {
                let e = s.exp();
                (-e, -e, s - e, 1.0 - e)
            }
            SplineScale::ProportionalOdds => {
                let sp = softplus(s);
                let p = logistic(s);
                (-sp, -p, s - 2.0 * sp, 1.0 - 2.0 * p)
            }
            SplineScale::Probit => (
                log_normal_sf(s),
                -inverse_mills(s),
                -0.5 * s * s - LN_SQRT_2PI,
                -s,
            ),
        }
    }

    /// (d² ln S/ds², d² ln g/ds²) at s given `dlog_s` = d ln S/ds from [`Self::terms`]
    /// (no transcendental of its own): ph −e^s twice; po −p(1 − p) and −2p(1 − p) with p the
    /// logistic; probit −m(m − s) and −1 with m the inverse Mills ratio.
    #[inline]
    fn second(self, s: f64, dlog_s: f64) -> (f64, f64) {
        match self {
            SplineScale::ProportionalHazards => (dlog_s, dlog_s),
            SplineScale::ProportionalOdds => {
                let p = -dlog_s;
                let v = p * (1.0 - p);
                (-v, -2.0 * v)
            }
            SplineScale::Probit => {
                let m = -dlog_s;
                (-m * (m - s), -1.0)
            }
        }
    }

    /// The transform of S that the spline models, for starting values from Kaplan–Meier.
    fn link(self, survival: f64) -> f64 {
        match self {
            SplineScale::ProportionalHazards => (-survival.ln()).ln(),
            SplineScale::ProportionalOdds => ((1.0 - survival) / survival).ln(),
            SplineScale::Probit => normal_quantile(1.0 - survival),
        }
    }
}

/// Parameter names, of which a spline with K internal knots uses the first K + 2.
const COEFFICIENT_NAMES: [&str; 5] = ["c0", "c1", "c2", "c3", "c4"];

/// A Royston–Parmar spline family; unconfigured until its knots are placed.
pub struct Spline {
    scale: SplineScale,
    internal: usize,
    name: &'static str,
    /// All knots in ln t (boundary first and last), once placed.
    knots: Option<Vec<f64>>,
    /// The same knots as the times they were given as (recorded exactly in the fit file).
    knot_times: Vec<f64>,
    /// Internal knots in ln t from `--knots`, the boundary knots still to come from the data.
    fixed_internal: Option<Vec<f64>>,
}

/// Spline basis (value and derivative in x) at x for the given ln-time knots; entries past
/// K + 2 stay zero.
#[inline]
fn basis(knots: &[f64], x: f64) -> ([f64; 5], [f64; 5]) {
    let mut b = [0.0; 5];
    let mut db = [0.0; 5];
    b[0] = 1.0;
    b[1] = x;
    db[1] = 1.0;
    let (k_min, k_max) = (knots[0], knots[knots.len() - 1]);
    let cube = |u: f64| if u > 0.0 { u * u * u } else { 0.0 };
    let square = |u: f64| if u > 0.0 { u * u } else { 0.0 };
    for j in 1..knots.len() - 1 {
        let lambda = (k_max - knots[j]) / (k_max - k_min);
        b[j + 1] = cube(x - knots[j]) - lambda * cube(x - k_min) - (1.0 - lambda) * cube(x - k_max);
        db[j + 1] = 3.0
            * (square(x - knots[j])
                - lambda * square(x - k_min)
                - (1.0 - lambda) * square(x - k_max));
    }
    (b, db)
}

/// Log-likelihood, gradient and, when `SECOND`, the Hessian's upper triangle (row by row,
/// after the 5 gradient slots; zeros otherwise) in one pass, so both trait methods share one
/// loop. With s = γ·b and s' = γ·b', a record adds (c·ln S' + d·ln g')·b + (d/s')·b' to the
/// gradient and (c·ln S'' + d·ln g'')·b bᵀ − (d/s'²)·b' b'ᵀ to the Hessian: no transcendental
/// function beyond the gradient's, so Newton takes exact steps at one pass each.
fn sums<const SECOND: bool>(
    knots: &[f64],
    scale: SplineScale,
    theta: &[f64],
    data: &FitData,
) -> (f64, [f64; 20]) {
    let k = theta.len();
    let mut gamma = [0.0; 5];
    gamma[..k].copy_from_slice(theta);
    sum_terms::<20>(data, |_t, x, d, n| {
        let (b, db) = basis(knots, x);
        let s = dot(&gamma, &b);
        let (log_s, dlog_s, log_g, dlog_g) = scale.terms(s);
        let c = n - d;
        let mut ll = c * log_s;
        let mut wb = c * dlog_s;
        let (d2log_s, d2log_g) = if SECOND {
            scale.second(s, dlog_s)
        } else {
            (0.0, 0.0)
        };
        let mut hb = c * d2log_s;
        let (mut wdb, mut hdb) = (0.0, 0.0);
        if d > 0.0 {
            let ds = dot(&gamma, &db);
            // ln f = ln g(s) + ln s'(x) - ln t; a non-positive slope has no density.
            ll += if ds > 0.0 {
                d * (log_g + ds.ln() - x)
            } else {
                f64::NEG_INFINITY
            };
            wb += d * dlog_g;
            wdb = d / ds;
            hb += d * d2log_g;
            hdb = -wdb / ds;
        }
        let mut out = [0.0; 20];
        let mut at = 5;
        for i in 0..k {
            out[i] = wb * b[i] + wdb * db[i];
            if SECOND {
                for j in i..k {
                    out[at] = hb * b[i] * b[j] + hdb * db[i] * db[j];
                    at += 1;
                }
            }
        }
        (ll, out)
    })
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Centile `p` of sorted values by linear interpolation between order statistics.
fn centile(sorted: &[f64], p: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

impl Spline {
    /// The unconfigured family `spline-SCALE-K` (name as in [`super::FLEXIBLE_NAMES`]).
    pub fn unconfigured(scale: SplineScale, internal: usize, name: &'static str) -> Spline {
        Spline {
            scale,
            internal,
            name,
            knots: None,
            knot_times: Vec::new(),
            fixed_internal: None,
        }
    }

    /// The interned family with all knots given as times (ascending, boundary first and last).
    fn with_knot_times(&self, times: &[f64]) -> Result<&'static dyn Family, String> {
        if times.len() != self.internal + 2 {
            return Err(format!(
                "{} needs {} knots (2 boundary and {} internal), got {}",
                self.name,
                self.internal + 2,
                self.internal,
                times.len()
            ));
        }
        check_increasing(times)?;
        let settings = FamilySettings {
            scale: Some(self.scale.word().into()),
            knots: Some(times.to_vec()),
            cuts: None,
        };
        let (scale, internal, name) = (self.scale, self.internal, self.name);
        let knots: Vec<f64> = times.iter().map(|t| t.ln()).collect();
        let knot_times = times.to_vec();
        Ok(intern(name, Some(settings), || {
            Box::new(Spline {
                scale,
                internal,
                name,
                knots: Some(knots),
                knot_times,
                fixed_internal: None,
            })
        }))
    }

    fn knots(&self) -> &[f64] {
        self.knots.as_deref().unwrap_or(&[])
    }

    /// s(x) and s'(x).
    #[inline]
    fn spline(&self, gamma: &[f64], x: f64) -> (f64, f64) {
        let (b, db) = basis(self.knots(), x);
        (dot(gamma, &b), dot(gamma, &db))
    }

    /// Smallest slope s'(x) over the whole line and where it occurs (exact: s' is constant
    /// outside the boundary knots and quadratic between knots).
    fn smallest_slope(&self, gamma: &[f64]) -> (f64, f64) {
        let knots = self.knots();
        let mut best = (gamma[1], knots[0]);
        for w in knots.windows(2) {
            let (a, b) = (w[0], w[1]);
            let m = 0.5 * (a + b);
            let (p0, p1, p2) = (
                self.spline(gamma, a).1,
                self.spline(gamma, m).1,
                self.spline(gamma, b).1,
            );
            let mut candidates = vec![(p0, a), (p2, b)];
            let curvature = p0 - 2.0 * p1 + p2;
            if curvature > 0.0 {
                let u = -(p2 - p0) / (2.0 * curvature);
                if u.abs() < 1.0 {
                    let x = m + u * 0.5 * (b - a);
                    candidates.push((self.spline(gamma, x).1, x));
                }
            }
            for c in candidates {
                if c.0 < best.0 {
                    best = c;
                }
            }
        }
        best
    }
}

/// Checks knot times are positive, finite and strictly increasing.
fn check_increasing(times: &[f64]) -> Result<(), String> {
    for (i, t) in times.iter().enumerate() {
        if !(t.is_finite() && *t > 0.0) {
            return Err(format!("knot {t} must be a positive time"));
        }
        if i > 0 && times[i - 1] >= *t {
            let texts = crate::format::readable_all(&[times[i - 1], *t]);
            return Err(format!(
                "knots must increase: {} is followed by {}",
                texts[0], texts[1]
            ));
        }
    }
    Ok(())
}

/// What to tell a user who evaluates a spline whose knots were never placed.
fn needs_knots(name: &str) -> String {
    format!("family {name} has no knots: fit it to data, or take it from its fit file")
}

impl Family for Spline {
    fn name(&self) -> &'static str {
        self.name
    }
    fn param_names(&self) -> &'static [&'static str] {
        &COEFFICIENT_NAMES[..self.internal + 2]
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        // s(ln t) = c0 + c1·ln t + …: c0 moves with the time unit (c0' = c0 - c1·ln factor),
        // the others do not (the basis depends on differences of ln t only).
        let mut units = vec![ParamUnit::LogTimeIntercept];
        units.extend(vec![ParamUnit::Unitless; self.internal + 1]);
        units
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        &COEFFICIENT_NAMES[..self.internal + 2]
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        theta.to_vec()
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        params.to_vec()
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        if self.knots.is_none() {
            return Err(needs_knots(self.name));
        }
        for (name, value) in self.param_names().iter().zip(params) {
            super::check_finite(name, *value)?;
        }
        let (slope, x) = self.smallest_slope(params);
        if slope > 0.0 {
            Ok(())
        } else {
            Err(format!(
                "{}: survival would rise near t = {:.6e} (the spline's slope in ln t is {slope:.3e} there, and must be positive); parameters rejected",
                self.name,
                x.exp()
            ))
        }
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if self.knots.is_none() {
            return f64::NAN;
        }
        if t <= 0.0 {
            return 0.0;
        }
        self.scale.terms(self.spline(p, t.ln()).0).0
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        self.log_density(p, t) - self.log_survival(p, t)
    }
    fn log_density(&self, p: &[f64], t: f64) -> f64 {
        if self.knots.is_none() {
            return f64::NAN;
        }
        let x = t.ln();
        let (s, ds) = self.spline(p, x);
        self.scale.terms(s).2 + ds.ln() - x
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        if self.knots.is_none() {
            return f64::NAN;
        }
        quantile_by_bisection(|t| self.log_survival(p, t), prob)
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        // s(x) with knots k equals s'(x + c) with knots k + c when c0' = c0 - c1·c.
        let mut q = p.to_vec();
        q[0] -= p[1] * factor.ln();
        q
    }
    fn rescaled_family(&self, factor: f64) -> Option<&'static dyn Family> {
        let times: Vec<f64> = self.knot_times.iter().map(|t| t * factor).collect();
        self.with_knot_times(&times).ok()
    }
    fn proportional_hazards(&self) -> bool {
        // A hazard ratio adds ln HR to c0 on the hazard scale.
        self.scale == SplineScale::ProportionalHazards
    }
    fn accelerated_failure_time(&self) -> bool {
        false
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        let k = self.internal + 2;
        let mut starts = Vec::new();
        let scale = self.scale;
        if let Some((slope, intercept)) = data.km_line(|s| scale.link(s)) {
            if slope > 0.0 {
                let mut start = vec![0.0; k];
                start[0] = intercept;
                start[1] = slope;
                starts.push(start);
            }
        }
        let (mean, sd) = data.event_log_time_moments();
        let mut start = vec![0.0; k];
        start[1] = 1.0 / sd;
        start[0] = -mean / sd;
        starts.push(start);
        starts
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        let Some(knots) = self.knots.as_deref() else {
            return (f64::NAN, vec![0.0; theta.len()]);
        };
        let (ll, s) = sums::<false>(knots, self.scale, theta, data);
        (ll, s[..theta.len()].to_vec())
    }
    fn loglik_grad_hessian(&self, theta: &[f64], data: &FitData) -> Option<SecondOrder> {
        let k = theta.len();
        let (ll, s) = sums::<true>(self.knots.as_deref()?, self.scale, theta, data);
        let mut hessian = vec![vec![0.0; k]; k];
        let mut at = 5;
        for i in 0..k {
            for j in i..k {
                hessian[i][j] = s[at];
                hessian[j][i] = s[at];
                at += 1;
            }
        }
        Some(SecondOrder {
            loglik: ll,
            grad: s[..k].to_vec(),
            hessian,
            exact: k,
        })
    }
    fn settings(&self) -> Option<FamilySettings> {
        self.knots.as_ref().map(|_| FamilySettings {
            scale: Some(self.scale.word().into()),
            knots: Some(self.knot_times.clone()),
            cuts: None,
        })
    }
    fn for_data(&self, data: &FitData) -> Result<Option<&'static dyn Family>, String> {
        if self.knots.is_some() {
            return Ok(None);
        }
        let mut log_times: Vec<f64> = Vec::new();
        for (x, d) in data.ln_time.iter().zip(&data.events) {
            for _ in 0..(*d as usize) {
                log_times.push(*x);
            }
        }
        let (Some(&first), Some(&last)) = (log_times.first(), log_times.last()) else {
            return Err(format!("{}: no events to place knots at", self.name));
        };
        if first >= last {
            return Err(format!(
                "{}: all events are at one time, so there is no range for the knots",
                self.name
            ));
        }
        let internal: Vec<f64> = match &self.fixed_internal {
            Some(fixed) => {
                if fixed.iter().any(|x| *x <= first || *x >= last) {
                    return Err(format!(
                        "{}: internal knots must lie strictly between the first and last event times ({} and {})",
                        self.name,
                        first.exp(),
                        last.exp()
                    ));
                }
                fixed.clone()
            }
            None => (1..=self.internal)
                .map(|j| centile(&log_times, j as f64 / (self.internal + 1) as f64))
                .collect(),
        };
        let mut knots = vec![first];
        knots.extend(internal);
        knots.push(last);
        // Recorded as times, so the fitted family is exactly the one rebuilt from the file.
        let times: Vec<f64> = knots.iter().map(|x| x.exp()).collect();
        self.with_knot_times(&times)
            .map(Some)
            .map_err(|e| format!("{e} (tied event times leave too few distinct knots; use fewer)"))
    }
    fn with_settings(&self, settings: &FamilySettings) -> Result<&'static dyn Family, String> {
        match settings {
            FamilySettings {
                scale: Some(scale),
                knots: Some(knots),
                cuts: None,
            } if scale == self.scale.word() => self.with_knot_times(knots),
            _ => Err(format!(
                "family {} takes scale \"{}\" and its knots as settings",
                self.name,
                self.scale.word()
            )),
        }
    }
    fn with_options(&self, options: &FamilyOptions) -> Result<&'static dyn Family, String> {
        let Some(times) = &options.knots else {
            return super::by_name(self.name);
        };
        let k = self.internal;
        if times.len() == k + 2 {
            return self
                .with_knot_times(times)
                .map_err(|e| format!("--knots: {e}"));
        }
        if times.len() != k {
            return Err(format!(
                "--knots: {} takes {k} internal knots, or {} with the boundary knots; {} given",
                self.name,
                k + 2,
                times.len()
            ));
        }
        check_increasing(times).map_err(|e| format!("--knots: {e}"))?;
        let key = FamilySettings {
            scale: Some(format!("{} (internal knots only)", self.scale.word())),
            knots: Some(times.clone()),
            cuts: None,
        };
        let (scale, internal, name) = (self.scale, self.internal, self.name);
        let fixed: Vec<f64> = times.iter().map(|t| t.ln()).collect();
        Ok(intern(name, Some(key), || {
            Box::new(Spline {
                scale,
                internal,
                name,
                knots: None,
                knot_times: Vec::new(),
                fixed_internal: Some(fixed),
            })
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::{by_name, configured, LogLogistic, LogNormal, Weibull};
    use crate::fit::fit_family;
    use crate::input::Record;

    /// Invented records: Weibull(1.3, 15) times by inversion of a low-discrepancy sequence,
    /// with a hazard bump after 10, censored at 35.
    fn records(n: usize) -> Vec<Record> {
        let mut r: Vec<Record> = (0..n)
            .map(|i| {
                let u = ((i as f64 + 0.5) * 0.618_033_988_749_895).fract();
                let h = -(1.0 - u).ln();
                let t = 15.0 * h.powf(1.0 / 1.3);
                let t = if t > 10.0 { 10.0 + 0.6 * (t - 10.0) } else { t };
                Record {
                    time: t.min(35.0),
                    event: t < 35.0,
                }
            })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
    }

    fn fitted(name: &str, data: &FitData) -> crate::fit::FamilyFit {
        converged(name, data).1
    }

    /// The family `name` with knots placed on `data`, and its fit, asserted converged.
    fn converged(name: &str, data: &FitData) -> (&'static dyn Family, crate::fit::FamilyFit) {
        let family = by_name(name).unwrap().for_data(data).unwrap().unwrap();
        let fit = fit_family(family, data, None);
        assert!(fit.converged, "{name}: {:?}", fit.message);
        (family, fit)
    }

    #[test]
    fn zero_knots_reproduce_weibull_loglogistic_lognormal() {
        // Royston and Parmar (2002), section 2: with no internal knots the ph, po and
        // probit scales are the Weibull, log-logistic and log-normal models.
        let data = FitData::from_records(&records(400));
        for (spline, plain) in [
            ("spline-ph-0", &Weibull as &dyn Family),
            ("spline-po-0", &LogLogistic),
            ("spline-probit-0", &LogNormal),
        ] {
            let a = fitted(spline, &data);
            let b = fit_family(plain, &data, None);
            assert!(a.converged && b.converged, "{spline}: {:?}", a.message);
            let (la, lb) = (a.loglik.unwrap(), b.loglik.unwrap());
            assert!((la - lb).abs() < 1e-6, "{spline}: {la} vs {lb}");
        }
    }

    #[test]
    fn gradient_matches_differences_on_every_scale() {
        let data = FitData::from_records(&records(150));
        for name in ["spline-ph-3", "spline-po-2", "spline-probit-1"] {
            let (family, fit) = converged(name, &data);
            let theta: Vec<f64> = fit.estimates.iter().map(|x| x * 1.01 + 0.001).collect();
            crate::fit::assert_gradient_matches_differences(family, &theta, &data, 1e-5);
        }
    }

    #[test]
    fn large_data_covariance_is_the_inverse_of_the_differenced_information() {
        // Above 60,000 distinct times the fit takes Newton steps with the analytic Hessian on
        // the full data; the information its covariance implies (the covariance inverted back)
        // must match central differences of the gradient at the same estimates, with steps of
        // a thousandth of a standard error, to 1e-5 of each entry's scale (common practice:
        // two schemes agreeing). Compared as information, not covariance: the spline basis is
        // strongly collinear, so covariance entries magnify the differences' own error.
        let data = FitData::from_records(&records(100_000));
        for name in ["spline-ph-2", "spline-po-1", "spline-probit-2"] {
            let (family, fit) = converged(name, &data);
            let covariance = &fit.covariance.as_ref().unwrap().matrix;
            let implied = crate::numeric::invert_positive_definite(covariance).unwrap();
            let k = covariance.len();
            let mut central = vec![vec![0.0; k]; k];
            for j in 0..k {
                let h = 1e-3 * covariance[j][j].sqrt();
                let (mut up, mut down) = (fit.estimates.clone(), fit.estimates.clone());
                up[j] += h;
                down[j] -= h;
                let (gu, gd) = (
                    family.loglik_grad(&up, &data).1,
                    family.loglik_grad(&down, &data).1,
                );
                for i in 0..k {
                    central[i][j] = -(gu[i] - gd[i]) / (2.0 * h);
                }
            }
            for i in 0..k {
                for j in 0..k {
                    let scale = (central[i][i] * central[j][j]).sqrt();
                    assert!(
                        (implied[i][j] - central[i][j]).abs() <= 1e-5 * scale,
                        "{name} [{i}][{j}]: {} vs {}",
                        implied[i][j],
                        central[i][j]
                    );
                }
            }
        }
    }

    #[test]
    fn hessian_matches_differences_of_the_gradient_on_every_scale() {
        // The analytic Hessian against central differences of the analytic gradient (which the
        // test above ties to the log-likelihood), at the estimates and away from them on every
        // scale and knot count; the probit also far in its upper tail, where the inverse Mills
        // ratio approaches s.
        let data = FitData::from_records(&records(150));
        for name in [
            "spline-ph-3",
            "spline-po-2",
            "spline-probit-1",
            "spline-ph-0",
            "spline-po-1",
            "spline-probit-3",
        ] {
            let (family, fit) = converged(name, &data);
            for (scale, shift) in [(1.0, 0.0), (1.01, 0.001), (1.0, 4.0)] {
                let mut theta: Vec<f64> = fit.estimates.iter().map(|x| x * scale).collect();
                theta[0] += shift;
                let second = family.loglik_grad_hessian(&theta, &data).unwrap();
                let (ll, grad) = family.loglik_grad(&theta, &data);
                assert!((second.loglik - ll).abs() <= 1e-12 * ll.abs(), "{name}");
                for (a, b) in second.grad.iter().zip(&grad) {
                    assert!(
                        (a - b).abs() <= 1e-12 * b.abs().max(1.0),
                        "{name}: {a} vs {b}"
                    );
                }
                let central = crate::fit::hessian(family, &theta, &data);
                assert_eq!(second.exact, theta.len());
                for i in 0..theta.len() {
                    for j in 0..theta.len() {
                        let (a, b) = (second.hessian[i][j], central[i][j]);
                        assert!(
                            (a - b).abs() <= 1e-5 * b.abs().max(1.0),
                            "{name} at {theta:?} [{i}][{j}]: {a} vs {b}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn knots_sit_at_centiles_of_event_log_times_and_round_trip() {
        let recs = records(400);
        let data = FitData::from_records(&recs);
        let fit = fitted("spline-ph-3", &data);
        let knots = fit.settings.as_ref().unwrap().knots.clone().unwrap();
        let mut logs: Vec<f64> = recs
            .iter()
            .filter(|r| r.event)
            .map(|r| r.time.ln())
            .collect();
        logs.sort_by(f64::total_cmp);
        // Centiles by linear interpolation between order statistics (common practice; the
        // default of numpy.quantile), computed here directly.
        let n = logs.len() as f64;
        for (j, p) in [(1, 0.25), (2, 0.5), (3, 0.75)] {
            let h = (n - 1.0) * p;
            let lo = h.floor() as usize;
            let expected = logs[lo] + (h - lo as f64) * (logs[lo + 1] - logs[lo]);
            assert!((knots[j].ln() - expected).abs() < 1e-12, "knot {j}");
        }
        assert!((knots[0] - logs[0].exp()).abs() < 1e-12);
        assert!((knots[4] - logs[logs.len() - 1].exp()).abs() < 1e-12 * knots[4]);
        // The family rebuilt from the recorded settings is the very same instance.
        let rebuilt = configured("spline-ph-3", fit.settings.as_ref()).unwrap();
        let original = by_name("spline-ph-3")
            .unwrap()
            .for_data(&data)
            .unwrap()
            .unwrap();
        assert!(std::ptr::addr_eq(rebuilt, original));
        // And moves its knots with the time unit.
        let params = fit.param_vector(rebuilt).unwrap();
        let other = rebuilt.rescaled_family(12.0).unwrap();
        let q = rebuilt.rescale_time(&params, 12.0);
        for t in [0.5, 4.0, 20.0, 80.0] {
            let (a, b) = (
                rebuilt.log_survival(&params, t),
                other.log_survival(&q, 12.0 * t),
            );
            assert!((a - b).abs() < 1e-12 * a.abs().max(1.0), "{t}: {a} vs {b}");
        }
    }

    #[test]
    fn non_monotone_survival_is_rejected_with_the_time() {
        let data = FitData::from_records(&records(200));
        let family = by_name("spline-ph-1")
            .unwrap()
            .for_data(&data)
            .unwrap()
            .unwrap();
        let knots = family.settings().unwrap().knots.unwrap();
        let (lo, hi) = (knots[0].ln() - 2.0, knots[2].ln() + 2.0);
        // The exact check agrees with a dense grid of differenced log survival, which falls
        // (ln S decreasing in x) exactly where the spline increases.
        let mut rejected = 0;
        for g2 in [-4.0, -1.0, -0.2, -0.02, 0.0, 0.02, 0.2, 1.0, 4.0] {
            let p = [-3.0, 1.0, g2];
            let grid_ok = (0..4000).all(|i| {
                let x = lo + (hi - lo) * i as f64 / 4000.0;
                let before = family.log_survival(&p, (x - 1e-6).exp());
                let after = family.log_survival(&p, (x + 1e-6).exp());
                after < before
            });
            match family.check_params(&p) {
                Ok(()) => assert!(grid_ok, "c2 = {g2} accepted but not monotone"),
                Err(e) => {
                    assert!(!grid_ok, "c2 = {g2} rejected but monotone: {e}");
                    assert!(e.contains("survival would rise near t ="), "{e}");
                    rejected += 1;
                }
            }
        }
        assert!(rejected > 0, "no parameter set was rejected");
        assert!(family.check_params(&[-3.0, -0.5, 0.0]).is_err());
        let bare = by_name("spline-po-2").unwrap();
        assert!(bare
            .check_params(&[0.0; 4])
            .unwrap_err()
            .contains("no knots"));
    }

    #[test]
    fn curve_functions_agree_with_each_other() {
        let data = FitData::from_records(&records(300));
        for name in ["spline-ph-2", "spline-po-3", "spline-probit-2"] {
            let fit = fitted(name, &data);
            let family = fit.family().unwrap();
            let p = fit.param_vector(family).unwrap();
            family.check_params(&p).unwrap();
            for t in [0.3, 2.0, 9.0, 30.0, 200.0] {
                let h = 1e-5 * t;
                let numeric = (family.cumulative_hazard(&p, t + h)
                    - family.cumulative_hazard(&p, t - h))
                    / (2.0 * h);
                let analytic = family.hazard(&p, t);
                assert!((numeric - analytic).abs() < 1e-6 * analytic, "{name} {t}");
                let s = family.survival(&p, t);
                if s > 1e-6 && s < 1.0 - 1e-6 {
                    let back = family.quantile(&p, 1.0 - s);
                    assert!(
                        (back - t).abs() < 1e-8 * t,
                        "{name} quantile at {t}: {back}"
                    );
                }
            }
        }
    }
}
