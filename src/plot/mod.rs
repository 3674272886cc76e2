//! Plots with `plotters`, each drawn once against a generic backend and rendered to SVG (text)
//! and PNG (bytes): no file I/O here, callers write through [`crate::output::write_atomic`].
//!
//! One file per plot, each implementing [`Plot`]. Shared here: the palette (our own,
//! chosen to stay distinguishable under the common colour-vision deficiencies, with
//! lightness differences as a second cue), the bundled font, the legend panel that sits
//! beside the plotting area so it never covers data, and "nice" axis ticks.
//!
//! PNG text uses DejaVu Sans, bundled in `assets/fonts/` (Bitstream Vera licence, beside it)
//! and compiled into the binary, so PNGs render the same on any machine; SVG text names the
//! generic `sans-serif` family and is drawn by the viewer's own fonts.

mod diagnostics;
mod effects;
mod hazard;
mod horizon;
mod payoffs;
mod population;
mod rebuild;
mod survival;
mod tunnels;

pub use diagnostics::{diagnostic_points, DiagnosticPlot, Transform};
pub use effects::{EffectsPlot, ResidualPanel};
pub use hazard::{smoothed_hazard, HazardPlot, SmoothedHazard};
pub use horizon::HorizonPlot;
pub use payoffs::{PayoffPanel, PayoffPlot};
pub use population::PopulationPlot;
pub use rebuild::{RebuildPlot, RebuildPlotArm};
pub use survival::SurvivalPlot;
pub use tunnels::{TunnelMarker, TunnelPlot};

use crate::curve::{Curve, ParametricCurve};
use crate::error::{Error, Result};
use crate::fit::FitFile;
use crate::input::Dataset;
use crate::km::KaplanMeier;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

// The house palette, in one place: every plot and the report's stylesheet
// (`report::style`) take their colours from here, each colour with one role.

/// Colour of the Kaplan–Meier estimate and other empirical quantities (near black); also the
/// text colour of plots and of the report.
pub const EMPIRICAL: RGBColor = RGBColor(0x1c, 0x1c, 0x1c);

/// Colour of the Kaplan–Meier confidence band (filled lightly) and of the report's reading
/// guides.
pub const BAND: RGBColor = RGBColor(0x9e, 0xa9, 0xb8);

/// Colour of reference lines (end of follow-up, tolerance, markers).
pub const REFERENCE: RGBColor = RGBColor(0x70, 0x70, 0x70);

/// Colour of grid lines.
pub const GRID: RGBColor = RGBColor(0xe4, 0xe4, 0xe4);

/// Secondary text: figure captions and the report's meta line.
pub const MUTED: RGBColor = RGBColor(0x50, 0x50, 0x50);

/// Rules between table rows in the report.
pub const RULE: RGBColor = RGBColor(0xd6, 0xd6, 0xd6);

/// Light tint behind table headings and verbatim text in the report.
pub const TINT: RGBColor = RGBColor(0xf1, 0xf1, 0xee);

/// The caution's accent (and of warnings), and the wash behind it.
pub const CAUTION: RGBColor = RGBColor(0xb0, 0x30, 0x2e);

/// Wash behind a caution or warning.
pub const CAUTION_WASH: RGBColor = RGBColor(0xf7, 0xef, 0xe9);

/// Lines of marked tunnel numbers (suggested count, stable from), in order; their lightness
/// differs from the curve colours', and none is the caution's red (a marker is not a warning).
pub const MARKER_COLOURS: [RGBColor; 3] = [
    REFERENCE,
    RGBColor(0x2f, 0x6b, 0x3a),
    RGBColor(0x4d, 0x3a, 0x7a),
];

/// Lines that are not families (the arms of a rebuild, the measures of the truncation plot),
/// in order: kept apart from the family colours so that blue never means "exponential" in
/// one plot and an arm in the next.
pub const SERIES_COLOURS: [RGBColor; 4] = [
    RGBColor(0x2e, 0x5a, 0x6b),
    RGBColor(0xb8, 0x61, 0x2a),
    RGBColor(0x6a, 0x4c, 0x93),
    RGBColor(0x4f, 0x7a, 0x28),
];

