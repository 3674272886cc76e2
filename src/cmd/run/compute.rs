//! Computing an analysis: from the checked analysis file and the data bytes to a [`RunResult`]
//! (fits, the chosen curve and its adjustments, tunnel table, truncation and within-cycle checks,
//! draws, payoffs). Nothing here renders or writes.

use crate::adjust::{lifetable, AdjustedCurve, Adjuster};
use crate::analysis::{Analysis, Choice, Count, CurveSource, JointChoice, NamedFile};
use crate::cmd::curve_args::Base;
use crate::cmd::rebuild::{rebuild_inputs, InputNames, RebuildInputs, RebuildOutcome};
use crate::curve::{Curve, ParametricCurve};
use crate::discretise::{count_until, tunnel_table, TunnelTable};
use crate::draws::{Sampler, SummaryBuilder, SummaryRow};
use crate::effects::report::JointSummary;
use crate::error::{Error, Result};
use crate::fit::{fit_dataset, FamilyFit, FitFile};
use crate::horizon::{
    boundary_log_survival, default_horizon, stable_count, stable_window, suggested_count,
    truncation_table, within_cycle_table, TruncationRow, WithinCycleRow, DEFAULT_HORIZON_SURVIVAL,
    MAX_HORIZON_CYCLES,
};
use crate::input::{self, Dataset, InputOptions};
use std::path::Path;
use std::sync::Arc;

/// Everything an analysis computed, before it is written.
pub struct RunResult {
    /// The checked analysis.
    pub analysis: Analysis,
    /// The validated data.
    pub data: Dataset,
    /// Every fit, as written to `fit.json`.
    pub fits: FitFile,
    /// The fit carried forward: a separate fit of one arm, or a joint model across arms.
    pub chosen: Chosen,
    /// Why that fit (e.g. "smallest AIC among converged fits").
    pub chosen_by: String,
    /// `[choice] reason` of the analysis file, when given (required when the chosen family is
    /// not the lowest AIC of its arm).
    pub reason: Option<String>,
    /// The plausibility settings every fit was annotated with (landmarks, means, targets,
    /// general population); the population plot reads its life table from here.
    pub plausibility: crate::plausibility::Settings,
    /// The chosen curve in the data's time unit: a family's curve, or an arm's curve from a
    /// joint model (the curve options' own type, so every path builds it alike).
    pub curve: Base,
    /// The chosen curve with the `[adjust]` adjustments, when any were asked for; the
    /// tunnel table and the checks then use this curve.
    pub adjusted: Option<Arc<AdjustedCurve>>,
    /// Summary of the `[draws]` parameter draws (mean and 2.5%/97.5% of p_exit per tunnel).
    /// With `per_draw` on it is made while `draws.csv` is written (see [`PerDraw`]).
    pub draws: Option<Vec<SummaryRow>>,
    /// The draws still to be written to `draws.csv` (and summarised in the same pass), when
    /// `[draws] per_draw` is on; taken by the writer.
    pub per_draw: Option<PerDraw>,
    /// The descriptor of the written `draws.csv`, listed in `datapackage.json` and linked
    /// from the report.
    pub per_draw_file: Option<crate::export::descriptor::Resource>,
    /// The tunnel table.
    pub tunnels: TunnelTable,
    /// How the count was set.
    pub count_rule: String,
    /// Number of whole cycles to the horizon of the checks.
    pub horizon_cycles: usize,
    /// How the horizon was set.
    pub horizon_rule: String,
    /// The truncation table, one row per candidate count.
    pub truncation: Vec<TruncationRow>,
    /// Smallest count with both truncation errors within the tolerance.
    pub suggested_count: usize,
    /// First tunnel from which p_exit is stable within the tolerance (see
    /// [`crate::horizon::stable_count`]); `None` when not reached within the horizon.
    pub stable_count: Option<usize>,
    /// Fewest tunnels the stable stretch must span.
    pub stable_window: usize,
    /// The within-cycle table.
    pub within_cycle: Vec<WithinCycleRow>,
    /// The rebuild, when the data were rebuilt from a digitised curve (`[data] curve`).
    pub rebuild: Option<RebuildOutcome>,
    /// The payoffs of `[payoffs]`, when given.
    pub payoffs: Option<RunPayoffs>,
}

