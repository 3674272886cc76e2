//! The printed fit comparison, ordered for a decision: per arm, one table with every family's
//! rank, ΔAIC, AIC weight, BIC, median, landmark survival, means, target flags and the
//! population comparison; below it the targets, then the parameters with their intervals and
//! the landmark intervals in tables of their own.

use crate::fit::{ArmSummary, FamilyFit, FitFile};
use crate::format::{fixed, readable, sig, table_aligned};
use crate::km::MedianEstimate;
use crate::units::TimeUnit;

/// Years by default when the data span more than two years (the longest follow-up of any
/// arm), else the data's unit: times a reader takes in at a glance.
pub fn default_display_unit(file: &FitFile) -> TimeUnit {
    let unit = file.data.time_unit;
    let longest = file
        .data
        .arms
        .iter()
        .map(|a| a.max_time)
        .fold(0.0, f64::max);
    if unit.convert(longest, TimeUnit::Years) > 2.0 {
        TimeUnit::Years
    } else {
        unit
    }
}

/// A survival probability for reading: three decimals, two significant digits below 0.001.
pub fn survival_text(s: f64) -> String {
    if s.is_finite() && s > 0.0 && s < 0.0005 {
        sig(s, 2)
    } else {
        fixed(s, 3)
    }
}

/// A landmark or horizon in years as a column label, e.g. `5 y`.
pub fn years_label(years: f64) -> String {
    format!("{} y", readable(years))
}

/// AIC weights of the converged fits of one arm (exp(−ΔAIC/2), normalised; Burnham and
/// Anderson, 2002, section 2.9), in the order given; `None` for the others.
pub fn aic_weights(fits: &[&FamilyFit]) -> Vec<Option<f64>> {
    let raw: Vec<Option<f64>> = fits
        .iter()
        .map(|f| match (f.converged, f.delta_aic) {
            (true, Some(d)) => Some((-0.5 * d).exp()),
            _ => None,
        })
        .collect();
    let total: f64 = raw.iter().flatten().sum();
    raw.into_iter()
        .map(|w| w.map(|w| w / total).filter(|w| w.is_finite()))
        .collect()
}

fn median_text(median: &MedianEstimate, factor: f64) -> String {
    let show = |x: Option<f64>| {
        x.map(|v| sig(v * factor, 4))
            .unwrap_or_else(|| "not reached".into())
    };
    format!(
        "{} (95% CI {} to {})",
        show(median.median),
        show(median.lower),
        show(median.upper)
    )
}

/// Target flag of one fit: `within` (all), `OUTSIDE k/n`, or empty without targets.
pub fn target_flag(fit: &FamilyFit) -> String {
    if fit.targets.is_empty() {
        return String::new();
    }
    let outside = fit.targets.iter().filter(|t| !t.within).count();
    if outside == 0 {
        format!("within {}/{}", fit.targets.len(), fit.targets.len())
    } else {
        format!("OUTSIDE {outside}/{}", fit.targets.len())
    }
}

/// The population comparison of one fit for reading.
pub fn population_text(fit: &FamilyFit, horizon_years: f64) -> String {
    match fit.below_population_from_years {
        None => String::new(),
        Some(None) => format!("not by {}", years_label(horizon_years)),
        Some(Some(y)) => fixed(y, 1),
    }
}

/// Renders the comparison of one fit file, arm by arm, times shown in `display`.
pub fn render(file: &FitFile, display: TimeUnit) -> String {
    let unit = file.data.time_unit;
    let mut out = format!(
        "data: {} (n = {}, events = {}, time unit: {unit})\n",
        file.data.file, file.data.n, file.data.events
    );
    for arm in &file.data.arms {
        out.push('\n');
        out.push_str(&render_arm(file, arm, display));
    }
    out
}

