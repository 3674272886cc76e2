//! Plot (c): straight-line diagnostics. Each panel puts a transform of the Kaplan–Meier
//! estimate against ln t; a family whose transform is linear in ln t fits where the points lie
//! on a straight line:
//! - ln(-ln S): linear for the Weibull (slope = shape) and the exponential (slope 1);
//! - ln((1 - S)/S): linear for the log-logistic (slope = shape);
//! - probit(1 - S) = Φ⁻¹(1 - S): linear for the log-normal (slope = 1/sigma).
//!
//! Each fitted curve's transform is drawn as a line over the observed times.

use super::EMPIRICAL;
use super::{draw_legend, err, family_colour, grid, text_style, tick_label, Mark, Plot};
use crate::curve::Curve;
use crate::km::KaplanMeier;
use crate::numeric::normal_quantile;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;

/// A transform of survival that is linear in ln t for some family.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Transform {
    /// ln(-ln S) (Weibull, exponential).
    LogCumulativeHazard,
    /// ln((1 - S)/S) (log-logistic).
    LogOdds,
    /// Φ⁻¹(1 - S) (log-normal).
    Probit,
}

impl Transform {
    /// The three panels, in order.
    pub const ALL: [Transform; 3] = [
        Transform::LogCumulativeHazard,
        Transform::LogOdds,
        Transform::Probit,
    ];

    /// The transform of S (finite for 0 < S < 1).
    pub fn apply(self, s: f64) -> f64 {
        match self {
            Transform::LogCumulativeHazard => (-s.ln()).ln(),
            Transform::LogOdds => ((1.0 - s) / s).ln(),
            Transform::Probit => normal_quantile(1.0 - s),
        }
    }

    /// Axis label.
    pub fn label(self) -> &'static str {
        match self {
            Transform::LogCumulativeHazard => "ln(−ln S)",
            Transform::LogOdds => "ln((1 − S)/S)",
            Transform::Probit => "probit(1 − S)",
        }
    }

    /// Which family a straight line points to.
    pub fn straight_for(self) -> &'static str {
        match self {
            Transform::LogCumulativeHazard => "straight: Weibull (slope 1: exponential)",
            Transform::LogOdds => "straight: log-logistic",
            Transform::Probit => "straight: log-normal",
        }
    }
}

/// Kaplan–Meier points (ln t, transform(S)) at event times where 0 < S < 1.
pub fn diagnostic_points(km: &KaplanMeier, transform: Transform) -> Vec<(f64, f64)> {
    km.steps
        .iter()
        .filter(|s| s.events > 0 && s.survival > 0.0 && s.survival < 1.0)
        .map(|s| (s.time.ln(), transform.apply(s.survival)))
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .collect()
}

/// The three diagnostic panels for one arm.
pub struct DiagnosticPlot<'a> {
    /// Title line.
    pub title: String,
    /// Time unit of the estimate (ln t is of time in this unit).
    pub unit: TimeUnit,
    /// The estimate.
    pub km: &'a KaplanMeier,
    /// Fitted curves with their labels.
    pub curves: Vec<(String, &'a dyn Curve)>,
}

