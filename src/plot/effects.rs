//! The plot of `fit --effects`: ln(−ln S) of each arm's Kaplan–Meier estimate against ln t
//! (parallel lines under proportional hazards), and per term the scaled Schoenfeld residuals
//! over time (an estimate of the coefficient as a function of time, Grambsch and Therneau,
//! 1994) with a running-mean smooth and the constant coefficient as a dashed line.

use super::{diagnostic_points, draw_legend, err, series_colour, text_style, tick_label};
use super::{Mark, Plot, Transform, EMPIRICAL, REFERENCE};
use crate::km::KaplanMeier;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;

/// One panel of residuals: term name, its coefficient, and (time, scaled residual) points.
pub struct ResidualPanel {
    /// Term name.
    pub name: String,
    /// The Cox coefficient (constant under PH).
    pub coef: f64,
    /// Per event, in time order.
    pub points: Vec<(f64, f64)>,
}

/// The figure.
pub struct EffectsPlot<'a> {
    /// Title line.
    pub title: String,
    /// Time unit of the data.
    pub unit: TimeUnit,
    /// Kaplan–Meier estimate per arm, labelled.
    pub arms: Vec<(String, &'a KaplanMeier)>,
    /// One panel per term.
    pub terms: Vec<ResidualPanel>,
}

/// Running mean over a window of about a fifth of the points (at least 5), centred; one value
/// per distinct time.
pub fn running_mean(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let n = points.len();
    if n == 0 {
        return Vec::new();
    }
    let half = (n / 10).max(2);
    let smooth: Vec<(f64, f64)> = (0..n)
        .map(|i| {
            let lo = i.saturating_sub(half);
            let hi = (i + half + 1).min(n);
            let mean = points[lo..hi].iter().map(|p| p.1).sum::<f64>() / (hi - lo) as f64;
            (points[i].0, mean)
        })
        .collect();
    // One value per distinct time (tied events averaged), so the line does not jump in place.
    let mut out: Vec<(f64, f64, usize)> = Vec::new();
    for (t, v) in smooth {
        match out.last_mut() {
            Some(last) if last.0 == t => {
                last.1 += v;
                last.2 += 1;
            }
            _ => out.push((t, v, 1)),
        }
    }
    out.into_iter().map(|(t, v, k)| (t, v / k as f64)).collect()
}

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if lo.is_finite() && hi > lo {
        let pad = 0.05 * (hi - lo);
        (lo - pad, hi + pad)
    } else if lo.is_finite() {
        (lo - 1.0, lo + 1.0)
    } else {
        (-1.0, 1.0)
    }
}

impl EffectsPlot<'_> {
    fn rows(&self) -> usize {
        (1 + self.terms.len()).div_ceil(3)
    }
}

impl Plot for EffectsPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (1200, 40 + 380 * self.rows() as u32)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let titled = root.titled(&self.title, text_style(17)).map_err(err)?;
        let (panels, legend) = titled.split_horizontally(1010);
        let areas = panels.split_evenly((self.rows(), 3));
        let unit = self.unit;
        // Panel 1: ln(−ln S) per arm.
        let lines: Vec<Vec<(f64, f64)>> = self
            .arms
            .iter()
            .map(|(_, km)| diagnostic_points(km, Transform::LogCumulativeHazard))
            .collect();
        let (x_lo, x_hi) = range(lines.iter().flatten().map(|p| p.0));
        let (y_lo, y_hi) = range(lines.iter().flatten().map(|p| p.1));
        let mut chart = ChartBuilder::on(&areas[0])
            .caption("parallel under proportional hazards", text_style(13))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(48)
            .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)
            .map_err(err)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(super::GRID)
            .x_desc(format!("ln t (t in {unit})"))
            .y_desc("ln(−ln S)")
            .x_labels(6)
            .y_labels(6)
            .x_label_formatter(&|x| tick_label(*x))
            .y_label_formatter(&|y| tick_label(*y))
            .label_style(text_style(12))
            .axis_desc_style(text_style(13))
            .draw()
            .map_err(err)?;
        for (i, line) in lines.iter().enumerate() {
            chart
                .draw_series(LineSeries::new(
                    line.iter().copied(),
                    series_colour(i).stroke_width(2),
                ))
                .map_err(err)?;
        }
        // One panel per term.
        for (panel, area) in self.terms.iter().zip(areas.iter().skip(1)) {
            let (x_lo, x_hi) = range(panel.points.iter().map(|p| p.0));
            let (y_lo, y_hi) = range(
                panel
                    .points
                    .iter()
                    .map(|p| p.1)
                    .chain(std::iter::once(panel.coef)),
            );
            let mut chart = ChartBuilder::on(area)
                .caption(&panel.name, text_style(13))
                .margin(10)
                .x_label_area_size(40)
                .y_label_area_size(48)
                .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)
                .map_err(err)?;
            chart
                .configure_mesh()
                .light_line_style(WHITE)
                .bold_line_style(super::GRID)
                .x_desc(format!("t ({unit})"))
                .y_desc("coefficient at t (scaled residual)")
                .x_labels(6)
                .y_labels(6)
                .x_label_formatter(&|x| tick_label(*x))
                .y_label_formatter(&|y| tick_label(*y))
                .label_style(text_style(12))
                .axis_desc_style(text_style(13))
                .draw()
                .map_err(err)?;
            chart
                .draw_series(
                    panel
                        .points
                        .iter()
                        .map(|p| Circle::new(*p, 2, REFERENCE.mix(0.5).filled())),
                )
                .map_err(err)?;
            chart
                .draw_series(DashedLineSeries::new(
                    [(x_lo, panel.coef), (x_hi, panel.coef)],
                    6,
                    4,
                    REFERENCE.stroke_width(1),
                ))
                .map_err(err)?;
            chart
                .draw_series(LineSeries::new(
                    running_mean(&panel.points),
                    EMPIRICAL.stroke_width(2),
                ))
                .map_err(err)?;
        }
        let mut entries: Vec<(String, Mark)> = self
            .arms
            .iter()
            .enumerate()
            .map(|(i, (name, _))| (format!("arm {name}"), Mark::Line(series_colour(i), 2)))
            .collect();
        entries.push(("scaled residual".into(), Mark::Point(REFERENCE)));
        entries.push(("running mean".into(), Mark::Line(EMPIRICAL, 2)));
        entries.push(("constant (Cox)".into(), Mark::Line(REFERENCE, 1)));
        draw_legend(&legend, "By arm and term", &entries)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn running_mean_of_a_line_is_the_line_inside() {
        let points: Vec<(f64, f64)> = (0..50).map(|i| (i as f64, 2.0 * i as f64)).collect();
        let smooth = running_mean(&points);
        // A centred window of a straight line returns the line away from the ends.
        for i in 10..40 {
            assert!((smooth[i].1 - points[i].1).abs() < 1e-12);
        }
        // Tied times give one point, the mean of their values.
        let tied = running_mean(&[(1.0, 0.0), (1.0, 2.0), (2.0, 4.0), (3.0, 6.0), (4.0, 8.0)]);
        assert_eq!(tied.len(), 4);
        assert_eq!(tied[0].0, 1.0);
    }
}