/// The parameter draws of `[draws]` with what turns each into a tunnel table, kept so that
/// `draws.csv` is streamed to the output folder (as `tunnelcast draws --layout long` writes
/// it) and summarised in one pass, instead of held in memory.
pub struct PerDraw {
    /// Natural parameters of every draw, in draw order.
    pub params: Vec<Vec<f64>>,
    /// The adjustments every draw goes through, as the point estimate did.
    pub adjuster: Adjuster,
    /// The point estimate's tunnel table before payoff columns (the draws carry none).
    pub point: TunnelTable,
}

/// The fit a run carries forward.
#[derive(Clone)]
pub enum Chosen {
    /// A separate fit of one arm (`[fit] choose`).
    Separate(Box<FamilyFit>),
    /// A joint model across arms (`[choice] model`), for one arm.
    Joint(Box<JointChosen>),
}

/// A joint model chosen by `[choice] model`: its entry in `fit.json` and the arm taken from it.
#[derive(Clone)]
pub struct JointChosen {
    /// The joint model as written to `fit.json` (estimates, log-likelihood, AIC, covariance).
    pub summary: JointSummary,
    /// The arm whose curve is carried forward.
    pub arm: String,
}

impl Chosen {
    /// The arm the tunnel table is for (`None` for data without arms).
    pub fn arm(&self) -> Option<&str> {
        match self {
            Chosen::Separate(f) => f.arm.as_deref(),
            Chosen::Joint(j) => Some(&j.arm),
        }
    }

    /// The family's name (of the reference curve, for a joint model).
    pub fn family(&self) -> &str {
        match self {
            Chosen::Separate(f) => &f.family,
            Chosen::Joint(j) => &j.summary.family,
        }
    }

    /// Log-likelihood (of the whole joint model, over every arm, for a joint model).
    pub fn loglik(&self) -> Option<f64> {
        match self {
            Chosen::Separate(f) => f.loglik,
            Chosen::Joint(j) => Some(j.summary.loglik),
        }
    }

    /// AIC (of the whole joint model, for a joint model).
    pub fn aic(&self) -> Option<f64> {
        match self {
            Chosen::Separate(f) => f.aic,
            Chosen::Joint(j) => Some(j.summary.aic),
        }
    }

    /// Covariance on the estimation scale (of all the joint model's parameters, for a joint
    /// model): what the draws sample from.
    pub fn covariance(&self) -> Option<&crate::fit::Covariance> {
        match self {
            Chosen::Separate(f) => f.covariance.as_ref(),
            Chosen::Joint(j) => Some(&j.summary.covariance),
        }
    }

    /// The separate fit, unless a joint model was chosen.
    pub fn separate(&self) -> Option<&FamilyFit> {
        match self {
            Chosen::Separate(f) => Some(f),
            Chosen::Joint(_) => None,
        }
    }
}

/// Two joint models whose AICs differ by less than this are equally good: the Weibull and the
/// exponential are each fitted as PH and as AFT, the same model twice, and their AICs agree
/// only to the optimiser's precision.
pub const JOINT_AIC_TIE: f64 = 1e-6;

/// What `[payoffs]` adds to a run: the schedule, the per-tunnel columns (also appended to the
/// tunnel table), the method table and truncation columns to the horizon.
pub struct RunPayoffs {
    /// The payoff file read and checked.
    pub file: crate::payoff::PayoffFile,
    /// The annual discount rate of every payoff figure.
    pub discount: crate::payoff::Discount,
    /// Per-tunnel payoffs of the table's tunnels, discounted within each cycle.
    pub tunnels: crate::payoff::TunnelPayoffs,
    /// The method table and `payoff_rel_error_NAME` over the horizon's cycles.
    pub horizon: crate::payoff::HorizonPayoffs,
    /// Per payoff, the running totals of every method to each boundary of the horizon
    /// (discounted), for the accrual plot.
    pub running: Vec<Vec<(crate::payoff::PayoffMethod, Vec<Option<f64>>)>>,
    /// The suggested count from the life-year criteria alone.
    pub suggested_without_payoffs: usize,
}

impl RunPayoffs {
    /// Metadata lines of every file that carries payoff figures.
    pub fn metadata(&self) -> Vec<(String, String)> {
        crate::cmd::payoff_args::payoff_metadata(&self.file, self.discount, self.tunnels.exactness)
    }
}