impl Plot for DiagnosticPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (1200, 470)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let titled = root.titled(&self.title, text_style(17)).map_err(err)?;
        let (panels, legend) = titled.split_horizontally(1010);
        let areas = panels.split_evenly((1, 3));
        let unit = self.unit;
        for (area, transform) in areas.iter().zip(Transform::ALL) {
            let points = diagnostic_points(self.km, transform);
            let (x_lo, x_hi) = match (points.first(), points.last(), self.km.steps.last()) {
                (Some(a), Some(_), Some(end)) => (a.0, end.time.ln().max(a.0 + 1e-6)),
                _ => (0.0, 1.0),
            };
            let mut curve_lines = Vec::new();
            for (label, curve) in &self.curves {
                let f = unit.factor_to(curve.time_unit());
                let line: Vec<(f64, f64)> = grid(x_lo, x_hi, 120)
                    .map(|x| (x, transform.apply(curve.survival(x.exp() * f))))
                    .filter(|p| p.1.is_finite())
                    .collect();
                curve_lines.push((label.clone(), line));
            }
            let ys = points
                .iter()
                .chain(curve_lines.iter().flat_map(|(_, l)| l.iter()))
                .map(|p| p.1);
            let (mut y_lo, mut y_hi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| {
                (a.min(y), b.max(y))
            });
            if !(y_lo.is_finite() && y_hi.is_finite() && y_hi > y_lo) {
                (y_lo, y_hi) = (-1.0, 1.0);
            }
            let pad = 0.05 * (y_hi - y_lo);
            let pad_x = 0.03 * (x_hi - x_lo);
            let mut chart = ChartBuilder::on(area)
                .caption(transform.straight_for(), text_style(13))
                .margin(10)
                .x_label_area_size(40)
                .y_label_area_size(48)
                .build_cartesian_2d(x_lo - pad_x..x_hi + pad_x, y_lo - pad..y_hi + pad)
                .map_err(err)?;
            chart
                .configure_mesh()
                .light_line_style(WHITE)
                .bold_line_style(super::GRID)
                .x_desc(format!("ln t (t in {unit})"))
                .y_desc(transform.label())
                .x_labels(6)
                .y_labels(6)
                .x_label_formatter(&|x| tick_label(*x))
                .y_label_formatter(&|y| tick_label(*y))
                .label_style(text_style(12))
                .axis_desc_style(text_style(13))
                .draw()
                .map_err(err)?;
            for (label, line) in curve_lines {
                chart
                    .draw_series(LineSeries::new(line, family_colour(&label).stroke_width(2)))
                    .map_err(err)?;
            }
            chart
                .draw_series(
                    points
                        .iter()
                        .map(|p| Circle::new(*p, 2, EMPIRICAL.filled())),
                )
                .map_err(err)?;
        }
        let mut entries = vec![("Kaplan–Meier".to_string(), Mark::Point(EMPIRICAL))];
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

    /// SplitMix64 (Steele, Lea and Flood, 2014): a small seeded generator for test data.
    fn uniforms(seed: u64, n: usize) -> Vec<f64> {
        let mut state = seed;
        (0..n)
            .map(|_| {
                state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
                let mut z = state;
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                z ^= z >> 31;
                ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
            })
            .collect()
    }

    fn slope(points: &[(f64, f64)]) -> f64 {
        let n = points.len() as f64;
        let mx = points.iter().map(|p| p.0).sum::<f64>() / n;
        let my = points.iter().map(|p| p.1).sum::<f64>() / n;
        let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
        let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
        sxy / sxx
    }

    #[test]
    fn weibull_log_cumulative_hazard_points_have_the_shape_as_slope() {
        // For the Weibull, ln(-ln S(t)) = shape·ln t - shape·ln scale, so the log-cumulative
        // hazard plot is a straight line with slope = shape (Collett, 2015, Modelling Survival
        // Data in Medical Research, 3rd ed., log-cumulative hazard plot; Klein and
        // Moeschberger, 2003, Survival Analysis, 2nd ed., chapter 12). Tolerance 0.1 (issue 6).
        for (seed, shape, scale) in [
            (11u64, 0.7, 20.0),
            (12, 1.0, 8.0),
            (13, 1.6, 30.0),
            (14, 2.5, 12.0),
        ] {
            let u = uniforms(seed, 4000);
            let mut records: Vec<Record> = u
                .chunks(2)
                .map(|pair| {
                    let t: f64 = scale * (-pair[0].ln()).powf(1.0 / shape);
                    // Independent uniform censoring over (0, 3·scale).
                    let c = 3.0 * scale * pair[1];
                    Record {
                        time: t.min(c),
                        event: t <= c,
                    }
                })
                .collect();
            records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
            let km = KaplanMeier::from_records(&records);
            let points = diagnostic_points(&km, Transform::LogCumulativeHazard);
            let b = slope(&points);
            assert!((b - shape).abs() < 0.1, "shape {shape}: slope {b}");
        }
    }

    #[test]
    fn transforms_are_linear_for_their_family() {
        // Closed forms from the interface's S(t): log-logistic ln((1-S)/S) = shape(ln t - ln scale);
        // log-normal Φ⁻¹(1-S) = (ln t - mu)/sigma.
        let (shape, scale) = (1.7f64, 26.0f64);
        for t in [1.0f64, 5.0, 30.0, 200.0] {
            let s = 1.0 / (1.0 + (t / scale).powf(shape));
            let expected = shape * (t.ln() - scale.ln());
            assert!((Transform::LogOdds.apply(s) - expected).abs() < 1e-10);
            let (mu, sigma) = (2.3f64, 0.9f64);
            let z = (t.ln() - mu) / sigma;
            let s = crate::numeric::normal_sf(z);
            assert!((Transform::Probit.apply(s) - z).abs() < 1e-7, "t {t}");
        }
    }
}
