//! Plot (d): the tunnel table, `p_exit` against the tunnel number, with the suggested
//! truncation point and any other criterion marked by labelled vertical lines.

use super::{draw_legend, draw_x_ticks, err, nice_ticks, text_style, tick_label, Mark, Plot};
use super::{EMPIRICAL, MARKER_COLOURS};
use crate::discretise::TunnelTable;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// A labelled vertical line at a tunnel number (e.g. the suggested count).
#[derive(Debug, Clone, PartialEq)]
pub struct TunnelMarker {
    /// Legend text.
    pub label: String,
    /// Tunnel number (1-based) the line is drawn at.
    pub tunnel: usize,
}

/// `p_exit` by tunnel for one table.
pub struct TunnelPlot<'a> {
    /// Title line.
    pub title: String,
    /// The table.
    pub table: &'a TunnelTable,
    /// Colour of the `p_exit` line (the chosen family's).
    pub colour: RGBColor,
    /// Marked tunnel numbers.
    pub markers: Vec<TunnelMarker>,
}

impl Plot for TunnelPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (960, 480)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let rows = &self.table.rows;
        let last = rows.len().max(1) as f64;
        let top = rows
            .iter()
            .map(|r| r.p_exit)
            .fold(0.0f64, f64::max)
            .max(1e-9)
            * 1.1;
        let mut chart = super::time_chart(
            &left,
            &self.title,
            70,
            (0f64..last + 1.0, 0f64..top.min(1.0)),
            (
                &format!(
                    "Tunnel state (cycle of {} {} since entry)",
                    tick_label(self.table.cycle),
                    self.table.time_unit.name_for(self.table.cycle)
                ),
                "p_exit (per cycle)",
            ),
        )?;
        let y_top = top.min(1.0);
        let ticks: Vec<f64> = nice_ticks(last + 1.0, 10)
            .into_iter()
            .filter(|t| *t >= 1.0)
            .collect();
        draw_x_ticks(root, &mut chart, &ticks, (0.0, y_top))?;
        let mut entries = vec![("p_exit".to_string(), Mark::Line(self.colour, 2))];
        for (i, marker) in self.markers.iter().enumerate() {
            let colour = MARKER_COLOURS[i % MARKER_COLOURS.len()];
            let x = marker.tunnel as f64;
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(x, 0.0), (x, top)],
                    colour.stroke_width(2),
                )))
                .map_err(err)?;
            let (px, py) = chart.backend_coord(&(x, top));
            root.draw(&Text::new(
                marker.tunnel.to_string(),
                (px + 4, py + 4),
                text_style(12).pos(Pos::new(HPos::Left, VPos::Top)),
            ))
            .map_err(err)?;
            entries.push((
                format!("{} ({})", marker.label, marker.tunnel),
                Mark::Line(colour, 2),
            ));
        }
        let points: Vec<(f64, f64)> = rows.iter().map(|r| (r.tunnel as f64, r.p_exit)).collect();
        chart
            .draw_series(LineSeries::new(points.clone(), self.colour.stroke_width(2)))
            .map_err(err)?;
        if points.len() <= 120 {
            chart
                .draw_series(
                    points
                        .iter()
                        .map(|p| Circle::new(*p, 2, EMPIRICAL.filled())),
                )
                .map_err(err)?;
        }
        draw_legend(&legend, "Table and markers", &entries)
    }
}