/// What every output of a run from a digitised curve says about the data.
pub const REBUILD_CAUTION: &str = "The patient-level data are reconstructed from a digitised Kaplan–Meier figure, not the trial's own: when patients were censored within each interval of the risk table is assumed, not known.";

/// Reads the digitised curve (and risk table) of `[data] curve` and rebuilds patient-level
/// data with the `rebuild` command's own code; errors name the analysis file's keys.
pub fn rebuild_data(analysis: &Analysis, source: &CurveSource) -> Result<RebuildOutcome> {
    let read = |f: &NamedFile, key: &str| {
        std::fs::read(&f.path).map_err(|e| {
            analysis.error_at(
                f.place,
                format!("[data] {key} {}: cannot read: {e}", f.path.display()),
            )
        })
    };
    let curve_bytes = read(&source.curve, "curve")?;
    let risk_bytes = match &source.at_risk {
        Some(r) => Some(read(r, "at_risk")?),
        None => None,
    };
    let names = InputNames {
        at_risk: "[data] at_risk",
        patients: "[data] patients",
        events: "[data] events",
    };
    rebuild_inputs(&RebuildInputs {
        curve_name: &source.curve.name,
        curve_bytes: &curve_bytes,
        at_risk: source
            .at_risk
            .as_ref()
            .zip(risk_bytes.as_deref())
            .map(|(r, b)| (r.name.as_str(), b)),
        patients: &source.patients,
        events: &source.events,
        arm_col: analysis.arm_column.as_deref(),
        names,
    })
    .map_err(|e| match e {
        Error::Usage(m) => {
            let place = if m.starts_with(names.events) {
                source.events_place
            } else if m.starts_with(names.patients) {
                source.patients_place
            } else {
                source.curve.place
            };
            analysis.error_at(
                place,
                m.replace("--arm-col not given", "[data] arm_column not given"),
            )
        }
        other => other,
    })
}

/// The last path component of a file name as given (so outputs do not depend on the working folder).
pub(super) fn file_name(path: &str) -> String {
    Path::new(path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string())
}

