//! The payoff accrual plot: for each payoff, how far each within-cycle method's running total
//! is from the exact accrual, over time since entry, as a share of the exact total to the
//! horizon. A method's line rising means it is counting too much there; the line's end is the
//! method's error in the horizon table. The exact (cycle-integrated) accrual is the zero line.

use super::{draw_legend, err, series_colour, text_style, tick_label, Mark, Plot};
use super::{BAND, EMPIRICAL, GRID, REFERENCE};
use crate::payoff::PayoffMethod;
use plotters::coord::Shift;
use plotters::prelude::*;

/// One payoff's panel.
pub struct PayoffPanel {
    /// Payoff name.
    pub name: String,
    /// Cycle boundaries, time since entry (in the plot's unit).
    pub times: Vec<f64>,
    /// Per method, (running total - exact accrual) / |exact total| at each boundary, in percent;
    /// `None` where the method has no running total (Simpson at odd boundaries).
    pub series: Vec<(PayoffMethod, Vec<Option<f64>>)>,
}

/// The figure: one panel per payoff (at most [`MAX_PANELS`]).
pub struct PayoffPlot {
    /// Title line.
    pub title: String,
    /// Time unit named on the x axis.
    pub time_unit: String,
    /// Panels, in schedule order.
    pub panels: Vec<PayoffPanel>,
}

/// Payoffs drawn (the rest are in the tables).
pub const MAX_PANELS: usize = 4;

/// The colour of a method's line: boundary methods from the series palette, the exact accrual
/// near black.
fn method_colour(method: PayoffMethod) -> RGBColor {
    match method {
        PayoffMethod::Start => series_colour(0),
        PayoffMethod::End => series_colour(1),
        PayoffMethod::HalfCycle => series_colour(2),
        PayoffMethod::Trapezoid => series_colour(3),
        PayoffMethod::Simpson => BAND,
        PayoffMethod::CycleIntegrated => EMPIRICAL,
    }
}

impl Plot for PayoffPlot {
    fn size(&self) -> (u32, u32) {
        let panels = self.panels.len().clamp(1, MAX_PANELS) as u32;
        (960, 60 + 260 * panels)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (top, body) = root.split_vertically(40);
        top.draw(&Text::new(self.title.clone(), (12, 10), text_style(17)))
            .map_err(err)?;
        let (left, legend) = body.split_horizontally(740);
        let panels: Vec<&PayoffPanel> = self.panels.iter().take(MAX_PANELS).collect();
        let areas = left.split_evenly((panels.len().max(1), 1));
        for (panel, area) in panels.iter().zip(&areas) {
            let t_max = panel
                .times
                .last()
                .copied()
                .unwrap_or(1.0)
                .max(f64::MIN_POSITIVE);
            let values = panel
                .series
                .iter()
                .flat_map(|(_, v)| v.iter().flatten().copied())
                .filter(|v| v.is_finite());
            let (lo, hi) = values.fold((0.0f64, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
            let pad = ((hi - lo) * 0.08).max(0.05);
            let mut chart = ChartBuilder::on(area)
                .caption(format!("payoff {}", panel.name), text_style(14))
                .margin(8)
                .x_label_area_size(36)
                .y_label_area_size(76)
                .build_cartesian_2d(0.0..t_max, (lo - pad)..(hi + pad))
                .map_err(err)?;
            chart
                .configure_mesh()
                .light_line_style(WHITE)
                .bold_line_style(GRID)
                .x_desc(format!("Time since entry ({})", self.time_unit))
                .y_desc("Counted − exact (% of total)")
                .x_label_formatter(&|x| tick_label(*x))
                .y_label_formatter(&|y| tick_label(*y))
                .label_style(text_style(12))
                .axis_desc_style(text_style(13))
                .draw()
                .map_err(err)?;
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(0.0, 0.0), (t_max, 0.0)],
                    REFERENCE.stroke_width(1),
                )))
                .map_err(err)?;
            for (method, values) in &panel.series {
                let points: Vec<(f64, f64)> = panel
                    .times
                    .iter()
                    .zip(values)
                    .filter_map(|(t, v)| v.filter(|v| v.is_finite()).map(|v| (*t, v)))
                    .collect();
                let width = if *method == PayoffMethod::CycleIntegrated {
                    3
                } else {
                    2
                };
                chart
                    .draw_series(LineSeries::new(
                        points,
                        method_colour(*method).stroke_width(width),
                    ))
                    .map_err(err)?;
            }
        }
        let methods = self
            .panels
            .first()
            .map(|p| p.series.iter().map(|(m, _)| *m).collect::<Vec<_>>())
            .unwrap_or_default();
        let entries: Vec<(String, Mark)> = methods
            .iter()
            .map(|m| {
                let label = if *m == PayoffMethod::CycleIntegrated {
                    "cycle-integrated (exact)".to_string()
                } else {
                    m.name().to_string()
                };
                let width = if *m == PayoffMethod::CycleIntegrated {
                    3
                } else {
                    2
                };
                (label, Mark::Line(method_colour(*m), width))
            })
            .collect();
        draw_legend(&legend, "Within-cycle method", &entries)
    }
}