/// Colour of series `index` (see [`SERIES_COLOURS`]).
pub fn series_colour(index: usize) -> RGBColor {
    SERIES_COLOURS[index % SERIES_COLOURS.len()]
}

/// Fixed colours of the families tunnelcast knows, so a family looks the same in every plot.
const FAMILY_COLOURS: [(&str, RGBColor); 6] = [
    ("exponential", RGBColor(0x3b, 0x6f, 0xb6)),
    ("weibull", RGBColor(0xe6, 0x9a, 0x2e)),
    ("lognormal", RGBColor(0x8c, 0x4b, 0xad)),
    ("loglogistic", RGBColor(0x2a, 0xa6, 0xa0)),
    ("gompertz", RGBColor(0xc9, 0x40, 0x6a)),
    ("generalized-gamma", RGBColor(0x6f, 0x7f, 0x1f)),
];

/// Colours for families without a fixed colour (flexible families, adjusted curves).
const SPARE_COLOURS: [RGBColor; 4] = [
    RGBColor(0x7a, 0x52, 0x30),
    RGBColor(0x4d, 0x4d, 0x9a),
    RGBColor(0xd7, 0x7f, 0xb3),
    RGBColor(0x5f, 0x8f, 0x3f),
];

/// The colour of a family's curve: fixed for known families, otherwise chosen from the spare
/// colours by the name (so it is stable from plot to plot).
pub fn family_colour(family: &str) -> RGBColor {
    if let Some((_, c)) = FAMILY_COLOURS.iter().find(|(n, _)| *n == family) {
        return *c;
    }
    let index = family.bytes().map(usize::from).sum::<usize>() % SPARE_COLOURS.len();
    SPARE_COLOURS[index]
}

/// Upper-case hex `#RRGGBB` of a colour, as it appears in SVG output.
pub fn hex(colour: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", colour.0, colour.1, colour.2)
}

/// The font family name every plot asks for.
const FONT: &str = "sans-serif";

/// DejaVu Sans, bundled for PNG text (see `assets/fonts/DejaVuSans-LICENSE.txt`).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Registers the bundled font once per process.
fn register_font() -> Result<()> {
    static REGISTERED: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let ok = *REGISTERED.get_or_init(|| {
        plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(Error::Computation(
            "the bundled plot font could not be loaded".into(),
        ))
    }
}

/// A plot that can be drawn on any plotters backend.
pub trait Plot {
    /// Width and height in pixels (SVG user units).
    fn size(&self) -> (u32, u32);
    /// Draws the whole figure on `area`; errors are plotters' messages.
    fn draw<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
    ) -> std::result::Result<(), String>;
}

fn plot_error(e: String) -> Error {
    Error::Computation(format!("drawing a plot failed: {e}"))
}

/// Renders a plot as SVG text.
pub fn to_svg(plot: &impl Plot) -> Result<String> {
    register_font()?;
    let mut text = String::new();
    {
        let area = SVGBackend::with_string(&mut text, plot.size()).into_drawing_area();
        plot.draw(&area).map_err(plot_error)?;
        area.present().map_err(|e| plot_error(e.to_string()))?;
    }
    Ok(text)
}

/// Renders a plot as PNG bytes (8-bit RGB).
pub fn to_png(plot: &impl Plot) -> Result<Vec<u8>> {
    register_font()?;
    let (w, h) = plot.size();
    let mut pixels = vec![0u8; w as usize * h as usize * 3];
    {
        let area = BitMapBackend::with_buffer(&mut pixels, (w, h)).into_drawing_area();
        plot.draw(&area).map_err(plot_error)?;
        area.present().map_err(|e| plot_error(e.to_string()))?;
    }
    let mut bytes = Vec::new();
    {
        let mut encoder = png::Encoder::new(&mut bytes, w, h);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        let mut writer = encoder
            .write_header()
            .map_err(|e| plot_error(e.to_string()))?;
        writer
            .write_image_data(&pixels)
            .map_err(|e| plot_error(e.to_string()))?;
    }
    Ok(bytes)
}

