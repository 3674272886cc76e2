//! Plot (b): the hazard. The empirical hazard is the Nelson–Aalen increments smoothed with an
//! Epanechnikov kernel (Ramlau-Hansen, 1983, Annals of Statistics 11:453–466); each family's
//! hazard is drawn beside it, out to the horizon.
//!
//! Bandwidth: Silverman's rule of thumb over the event times,
//! b = 0.9 · min(sd, IQR/1.34) · d^(-1/5) with d events (Silverman, 1986, Density Estimation,
//! equation 3.31). The smoothed estimate is shown only on [t₁ + b, t_d − b], where the kernel
//! window lies inside the event times, because it is biased downwards at the edges.

use super::{draw_legend, draw_x_ticks, err, family_colour, grid, nice_ticks, Mark, Plot};
use super::{EMPIRICAL, REFERENCE};
use crate::curve::Curve;
use crate::km::KaplanMeier;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;

/// The kernel-smoothed Nelson–Aalen hazard on a grid.
#[derive(Debug, Clone, PartialEq)]
pub struct SmoothedHazard {
    /// Kernel half-width (data's time unit).
    pub bandwidth: f64,
    /// (t, h(t)) with h per unit of time.
    pub points: Vec<(f64, f64)>,
}

/// Smooths the Nelson–Aalen increments d/n at the event times of `km`; `None` with fewer than
/// three distinct event times or no spread (no bandwidth can be chosen).
pub fn smoothed_hazard(km: &KaplanMeier) -> Option<SmoothedHazard> {
    let events: Vec<(f64, f64, usize)> = km
        .steps
        .iter()
        .filter(|s| s.events > 0)
        .map(|s| (s.time, s.events as f64 / s.at_risk as f64, s.events))
        .collect();
    if events.len() < 3 {
        return None;
    }
    let mut times: Vec<f64> = Vec::new();
    for &(t, _, d) in &events {
        times.extend(std::iter::repeat_n(t, d));
    }
    let d = times.len() as f64;
    let mean = times.iter().sum::<f64>() / d;
    let sd = (times.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (d - 1.0)).sqrt();
    let quantile = |p: f64| {
        let h = (d - 1.0) * p;
        let i = h.floor() as usize;
        let j = (i + 1).min(times.len() - 1);
        times[i] + (h - i as f64) * (times[j] - times[i])
    };
    let iqr = quantile(0.75) - quantile(0.25);
    let spread = if iqr > 0.0 { sd.min(iqr / 1.34) } else { sd };
    let bandwidth = 0.9 * spread * d.powf(-0.2);
    if !(bandwidth.is_finite() && bandwidth > 0.0) {
        return None;
    }
    let first = events[0].0 + bandwidth;
    let last = events[events.len() - 1].0 - bandwidth;
    if last <= first {
        return None;
    }
    let points = grid(first, last, 200)
        .map(|t| {
            let h: f64 = events
                .iter()
                .map(|&(ti, increment, _)| {
                    let u = (t - ti) / bandwidth;
                    if u.abs() < 1.0 {
                        0.75 * (1.0 - u * u) * increment
                    } else {
                        0.0
                    }
                })
                .sum::<f64>()
                / bandwidth;
            (t, h)
        })
        .collect();
    Some(SmoothedHazard { bandwidth, points })
}

/// Smoothed empirical hazard beside each fitted curve's hazard, for one arm.
pub struct HazardPlot<'a> {
    /// Title line.
    pub title: String,
    /// Time unit of the axis and of the estimate.
    pub unit: TimeUnit,
    /// The estimate the Nelson–Aalen increments come from.
    pub km: &'a KaplanMeier,
    /// Fitted curves with their labels.
    pub curves: Vec<(String, &'a dyn Curve)>,
    /// End of the time axis (`unit`).
    pub horizon: f64,
}

