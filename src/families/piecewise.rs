//! Piecewise exponential family: a constant hazard `rate` on each interval between the cut
//! points given by `--cuts` (time in the data's unit), one parameter per interval named by it,
//! e.g. `rate[0,6)`, `rate[6,12)`, `rate[12,inf)`. Estimated as `ln_rate[…]`; the maximum
//! likelihood estimate is closed-form: events / time at risk in each interval.

use super::{check_positive, intern, leak_names, Family, FamilyOptions, FamilySettings, ParamUnit};
use crate::fit::FitData;

/// Piecewise-constant hazard; proportional-hazards (a hazard ratio scales every rate).
pub struct Piecewise {
    /// Cut points, ascending and positive; `None` until configured.
    cuts: Option<Vec<f64>>,
    /// `rate[a,b)` per interval.
    param_names: &'static [&'static str],
    /// `ln_rate[a,b)` per interval.
    estimation_names: &'static [&'static str],
}

/// What to tell a user who asked for `piecewise` without cut points.
const NEEDS_CUTS: &str =
    "family piecewise needs cut points: give --cuts, e.g. --cuts \"6 months,12 months\"";

/// Checks cut points are positive, finite and strictly increasing.
fn check_cuts(cuts: &[f64]) -> Result<(), String> {
    if cuts.is_empty() {
        return Err(NEEDS_CUTS.into());
    }
    for (i, c) in cuts.iter().enumerate() {
        if !(c.is_finite() && *c > 0.0) {
            return Err(format!("cut point {c} must be a positive time"));
        }
        if i > 0 && cuts[i - 1] >= *c {
            let texts = crate::format::readable_all(&[cuts[i - 1], *c]);
            return Err(format!(
                "cut points must increase: {} is followed by {}",
                texts[0], texts[1]
            ));
        }
    }
    Ok(())
}

impl Piecewise {
    /// The family before cut points are given (by name only); it fits nothing and says why.
    pub fn unconfigured() -> Piecewise {
        Piecewise {
            cuts: None,
            param_names: &[],
            estimation_names: &[],
        }
    }

    /// The (interned) piecewise family with these cut points (time unit of the curve).
    pub fn with_cuts(cuts: &[f64]) -> Result<&'static dyn Family, String> {
        check_cuts(cuts)?;
        let settings = FamilySettings {
            cuts: Some(cuts.to_vec()),
            ..FamilySettings::default()
        };
        Ok(intern("piecewise", Some(settings), || {
            // Readable bounds (a cut converted between units is not written 5.999999999999999).
            let bounds: Vec<String> = std::iter::once("0".to_string())
                .chain(crate::format::readable_all(cuts))
                .chain(std::iter::once("inf".to_string()))
                .collect();
            let names: Vec<String> = bounds
                .windows(2)
                .map(|w| format!("rate[{},{})", w[0], w[1]))
                .collect();
            let estimation = names.iter().map(|n| format!("ln_{n}")).collect();
            Box::new(Piecewise {
                cuts: Some(cuts.to_vec()),
                param_names: leak_names(names),
                estimation_names: leak_names(estimation),
            })
        }))
    }

    fn cuts(&self) -> &[f64] {
        self.cuts.as_deref().unwrap_or(&[])
    }

    /// Interval bounds [a_j, b_j) (the last one open-ended).
    fn bounds(&self, j: usize) -> (f64, f64) {
        let cuts = self.cuts();
        let a = if j == 0 { 0.0 } else { cuts[j - 1] };
        let b = cuts.get(j).copied().unwrap_or(f64::INFINITY);
        (a, b)
    }

    /// Index of the interval holding `t` (a time on a cut belongs to the later interval).
    fn interval(&self, t: f64) -> usize {
        self.cuts().partition_point(|c| *c <= t)
    }

    /// Events and time at risk per interval.
    fn events_and_exposure(&self, data: &FitData) -> (Vec<f64>, Vec<f64>) {
        let m = self.cuts().len() + 1;
        let mut events = vec![0.0; m];
        let mut exposure = vec![0.0; m];
        for i in 0..data.time.len() {
            let (t, d, n) = (data.time[i], data.events[i], data.total[i]);
            let k = self.interval(t);
            events[k] += d;
            for j in 0..=k {
                let (a, b) = self.bounds(j);
                exposure[j] += n * (t.min(b) - a);
            }
        }
        (events, exposure)
    }
}