fn render_arm(file: &FitFile, arm: &ArmSummary, display: TimeUnit) -> String {
    let unit = file.data.time_unit;
    let factor = unit.factor_to(display);
    let record = file.plausibility.as_ref();
    let mut out = String::new();
    if let Some(name) = &arm.arm {
        out.push_str(&format!(
            "arm {name} (n = {}, events = {})\n",
            arm.n, arm.events
        ));
    }
    let follow_years = unit.convert(arm.max_time, TimeUnit::Years);
    let in_years = if display == TimeUnit::Years {
        String::new()
    } else {
        format!(" ({} years)", sig(follow_years, 3))
    };
    out.push_str(&format!(
        "Kaplan–Meier median: {} {display}; longest follow-up {} {}{in_years}\n",
        median_text(&arm.km_median, factor),
        sig(arm.max_time * factor, 4),
        display.name_for(arm.max_time * factor),
    ));
    let fits: Vec<&FamilyFit> = file.fits.iter().filter(|f| f.arm == arm.arm).collect();
    let weights = aic_weights(&fits);
    let landmark_years: Vec<f64> = record
        .map(|r| r.landmarks_years.clone())
        .unwrap_or_default();
    let horizon = record.map(|r| r.mean_horizon_years);
    let has_targets = fits.iter().any(|f| !f.targets.is_empty());
    let has_population = fits.iter().any(|f| f.below_population_from_years.is_some());

    let mut header: Vec<String> = vec![
        "rank".into(),
        "family".into(),
        "ΔAIC".into(),
        "AIC weight".into(),
        "BIC".into(),
        format!("median ({display})"),
    ];
    header.extend(
        landmark_years
            .iter()
            .map(|y| format!("S({})", years_label(*y))),
    );
    if record.is_some() {
        header.push("RMST (y)".into());
        header.push("mean (y)".into());
    }
    if has_targets {
        header.push("targets".into());
    }
    if has_population {
        header.push("below pop. from (y)".into());
    }
    let mut rank = 0;
    let mut rows = Vec::new();
    for (fit, weight) in fits.iter().zip(&weights) {
        let opt = |x: Option<f64>, d: usize| x.map(|v| fixed(v, d)).unwrap_or_else(|| "NA".into());
        let rank_text = if fit.converged {
            rank += 1;
            rank.to_string()
        } else {
            "–".into()
        };
        let name = if fit.converged {
            fit.family.clone()
        } else {
            format!("{} (not converged)", fit.family)
        };
        let mut row = vec![
            rank_text,
            name,
            opt(fit.delta_aic, 2),
            opt(*weight, 3),
            opt(fit.bic, 2),
            if !fit.converged {
                "NA".into()
            } else {
                fit.median
                    .map(|m| sig(m * factor, 4))
                    .unwrap_or_else(|| "not reached".into())
            },
        ];
        for (i, _) in landmark_years.iter().enumerate() {
            row.push(
                fit.landmarks
                    .get(i)
                    .map(|l| survival_text(l.survival))
                    .unwrap_or_else(|| "NA".into()),
            );
        }
        if record.is_some() {
            row.push(opt(fit.rmst_followup, 2));
            row.push(opt(fit.mean_years, 2));
        }
        if has_targets {
            row.push(target_flag(fit));
        }
        if has_population {
            row.push(population_text(fit, horizon.unwrap_or(f64::NAN)));
        }
        rows.push(row);
    }
    let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
    out.push_str(&table_aligned(&header_refs, &rows, 2));
    if let Some(r) = record {
        out.push_str(&format!(
            "S(t): survival t years after entry; RMST: mean restricted to the longest follow-up ({} years); mean: restricted to {} years; AIC weight: exp(−ΔAIC/2), normalised\n",
            sig(follow_years, 3),
            readable(r.mean_horizon_years)
        ));
        if has_population {
            if let Some(p) = &r.population {
                out.push_str(&format!(
                    "below pop. from: first time after follow-up at which the fit's hazard is below that of the general population ({}, {}, age {} at entry); beyond the table's last age its last hazard is held\n",
                    p.file,
                    p.column,
                    readable(p.start_age)
                ));
            }
        }
    }
    if has_targets {
        out.push_str(&targets_text(file, &fits));
    }
    for fit in &fits {
        if let Some(settings) = &fit.settings {
            out.push_str(&format!(
                "{}: {}\n",
                fit.family,
                crate::cmd::fit::settings_text(settings, unit)
            ));
        }
    }
    for fit in fits.iter().filter(|f| f.converged) {
        if let Some(note) = &fit.note {
            out.push_str(&format!("note: {}: {note}\n", fit.family));
        }
    }
    for fit in fits.iter().filter(|f| !f.converged) {
        out.push_str(&format!(
            "note: {} did not converge: {}\n",
            fit.family,
            fit.message.as_deref().unwrap_or("no reason recorded")
        ));
    }
    out.push('\n');
    out.push_str(&parameter_table(&fits, unit));
    if !landmark_years.is_empty() {
        out.push('\n');
        out.push_str(&landmark_table(file, &fits, &landmark_years));
    }
    out
}

