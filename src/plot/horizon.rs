//! Plot (e): truncation errors against the number of tunnel states, on a log scale, with the
//! tolerance as a horizontal line: where both errors fall below it the chain may be cut.

use super::{draw_legend, err, series_colour, text_style, tick_label, Mark, Plot};
use super::{GRID, REFERENCE};
use plotters::coord::Shift;
use plotters::prelude::*;

/// Errors by tunnel count, as computed by the horizon check.
pub struct HorizonPlot {
    /// Title line.
    pub title: String,
    /// Candidate tunnel counts.
    pub counts: Vec<usize>,
    /// Largest survival gap over cycle boundaries, one per count.
    pub max_surv_gap: Vec<f64>,
    /// Relative life-year error, one per count.
    pub ly_rel_error: Vec<f64>,
    /// Tolerance both errors are compared with.
    pub tolerance: f64,
}

/// Smallest value drawn on the log axis; exact zeros are drawn there.
const FLOOR: f64 = 1e-12;

impl Plot for HorizonPlot {
    fn size(&self) -> (u32, u32) {
        (960, 480)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let gap_colour = series_colour(0);
        let ly_colour = series_colour(1);
        let max_count = self.counts.iter().copied().max().unwrap_or(1).max(2) as f64;
        let min_count = self.counts.iter().copied().min().unwrap_or(1) as f64;
        let values = self
            .max_surv_gap
            .iter()
            .chain(&self.ly_rel_error)
            .chain(std::iter::once(&self.tolerance))
            .map(|v| v.abs().max(FLOOR));
        let (lo, hi) = values.fold((1.0f64, FLOOR), |(a, b), v| (a.min(v), b.max(v)));
        let mut chart = ChartBuilder::on(&left)
            .caption(&self.title, text_style(17))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(76)
            .build_cartesian_2d(min_count..max_count, (lo / 2.0..hi * 2.0).log_scale())
            .map_err(err)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(GRID)
            .x_desc("Number of tunnel states")
            .y_desc("Error (log scale)")
            .x_label_formatter(&|x| tick_label(*x))
            .y_label_formatter(&|y| format!("{y:.0e}"))
            .label_style(text_style(13))
            .axis_desc_style(text_style(14))
            .draw()
            .map_err(err)?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(min_count, self.tolerance), (max_count, self.tolerance)],
                REFERENCE.stroke_width(1),
            )))
            .map_err(err)?;
        for (series, colour) in [
            (&self.max_surv_gap, gap_colour),
            (&self.ly_rel_error, ly_colour),
        ] {
            let points: Vec<(f64, f64)> = self
                .counts
                .iter()
                .zip(series.iter())
                .map(|(k, v)| (*k as f64, v.abs().max(FLOOR)))
                .collect();
            chart
                .draw_series(LineSeries::new(points, colour.stroke_width(2)))
                .map_err(err)?;
        }
        let entries = vec![
            ("max_surv_gap".to_string(), Mark::Line(gap_colour, 2)),
            ("ly_rel_error".to_string(), Mark::Line(ly_colour, 2)),
            (
                format!("tolerance ({})", crate::format::sig(self.tolerance, 2)),
                Mark::Line(REFERENCE, 1),
            ),
        ];
        draw_legend(&legend, "Errors and tolerance", &entries)
    }
}
