//! Plot (f): a rebuild checked by eye. The digitised points of each arm as hollow markers over
//! the Kaplan–Meier curve of the rebuilt records as a step line, and, under the plot, the
//! published numbers at risk beside the rebuilt ones at each risk-table time.

use super::{draw_legend, draw_x_ticks, err, nice_ticks, series_colour, text_style, Mark, Plot};
use crate::km::KaplanMeier;
use crate::rebuild::AtRiskCheck;
use crate::units::TimeUnit;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// One rebuilt arm as drawn.
pub struct RebuildPlotArm {
    /// Arm label (`None` without an arm column).
    pub label: Option<String>,
    /// Cleaned digitised points: (time, survival as a proportion).
    pub points: Vec<(f64, f64)>,
    /// Kaplan–Meier estimate of the rebuilt records.
    pub km: KaplanMeier,
    /// Published and rebuilt numbers at risk at each risk-table time (empty without a table).
    pub at_risk: Vec<AtRiskCheck>,
}

/// Digitised points over the rebuilt curves of every arm; times on the figure's own axis.
pub struct RebuildPlot {
    /// Title line.
    pub title: String,
    /// Time unit of the figure when known (`run` knows it from `[data] time_unit`).
    pub unit: Option<TimeUnit>,
    /// Arms in the order of the points file.
    pub arms: Vec<RebuildPlotArm>,
}

/// Height of one row of numbers at risk under the plot, in pixels.
const ROW: u32 = 18;

/// Height of the plotting area above the rows of numbers at risk.
const CHART_HEIGHT: u32 = 535;

impl RebuildPlot {
    /// Colour of arm `index`: the series colours in order (not family colours: an arm is not
    /// a family), so arms stay apart.
    pub fn arm_colour(index: usize) -> RGBColor {
        series_colour(index)
    }

    /// Rows of numbers at risk: two (published, rebuilt) per arm with a risk table.
    fn risk_rows(&self) -> u32 {
        2 * self.arms.iter().filter(|a| a.at_risk.len() > 1).count() as u32
    }

    /// End of the time axis: the last digitised or rebuilt time.
    fn end(&self) -> f64 {
        let last = self
            .arms
            .iter()
            .flat_map(|a| {
                a.points
                    .iter()
                    .map(|p| p.0)
                    .chain(a.km.steps.last().map(|s| s.time))
            })
            .fold(0.0, f64::max);
        if last > 0.0 {
            last
        } else {
            1.0
        }
    }
}

/// Step path of a Kaplan–Meier estimate from (0, 1) to its last time.
fn step_path(km: &KaplanMeier) -> Vec<(f64, f64)> {
    let mut path = vec![(0.0, 1.0)];
    let mut last = 1.0;
    for s in &km.steps {
        if s.survival != last {
            path.push((s.time, last));
            path.push((s.time, s.survival));
            last = s.survival;
        }
    }
    if let Some(end) = km.steps.last() {
        path.push((end.time, last));
    }
    path
}

impl Plot for RebuildPlot {
    fn size(&self) -> (u32, u32) {
        let rows = self.risk_rows();
        let under = if rows > 0 { 14 + (rows + 1) * ROW } else { 0 };
        (960, CHART_HEIGHT + under.max(10))
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(err)?;
        let (left, legend) = root.split_horizontally(740);
        let (top, risk) = left.split_vertically(CHART_HEIGHT);
        let end = self.end();
        let ticks = nice_ticks(end, 10);
        let x_desc = match self.unit {
            Some(unit) => format!("Time ({unit})"),
            None => "Time (the figure's unit)".to_string(),
        };
        let mut chart = super::time_chart(
            &top,
            &self.title,
            58,
            (0f64..end, 0f64..1.0f64),
            (&x_desc, "Survival probability"),
        )?;
        draw_x_ticks(root, &mut chart, &ticks, (0.0, 1.0))?;

        for (i, arm) in self.arms.iter().enumerate() {
            let colour = Self::arm_colour(i);
            chart
                .draw_series(std::iter::once(PathElement::new(
                    step_path(&arm.km),
                    colour.stroke_width(2),
                )))
                .map_err(err)?;
            chart
                .draw_series(
                    arm.points
                        .iter()
                        .map(|&(t, s)| Circle::new((t, s), 3, colour.stroke_width(1))),
                )
                .map_err(err)?;
        }

        // Numbers at risk: per arm with a table, the published row above the rebuilt one, at
        // the table's own times; a label closer than 30 pixels to the previous one is skipped
        // so that numbers never overlap. Row names sit in the legend column on the right.
        let mut y = risk.get_base_pixel().1 + 14;
        let small = text_style(12);
        let centred = small.pos(Pos::new(HPos::Center, VPos::Top));
        if self.risk_rows() > 0 {
            root.draw(&Text::new("at risk".to_string(), (6, y), small.clone()))
                .map_err(err)?;
            y += ROW as i32;
        }
        for (i, arm) in self.arms.iter().enumerate() {
            if arm.at_risk.len() < 2 {
                continue;
            }
            let colour = Self::arm_colour(i);
            let name = arm.label.as_deref().unwrap_or("all");
            for (which, value) in [
                (
                    "published",
                    (|a: &AtRiskCheck| a.published) as fn(&AtRiskCheck) -> u64,
                ),
                ("rebuilt", |a: &AtRiskCheck| a.rebuilt),
            ] {
                root.draw(&PathElement::new(
                    vec![(8, y + 7), (30, y + 7)],
                    colour.stroke_width(2),
                ))
                .map_err(err)?;
                let mut previous: Option<i32> = None;
                for check in &arm.at_risk {
                    let (x, _) = chart.backend_coord(&(check.time, 0.0));
                    if previous.is_some_and(|p| x - p < 30) {
                        continue;
                    }
                    previous = Some(x);
                    root.draw(&Text::new(
                        value(check).to_string(),
                        (x, y),
                        centred.clone(),
                    ))
                    .map_err(err)?;
                }
                root.draw(&Text::new(
                    format!("{name}: {which}"),
                    (748, y),
                    small.clone(),
                ))
                .map_err(err)?;
                y += ROW as i32;
            }
        }

        let mut entries = Vec::new();
        for (i, arm) in self.arms.iter().enumerate() {
            let colour = Self::arm_colour(i);
            let name = arm
                .label
                .as_deref()
                .map(|l| format!("{l}: "))
                .unwrap_or_default();
            entries.push((format!("{name}rebuilt Kaplan–Meier"), Mark::Line(colour, 2)));
            entries.push((format!("{name}digitised points"), Mark::Point(colour)));
        }
        draw_legend(&legend, "By arm", &entries)
    }
}