/// Runs the analysis on the data file's bytes; nothing is written. `lifetable_bytes`, when
/// given, are the contents of `[adjust] background` (the demo's compiled-in table); otherwise
/// the life table is read from its path.
pub fn compute(
    analysis: Analysis,
    data_bytes: &[u8],
    lifetable_bytes: Option<&[u8]>,
) -> Result<RunResult> {
    let options = InputOptions {
        time_col: analysis.time_column.clone(),
        event_col: analysis.event_column.clone(),
        arm_col: analysis.arm_column.clone(),
        delimiter: None,
        zero_time: None,
    };
    let data = input::parse(&analysis.data_name, data_bytes, &options)?;
    let mut fits = fit_dataset(&data, &analysis.families, analysis.time_unit, None);
    if let (Some(effects), Some(arm_col)) = (&analysis.effects, &analysis.arm_column) {
        let columns = (&*analysis.time_column, &*analysis.event_column, &**arm_col);
        crate::cmd::fit_effects::attach(
            &mut fits,
            effects,
            &analysis.data_name,
            data_bytes,
            columns,
        )?;
    }
    let plausibility = plausibility_settings(&analysis, &data, lifetable_bytes)?;
    crate::plausibility::annotate(&mut fits, &plausibility);
    let reason = analysis.reason.as_ref().map(|r| r.text.clone());
    let (chosen, chosen_by, curve) = match &analysis.joint {
        None => choose_separate(&analysis, &data, &fits, reason.is_some())?,
        Some(joint) => choose_joint(&analysis, joint, &fits, reason.is_some())?,
    };

    // The one way from the chosen curve to the adjusted curve, also taken by every draw.
    // The table is named as the analysis file writes it (relative to that file), as the other
    // commands name it as given: every output records the same name for the same input.
    let settings = &analysis.adjustments;
    let table = match &settings.background {
        None => None,
        Some(b) => {
            let name = analysis
                .background_name
                .clone()
                .unwrap_or_else(|| b.path.display().to_string());
            let read;
            let bytes = match lifetable_bytes {
                Some(bytes) => bytes,
                None => {
                    read = crate::csv_read::read_file(&b.path)?;
                    &read
                }
            };
            Some(lifetable::parse(&name, bytes, b.sex)?)
        }
    };
    let adjuster = Adjuster::new(settings.clone(), table)?;
    let table_curve = Arc::new(curve.adjust(&adjuster)?);
    let adjusted = (!adjuster.is_empty()).then(|| table_curve.clone());

    let cycle = analysis.cycle;
    let (horizon_cycles, horizon_rule) = match analysis.horizon {
        Some(h) => {
            let n = count_until(cycle, h).map_err(|e| {
                Error::Usage(format!(
                    "{}: [tunnels] horizon: {}",
                    analysis.file,
                    e.replace("--until ", "")
                ))
            })?;
            if n > MAX_HORIZON_CYCLES {
                return Err(Error::Usage(format!(
                    "{}: [tunnels] horizon {h} spans {n} cycles of {cycle}; at most {MAX_HORIZON_CYCLES} are allowed",
                    analysis.file
                )));
            }
            (n, format!("horizon = {h}"))
        }
        None => {
            let (n, by_threshold) = default_horizon(table_curve.as_ref(), cycle);
            let why = if by_threshold {
                format!("default: survival first falls below {DEFAULT_HORIZON_SURVIVAL}")
            } else {
                format!("default: survival stays above {DEFAULT_HORIZON_SURVIVAL} for 100 years")
            };
            (n, why)
        }
    };
    let payoff_input = match &analysis.payoffs {
        None => None,
        Some(p) => {
            let read;
            let bytes = match p.bytes {
                Some(bytes) => bytes,
                None => {
                    read = std::fs::read(&p.file.path).map_err(|e| {
                        analysis.error_at(
                            p.file.place,
                            format!("[payoffs] file {}: cannot read: {e}", p.file.path.display()),
                        )
                    })?;
                    &read
                }
            };
            let file = crate::payoff::schedule::parse(&p.file.name, bytes)?;
            let discount = crate::payoff::Discount::annual(p.discount).map_err(Error::Usage)?;
            Some((file, discount))
        }
    };
    let log_s = boundary_log_survival(table_curve.as_ref(), cycle, horizon_cycles);
    let truncation = truncation_table(&log_s, cycle.value);
    let life_years_suggested = suggested_count(&truncation, analysis.tolerance);
    let payoff_horizon = payoff_input.as_ref().map(|(file, discount)| {
        crate::payoff::horizon_payoffs(
            table_curve.as_ref(),
            &file.schedule,
            cycle,
            horizon_cycles,
            *discount,
        )
    });
    let suggested = match &payoff_horizon {
        Some(h) => crate::payoff::suggested_count_with_payoffs(
            &truncation,
            &h.truncation,
            analysis.tolerance,
        ),
        None => life_years_suggested,
    };
    let p_exit: Vec<f64> = truncation.iter().map(|r| r.p_exit_last).collect();
    let window = stable_window(cycle);
    let stable = stable_count(&p_exit, analysis.tolerance, window);
    let (count, count_rule) = match analysis.count {
        Count::Auto => (suggested, "auto: the suggested count".to_string()),
        Count::Fixed(n) => (n, "fixed in the analysis file".to_string()),
    };
    let last = horizon_cycles.max(count) as f64 * cycle.in_unit(curve.unit());
    table_curve
        .check_horizon(last)
        .map_err(|e| analysis.error_at(analysis.adjust_place, format!("[adjust] {e}")))?;
    let tunnels = tunnel_table(table_curve.as_ref(), cycle, count);
    let within_cycle = within_cycle_table(
        table_curve.as_ref(),
        cycle,
        horizon_cycles,
        analysis.discount,
    );
    let mut per_draw = None;
    let draws = match analysis.draws {
        None => None,
        Some(settings) => {
            // As `draws` draws: a family's parameters from its fit, or all the joint model's
            // parameters together from the joint covariance.
            let params = match (&curve, &chosen) {
                (Base::Joint(j), _) => j
                    .sampler()
                    .map_err(|e| Error::Computation(format!("[draws]: {e}")))?
                    .draw(settings.count, settings.seed),
                (Base::Parametric(p), Chosen::Separate(fit)) => {
                    let family = p.family;
                    Sampler::from_fit(family, fit)
                        .map_err(|e| {
                            Error::Computation(format!("[draws]: the {} fit: {e}", family.name()))
                        })?
                        .draw_natural(settings.count, settings.seed)
                }
                (Base::Parametric(_), Chosen::Joint(_)) => {
                    return Err(Error::Computation(
                        "a joint model's curve was expected".into(),
                    ))
                }
            };
            if settings.per_draw {
                per_draw = Some(PerDraw {
                    params,
                    adjuster: adjuster.clone(),
                    point: tunnels.clone(),
                });
                None
            } else {
                let (base, adjuster) = (&curve, &adjuster);
                let build = move |p: &[f64]| -> std::result::Result<Box<dyn Curve>, String> {
                    Ok(Box::new(base.adjust_draw(adjuster, p)?))
                };
                let mut summary = SummaryBuilder::new(tunnels.clone(), params.len());
                crate::draws::tables_in_chunks(
                    &params,
                    &build,
                    cycle,
                    count,
                    &crate::draws::Control::none(),
                    |_, tables| {
                        tables.iter().for_each(|t| summary.add(t));
                        Ok(())
                    },
                )?;
                Some(summary.finish())
            }
        }
    };
    let mut tunnels = tunnels;
    let payoffs = match (payoff_input, payoff_horizon) {
        (Some((file, discount)), Some(horizon)) => {
            let per_tunnel = crate::payoff::tunnel_payoffs(
                table_curve.as_ref(),
                &file.schedule,
                cycle,
                count,
                discount,
            );
            per_tunnel.append_to(&mut tunnels);
            // The running totals use the per-tunnel payoffs over the horizon's cycles.
            let over_horizon = crate::payoff::tunnel_payoffs(
                table_curve.as_ref(),
                &file.schedule,
                cycle,
                horizon_cycles,
                discount,
            );
            let running = file
                .schedule
                .payoffs
                .iter()
                .zip(&over_horizon.values)
                .map(|(payoff, values)| {
                    crate::payoff::running_totals(payoff, &log_s, cycle, discount, values)
                })
                .collect();
            Some(RunPayoffs {
                file,
                discount,
                tunnels: per_tunnel,
                horizon,
                running,
                suggested_without_payoffs: life_years_suggested,
            })
        }
        _ => None,
    };
    Ok(RunResult {
        analysis,
        data,
        fits,
        chosen,
        chosen_by,
        reason,
        plausibility,
        curve,
        adjusted,
        draws,
        per_draw,
        per_draw_file: None,
        tunnels,
        count_rule,
        horizon_cycles,
        horizon_rule,
        truncation,
        suggested_count: suggested,
        stable_count: stable,
        stable_window: window,
        within_cycle,
        rebuild: None,
        payoffs,
    })
}