/// Plot formats a single plot file can be written in, by extension.
pub const PLOT_FORMATS: [&str; 2] = ["svg", "png"];

/// Checks that `path` (given with `option`) ends in a plot format, before anything is computed.
pub fn check_plot_path(path: &std::path::Path, option: &str) -> Result<()> {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    if PLOT_FORMATS.contains(&ext.as_str()) {
        return Ok(());
    }
    let hint = crate::units::nearest(&ext, &PLOT_FORMATS)
        .filter(|_| !ext.is_empty())
        .map(|n| format!(" (did you mean \".{n}\"?)"))
        .unwrap_or_default();
    let found = if ext.is_empty() {
        "no extension".to_string()
    } else {
        format!("\".{ext}\"")
    };
    Err(Error::Usage(format!(
        "{option} {}: a plot file must end in .svg or .png, not {found}{hint}",
        path.display()
    )))
}

/// Renders `plot` in the format named by `path`'s extension (checked by [`check_plot_path`]).
pub fn render_to(path: &std::path::Path, plot: &impl Plot) -> Result<Vec<u8>> {
    check_plot_path(path, "plot")?;
    let png = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("png"));
    if png {
        to_png(plot)
    } else {
        Ok(to_svg(plot)?.into_bytes())
    }
}

/// A rendered figure: file name (without folder) and bytes.
pub type Figure = (String, Vec<u8>);

/// Both renderings of one plot, named `STEM.svg` and `STEM.png`.
pub fn both(stem: &str, plot: &impl Plot) -> Result<Vec<Figure>> {
    Ok(vec![
        (format!("{stem}.svg"), to_svg(plot)?.into_bytes()),
        (format!("{stem}.png"), to_png(plot)?),
    ])
}

/// A file-name-safe form of an arm label (letters, digits, `-` and `_`; others become `_`).
pub fn file_stem(arm: Option<&str>) -> String {
    match arm {
        None => String::new(),
        Some(a) => {
            let safe: String = a
                .chars()
                .map(|c| {
                    if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                        c
                    } else {
                        '_'
                    }
                })
                .collect();
            format!("-{safe}")
        }
    }
}

/// The converged fits of one arm as curves, labelled by family, in the fit file's order (AIC).
pub fn fitted_curves(file: &FitFile, arm: Option<&str>) -> Vec<(String, ParametricCurve)> {
    file.fits
        .iter()
        .filter(|f| f.arm.as_deref() == arm && f.converged)
        .filter_map(|f| {
            let family = f.family().ok()?;
            let params = f.param_vector(family)?;
            let curve = ParametricCurve::new(family, params, file.data.time_unit).ok()?;
            Some((f.family.clone(), curve))
        })
        .collect()
}

