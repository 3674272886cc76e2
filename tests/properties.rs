//! Property tests (proptest) for the fitter and the families: the fitted log-likelihood is
//! never below the log-likelihood at any starting value; survival is non-increasing and in
//! [0, 1]; the quantile inverts the distribution function, quantile(1 - S(t)) = t. These are
//! definitions of a maximum and of a survival function (common practice), not values.

use proptest::prelude::*;
use tunnelcast::families;
use tunnelcast::fit::{fit_family, FitData};
use tunnelcast::input::Record;

/// Small right-censored data sets: 3 to 60 subjects, times in (0.01, 100), at least one event.
fn data_sets() -> impl Strategy<Value = Vec<Record>> {
    prop::collection::vec((0.01f64..100.0, any::<bool>()), 3..60).prop_map(|pairs| {
        let mut records: Vec<Record> = pairs
            .into_iter()
            .map(|(time, event)| Record { time, event })
            .collect();
        records[0].event = true;
        records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        records
    })
}

/// Natural parameters inside each family's range, wide enough to reach the tails.
fn family_and_params() -> impl Strategy<Value = (&'static str, Vec<f64>)> {
    prop_oneof![
        (1e-4f64..10.0).prop_map(|r| ("exponential", vec![r])),
        (0.1f64..8.0, 0.01f64..500.0).prop_map(|(k, s)| ("weibull", vec![k, s])),
        (-3.0f64..7.0, 0.05f64..4.0).prop_map(|(m, s)| ("lognormal", vec![m, s])),
        (0.1f64..8.0, 0.01f64..500.0).prop_map(|(k, s)| ("loglogistic", vec![k, s])),
        (-2.0f64..2.0, 1e-4f64..2.0).prop_map(|(g, r)| ("gompertz", vec![g, r])),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn fitted_loglik_is_never_below_any_start(records in data_sets()) {
        let data = FitData::from_records(&records);
        for family in families::all() {
            let fit = fit_family(family, &data, None);
            let best = fit.loglik.unwrap_or(f64::NEG_INFINITY);
            for start in family.start_values(&data) {
                let (at_start, _) = family.loglik_grad(&start, &data);
                if at_start.is_finite() {
                    prop_assert!(
                        best >= at_start - 1e-9 * at_start.abs(),
                        "{}: fitted {best} below start {at_start} at {start:?}",
                        family.name()
                    );
                }
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn survival_is_non_increasing_and_in_unit_interval(
        (name, params) in family_and_params(),
        times in prop::collection::vec(0.0f64..1e4, 2..40),
    ) {
        let family = families::by_name(name).unwrap();
        let mut times = times;
        times.sort_by(f64::total_cmp);
        let mut last = 1.0;
        for t in times {
            let s = family.survival(&params, t);
            prop_assert!((0.0..=1.0).contains(&s), "{} {params:?}: S({t}) = {s}", family.name());
            prop_assert!(s <= last, "{} {params:?}: S rises at {t}: {s} > {last}", family.name());
            last = s;
        }
    }

    #[test]
    fn quantile_inverts_the_distribution_function(
        (name, params) in family_and_params(),
        t in 1e-3f64..1e3,
    ) {
        let family = families::by_name(name).unwrap();
        let s = family.survival(&params, t);
        // Only where S(t) is well away from 0 and 1 is t determined by S(t) to working precision.
        prop_assume!(s > 1e-6 && s < 1.0 - 1e-6);
        let back = family.quantile(&params, 1.0 - s);
        // Relative error in t is the relative error in 1 - S magnified by the flatness of the
        // curve: |dt| = |d(1 - S)| / f(t); allow 1e-12 relative in 1 - S.
        let density = family.log_density(&params, t).exp();
        let allowed = 1e-9 * t + 1e-12 * (1.0 - s).max(s) / density;
        // Where the curve is flat to working precision (a Gompertz plateau), t is not
        // determined by S(t); there the round trip is checked in survival instead.
        let flat = (family.survival(&params, back) - s).abs() <= 1e-12;
        prop_assert!(
            (back - t).abs() <= allowed || flat,
            "{} {params:?}: quantile(1 - S({t})) = {back} (allowed {allowed})",
            family.name()
        );
    }
}
