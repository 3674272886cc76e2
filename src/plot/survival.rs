//! Plot (a): the Kaplan–Meier estimate with its 95% band, censoring marks and a row of
//! numbers at risk under the time axis, with every fitted curve overlaid and extrapolated to
//! the horizon.

use super::{
    draw_legend, draw_x_ticks, err, family_colour, grid, nice_ticks, text_style, tick_label, Mark,
    Plot,
};
use super::{BAND, EMPIRICAL, REFERENCE};
use crate::curve::Curve;
use crate::km::KaplanMeier;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Kaplan–Meier with fitted curves for one arm; times in `unit`.
pub struct SurvivalPlot<'a> {
    /// Title line (e.g. the arm).
    pub title: String,
    /// Time unit of the Kaplan–Meier times and of the axis.
    pub unit: TimeUnit,
    /// The estimate.
    pub km: &'a KaplanMeier,
    /// Fitted curves with their labels (family names); any time unit, converted for drawing.
    pub curves: Vec<(String, &'a dyn Curve)>,
    /// End of the time axis (`unit`): the extrapolation horizon.
    pub horizon: f64,
}

impl SurvivalPlot<'_> {
    /// Step path of the estimate from (0, 1) to the last observed time.
    pub fn step_path(&self) -> Vec<(f64, f64)> {
        step_path(self.km, |s| s.survival, 1.0)
    }
}

/// Step path through `value` of each step, starting at (0, `start`).
fn step_path(
    km: &KaplanMeier,
    value: impl Fn(&crate::km::KmStep) -> f64,
    start: f64,
) -> Vec<(f64, f64)> {
    let mut path = vec![(0.0, start)];
    let mut last = start;
    for s in &km.steps {
        let v = value(s);
        if v != last {
            path.push((s.time, last));
            path.push((s.time, v));
            last = v;
        }
    }
    if let Some(end) = km.steps.last() {
        path.push((end.time, last));
    }
    path
}

/// Times of the numbers-at-risk row: every axis tick, and the midpoints between ticks up to
/// `end` (the end of follow-up) when the midpoints land at least 30 pixels (`pixel`) from
/// their ticks.
fn risk_times(ticks: &[f64], end: f64, pixel: impl Fn(f64) -> i32) -> Vec<f64> {
    let mut times = ticks.to_vec();
    if let [first, second, ..] = ticks {
        let half = (second - first) / 2.0;
        if pixel(first + half) - pixel(*first) >= 30 {
            times.extend(ticks.iter().map(|t| t + half).filter(|t| *t <= end));
            times.sort_by(f64::total_cmp);
        }
    }
    times
}

/// Number at risk at a tick: subjects whose time is at or after `t`. The plot's times are
/// the data's times converted (months to years), so a time equal to a tick may land a
/// rounding error below it; within 1e-9 relative it counts as at the tick.
fn at_risk_at_tick(km: &KaplanMeier, t: f64) -> usize {
    km.at_risk_at(t * (1.0 - 1e-9))
}

impl Plot for SurvivalPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (960, 600)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let (top, risk) = left.split_vertically(535);
        let unit = self.unit;
        let horizon = self
            .horizon
            .max(self.km.steps.last().map_or(1.0, |s| s.time));
        let ticks = nice_ticks(horizon, 10);
        let mut chart = super::time_chart(
            &top,
            &self.title,
            58,
            (0f64..horizon, 0f64..1.0f64),
            (&format!("Time ({unit})"), "Survival probability"),
        )?;
        draw_x_ticks(root, &mut chart, &ticks, (0.0, 1.0))?;

        let upper = step_path(self.km, |s| s.upper, 1.0);
        let lower = step_path(self.km, |s| s.lower, 1.0);
        let mut band = upper.clone();
        band.extend(lower.iter().rev());
        chart
            .draw_series(std::iter::once(Polygon::new(band, BAND.mix(0.35).filled())))
            .map_err(err)?;

        let end = self.km.steps.last().map_or(0.0, |s| s.time);
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(end, 0.0), (end, 1.0)],
                REFERENCE.stroke_width(1),
            )))
            .map_err(err)?;

        for (label, curve) in &self.curves {
            let to_curve = unit.factor_to(curve.time_unit());
            let points: Vec<(f64, f64)> = grid(0.0, horizon, 400)
                .map(|t| (t, curve.survival(t * to_curve).clamp(0.0, 1.0)))
                .collect();
            chart
                .draw_series(LineSeries::new(
                    points,
                    family_colour(label).stroke_width(2),
                ))
                .map_err(err)?;
        }

        chart
            .draw_series(LineSeries::new(self.step_path(), EMPIRICAL.stroke_width(2)))
            .map_err(err)?;
        let marks = self.km.steps.iter().filter(|s| s.censored > 0).map(|s| {
            PathElement::new(
                vec![(s.time, s.survival - 0.012), (s.time, s.survival + 0.012)],
                EMPIRICAL.stroke_width(1),
            )
        });
        chart.draw_series(marks).map_err(err)?;

        // Numbers at risk under every axis tick (0 past the end of follow-up), and within
        // follow-up also halfway between ticks where the labels stay at least 30 pixels apart.
        let risk_ticks = risk_times(&ticks, end, |t| chart.backend_coord(&(t, 0.0)).0);
        let top_y = risk.get_base_pixel().1 + 4;
        let left = text_style(12);
        root.draw(&Text::new(
            unit.name().to_string(),
            (6, top_y),
            left.clone(),
        ))
        .map_err(err)?;
        root.draw(&Text::new("at risk".to_string(), (6, top_y + 20), left))
            .map_err(err)?;
        let centred = text_style(12).pos(Pos::new(HPos::Center, VPos::Top));
        for &t in &risk_ticks {
            let (x, _) = chart.backend_coord(&(t, 0.0));
            root.draw(&Text::new(tick_label(t), (x, top_y), centred.clone()))
                .map_err(err)?;
            root.draw(&Text::new(
                at_risk_at_tick(self.km, t).to_string(),
                (x, top_y + 20),
                centred.clone(),
            ))
            .map_err(err)?;
        }

        let mut entries = vec![
            ("Kaplan–Meier".to_string(), Mark::Line(EMPIRICAL, 2)),
            ("95% band (log-log)".to_string(), Mark::Swatch(BAND)),
            ("censored (tick)".to_string(), Mark::Line(EMPIRICAL, 1)),
            ("end of follow-up".to_string(), Mark::Line(REFERENCE, 1)),
        ];
        for (label, _) in &self.curves {
            entries.push((label.clone(), Mark::Line(family_colour(label), 2)));
        }
        draw_legend(&legend, "Estimate and fits", &entries)
    }
}

#[cfg(test)]
mod tests {
    use super::risk_times;

    #[test]
    fn numbers_at_risk_sit_under_every_tick_and_between_ticks_within_follow_up() {
        let ticks: Vec<f64> = (0..=10).map(|i| 2.0 * i as f64).collect();
        // 33 pixels a year: midpoints (1, 3) land 33 pixels from their ticks; 5 is past 3.35.
        let wide = risk_times(&ticks, 3.35, |t| (33.0 * t).round() as i32);
        let mut expected = ticks.clone();
        expected.extend([1.0, 3.0]);
        expected.sort_by(f64::total_cmp);
        assert_eq!(wide, expected);
        // 25 pixels a year: midpoints would be 25 pixels from their ticks, too close.
        assert_eq!(risk_times(&ticks, 3.35, |t| (25.0 * t) as i32), ticks);
    }
}