/// One line per target of this arm, naming the fits outside it.
fn targets_text(file: &FitFile, fits: &[&FamilyFit]) -> String {
    let Some(record) = &file.plausibility else {
        return String::new();
    };
    let arm = fits.first().and_then(|f| f.arm.clone());
    let mut out = String::new();
    for target in record
        .targets
        .iter()
        .filter(|t| t.arm.is_none() || t.arm == arm)
    {
        let outside: Vec<String> = fits
            .iter()
            .filter_map(|f| {
                f.targets
                    .iter()
                    .find(|c| {
                        c.time_years == target.time_years
                            && c.lower == target.lower
                            && c.upper == target.upper
                    })
                    .filter(|c| !c.within)
                    .map(|c| format!("{} {}", f.family, survival_text(c.survival)))
            })
            .collect();
        let source = target
            .source
            .as_deref()
            .map(|s| format!(" ({s})"))
            .unwrap_or_default();
        let verdict = if outside.is_empty() {
            "every converged fit within".to_string()
        } else {
            format!("outside: {}", outside.join(", "))
        };
        out.push_str(&format!(
            "target at {}: survival {} to {}{source}; {verdict}\n",
            target.time,
            readable(target.lower),
            readable(target.upper)
        ));
    }
    out
}

/// Parameters with 95% intervals, log-likelihood and AIC, in the data's time unit.
fn parameter_table(fits: &[&FamilyFit], unit: TimeUnit) -> String {
    let mut rows = Vec::new();
    for fit in fits {
        let params = fit
            .family()
            .ok()
            .map(|f| {
                f.param_names()
                    .iter()
                    .map(|n| {
                        let v = fit.params.get(*n).copied().unwrap_or(f64::NAN);
                        match fit.intervals.get(*n) {
                            Some([lo, hi]) => {
                                format!("{n} {} ({} to {})", sig(v, 4), sig(*lo, 3), sig(*hi, 3))
                            }
                            None => format!("{n} {}", sig(v, 4)),
                        }
                    })
                    .collect::<Vec<_>>()
                    .join("; ")
            })
            .unwrap_or_default();
        let opt = |x: Option<f64>| x.map(|v| fixed(v, 2)).unwrap_or_else(|| "NA".into());
        rows.push(vec![
            fit.family.clone(),
            params,
            opt(fit.loglik),
            opt(fit.aic),
        ]);
    }
    let title = format!("parameters (95% CI; time in {unit})");
    table_aligned(&["family", &title, "loglik", "AIC"], &rows, 2)
}

/// Survival at each landmark with its 95% interval.
fn landmark_table(file: &FitFile, fits: &[&FamilyFit], years: &[f64]) -> String {
    let how = match file.plausibility.as_ref() {
        Some(r) if r.interval == "draws" => format!(
            "2.5–97.5 percentiles of {} parameter draws, seed {}",
            r.draws.unwrap_or(0),
            r.seed.unwrap_or(0)
        ),
        _ => "delta method".to_string(),
    };
    let mut header = vec![format!("survival (95% CI, {how})")];
    header.extend(years.iter().map(|y| format!("S({})", years_label(*y))));
    let rows: Vec<Vec<String>> = fits
        .iter()
        .filter(|f| f.converged)
        .map(|fit| {
            let mut row = vec![fit.family.clone()];
            for (i, _) in years.iter().enumerate() {
                row.push(match fit.landmarks.get(i) {
                    Some(l) => match (l.lower, l.upper) {
                        (Some(lo), Some(hi)) => format!(
                            "{} ({} to {})",
                            survival_text(l.survival),
                            survival_text(lo),
                            survival_text(hi)
                        ),
                        _ => survival_text(l.survival),
                    },
                    None => "NA".into(),
                });
            }
            row
        })
        .collect();
    let refs: Vec<&str> = header.iter().map(String::as_str).collect();
    table_aligned(&refs, &rows, 1)
}
