//! Every fit's extrapolated survival beside general-population survival from the same age at
//! entry (and sex): a curve above the population's line implies patients outlive people of the
//! same age in general, which a reviewer asks about first.

use super::{draw_legend, draw_x_ticks, err, family_colour, grid, nice_ticks, Mark, Plot};
use super::{EMPIRICAL, REFERENCE};
use crate::adjust::background::BackgroundHazard;
use crate::curve::Curve;
use crate::plausibility::population::population_survival;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Fitted (and, for `run`, adjusted) curves against the general population of one arm.
pub struct PopulationPlot<'a> {
    /// Title line (e.g. the arm).
    pub title: String,
    /// Unit of the time axis (years when the data span more than two years).
    pub unit: TimeUnit,
    /// Fitted curves with their labels (family names); any time unit, converted for drawing.
    pub curves: Vec<(String, &'a dyn Curve)>,
    /// Further curves drawn in black with their own labels (the chosen curve with adjustments).
    pub extra: Vec<(String, &'a dyn Curve)>,
    /// The general population's hazard from the age at entry, time in years.
    pub population: &'a BackgroundHazard,
    /// End of follow-up, in `unit`.
    pub follow_up: f64,
    /// End of the time axis, in `unit`.
    pub horizon: f64,
}

impl PopulationPlot<'_> {
    /// General-population survival at times `t` (in `unit`) on the plot's grid.
    pub fn population_path(&self) -> Vec<(f64, f64)> {
        let to_years = self.unit.factor_to(TimeUnit::Years);
        grid(0.0, self.horizon, 400)
            .map(|t| (t, population_survival(self.population, t * to_years)))
            .collect()
    }
}

impl Plot for PopulationPlot<'_> {
    fn size(&self) -> (u32, u32) {
        (960, 540)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let unit = self.unit;
        let horizon = self.horizon.max(1e-9);
        let ticks = nice_ticks(horizon, 10);
        let mut chart = super::time_chart(
            &left,
            &self.title,
            58,
            (0f64..horizon, 0f64..1.0f64),
            (
                &format!("Time since entry ({unit})"),
                "Survival probability",
            ),
        )?;
        draw_x_ticks(root, &mut chart, &ticks, (0.0, 1.0))?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(self.follow_up, 0.0), (self.follow_up, 1.0)],
                REFERENCE.stroke_width(1),
            )))
            .map_err(err)?;
        chart
            .draw_series(LineSeries::new(
                self.population_path(),
                REFERENCE.stroke_width(5),
            ))
            .map_err(err)?;
        let line = |curve: &dyn Curve| -> Vec<(f64, f64)> {
            let to_curve = unit.factor_to(curve.time_unit());
            grid(0.0, horizon, 400)
                .map(|t| (t, curve.survival(t * to_curve).clamp(0.0, 1.0)))
                .collect()
        };
        for (label, curve) in &self.curves {
            chart
                .draw_series(LineSeries::new(
                    line(*curve),
                    family_colour(label).stroke_width(2),
                ))
                .map_err(err)?;
        }
        for (_, curve) in &self.extra {
            chart
                .draw_series(LineSeries::new(line(*curve), EMPIRICAL.stroke_width(2)))
                .map_err(err)?;
        }
        let age = crate::format::readable(self.population.start_age);
        let mut entries = vec![
            (format!("population, age {age}"), Mark::Line(REFERENCE, 5)),
            ("end of follow-up".to_string(), Mark::Line(REFERENCE, 1)),
        ];
        for (label, _) in &self.curves {
            entries.push((label.clone(), Mark::Line(family_colour(label), 2)));
        }
        for (label, _) in &self.extra {
            entries.push((label.clone(), Mark::Line(EMPIRICAL, 2)));
        }
        draw_legend(&legend, "Fits and population", &entries)
    }
}