/// The separate fit of `[fit] choose` in the arm of `[fit] arm` (the only arm when there is one),
/// with the `[choice] reason` rule: a family other than the lowest AIC of its arm needs a reason.
fn choose_separate(
    analysis: &Analysis,
    data: &Dataset,
    fits: &FitFile,
    has_reason: bool,
) -> Result<(Chosen, String, Base)> {
    let arms: Vec<Option<&str>> = data.arms.iter().map(|a| a.arm.as_deref()).collect();
    let arm = match (&analysis.arm, arms.as_slice()) {
        (Some(a), _) => {
            if !arms.contains(&Some(a.as_str())) {
                let names: Vec<&str> = arms.iter().flatten().copied().collect();
                return Err(analysis.error_at(
                    analysis.arm_place,
                    format!(
                        "[fit] arm: the data have no arm \"{a}\" (arms: {})",
                        names.join(", ")
                    ),
                ));
            }
            Some(a.clone())
        }
        (None, [only]) => only.map(str::to_string),
        (None, _) => {
            let names: Vec<&str> = arms.iter().flatten().copied().collect();
            return Err(analysis.error_at(
                analysis.choose_place,
                format!(
                    "the data have several arms ({}); say which one the tunnel table is for with [fit] arm",
                    names.join(", ")
                ),
            ));
        }
    };
    let in_arm = |f: &&FamilyFit| f.arm == arm;
    let (chosen, chosen_by) = match analysis.choose {
        Choice::BestAic => {
            let best = fits
                .fits
                .iter()
                .filter(in_arm)
                .filter(|f| f.converged)
                .min_by(|a, b| {
                    a.aic
                        .unwrap_or(f64::INFINITY)
                        .total_cmp(&b.aic.unwrap_or(f64::INFINITY))
                })
                .ok_or_else(|| {
                    analysis.error_at(
                        analysis.choose_place,
                        "no family converged, so none can be chosen",
                    )
                })?;
            (
                best.clone(),
                "smallest AIC among converged fits".to_string(),
            )
        }
        Choice::Family(family) => {
            let fit = fits
                .fits
                .iter()
                .filter(in_arm)
                .find(|f| f.family == family.name())
                .ok_or_else(|| {
                    Error::Computation(format!("the {} fit is missing", family.name()))
                })?;
            if !fit.converged {
                return Err(analysis.error_at(
                    analysis.choose_place,
                    format!(
                        "[fit] choose: the {} fit failed ({}); choose another family or \"best-aic\"",
                        family.name(),
                        fit.message.as_deref().unwrap_or("no reason recorded")
                    ),
                ));
            }
            (fit.clone(), "named in the analysis file".to_string())
        }
    };
    let lowest = fits
        .fits
        .iter()
        .filter(in_arm)
        .filter(|f| f.converged)
        .filter_map(|f| f.aic.map(|aic| (f, aic)))
        .min_by(|a, b| a.1.total_cmp(&b.1));
    if let (Some((best, best_aic)), Some(aic), false) = (lowest, chosen.aic, has_reason) {
        if aic > best_aic {
            return Err(analysis.error_at(
                analysis.choose_place,
                format!(
                    "[fit] choose: {} is not the lowest AIC{} ({} is, by {}); say why it is chosen with [choice] reason = \"...\"",
                    chosen.family,
                    chosen.arm.as_deref().map(|a| format!(" in arm {a}")).unwrap_or_default(),
                    best.family,
                    crate::format::fixed(aic - best_aic, 2)
                ),
            ));
        }
    }
    let family = chosen.family().map_err(Error::Computation)?;
    let params = chosen
        .param_vector(family)
        .ok_or_else(|| Error::Computation(format!("the {} fit lacks parameters", family.name())))?;
    let curve = ParametricCurve::new(family, params, analysis.time_unit)
        .map_err(|e| Error::Computation(format!("the {} fit: {e}", family.name())))?;
    Ok((
        Chosen::Separate(Box::new(chosen)),
        chosen_by,
        Base::Parametric(curve),
    ))
}