/// Plots (a)–(c) for every arm of a fitted dataset, extrapolated to `horizon` (data's unit).
/// The survival and hazard plots show time in years where the data span more than two years
/// (the comparison's display unit), otherwise in the data's unit; the diagnostics keep the
/// data's unit (ln t only shifts).
pub fn fit_figures(data: &Dataset, file: &FitFile, horizon: f64) -> Result<Vec<Figure>> {
    let unit = file.data.time_unit;
    let display = crate::plausibility::comparison::default_display_unit(file);
    let scale = unit.factor_to(display);
    let mut figures = Vec::new();
    for arm in &data.arms {
        let label = arm.arm.as_deref();
        let km = KaplanMeier::from_records(&arm.records);
        let shown_records: Vec<crate::input::Record> = arm
            .records
            .iter()
            .map(|r| crate::input::Record {
                time: r.time * scale,
                event: r.event,
            })
            .collect();
        let shown_km = KaplanMeier::from_records(&shown_records);
        let owned = fitted_curves(file, label);
        let curves: Vec<(String, &dyn Curve)> = owned
            .iter()
            .map(|(n, c)| (n.clone(), c as &dyn Curve))
            .collect();
        let suffix = file_stem(label);
        let named = |what: &str| match label {
            Some(a) => format!("{what}: arm {a}"),
            None => what.to_string(),
        };
        figures.extend(both(
            &format!("survival{suffix}"),
            &SurvivalPlot {
                title: named("Kaplan–Meier and fitted survival"),
                unit: display,
                km: &shown_km,
                curves: curves.clone(),
                horizon: horizon * scale,
            },
        )?);
        figures.extend(both(
            &format!("hazard{suffix}"),
            &HazardPlot {
                title: named("Smoothed and fitted hazards"),
                unit: display,
                km: &shown_km,
                curves: curves.clone(),
                horizon: horizon * scale,
            },
        )?);
        figures.extend(both(
            &format!("diagnostics{suffix}"),
            &DiagnosticPlot {
                title: named("Straight-line diagnostics"),
                unit,
                km: &km,
                curves,
            },
        )?);
    }
    Ok(figures)
}

/// End of the population plot's time axis, years: the mean horizon, or earlier where the
/// population's survival falls below 1%, but at least one and a half times the follow-up.
pub fn population_horizon_years(
    population: &crate::adjust::background::BackgroundHazard,
    mean_horizon_years: f64,
    follow_up_years: f64,
) -> f64 {
    let mut end = mean_horizon_years;
    let mut t = 0.0;
    while t < mean_horizon_years {
        t += 0.5;
        if crate::plausibility::population::population_survival(population, t) < 0.01 {
            end = t;
            break;
        }
    }
    end.max(1.5 * follow_up_years)
}

/// The population plot of every arm (`population-ARM.svg`/`.png`): the converged fits against
/// general-population survival from the same age, times in `display`; `extra` adds labelled
/// curves to the arm `extra_arm` (the chosen curve with its adjustments). Nothing without a
/// life table in `settings`.
pub fn population_figures(
    file: &FitFile,
    settings: &crate::plausibility::Settings,
    display: crate::units::TimeUnit,
    extra_arm: Option<&str>,
    extra: &[(String, &dyn Curve)],
) -> Result<Vec<Figure>> {
    let Some(population) = &settings.population else {
        return Ok(Vec::new());
    };
    let unit = file.data.time_unit;
    let mut figures = Vec::new();
    for arm in &file.data.arms {
        let label = arm.arm.as_deref();
        let owned = fitted_curves(file, label);
        let curves: Vec<(String, &dyn Curve)> = owned
            .iter()
            .map(|(n, c)| (n.clone(), c as &dyn Curve))
            .collect();
        let follow_years = unit.convert(arm.max_time, crate::units::TimeUnit::Years);
        let horizon_years =
            population_horizon_years(population, settings.mean_horizon_years, follow_years);
        let to_display = crate::units::TimeUnit::Years.factor_to(display);
        let title = match label {
            Some(a) => format!("Fitted survival and the general population: arm {a}"),
            None => "Fitted survival and the general population".to_string(),
        };
        let plot = PopulationPlot {
            title,
            unit: display,
            curves,
            extra: if label == extra_arm {
                extra.to_vec()
            } else {
                Vec::new()
            },
            population,
            follow_up: follow_years * to_display,
            horizon: horizon_years * to_display,
        };
        figures.extend(both(&format!("population{}", file_stem(label)), &plot)?);
    }
    Ok(figures)
}

/// Maps any plotters error to text.
fn err<E: std::fmt::Display>(e: E) -> String {
    e.to_string()
}

