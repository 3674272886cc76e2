//! The extrapolation against the general population of the same age (and sex): the first time
//! after follow-up at which a fit's hazard falls below the population's, and the population's
//! survival from the age at entry for the plot.
//!
//! The population hazard is constant within each year of age at −ln(1 − qx) (common practice,
//! as for background mortality), so the search runs year of age by year of age: within one,
//! the population hazard is a constant c and the crossing is where the fit's hazard first
//! drops below c, found on a grid of at most 0.05 years and refined by bisection to 1e-12 years.

use crate::adjust::background::BackgroundHazard;

/// Grid step of the search, years (a crossing and recrossing within it would be missed).
const STEP_YEARS: f64 = 0.05;

/// First time in years since entry, in [`from`, `horizon`], at which `hazard(years)` (per year)
/// is below the population's hazard; `None` if never. `population` must measure time in years.
pub fn below_population_from(
    hazard: impl Fn(f64) -> f64,
    population: &BackgroundHazard,
    from: f64,
    horizon: f64,
) -> Option<f64> {
    if !(from.is_finite() && horizon.is_finite()) || horizon < from {
        return None;
    }
    let mut edges = vec![from];
    edges.extend(population.breakpoints(from, horizon));
    edges.push(horizon);
    for pair in edges.windows(2) {
        let (start, end) = (pair[0], pair[1]);
        // The population's rate over this year of age, read at its middle (never at a
        // birthday, where rounding could pick the neighbouring year).
        let c = population.hazard(0.5 * (start + end));
        let below = |t: f64| hazard(t) < c;
        if below(start) {
            return Some(start);
        }
        let pieces = ((end - start) / STEP_YEARS).ceil().max(1.0) as usize;
        let mut a = start;
        for i in 1..=pieces {
            // Just inside the year of age at its end, so the rate c still applies.
            let b = if i == pieces {
                end - (end - start) * 1e-12
            } else {
                start + (end - start) * i as f64 / pieces as f64
            };
            if below(b) {
                let (mut lo, mut hi) = (a, b);
                while hi - lo > 1e-12 * hi.max(1.0) {
                    let mid = 0.5 * (lo + hi);
                    if below(mid) {
                        hi = mid;
                    } else {
                        lo = mid;
                    }
                }
                return Some(hi);
            }
            a = b;
        }
    }
    None
}

/// General-population survival `years` after entry at the cohort's start age.
pub fn population_survival(population: &BackgroundHazard, years: f64) -> f64 {
    (-population.cumulative(0.0, years)).exp()
}