impl Plot for HazardPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (960, 520)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let unit = self.unit;
        let end = self.km.steps.last().map_or(1.0, |s| s.time);
        let horizon = self.horizon.max(end);
        let smooth = smoothed_hazard(self.km);
        let empirical_max = smooth
            .as_ref()
            .map(|s| s.points.iter().fold(0.0f64, |m, p| m.max(p.1)))
            .unwrap_or(0.0);
        let curve_max = self
            .curves
            .iter()
            .flat_map(|(_, c)| {
                let f = unit.factor_to(c.time_unit());
                grid(end / 20.0, end, 50).map(move |t| c.hazard(t * f) * f)
            })
            .filter(|h| h.is_finite())
            .fold(0.0f64, f64::max);
        let mut top = (1.5 * empirical_max).max(1.1 * curve_max);
        if empirical_max > 0.0 {
            top = top.min(4.0 * empirical_max);
        }
        if !(top.is_finite() && top > 0.0) {
            top = 1.0;
        }
        let mut chart = super::time_chart(
            &left,
            &self.title,
            70,
            (0f64..horizon, 0f64..top),
            (
                &format!("Time ({unit})"),
                &format!("Hazard (per {})", unit.name_for(1.0)),
            ),
        )?;
        draw_x_ticks(root, &mut chart, &nice_ticks(horizon, 10), (0.0, top))?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(end, 0.0), (end, top)],
                REFERENCE.stroke_width(1),
            )))
            .map_err(err)?;
        for (label, curve) in &self.curves {
            let f = unit.factor_to(curve.time_unit());
            // The hazard per unit of the axis is the curve's hazard times the unit factor.
            let points: Vec<(f64, f64)> = grid(horizon / 2000.0, horizon, 400)
                .map(|t| (t, curve.hazard(t * f) * f))
                // Points above the axis are left out rather than flattened onto its edge.
                .filter(|p| p.1.is_finite() && p.1 <= top)
                .collect();
            chart
                .draw_series(LineSeries::new(
                    points,
                    family_colour(label).stroke_width(2),
                ))
                .map_err(err)?;
        }
        let mut entries = Vec::new();
        if let Some(s) = &smooth {
            chart
                .draw_series(LineSeries::new(s.points.clone(), EMPIRICAL.stroke_width(2)))
                .map_err(err)?;
            entries.push((
                "smoothed Nelson–Aalen".to_string(),
                Mark::Line(EMPIRICAL, 2),
            ));
            entries.push((
                format!("  Epanechnikov, b = {}", crate::format::sig(s.bandwidth, 3)),
                Mark::Line(WHITE, 1),
            ));
        }
        entries.push(("end of follow-up".to_string(), Mark::Line(REFERENCE, 1)));
        for (label, _) in &self.curves {
            entries.push((label.clone(), Mark::Line(family_colour(label), 2)));
        }
        draw_legend(&legend, "Estimate and fits", &entries)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::input::Record;

    #[test]
    fn constant_hazard_is_recovered_in_the_interior() {
        // Exponential quantiles t_i = -ln(1 - (i - 0.5)/n)/rate: the Nelson–Aalen increments
        // estimate a constant hazard equal to the rate (property of the exponential; common
        // practice to check smoothers on it). Tolerance 10% away from the edges.
        let rate = 0.05;
        let n = 4000;
        let records: Vec<Record> = (1..=n)
            .map(|i| Record {
                time: -(1.0 - (i as f64 - 0.5) / n as f64).ln() / rate,
                event: true,
            })
            .collect();
        let km = KaplanMeier::from_records(&records);
        let smooth = smoothed_hazard(&km).unwrap();
        let inner: Vec<&(f64, f64)> = smooth.points.iter().filter(|p| p.0 < 60.0).collect();
        assert!(inner.len() > 40);
        for (t, h) in inner {
            assert!((h - rate).abs() < 0.1 * rate, "t {t}: {h}");
        }
    }

    #[test]
    fn too_few_events_give_no_smooth() {
        let records = vec![
            Record {
                time: 1.0,
                event: true,
            },
            Record {
                time: 2.0,
                event: true,
            },
            Record {
                time: 3.0,
                event: false,
            },
        ];
        assert!(smoothed_hazard(&KaplanMeier::from_records(&records)).is_none());
    }
}