/// The joint model of `[choice] model` (family from `[fit] choose`, or the lowest AIC among the
/// converged joint models of that kind) and the arm's curve from it, taken by the curve
/// options' own code ([`crate::effects::curve::select`]); their messages are reworded for the
/// analysis file's keys. `[choice] reason` is needed when the model is not the lowest AIC among
/// all the joint models (PH and AFT alike; ties within [`JOINT_AIC_TIE`]).
fn choose_joint(
    analysis: &Analysis,
    joint: &JointChoice,
    fits: &FitFile,
    has_reason: bool,
) -> Result<(Chosen, String, Base)> {
    let model = joint.model.name();
    let converged = || fits.effects.iter().filter(|m| m.converged);
    let (family, chosen_by) = match analysis.choose {
        Choice::Family(f) => (f, "named in the analysis file".to_string()),
        Choice::BestAic => {
            let best = converged()
                .filter(|m| m.model == model)
                .min_by(|a, b| a.aic.total_cmp(&b.aic))
                .ok_or_else(|| {
                    analysis.error_at(
                        joint.model_place,
                        format!("[choice] model: no joint {model} model converged, so none can be chosen"),
                    )
                })?;
            let family = crate::families::by_name(&best.family).map_err(Error::Computation)?;
            (
                family,
                format!("smallest AIC among converged joint {model} models"),
            )
        }
    };
    let source = crate::effects::curve::select(
        fits,
        &analysis.file,
        family,
        joint.model,
        joint.arm.as_deref(),
        joint.at.as_deref(),
        false,
    )
    .map_err(|e| {
        let message = match e {
            Error::Usage(m) | Error::Input { message: m, .. } => m,
            other => other.to_string(),
        };
        let place = if message.starts_with("--arm") {
            joint.arm_place
        } else if message.starts_with("--at") {
            joint.at_place
        } else {
            joint.model_place
        };
        let message = message
            .replace("the fit file has no", "the run fitted no")
            .replace(
                "; choose another or add --allow-unconverged",
                "; choose another family or model",
            );
        let mut message = crate::analysis::choice_message(&message);
        if message.starts_with("[choice] arm ") {
            message = message.replacen("[choice] arm", joint.arm_key, 1);
        }
        analysis.error_at(place, message)
    })?;
    let summary = fits
        .effects
        .iter()
        .find(|m| m.family == family.name() && m.model == model)
        .ok_or_else(|| {
            Error::Computation(format!(
                "the joint {} {model} model is missing",
                family.name()
            ))
        })?
        .clone();
    let lowest = converged().min_by(|a, b| a.aic.total_cmp(&b.aic));
    if let (Some(best), false) = (lowest, has_reason) {
        if summary.aic > best.aic + JOINT_AIC_TIE {
            return Err(analysis.error_at(
                analysis.choose_place,
                format!(
                    "[fit] choose: the joint {} {model} model is not the lowest AIC among the joint models (the joint {} {} model is, by {}); say why it is chosen with [choice] reason = \"...\"",
                    family.name(),
                    best.family,
                    best.model,
                    crate::format::fixed(summary.aic - best.aic, 2)
                ),
            ));
        }
    }
    let arm = source
        .metadata
        .iter()
        .find(|(k, _)| k == "arm")
        .map(|(_, v)| v.clone())
        .unwrap_or_default();
    Ok((
        Chosen::Joint(Box::new(JointChosen { summary, arm })),
        chosen_by,
        Base::Joint(Box::new(source)),
    ))
}