/// A chart over time-like axes in the house style (survival, hazard, tunnels, rebuild): title,
/// margins, horizontal grid lines only, the y axis labelled with [`tick_label`], and no x tick
/// labels of its own (callers draw them with [`draw_x_ticks`], at "nice" values).
fn time_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    title: &str,
    y_label_area: u32,
    (x, y): (std::ops::Range<f64>, std::ops::Range<f64>),
    (x_desc, y_desc): (&str, &str),
) -> std::result::Result<ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>, String>
{
    let mut chart = ChartBuilder::on(area)
        .caption(title, text_style(17))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(y_label_area)
        .build_cartesian_2d(x, y)
        .map_err(err)?;
    chart
        .configure_mesh()
        .light_line_style(WHITE)
        .bold_line_style(GRID)
        .disable_x_mesh()
        .x_labels(0)
        .x_desc(x_desc)
        .y_desc(y_desc)
        .y_label_formatter(&|y| tick_label(*y))
        .label_style(text_style(13))
        .axis_desc_style(text_style(14))
        .draw()
        .map_err(err)?;
    Ok(chart)
}

/// How a legend entry is drawn.
#[derive(Debug, Clone, Copy)]
pub enum Mark {
    /// A line in this colour and width.
    Line(RGBColor, u32),
    /// A filled swatch (a band).
    Swatch(RGBColor),
    /// A point.
    Point(RGBColor),
}

/// Text style of titles, axis labels and legends.
fn text_style(size: u32) -> TextStyle<'static> {
    (FONT, size).into_font().color(&EMPIRICAL)
}

/// Draws a legend as a list down the panel `area` (beside the plot, never over it), under a
/// `heading` that says what the entries are ("Estimate and fits", "By arm"), not "Legend".
fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    heading: &str,
    entries: &[(String, Mark)],
) -> std::result::Result<(), String> {
    let style = text_style(13);
    let mut y = 46;
    area.draw(&Text::new(heading.to_string(), (8, y - 20), text_style(13)))
        .map_err(err)?;
    for (label, mark) in entries {
        match mark {
            Mark::Line(c, w) => area
                .draw(&PathElement::new(
                    vec![(8, y + 7), (34, y + 7)],
                    c.stroke_width(*w),
                ))
                .map_err(err)?,
            Mark::Swatch(c) => area
                .draw(&Rectangle::new(
                    [(8, y + 1), (34, y + 13)],
                    c.mix(0.35).filled(),
                ))
                .map_err(err)?,
            Mark::Point(c) => area
                .draw(&Circle::new((21, y + 7), 3, c.filled()))
                .map_err(err)?,
        }
        area.draw(&Text::new(label.clone(), (40, y), style.clone()))
            .map_err(err)?;
        y += 20;
    }
    Ok(())
}

/// Draws vertical grid lines and labels at our own `ticks` on a chart whose own x labels are
/// switched off, so that rows placed under the axis (numbers at risk) line up with them.
fn draw_x_ticks<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    ticks: &[f64],
    y_range: (f64, f64),
) -> std::result::Result<(), String> {
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    chart
        .draw_series(
            ticks.iter().map(|&t| {
                PathElement::new(vec![(t, y_range.0), (t, y_range.1)], GRID.stroke_width(1))
            }),
        )
        .map_err(err)?;
    let centred = text_style(13).pos(Pos::new(HPos::Center, VPos::Top));
    for &t in ticks {
        let (x, y) = chart.backend_coord(&(t, y_range.0));
        root.draw(&PathElement::new(
            vec![(x, y), (x, y + 5)],
            EMPIRICAL.stroke_width(1),
        ))
        .map_err(err)?;
        root.draw(&Text::new(tick_label(t), (x, y + 8), centred.clone()))
            .map_err(err)?;
    }
    Ok(())
}

/// Round tick positions covering [0, max]: steps of 1, 2 or 5 times a power of ten,
/// at most `most` intervals.
pub fn nice_ticks(max: f64, most: usize) -> Vec<f64> {
    if !(max.is_finite() && max > 0.0) {
        return vec![0.0];
    }
    let raw = max / most.max(1) as f64;
    let power = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * power)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * power);
    let count = (max / step + 1e-9).floor() as usize;
    (0..=count).map(|i| i as f64 * step).collect()
}