#[cfg(test)]
mod tests {
    use super::super::{hex, tests::polylines, to_png, to_svg};
    use super::*;
    use crate::input::Record;

    /// Two invented arms: five patients each, events and censorings worked by hand.
    fn two_arms() -> RebuildPlot {
        let arm = |label: &str, times: [(f64, bool); 5]| {
            let records: Vec<Record> = times
                .iter()
                .map(|&(time, event)| Record { time, event })
                .collect();
            let km = KaplanMeier::from_records(&records);
            // Points at the top and bottom of each drop, read from the estimate.
            let mut points = vec![(0.0, 1.0)];
            let mut last = 1.0;
            for s in &km.steps {
                if s.events > 0 {
                    points.push((s.time, last));
                    points.push((s.time, s.survival));
                }
                last = s.survival;
            }
            let at_risk = [0.0, 2.5]
                .iter()
                .map(|&t| AtRiskCheck {
                    time: t,
                    published: km.at_risk_at(t) as u64,
                    rebuilt: km.at_risk_at(t) as u64,
                })
                .collect();
            RebuildPlotArm {
                label: Some(label.into()),
                points,
                km,
                at_risk,
            }
        };
        RebuildPlot {
            title: "test".into(),
            unit: Some(TimeUnit::Months),
            arms: vec![
                arm(
                    "a",
                    [
                        (1.0, true),
                        (2.0, false),
                        (3.0, true),
                        (4.0, true),
                        (5.0, false),
                    ],
                ),
                arm(
                    "b",
                    [
                        (1.5, true),
                        (2.0, true),
                        (3.5, false),
                        (4.5, true),
                        (6.0, false),
                    ],
                ),
            ],
        }
    }

    #[test]
    fn svg_has_one_step_line_and_every_point_per_arm() {
        let plot = two_arms();
        let svg = to_svg(&plot).unwrap();
        let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
        let lines = polylines(&svg);
        for (i, arm) in plot.arms.iter().enumerate() {
            let colour = hex(RebuildPlot::arm_colour(i));
            // The step line: from (0, 1) two corners per drop and the end, never diagonal.
            let steps: Vec<&Vec<(f64, f64)>> = lines
                .iter()
                .filter(|(c, p)| *c == colour && p.len() > 2)
                .map(|(_, p)| p)
                .collect();
            assert_eq!(steps.len(), 1, "arm {i}: one step line");
            let drops = arm.km.steps.iter().filter(|s| s.events > 0).count();
            assert_eq!(steps[0].len(), 2 + 2 * drops);
            for w in steps[0].windows(2) {
                assert!(w[0].0 == w[1].0 || w[0].1 == w[1].1, "{w:?}");
            }
            // Markers: one circle per digitised point, plus the legend's filled one.
            let circles = doc
                .descendants()
                .filter(|n| n.has_tag_name("circle") && n.attribute("stroke") == Some(&colour))
                .count();
            assert_eq!(circles, arm.points.len(), "arm {i}");
        }
        // Numbers at risk under the plot: published and rebuilt rows for both arms.
        let texts: Vec<String> = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter_map(|n| n.text().map(|t| t.trim().to_string()))
            .collect();
        for label in ["a: published", "a: rebuilt", "b: published", "b: rebuilt"] {
            assert!(texts.iter().any(|t| t == label), "{label}: {texts:?}");
        }
    }

    #[test]
    fn png_has_the_plot_size_and_room_for_the_risk_rows() {
        let plot = two_arms();
        let (w, h) = plot.size();
        assert_eq!(h, CHART_HEIGHT + 14 + 5 * ROW);
        let bytes = to_png(&plot).unwrap();
        let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
        let reader = decoder.read_info().unwrap();
        assert_eq!((reader.info().width, reader.info().height), (w, h));
    }
}
