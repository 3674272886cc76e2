//! `tunnelcast fit DATA.csv`: fit the families, print the comparison sorted by AIC, write the fit JSON.

use crate::error::{Error, Result};
use crate::families;
use crate::fit::{fit_dataset, select_families_with, FitFile};
use crate::input::{self, InputOptions};
use crate::output;
use crate::units::TimeUnit;
use clap::Args;
use std::path::PathBuf;

/// Options of `fit`.
#[derive(Debug, Args)]
#[command(after_help = concat!(
    "Example:\n  tunnelcast fit data/demo_trial.csv --time-unit months --arm-col arm --json fit.json\n\n",
    "Caution: extrapolated survival is an assumption, not an observation. Check every extrapolation \
against clinical opinion and external data. tunnelcast does not replace local HTA guidance or qualified review."
))]
pub struct FitArgs {
    /// Time-to-event CSV with a header row.
    pub data: PathBuf,
    /// Column with the time to event or censoring.
    #[arg(long, default_value = "time")]
    pub time_col: String,
    /// Column with 1 for an event, 0 for censoring.
    #[arg(long, default_value = "event")]
    pub event_col: String,
    /// Column naming the arm; each arm is fitted separately.
    #[arg(long)]
    pub arm_col: Option<String>,
    /// Time unit of the data (days, weeks, months, years); required, since no default can be
    /// right for every trial and a wrong one changes every table by an order of magnitude.
    #[arg(long)]
    pub time_unit: Option<TimeUnit>,
    /// Families to fit, comma-separated (default: the five standard families plus generalized-gamma).
    #[arg(long, value_delimiter = ',')]
    pub families: Vec<String>,
    /// Cut points of the piecewise family, comma-separated durations (e.g. "6 months,12 months").
    #[arg(long, value_name = "DURATIONS")]
    pub cuts: Option<String>,
    /// Knots of the spline families, comma-separated durations: K internal knots, or all K + 2
    /// with the boundary knots (default: boundaries at the extreme event times, internal knots
    /// at equally spaced quantiles of the log event times).
    #[arg(long, value_name = "DURATIONS")]
    pub knots: Option<String>,
    /// Write the fits to this JSON file.
    #[arg(long)]
    pub json: Option<PathBuf>,
    /// Write plots (Kaplan–Meier with fitted curves, hazards, straight-line diagnostics; SVG
    /// and PNG) into this folder, extrapolated to three times the longest follow-up; with
    /// --background also every fit against general-population survival (population*.svg).
    #[arg(long)]
    pub plots: Option<PathBuf>,
    /// Field delimiter (detected from the header when not given).
    #[arg(long)]
    pub delimiter: Option<char>,
    /// Replace zero times by this small positive time (data's unit) instead of rejecting them.
    #[arg(long)]
    pub zero_time: Option<f64>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// Plausibility of the extrapolation: landmarks, means, targets, general population.
    #[command(flatten)]
    pub plausibility: crate::cmd::plausibility_args::PlausibilityArgs,
    /// Unit of the times shown in the comparison and on plot axes (default: years when the
    /// data span more than two years, else the data's unit).
    #[arg(long, value_name = "UNIT")]
    pub display_unit: Option<TimeUnit>,
    /// Models across arms (`--effects`, `--reference`, `--covariates`).
    #[command(flatten)]
    pub effects: super::fit_effects::EffectsArgs,
}

/// Renders the comparison of one fit file, arm by arm (see
/// [`crate::plausibility::comparison`]), times in years when the data span more than two years.
pub fn render_comparison(file: &FitFile) -> String {
    let display = crate::plausibility::comparison::default_display_unit(file);
    crate::plausibility::comparison::render(file, display)
}

/// One line describing a configured family's settings, times in `unit`, for reading (10
/// significant digits; the fit file keeps them at full precision).
pub fn settings_text(settings: &families::FamilySettings, unit: TimeUnit) -> String {
    // The unit follows the list: singular only after a lone 1 ("cut point at 1 month").
    let list = |v: &[f64]| {
        let name = match v {
            [one] => unit.name_for(*one),
            _ => unit.name(),
        };
        format!("{} {name}", crate::format::readable_all(v).join(", "))
    };
    let mut parts = Vec::new();
    if let Some(scale) = &settings.scale {
        parts.push(format!("scale {scale}"));
    }
    if let Some(knots) = &settings.knots {
        parts.push(format!("knots at {}", list(knots)));
    }
    if let Some(cuts) = &settings.cuts {
        let what = if cuts.len() == 1 {
            "cut point"
        } else {
            "cut points"
        };
        parts.push(format!("{what} at {}", list(cuts)));
    }
    parts.join("; ")
}

/// Parses a comma-separated list of durations given to `option`, in the data's `unit`.
pub(crate) fn parse_durations(option: &str, text: &str, unit: TimeUnit) -> Result<Vec<f64>> {
    text.split(',')
        .map(|part| {
            part.parse::<crate::units::Duration>()
                .map(|d| d.in_unit(unit))
                .map_err(|e| Error::Usage(format!("{option}: {e}")))
        })
        .collect()
}