/// The plausibility settings of `[plausibility]` (and `[adjust]`'s life table), with the
/// targets and the life table read; errors name the analysis file's keys. `lifetable_bytes`
/// are the `[adjust] background` table's bytes when compiled in (the demo).
pub fn plausibility_settings(
    analysis: &Analysis,
    data: &Dataset,
    lifetable_bytes: Option<&[u8]>,
) -> Result<crate::plausibility::Settings> {
    use crate::adjust::background::{BackgroundHazard, BeyondTable};
    let p = &analysis.plausibility;
    let mut settings = crate::plausibility::Settings {
        landmarks_years: p.landmarks_years.clone(),
        mean_horizon_years: p.mean_horizon_years,
        ..Default::default()
    };
    let read = |f: &NamedFile, key: &str| {
        std::fs::read(&f.path).map_err(|e| {
            analysis.error_at(
                f.place,
                format!("{key} {}: cannot read: {e}", f.path.display()),
            )
        })
    };
    if let Some(t) = &p.targets {
        let bytes = read(t, "[plausibility] targets")?;
        settings.targets = crate::plausibility::targets::parse(&t.name, &bytes)?;
        settings.targets_file = Some(t.name.clone());
        let arms: Vec<Option<String>> = data.arms.iter().map(|a| a.arm.clone()).collect();
        crate::plausibility::targets::check_arms(&settings.targets, &arms, &t.name)?;
    }
    if let Some(source) = &p.population {
        let key = if source.from_adjust {
            "[adjust] background"
        } else {
            "[plausibility] background"
        };
        let read_bytes;
        let bytes = match (source.from_adjust, lifetable_bytes) {
            (true, Some(bytes)) => bytes,
            _ => {
                read_bytes = read(&source.file, key)?;
                &read_bytes
            }
        };
        let table = lifetable::parse(&source.file.name, bytes, source.sex)?;
        let hazard = BackgroundHazard::new(
            table,
            source.start_age,
            BeyondTable::HoldLast,
            crate::units::TimeUnit::Years,
        )
        .map_err(|e| {
            let message = match e {
                Error::Usage(m) => m,
                other => other.to_string(),
            };
            let section = if source.from_adjust {
                "[adjust]"
            } else {
                "[plausibility]"
            };
            analysis.error_at(
                source.file.place,
                format!("{section} {}", message.replace("--start-age", "start_age")),
            )
        })?;
        settings.population = Some(hazard);
    }
    Ok(settings)
}