/// Evenly spaced grid of `n` + 1 points over [a, b].
fn grid(a: f64, b: f64, n: usize) -> impl Iterator<Item = f64> {
    (0..=n).map(move |i| a + (b - a) * i as f64 / n as f64)
}

/// Short label for a tick value (no trailing zeros). Axis positions built by repeated
/// addition over a range that crosses zero land a rounding error away from it (−2.8e−17);
/// such a position is the zero tick and is labelled "0".
fn tick_label(x: f64) -> String {
    if x.abs() < 1e-12 {
        return "0".into();
    }
    let s = crate::format::sig(x, 4);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::{LogLogistic, Weibull};
    use crate::input::Record;
    use crate::units::TimeUnit;

    /// Polylines of an SVG document as (stroke colour, points).
    pub(crate) fn polylines(svg: &str) -> Vec<(String, Vec<(f64, f64)>)> {
        let doc = roxmltree::Document::parse(svg).expect("SVG parses as XML");
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        doc.descendants()
            .filter(|n| n.has_tag_name("polyline"))
            .map(|n| {
                let points = n
                    .attribute("points")
                    .unwrap_or("")
                    .split_whitespace()
                    .map(|p| {
                        let (x, y) = p.split_once(',').unwrap();
                        (x.parse().unwrap(), y.parse().unwrap())
                    })
                    .collect();
                (n.attribute("stroke").unwrap_or("").to_string(), points)
            })
            .collect()
    }

    fn small_km() -> KaplanMeier {
        // Weibull quantiles with every fifth subject censored at the same time (no randomness).
        let mut records: Vec<Record> = (1..=200)
            .map(|i| Record {
                time: 12.0 * (-(1.0 - (i as f64 - 0.5) / 200.0).ln()).powf(1.0 / 1.3),
                event: i % 5 != 0,
            })
            .collect();
        records.sort_by(|a, b| a.time.total_cmp(&b.time));
        KaplanMeier::from_records(&records)
    }

    #[test]
    fn survival_svg_has_one_curve_per_family_and_the_step_path() {
        let km = small_km();
        let weibull = ParametricCurve::new(&Weibull, vec![1.3, 12.0], TimeUnit::Months).unwrap();
        // A curve in another unit must still be drawn (converted), not skipped.
        let loglogistic =
            ParametricCurve::new(&LogLogistic, vec![1.8, 300.0], TimeUnit::Days).unwrap();
        let plot = SurvivalPlot {
            title: "test".into(),
            unit: TimeUnit::Months,
            km: &km,
            curves: vec![
                ("weibull".into(), &weibull as &dyn Curve),
                ("loglogistic".into(), &loglogistic as &dyn Curve),
            ],
            horizon: 60.0,
        };
        let svg = to_svg(&plot).unwrap();
        let lines = polylines(&svg);
        // A curve is a polyline with many points; legend samples and ticks have two.
        let curves = |colour: RGBColor| {
            lines
                .iter()
                .filter(|(c, p)| *c == hex(colour) && p.len() > 50)
                .count()
        };
        assert_eq!(curves(family_colour("weibull")), 1);
        assert_eq!(curves(family_colour("loglogistic")), 1);
        // The legend panel says what it lists.
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let texts: Vec<&str> = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter_map(|n| n.text())
            .map(str::trim)
            .collect();
        assert!(texts.contains(&"Estimate and fits"), "{texts:?}");
        assert!(!texts.contains(&"Legend"));
        let steps: Vec<&Vec<(f64, f64)>> = lines
            .iter()
            .filter(|(c, p)| *c == hex(EMPIRICAL) && p.len() > 50)
            .map(|(_, p)| p)
            .collect();
        assert_eq!(steps.len(), 1, "one Kaplan–Meier path");
        // A step path moves horizontally or vertically, never diagonally, and only down.
        for w in steps[0].windows(2) {
            assert!(w[0].0 == w[1].0 || w[0].1 == w[1].1, "{w:?}");
            assert!(w[1].1 >= w[0].1, "pixel y grows as survival falls");
        }
    }

    #[test]
    fn png_decodes_with_the_plot_size() {
        let km = small_km();
        let plot = DiagnosticPlot {
            title: "test".into(),
            unit: TimeUnit::Months,
            km: &km,
            curves: vec![],
        };
        let bytes = to_png(&plot).unwrap();
        let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
        let mut reader = decoder.read_info().unwrap();
        let mut buf = vec![0; reader.output_buffer_size()];
        let info = reader.next_frame(&mut buf).unwrap();
        assert_eq!((info.width, info.height), plot.size());
        // Text and points were drawn: not a blank page.
        let pixels = &buf[..info.buffer_size()];
        let dark = pixels
            .chunks(3)
            .filter(|p| p[0] < 100 && p[1] < 100 && p[2] < 100)
            .count();
        assert!(dark > 500, "{dark} dark pixels");
    }

    #[test]
    fn a_rounding_error_at_zero_is_labelled_zero() {
        // −0.3 + 0.1 + 0.1 + 0.1 leaves a rounding error where the axis crosses zero.
        let mut x: f64 = -0.3;
        for _ in 0..3 {
            x += 0.1;
        }
        assert!(
            x != 0.0 && x.abs() < 1e-15,
            "the example must carry a rounding error: {x}"
        );
        assert_eq!(tick_label(x), "0");
        assert_eq!(tick_label(-0.0), "0");
        assert_eq!(tick_label(0.25), "0.25");
        assert_eq!(tick_label(-1.5), "-1.5");
    }

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        assert_eq!(nice_ticks(42.0, 8), vec![0.0, 10.0, 20.0, 30.0, 40.0]);
        assert_eq!(nice_ticks(240.0, 10), vec![0.0, 50.0, 100.0, 150.0, 200.0]);
        assert_eq!(nice_ticks(1.0, 4), vec![0.0, 0.5, 1.0]);
    }

    #[test]
    fn every_family_has_a_distinct_colour() {
        let names = [
            "exponential",
            "weibull",
            "lognormal",
            "loglogistic",
            "gompertz",
            "generalized-gamma",
        ];
        let colours: Vec<String> = names.iter().map(|n| hex(family_colour(n))).collect();
        for (i, a) in colours.iter().enumerate() {
            for b in &colours[i + 1..] {
                assert_ne!(a, b);
            }
            assert_ne!(a, &hex(EMPIRICAL));
        }
    }

    #[test]
    fn each_palette_colour_has_one_role() {
        // Series (arms, measures), markers, the caution and the families never share a colour,
        // so a colour means the same thing in every plot and in the report.
        let mut roles: Vec<(String, RGBColor)> = vec![
            ("empirical".into(), EMPIRICAL),
            ("band".into(), BAND),
            ("reference".into(), REFERENCE),
            ("grid".into(), GRID),
            ("muted".into(), MUTED),
            ("rule".into(), RULE),
            ("tint".into(), TINT),
            ("caution".into(), CAUTION),
            ("caution wash".into(), CAUTION_WASH),
        ];
        roles.extend(
            MARKER_COLOURS
                .iter()
                .skip(1) // the first marker is the reference grey itself
                .enumerate()
                .map(|(i, c)| (format!("marker {i}"), *c)),
        );
        roles.extend(
            SERIES_COLOURS
                .iter()
                .enumerate()
                .map(|(i, c)| (format!("series {i}"), *c)),
        );
        roles.extend(FAMILY_COLOURS.iter().map(|(n, c)| (n.to_string(), *c)));
        roles.extend(
            SPARE_COLOURS
                .iter()
                .enumerate()
                .map(|(i, c)| (format!("spare {i}"), *c)),
        );
        for (i, (a, ca)) in roles.iter().enumerate() {
            for (b, cb) in &roles[i + 1..] {
                assert_ne!(hex(*ca), hex(*cb), "{a} and {b} share a colour");
            }
        }
        assert_eq!(MARKER_COLOURS[0], REFERENCE);
    }
}