/// Runs `fit`.
pub fn run(args: FitArgs) -> Result<()> {
    let Some(time_unit) = args.time_unit else {
        // Said after reading the data, so the message can give the range of the times (and a
        // bad file is reported first).
        let options = InputOptions {
            time_col: args.time_col.clone(),
            event_col: args.event_col.clone(),
            arm_col: args.arm_col.clone(),
            delimiter: args.delimiter.filter(char::is_ascii).map(|c| c as u8),
            zero_time: args.zero_time,
        };
        let data = input::load(&args.data, &options)?;
        return Err(Error::Usage(input::time_unit_needed(
            "--time-unit",
            &args.data.display().to_string(),
            data.time_range(),
        )));
    };
    let options = families::FamilyOptions {
        cuts: args
            .cuts
            .as_deref()
            .map(|t| parse_durations("--cuts", t, time_unit))
            .transpose()?,
        knots: args
            .knots
            .as_deref()
            .map(|t| parse_durations("--knots", t, time_unit))
            .transpose()?,
    };
    let families = select_families_with(&args.families, &options)?;
    let plausibility = args.plausibility.build()?;
    if let Some(path) = &args.json {
        output::check_writable(path, args.force)?;
    }
    if let Some(dir) = &args.plots {
        output::check_folder(dir, args.force)?;
    }
    if let Some(z) = args.zero_time {
        if !(z.is_finite() && z > 0.0) {
            return Err(Error::Usage(format!(
                "--zero-time must be a positive time, got {z}"
            )));
        }
    }
    let delimiter = match args.delimiter {
        Some(c) if c.is_ascii() => Some(c as u8),
        Some(c) => {
            return Err(Error::Usage(format!(
                "--delimiter must be a single ASCII character, got {c:?}"
            )))
        }
        None => None,
    };
    let options = InputOptions {
        time_col: args.time_col,
        event_col: args.event_col,
        arm_col: args.arm_col,
        delimiter,
        zero_time: args.zero_time,
    };
    let data = input::load(&args.data, &options)?;
    let arms: Vec<Option<String>> = data.arms.iter().map(|a| a.arm.clone()).collect();
    crate::plausibility::targets::check_arms(
        &plausibility.targets,
        &arms,
        plausibility.targets_file.as_deref().unwrap_or("targets"),
    )?;
    let effects = super::fit_effects::prepare(
        &args.effects,
        &args.data,
        (
            &options.time_col,
            &options.event_col,
            options.arm_col.as_deref(),
        ),
        delimiter,
        args.zero_time,
    )?;
    let mut file = fit_dataset(&data, &families, time_unit, args.zero_time);
    file.cox = effects.as_ref().map(|e| e.cox.clone());
    if let Some(effects) = &effects {
        file.effects = super::fit_effects::joint(effects, &file);
        file.effects_design = Some(crate::effects::curve::record(
            &effects.design,
            &effects.covariates,
        ));
    }
    crate::plausibility::annotate(&mut file, &plausibility);
    let display = args
        .display_unit
        .unwrap_or_else(|| crate::plausibility::comparison::default_display_unit(&file));
    let mut text = crate::plausibility::comparison::render(&file, display);
    if let Some(effects) = &effects {
        text.push_str(&super::fit_effects::render(effects, &file.effects));
    }
    if data.zero_times_replaced > 0 {
        text.push_str(&format!(
            "note: {} zero time(s) replaced by {} {}\n",
            data.zero_times_replaced,
            args.zero_time.unwrap_or(0.0),
            time_unit
        ));
    }
    if let Some(path) = &args.json {
        let json = crate::export::json::to_json_bytes(&file)?;
        output::write_atomic(path, &json)?;
        text.push_str(&format!("wrote {}\n", path.display()));
    }
    if let Some(dir) = &args.plots {
        let longest = data.arms.iter().map(|a| a.max_time()).fold(0.0, f64::max);
        let staged = output::StagedFolder::new(dir)?;
        for (name, bytes) in crate::plot::fit_figures(&data, &file, 3.0 * longest)? {
            staged.write(&name, &bytes)?;
        }
        // With a life table: every fit against the general population of the same age.
        for (name, bytes) in
            crate::plot::population_figures(&file, &plausibility, display, None, &[])?
        {
            staged.write(&name, &bytes)?;
        }
        if let Some(effects) = &effects {
            for (name, bytes) in super::fit_effects::figures(effects, &data, time_unit)? {
                staged.write(&name, &bytes)?;
            }
        }
        staged.finish()?;
        text.push_str(&format!("wrote plots to {}\n", dir.display()));
    }
    output::print(&text);
    if file.fits.iter().all(|f| !f.converged) {
        return Err(Error::Computation("no family converged".into()));
    }
    Ok(())
}