impl Family for Piecewise {
    fn name(&self) -> &'static str {
        "piecewise"
    }
    fn param_names(&self) -> &'static [&'static str] {
        self.param_names
    }
    fn param_units(&self) -> Vec<ParamUnit> {
        vec![ParamUnit::PerTime; self.param_names.len()]
    }
    fn estimation_names(&self) -> &'static [&'static str] {
        self.estimation_names
    }
    fn to_natural(&self, theta: &[f64]) -> Vec<f64> {
        theta.iter().map(|x| x.exp()).collect()
    }
    fn to_estimation(&self, params: &[f64]) -> Vec<f64> {
        params.iter().map(|x| x.ln()).collect()
    }
    fn check_params(&self, params: &[f64]) -> Result<(), String> {
        if self.cuts.is_none() {
            return Err(NEEDS_CUTS.into());
        }
        for (name, value) in self.param_names.iter().zip(params) {
            check_positive(name, *value)?;
        }
        Ok(())
    }
    fn log_survival(&self, p: &[f64], t: f64) -> f64 {
        if self.cuts.is_none() {
            return f64::NAN;
        }
        if t <= 0.0 {
            return 0.0;
        }
        let k = self.interval(t);
        -(0..=k)
            .map(|j| {
                let (a, b) = self.bounds(j);
                p[j] * (t.min(b) - a)
            })
            .sum::<f64>()
    }
    fn log_hazard(&self, p: &[f64], t: f64) -> f64 {
        if self.cuts.is_none() {
            return f64::NAN;
        }
        p[self.interval(t)].ln()
    }
    fn quantile(&self, p: &[f64], prob: f64) -> f64 {
        if self.cuts.is_none() {
            return f64::NAN;
        }
        let target = -(-prob).ln_1p();
        let mut cumulative = 0.0;
        for (j, rate) in p.iter().enumerate() {
            let (a, b) = self.bounds(j);
            let step = rate * (b - a);
            if cumulative + step >= target {
                return a + (target - cumulative) / rate;
            }
            cumulative += step;
        }
        f64::INFINITY
    }
    fn rescale_time(&self, p: &[f64], factor: f64) -> Vec<f64> {
        p.iter().map(|r| r / factor).collect()
    }
    fn rescaled_family(&self, factor: f64) -> Option<&'static dyn Family> {
        let cuts: Vec<f64> = self.cuts().iter().map(|c| c * factor).collect();
        Piecewise::with_cuts(&cuts).ok()
    }
    fn proportional_hazards(&self) -> bool {
        true
    }
    fn accelerated_failure_time(&self) -> bool {
        false
    }
    fn start_values(&self, data: &FitData) -> Vec<Vec<f64>> {
        self.closed_form_mle(data).into_iter().collect()
    }
    fn closed_form_mle(&self, data: &FitData) -> Option<Vec<f64>> {
        self.cuts.as_ref()?;
        let (events, exposure) = self.events_and_exposure(data);
        Some(
            events
                .iter()
                .zip(&exposure)
                .map(|(d, e)| (d / e).ln())
                .collect(),
        )
    }
    fn loglik_grad(&self, theta: &[f64], data: &FitData) -> (f64, Vec<f64>) {
        if self.cuts.is_none() {
            return (f64::NAN, Vec::new());
        }
        // ln L = Σ_j D_j ln λ_j - λ_j T_j (full densities: ln h + ln S per event).
        let (events, exposure) = self.events_and_exposure(data);
        let mut ll = 0.0;
        let mut grad = Vec::with_capacity(theta.len());
        for j in 0..theta.len() {
            let rate = theta[j].exp();
            ll += events[j] * theta[j] - rate * exposure[j];
            grad.push(events[j] - rate * exposure[j]);
        }
        (ll, grad)
    }
    fn restricted_mean(&self, p: &[f64], horizon: f64) -> f64 {
        let mut log_s = 0.0f64;
        let mut total = 0.0;
        for (j, rate) in p.iter().enumerate() {
            let (a, b) = self.bounds(j);
            if a >= horizon {
                break;
            }
            let width = b.min(horizon) - a;
            // ∫ S(a)·e^(-λ(t-a)) dt over the interval = S(a)·width·(1 - e^(-λ·width))/(λ·width).
            let x = rate * width;
            let factor = if x.is_finite() {
                width * crate::numeric::expm1_over_x(-x)
            } else {
                1.0 / rate
            };
            total += log_s.exp() * factor;
            log_s -= x;
        }
        total
    }
    fn settings(&self) -> Option<FamilySettings> {
        self.cuts.as_ref().map(|c| FamilySettings {
            cuts: Some(c.clone()),
            ..FamilySettings::default()
        })
    }
    fn for_data(&self, data: &FitData) -> Result<Option<&'static dyn Family>, String> {
        if self.cuts.is_none() {
            return Err(NEEDS_CUTS.into());
        }
        let (events, _) = self.events_and_exposure(data);
        if let Some(j) = events.iter().position(|d| *d == 0.0) {
            return Err(format!(
                "no events in {}: the rate there cannot be estimated; move or remove cut points",
                &self.param_names[j]["rate".len()..]
            ));
        }
        Ok(None)
    }
    fn with_settings(&self, settings: &FamilySettings) -> Result<&'static dyn Family, String> {
        match settings {
            FamilySettings {
                cuts: Some(cuts),
                knots: None,
                scale: None,
            } => Piecewise::with_cuts(cuts),
            _ => Err("family piecewise takes cut points (cuts) and no other settings".into()),
        }
    }
    fn with_options(&self, options: &FamilyOptions) -> Result<&'static dyn Family, String> {
        match &options.cuts {
            Some(cuts) => Piecewise::with_cuts(cuts).map_err(|e| format!("--cuts: {e}")),
            None => Err(NEEDS_CUTS.into()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fit_family;
    use crate::input::Record;

    /// Invented records: times by inversion of a low-discrepancy sequence under a hazard of
    /// 0.05 before 6 and 0.12 after, censored at 20.
    fn records() -> Vec<Record> {
        let mut r: Vec<Record> = (0..300)
            .map(|i| {
                let u = ((i as f64 + 0.5) * 0.618_033_988_749_895).fract();
                let h = -(1.0 - u).ln();
                let t = if h < 0.3 {
                    h / 0.05
                } else {
                    6.0 + (h - 0.3) / 0.12
                };
                Record {
                    time: t.min(20.0),
                    event: t < 20.0,
                }
            })
            .collect();
        r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        r
    }

    #[test]
    fn mle_is_events_over_time_at_risk_in_each_interval() {
        // Closed form of the piecewise exponential MLE (common practice): counted here record
        // by record, independently of the family's own bookkeeping.
        let recs = records();
        let cuts = [6.0, 12.0];
        let family = Piecewise::with_cuts(&cuts).unwrap();
        let fit = fit_family(family, &FitData::from_records(&recs), None);
        assert!(fit.converged, "{:?}", fit.message);
        let edges = [0.0, 6.0, 12.0, f64::INFINITY];
        for (j, name) in family.param_names().iter().enumerate() {
            let (a, b) = (edges[j], edges[j + 1]);
            let events = recs
                .iter()
                .filter(|r| r.event && r.time >= a && r.time < b)
                .count() as f64;
            let at_risk: f64 = recs.iter().map(|r| (r.time.min(b) - a).max(0.0)).sum();
            let expected = events / at_risk;
            assert!(
                (fit.params[*name] - expected).abs() < 1e-12 * expected,
                "{name}: {} vs {expected}",
                fit.params[*name]
            );
        }
        assert_eq!(
            family.param_names(),
            &["rate[0,6)", "rate[6,12)", "rate[12,inf)"]
        );
        // Observed information of ln λ_j is D_j, so SE(ln λ_j) = 1/√D_j (common practice).
        let cov = fit.covariance.unwrap().matrix;
        let d0 = recs.iter().filter(|r| r.event && r.time < 6.0).count() as f64;
        assert!((cov[0][0] - 1.0 / d0).abs() < 1e-6 / d0);
    }

    #[test]
    fn curve_functions_agree_with_each_other() {
        let family = Piecewise::with_cuts(&[6.0, 12.0]).unwrap();
        let p = [0.05, 0.12, 0.02];
        // S(9) = exp(-(0.05·6 + 0.12·3)) by hand.
        assert!((family.log_survival(&p, 9.0) + 0.66).abs() < 1e-14);
        assert_eq!(family.log_hazard(&p, 6.0), 0.12f64.ln());
        for prob in [0.1, 0.3, 0.6, 0.95] {
            let t = family.quantile(&p, prob);
            assert!(
                (family.survival(&p, t) - (1.0 - prob)).abs() < 1e-13,
                "{prob}"
            );
        }
        let rm = family.restricted_mean(&p, 30.0);
        let quad = crate::numeric::integrate(|t| family.survival(&p, t), 0.0, 30.0, 1e-12);
        assert!((rm - quad).abs() < 1e-8, "{rm} vs {quad}");
        // A new time unit moves the cut points with the rates.
        let q = family.rescale_time(&p, 7.0);
        let g = family.rescaled_family(7.0).unwrap();
        assert_eq!(g.settings().unwrap().cuts.unwrap(), vec![42.0, 84.0]);
        for t in [1.0, 6.5, 13.0, 40.0] {
            assert!((family.log_survival(&p, t) - g.log_survival(&q, 7.0 * t)).abs() < 1e-13);
        }
    }

    #[test]
    fn settings_round_trip_and_errors_are_clear() {
        let family = Piecewise::with_cuts(&[3.0]).unwrap();
        let again = crate::families::configured("piecewise", family.settings().as_ref()).unwrap();
        assert!(std::ptr::addr_eq(family, again), "interned once");
        let bare = crate::families::by_name("piecewise").unwrap();
        assert!(bare.check_params(&[]).unwrap_err().contains("--cuts"));
        assert!(Piecewise::with_cuts(&[5.0, 2.0])
            .err()
            .unwrap()
            .contains("must increase"));
        let late = Piecewise::with_cuts(&[50.0]).unwrap();
        let err = late
            .for_data(&FitData::from_records(&records()))
            .err()
            .unwrap();
        assert!(err.contains("no events in [50,inf)"), "{err}");
    }
}
