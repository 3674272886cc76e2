//! `report.html`: one self-contained file (inline SVG and CSS, no scripts, no fetches) that a
//! reviewer can read offline and print: data summary, fit comparison, plots, the chosen curve,
//! the tunnel, truncation and within-cycle tables, adjustments, draws, the caution, and a
//! reproducibility block. The markup is well-formed XML (polyglot HTML) so tests can parse it.
//!
//! Tables are rendered from the same export documents as the CSV/JSON files, so the numbers
//! shown are the exported numbers (at 6 significant digits).

use crate::cmd::curve_args::Base;
use crate::cmd::run::compute::{Chosen, JointChosen, RunResult};
use crate::discretise::TunnelTable;
use crate::error::Result;
use crate::export::{Cell, Table};
use crate::format::sig;
use crate::plot::Figure;
use crate::units::TimeUnit;

/// Significant digits of numbers in report tables.
pub const DIGITS: usize = 6;

/// Years since entry whose tunnel rows the report lists in full; later years appear only in
/// the yearly summary (the files hold every row).
pub const LISTED_YEARS: f64 = 2.0;

/// Number of leading tunnel rows the report lists: those whose cycle starts before
/// [`LISTED_YEARS`] years since entry. A start a rounding error below the limit (24 months
/// converted through days) counts as at the limit.
pub fn listed_rows(table: &TunnelTable) -> usize {
    let limit = TimeUnit::Years.convert(LISTED_YEARS, table.time_unit);
    table
        .rows
        .iter()
        .take_while(|r| r.t_start < limit * (1.0 - 1e-9))
        .count()
}

/// One year of time since entry in the report's yearly summary of a tunnel table.
#[derive(Debug, Clone, PartialEq)]
pub struct YearSummary {
    /// 1-based year since entry.
    pub year: usize,
    /// Start of the year's first tunnel and end of its last, in years since entry (whole
    /// years when the cycle divides a year; the last year may end early with the table).
    pub from_years: f64,
    pub to_years: f64,
    /// Number of tunnels whose cycle starts in the year.
    pub tunnels: usize,
    /// Survival at `from_years` and at `to_years`.
    pub surv_start: f64,
    pub surv_end: f64,
    /// Probability of leaving during the year given presence at its start:
    /// 1 − S(end)/S(start), the product of the year's (1 − p_exit) taken from one.
    pub p_leave: f64,
}

/// The tunnel table by year since entry: each tunnel belongs to the year its cycle starts in,
/// one row per year up to the table's end.
pub fn yearly_summary(table: &TunnelTable) -> Vec<YearSummary> {
    let year = TimeUnit::Years.convert(1.0, table.time_unit);
    let mut out: Vec<YearSummary> = Vec::new();
    for r in &table.rows {
        // The same rounding allowance as `listed_rows`: month 24 is year 3's first tunnel.
        let index = (r.t_start / year + 1e-9).floor() as usize + 1;
        match out.last_mut() {
            Some(y) if y.year == index => {
                y.to_years = r.t_end / year;
                y.tunnels += 1;
                y.surv_end = r.surv_end;
            }
            _ => out.push(YearSummary {
                year: index,
                from_years: r.t_start / year,
                to_years: r.t_end / year,
                tunnels: 1,
                surv_start: r.surv_start,
                surv_end: r.surv_end,
                p_leave: 0.0,
            }),
        }
    }
    for y in &mut out {
        y.p_leave = crate::discretise::exit_probability(y.surv_start.ln(), y.surv_end.ln());
    }
    out
}

/// Links to the exported files of the table `stem` beside the report, by relative name: the
/// CSV file first when the analysis writes one, then the other formats it writes.
fn table_files(result: &RunResult, stem: &str) -> String {
    let mut formats: Vec<&str> = result.analysis.formats.iter().map(String::as_str).collect();
    formats.sort_by_key(|f| *f != "csv");
    let links: Vec<String> = formats
        .iter()
        .map(|ext| {
            let name = escape(&format!("{stem}.{ext}"));
            format!("<a class=\"file\" href=\"{name}\">{name}</a>")
        })
        .collect();
    match links.split_first() {
        Some((first, [])) => first.clone(),
        Some((first, rest)) => format!("{first} (also {})", rest.join(", ")),
        None => String::new(),
    }
}

/// The sentence over a per-tunnel table cut at [`LISTED_YEARS`]: how many rows are listed and
/// which files hold them all.
fn listed_note(result: &RunResult, shown: usize, total: usize, stem: &str) -> String {
    format!(
        "<p>Listed: the {} starting in the first {} years since entry, of {total}; the full table is in {}.</p>\n",
        crate::format::counted(shown, "tunnel"),
        crate::format::readable(LISTED_YEARS),
        table_files(result, stem)
    )
}

/// Escapes text for HTML/XML content and attributes.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Seconds since 1970-01-01 00:00 UTC as `YYYY-MM-DD HH:MM UTC`.
pub fn format_utc(secs: u64) -> String {
    let (year, month, day, hour, minute, _) = crate::output::civil_time(secs);
    format!("{year:04}-{month:02}-{day:02} {hour:02}:{minute:02} UTC")
}

/// What the report says in place of a date when `SOURCE_DATE_EPOCH` is not set.
pub const NO_DATE: &str = "not recorded (set SOURCE_DATE_EPOCH to record one)";

/// Text of a cell as shown in the report.
fn cell_text(cell: &Cell) -> String {
    match cell {
        Cell::Int(i) => i.to_string(),
        Cell::Number(x) => sig(*x, DIGITS),
        Cell::Text(t) => t.clone(),
        Cell::Missing => String::new(),
    }
}

/// Columns of the exported tables that hold a time (in the analysis's time unit); the report
/// writes the unit into their heading, as the printed tables do ("t_start (months)").
const TIME_COLUMNS: [&str; 6] = [
    "t_start",
    "t_end",
    "time",
    "start",
    "end",
    "max_abs_diff_time",
];

/// `table` with the unit written into the heading of each time column.
fn with_time_units(table: &Table, unit: crate::units::TimeUnit) -> Table {
    let mut table = table.clone();
    for c in table.columns.iter_mut() {
        if TIME_COLUMNS.contains(&c.as_str()) {
            *c = format!("{c} ({unit})");
        }
    }
    table
}

/// A column heading, escaped, with a line-break opportunity after each underscore: the
/// exported column names (`at_risk_max_abs_diff`) have no spaces, and unbroken they make a
/// table wider than a printed page.
fn heading(text: &str) -> String {
    escape(text).replace('_', "_<wbr/>")
}

/// An export table as an HTML table with `id`, showing the rows selected by `keep`.
fn html_table(id: &str, table: &Table, keep: impl Fn(usize) -> bool) -> String {
    let mut out = format!("<table id=\"{}\"><thead><tr>", escape(id));
    for c in &table.columns {
        out.push_str(&format!("<th>{}</th>", heading(c)));
    }
    out.push_str("</tr></thead><tbody>");
    for (_, row) in table.rows.iter().enumerate().filter(|(i, _)| keep(*i)) {
        out.push_str("<tr>");
        for cell in row {
            let class = match cell {
                Cell::Text(_) => "",
                _ => " class=\"n\"",
            };
            out.push_str(&format!("<td{class}>{}</td>", escape(&cell_text(cell))));
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>\n");
    out
}

/// A plain table from header and text rows (numbers right-aligned when `numeric[i]`).
fn text_table(id: &str, header: &[&str], rows: &[Vec<String>], numeric: &[bool]) -> String {
    let mut out = format!("<table id=\"{}\"><thead><tr>", escape(id));
    for h in header {
        out.push_str(&format!("<th>{}</th>", heading(h)));
    }
    out.push_str("</tr></thead><tbody>");
    for row in rows {
        out.push_str("<tr>");
        for (i, cell) in row.iter().enumerate() {
            let class = if numeric.get(i).copied().unwrap_or(false) {
                " class=\"n\""
            } else {
                ""
            };
            out.push_str(&format!("<td{class}>{}</td>", escape(cell)));
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>\n");
    out
}

/// A section's one-line reading guide, under its heading: what to look at and what it means.
fn guide(text: &str) -> String {
    format!(
        "<p class=\"guide\"><b>How to read this:</b> {}</p>\n",
        escape(text)
    )
}

/// The report's contents: each `<section id>` of `body` with its `<h2>` heading, in order, as
/// in-page links. Read from the markup, so a section added later is listed without naming it.
fn contents(body: &str) -> String {
    let mut items = String::new();
    let mut rest = body;
    while let Some(at) = rest.find("<section id=\"") {
        rest = &rest[at + "<section id=\"".len()..];
        let Some(end) = rest.find('"') else { break };
        let id = &rest[..end];
        let next = rest.find("<section id=\"").unwrap_or(rest.len());
        let heading = rest[..next]
            .find("<h2>")
            .zip(rest[..next].find("</h2>"))
            .filter(|(a, b)| a < b)
            .map(|(a, b)| &rest[a + 4..b]);
        if let Some(heading) = heading {
            // `id` and `heading` are already escaped where they were written.
            items.push_str(&format!("<li><a href=\"#{id}\">{heading}</a></li>"));
        }
    }
    format!("<nav id=\"contents\"><p><b>In this report</b></p><ol>{items}</ol></nav>\n")
}

/// An inline figure from the rendered SVG named `name`, if present.
fn figure(figures: &[Figure], name: &str, caption: &str) -> String {
    match figures.iter().find(|(n, _)| n == name) {
        Some((_, bytes)) => format!(
            "<figure id=\"fig-{}\">{}<figcaption>{} <span class=\"file\">({})</span></figcaption></figure>\n",
            escape(name.trim_end_matches(".svg")),
            String::from_utf8_lossy(bytes),
            escape(caption),
            escape(name)
        ),
        None => String::new(),
    }
}

/// The report's stylesheet, its colours from the house palette (`crate::plot`), so the report
/// and its plots share one look.
fn style() -> String {
    use crate::plot::{hex, BAND, CAUTION, CAUTION_WASH, EMPIRICAL, GRID, MUTED, RULE, TINT};
    let (ink, band, grid, muted, rule, tint) = (
        hex(EMPIRICAL),
        hex(BAND),
        hex(GRID),
        hex(MUTED),
        hex(RULE),
        hex(TINT),
    );
    let (caution, wash) = (hex(CAUTION), hex(CAUTION_WASH));
    format!(
        "
body{{font-family:'DejaVu Sans',Verdana,sans-serif;font-size:12px;line-height:1.35;color:{ink};background:#fff;max-width:1000px;margin:0 auto;padding:14px 18px}}
h1{{font-size:19px;margin:0 0 2px}}
h2{{font-size:14px;margin:22px 0 6px;padding-top:5px;border-top:2px solid {ink};text-transform:uppercase;letter-spacing:.04em}}
h3{{font-size:12.5px;margin:12px 0 4px}}
p{{margin:4px 0}}
.meta{{color:{muted}}}
.caution,.warning{{border-left:5px solid {caution};background:{wash};padding:6px 10px;margin:8px 0}}
.guide{{border-left:3px solid {band};padding:1px 8px;margin:2px 0 6px;color:{muted}}}
nav#contents{{border:1px solid {rule};padding:4px 10px;margin:8px 0;font-size:11.5px}}
nav#contents ol{{columns:3;margin:2px 0;padding-left:22px}}
a{{color:{ink}}}
table{{border-collapse:collapse;margin:4px 0 8px;font-size:11px}}
th,td{{padding:2px 7px;border-bottom:1px solid {rule};vertical-align:top}}
th{{text-align:left;border-bottom:1.5px solid {ink};background:{tint}}}
td.n{{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}}
dl{{display:grid;grid-template-columns:max-content auto;gap:2px 12px;margin:4px 0}}
dt{{font-weight:bold}}dd{{margin:0}}
figure{{margin:8px 0 14px}}
figure svg{{max-width:100%;height:auto;border:1px solid {grid}}}
figcaption{{font-size:11px;color:{muted}}}
.file{{font-family:'DejaVu Sans Mono',monospace;font-size:10.5px}}
pre{{background:{tint};border:1px solid {rule};padding:6px 8px;font-size:10.5px;white-space:pre-wrap}}
code{{font-family:'DejaVu Sans Mono',monospace}}
pre#comparison{{font-size:9.4px;line-height:1.3}}
a.file{{text-decoration:underline dotted}}
@page{{margin:12mm}}
@media print{{
body{{max-width:none;padding:0;font-size:11px}}
*{{-webkit-print-color-adjust:exact;print-color-adjust:exact}}
section+section{{break-before:page}}
section#data,section#adjustments,section#within-cycle,section#reproducibility{{break-before:auto}}
h2{{border-top:none;margin-top:0}}
section#data h2,section#adjustments h2,section#within-cycle h2,section#reproducibility h2{{margin-top:18px;padding-top:5px;border-top:2px solid {ink}}}
h2,h3,.guide{{break-after:avoid}}
figure,table,dl,.caution{{break-inside:avoid}}
thead{{display:table-header-group}}
tr{{break-inside:avoid}}
pre#comparison{{font-size:7px;line-height:1.25}}
nav#contents a{{text-decoration:none}}
}}
"
    )
}

/// Renders the report; `created` (seconds since 1970, from `SOURCE_DATE_EPOCH`) is the only
/// date it shows, so that without it a rerun writes the same bytes.
pub fn render(result: &RunResult, figures: &[Figure], created: Option<u64>) -> Result<String> {
    let date = created.map(format_utc);
    let a = &result.analysis;
    let unit = a.time_unit;
    let fits = &result.fits;
    let title = a
        .title
        .clone()
        .unwrap_or_else(|| "Survival extrapolation and tunnel states".to_string());
    let mut h = String::new();
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n");
    h.push_str(&format!("<title>{}</title>\n", escape(&title)));
    h.push_str(&format!("<style>{}</style>\n</head>\n<body>\n", style()));
    h.push_str(&format!("<h1>{}</h1>\n", escape(&title)));
    h.push_str(&format!(
        "<p class=\"meta\">tunnelcast {} · analysis file <code>{}</code> · data <code>{}</code>{}</p>\n",
        crate::VERSION,
        escape(&file_name(&a.file)),
        escape(&a.data_name),
        date.as_deref()
            .map(|d| format!(" · {}", escape(d)))
            .unwrap_or_default()
    ));
    h.push_str(&format!(
        "<p class=\"caution\">{}</p>\n",
        escape(crate::CAUTION)
    ));
    let contents_at = h.len();

    h.push_str(&question_section(result));

    // Data summary.
    h.push_str("<section id=\"data\">\n<h2>Data</h2>\n");
    h.push_str(&guide("One row per arm; a median shown as “not reached” means survival stayed above one half to the end of follow-up."));
    h.push_str(&format!(
        "<p>{} subjects, {} events{}; time unit: {unit}. Kaplan–Meier median with a 95% interval from the log-log band.</p>\n",
        fits.data.n,
        fits.data.events,
        if result.rebuild.is_some() {
            " (rebuilt from a digitised Kaplan–Meier figure, not the trial's own data: see Rebuilt data below)"
        } else {
            ""
        }
    ));
    let show = |x: Option<f64>| x.map(|v| sig(v, 4)).unwrap_or_else(|| "not reached".into());
    let rows: Vec<Vec<String>> = fits
        .data
        .arms
        .iter()
        .map(|arm| {
            vec![
                arm.arm.clone().unwrap_or_else(|| "(all)".into()),
                arm.n.to_string(),
                arm.events.to_string(),
                (arm.n - arm.events).to_string(),
                sig(arm.max_time, 4),
                show(arm.km_median.median),
                show(arm.km_median.lower),
                show(arm.km_median.upper),
            ]
        })
        .collect();
    let longest = format!("longest follow-up ({unit})");
    let median = format!("median ({unit})");
    h.push_str(&text_table(
        "table-data",
        &[
            "arm",
            "n",
            "events",
            "censored",
            &longest,
            &median,
            "95% lower",
            "95% upper",
        ],
        &rows,
        &[false, true, true, true, true, true, true, true],
    ));
    h.push_str("</section>\n");

    if let Some(section) = rebuild_section(result, figures) {
        h.push_str(&section);
    }

    // Plots.
    h.push_str("<section id=\"plots\">\n<h2>Fitted curves against the data</h2>\n");
    h.push_str(&guide("Left of the end-of-follow-up line, compare each fitted curve with the Kaplan–Meier estimate; right of it the curves differ by assumption alone. In the straight-line diagnostics, points on a straight line favour the family that is straight on that scale."));
    for arm in &fits.data.arms {
        let label = arm.arm.as_deref();
        let suffix = crate::plot::file_stem(label);
        if let Some(name) = label {
            h.push_str(&format!("<h3>Arm {}</h3>\n", escape(name)));
        }
        h.push_str(&figure(figures, &format!("survival{suffix}.svg"), "Kaplan–Meier estimate with 95% log-log band, censoring ticks and numbers at risk; fitted curves extrapolated to the horizon of the checks."));
        h.push_str(&figure(figures, &format!("hazard{suffix}.svg"), "Kernel-smoothed Nelson–Aalen hazard (Epanechnikov kernel, Silverman's bandwidth over the event times; shown where the window lies within the event times) beside each fitted hazard."));
        h.push_str(&figure(figures, &format!("diagnostics{suffix}.svg"), "Straight-line diagnostics: Kaplan–Meier points and each fitted curve on the scale where one family is a straight line in ln t."));
    }
    h.push_str("</section>\n");

    // Fit comparison.
    h.push_str("<section id=\"fits\">\n<h2>Fit comparison</h2>\n");
    h.push_str(&guide("Within each arm, a lower AIC means a closer fit to the observed follow-up; differences of a few points do not separate families, and no column here says how well a family extrapolates."));
    h.push_str("<p>Maximum likelihood per arm; full log-likelihood; AIC = 2k − 2·loglik, BIC = k·ln(n) − 2·loglik; sorted by AIC. Parameters for time in the data's unit with 95% intervals (Wald, on the estimation scale): scales in that unit, rates and the Gompertz shape per that unit, mu in ln(that unit); other shapes, sigma, q, cure fractions and spline coefficients are unitless (the chosen curve's table below gives each unit).</p>\n");
    for arm in &fits.data.arms {
        let label = arm.arm.as_deref();
        if let Some(name) = label {
            h.push_str(&format!("<h3>Arm {}</h3>\n", escape(name)));
        }
        let rows: Vec<Vec<String>> = fits
            .fits
            .iter()
            .filter(|f| f.arm.as_deref() == label)
            .map(|f| {
                let params = f
                    .family()
                    .map(|fam| {
                        fam.param_names()
                            .iter()
                            .map(|n| {
                                let v = f.params.get(*n).copied().unwrap_or(f64::NAN);
                                match f.intervals.get(*n) {
                                    Some([lo, hi]) => format!(
                                        "{n} {} ({} to {})",
                                        sig(v, DIGITS),
                                        sig(*lo, 4),
                                        sig(*hi, 4)
                                    ),
                                    None => format!("{n} {}", sig(v, DIGITS)),
                                }
                            })
                            .collect::<Vec<_>>()
                            .join("; ")
                    })
                    .unwrap_or_default();
                let opt = |x: Option<f64>| x.map(|v| sig(v, DIGITS)).unwrap_or_else(|| "NA".into());
                vec![
                    f.family.clone(),
                    params,
                    opt(f.loglik),
                    opt(f.aic),
                    opt(f.bic),
                    opt(f.delta_aic),
                    f.median
                        .map(|m| sig(m, 4))
                        .unwrap_or_else(|| "not reached".into()),
                    if f.converged {
                        "yes".into()
                    } else {
                        format!("no: {}", f.message.as_deref().unwrap_or(""))
                    },
                ]
            })
            .collect();
        let id = format!("table-fits{}", crate::plot::file_stem(label));
        h.push_str(&text_table(
            &id,
            &[
                "family",
                "parameters (95% CI)",
                "loglik",
                "AIC",
                "BIC",
                "ΔAIC",
                &median,
                "converged",
            ],
            &rows,
            &[false, false, true, true, true, true, true, false],
        ));
    }
    h.push_str("</section>\n");

    // Models across arms (`[effects]`).
    if let Some(cox) = &fits.cox {
        h.push_str("<section id=\"effects\">\n<h2>Effects across arms</h2>\n");
        h.push_str(&guide("The joint models fit one reference curve and one effect per arm (HR or AF with a 95% interval; a small p against the separate fits says one shape for all arms does not fit). The test of proportional hazards cannot prove them constant, and a test does not settle how the effect behaves beyond follow-up."));
        let mut text = crate::effects::report::render_joint(&fits.effects);
        text.push_str(&crate::effects::report::render(cox));
        h.push_str(&format!("<pre>{}</pre>\n", escape(text.trim())));
        h.push_str("</section>\n");
    }

    h.push_str(&plausibility_section(result, figures));

    // Chosen curve.
    h.push_str(&chosen_section(result, unit));

    // Adjustments: the curve carried forward after the adjustments.
    h.push_str("<section id=\"adjustments\">\n<h2>Adjustments</h2>\n");
    h.push_str(&guide("Every setting listed here changes the fitted curve before it is cut into cycles; the same list is in each output file's provenance."));
    match &result.adjusted {
        None => h.push_str("<p>None: the chosen curve is used as fitted (no hazard ratio, acceleration factor or background mortality was requested).</p>\n"),
        Some(adjusted) => {
            h.push_str("<p>The tunnel table, the truncation and the within-cycle checks use the chosen curve with these adjustments (<code>[adjust]</code> of the analysis file):</p>\n<dl>\n");
            // The floor lines over the tunnel table's count, as its files record them.
            let floor = result.floor_report(result.tunnels.rows.len());
            for (k, v) in adjusted.metadata.iter().chain(&floor) {
                h.push_str(&format!("<dt>{}</dt><dd><code>{}</code></dd>\n", escape(k), escape(v)));
            }
            h.push_str("</dl>\n");
            for w in &adjusted.warnings {
                h.push_str(&format!("<p class=\"warning\">Warning: {}</p>\n", escape(w)));
            }
            let stem = format!("population{}", crate::plot::file_stem(result.chosen.arm()));
            if figures.iter().any(|(n, _)| *n == format!("{stem}.svg")) {
                h.push_str(&format!(
                    "<p>The adjusted curve is drawn in black beside the unadjusted fits and general-population survival in <a href=\"#fig-{}\">the population plot</a> of the plausibility section.</p>\n",
                    escape(&stem)
                ));
            }
        }
    }
    h.push_str("</section>\n");
    // Tunnel table.
    let t = &result.tunnels;
    let doc = result.tunnel_document();
    h.push_str("<section id=\"tunnels\">\n<h2>Tunnel table</h2>\n");
    h.push_str(&guide("One row per tunnel state, for the chosen curve with its adjustments: people in tunnel k leave the chain with p_exit and move to tunnel k + 1 with p_next; the last row's state keeps its own probabilities."));
    h.push_str(&format!(
        "<p>{} of {} {} ({}). Tunnel k covers [(k−1)·cycle, k·cycle) since entry; p_exit = 1 − S(t_end)/S(t_start), with no half-cycle shift; the last tunnel repeats its own probability. Times in {}.</p>\n",
        crate::format::counted(t.rows.len(), "tunnel state"),
        crate::format::readable(t.cycle),
        t.time_unit.name_for(t.cycle),
        escape(&result.count_rule),
        t.time_unit
    ));
    let listed = listed_rows(t);
    h.push_str(&listed_note(result, listed, t.rows.len(), "tunnels"));
    h.push_str(&html_table(
        "table-tunnels",
        &with_time_units(&doc.tables[0], t.time_unit),
        |i| i < listed,
    ));
    h.push_str(&yearly_section(t));
    h.push_str(&figure(figures, "tunnels.svg", "p_exit by tunnel state, with the suggested count and, when it is reached, the tunnel from which p_exit is stable."));
    h.push_str("</section>\n");

    // Truncation.
    let doc = result.truncation_document();
    let n = result.horizon_cycles;
    h.push_str("<section id=\"truncation\">\n<h2>Truncation: how many tunnels are enough</h2>\n");
    h.push_str(&guide("Go down the count column to the first row whose errors are all at or below the tolerance: that is the suggested count; a chain cut earlier misstates the results by more than the tolerance."));
    let window = crate::format::counted(result.stable_window, "tunnel");
    let stable = match result.stable_count {
        Some(k) => format!(
            "p_exit stable from tunnel {k} (every later p_exit up to the horizon is within the tolerance, relative, of tunnel {k}'s, over at least {window} = {} years)",
            crate::horizon::STABLE_WINDOW_YEARS
        ),
        None => format!(
            "p_exit stable: not reached (no tunnel from which every later p_exit up to the horizon stays within the tolerance, relative, of its own over at least {window} = {} years)",
            crate::horizon::STABLE_WINDOW_YEARS
        ),
    };
    h.push_str(&format!(
        "<p>Horizon of the checks: {} = {} {} ({}). A chain cut at K tunnels repeats tunnel K's probability for every later cycle. <b>Suggested count: {}</b> (smallest K with max_surv_gap and ly_rel_error both ≤ {}); {}. Selected rows are shown; <span class=\"file\">truncation.*</span> hold every count.</p>\n",
        crate::format::counted(n, "cycle"),
        crate::format::readable(n as f64 * t.cycle),
        t.time_unit.name_for(n as f64 * t.cycle),
        escape(&result.horizon_rule),
        result.suggested_count,
        a.tolerance,
        escape(&stable)
    ));
    let marked: Vec<usize> = [result.suggested_count, t.rows.len()]
        .into_iter()
        .chain(result.stable_count)
        .collect();
    let shown = shown_counts(n, &marked);
    h.push_str(&html_table("table-truncation", &doc.tables[0], |i| {
        shown.contains(&(i + 1))
    }));
    h.push_str(&figure(
        figures,
        "horizon.svg",
        "Truncation errors against the number of tunnel states, with the tolerance.",
    ));
    h.push_str("</section>\n");

    // Within-cycle.
    let doc = result.within_cycle_document();
    h.push_str("<section id=\"within-cycle\">\n<h2>Within-cycle accuracy</h2>\n");
    h.push_str(&guide("Each row counts life-years from survival at cycle boundaries by one method; its error is what that method costs, at this cycle length, against the exact integral of the curve."));
    h.push_str(&format!(
        "<p>Life-years, in years, to the horizon from survival at cycle boundaries (cycles of {} {}), by method, beside the exact integral of the curve; discounted at {} a year as (1 + r)^(−t) at each boundary. life_years, exact, error and their discounted columns are in years; rel_error columns are ratios.</p>\n",
        crate::format::readable(t.cycle),
        t.time_unit.name_for(t.cycle),
        a.discount
    ));
    h.push_str(&html_table("table-within-cycle", &doc.tables[0], |_| true));
    h.push_str("</section>\n");

    if let Some(section) = payoff_section(result, figures) {
        h.push_str(&section);
    }

    h.push_str("<section id=\"draws\">\n<h2>Uncertainty draws</h2>\n");
    h.push_str(&guide("The spread between the 2.5% and 97.5% columns is parameter uncertainty only: it does not cover the choice of family or of the extrapolation."));
    match (a.draws, result.draws_document()) {
        (Some(d), Some(doc)) => {
            let what = match &result.chosen {
                Chosen::Separate(_) => "of the chosen fit (multivariate normal on the estimation scale, from the fit's estimates and covariance",
                Chosen::Joint(_) => "of all the joint model's parameters together: reference curve, arm effects and covariate coefficients (multivariate normal on the estimation scale, from the model's estimates and covariance, so the effect's uncertainty and its correlation with the reference curve are carried",
            };
            h.push_str(&format!(
                "<p>{} parameter draws {what}; seed {}), each taken through the same adjustments to a tunnel table. p_exit per tunnel: the point estimate, the mean of the draws and their 2.5% and 97.5% percentiles.</p>\n",
                d.count, d.seed
            ));
            let listed = listed_rows(&result.tunnels);
            let total = doc.tables[0].rows.len();
            h.push_str(&listed_note(
                result,
                listed.min(total),
                total,
                "draws_summary",
            ));
            h.push_str(&html_table(
                "table-draws",
                &with_time_units(&doc.tables[0], result.tunnels.time_unit),
                |i| i < listed,
            ));
            if result.per_draw_file.is_some() {
                let name = escape(crate::cmd::run::PER_DRAW_FILE);
                h.push_str(&format!(
                    "<p>Every draw's own tunnel table is in <a class=\"file\" href=\"{name}\">{name}</a> ({} draws × {} = {} rows, one per draw and tunnel: <code>draw</code>, then the columns of the tunnel table), for a model that runs the draws itself; it is not listed here.</p>\n",
                    d.count,
                    crate::format::counted(total, "tunnel"),
                    d.count * total
                ));
            }
        }
        _ => {
            h.push_str("<p>None requested in this analysis, so no random numbers were used.</p>\n")
        }
    }
    h.push_str("</section>\n");

    // Caution.
    h.push_str(&format!(
        "<section id=\"caution\">\n<h2>Caution</h2>\n{}<p class=\"caution\">{}</p>\n<p>The fitted curves agree with the data only over the observed follow-up; beyond it, the families above differ by assumption alone. A reviewer should see the extrapolated part judged against clinical opinion and external data (registries, longer trials, general-population mortality).</p>\n</section>\n",
        guide("Read this before using any number in this report."),
        escape(crate::CAUTION)
    ));

    // Reproducibility.
    h.push_str("<section id=\"reproducibility\">\n<h2>Reproducibility</h2>\n");
    h.push_str(&guide("The same command on files with these SHA-256 values, with the same tool version and SOURCE_DATE_EPOCH, writes the same files byte for byte."));
    h.push_str("<dl>\n");
    let analysis_sha = crate::input::sha256_hex(a.text.as_bytes());
    let mut rebuilt_from = Vec::new();
    if let (Some(outcome), Some(source)) = (&result.rebuild, &a.rebuild) {
        rebuilt_from.push(("digitised curve", source.curve.name.clone()));
        rebuilt_from.push(("digitised curve SHA-256", outcome.curve_sha256.clone()));
        if let (Some(r), Some(sha)) = (&source.at_risk, &outcome.at_risk_sha256) {
            rebuilt_from.push(("risk table", r.name.clone()));
            rebuilt_from.push(("risk table SHA-256", sha.clone()));
        }
    }
    for (k, v) in rebuilt_from.into_iter().chain([
        ("tool version", format!("tunnelcast {}", crate::VERSION)),
        ("command", format!("tunnelcast run {}", file_name(&a.file))),
        ("data file", a.data_name.clone()),
        ("data SHA-256", result.data.sha256.clone()),
        ("analysis file SHA-256", analysis_sha),
        (
            "seed",
            match a.draws {
                Some(d) => format!(
                    "{} ({} draws; {})",
                    d.seed,
                    d.count,
                    crate::draws::GENERATOR
                ),
                None => "none (no random draws)".to_string(),
            },
        ),
        ("date", date.clone().unwrap_or_else(|| NO_DATE.to_string())),
    ]) {
        h.push_str(&format!(
            "<dt>{}</dt><dd><code>{}</code></dd>\n",
            escape(k),
            escape(&v)
        ));
    }
    h.push_str("</dl>\n<h3>Analysis file, verbatim</h3>\n");
    h.push_str(&format!(
        "<pre id=\"analysis-text\">{}</pre>\n",
        escape(&a.text)
    ));
    h.push_str("</section>\n</body>\n</html>\n");
    let listed = contents(&h[contents_at..]);
    h.insert_str(contents_at, &listed);
    Ok(h)
}

/// The chosen curve: a separate fit's family, parameters with intervals and covariance, or an
/// arm's curve from a joint model ([`joint_chosen_section`]).
fn chosen_section(result: &RunResult, unit: crate::units::TimeUnit) -> String {
    let (c, curve) = match (&result.chosen, &result.curve) {
        (Chosen::Separate(c), Base::Parametric(curve)) => (c, curve),
        (Chosen::Joint(j), Base::Joint(source)) => return joint_chosen_section(result, j, source),
        _ => return String::new(),
    };
    let mut h = String::new();
    let family = curve.family;
    h.push_str("<section id=\"chosen\">\n<h2>Chosen curve</h2>\n");
    h.push_str(&guide("The curve every later table is built from, as fitted (adjustments come on top of it); its covariance is what the uncertainty draws sample from."));
    h.push_str("<dl>\n");
    let mut facts = vec![("family", family.name().to_string())];
    if let Some(arm) = &c.arm {
        facts.push(("arm", arm.clone()));
    }
    facts.push(("chosen by", result.chosen_by.clone()));
    if let Some(reason) = &result.reason {
        facts.push(("why", reason.clone()));
    }
    facts.extend([
        ("parameter time unit", unit.name().to_string()),
        (
            "log-likelihood",
            c.loglik.map(|v| sig(v, DIGITS)).unwrap_or_default(),
        ),
        ("AIC", c.aic.map(|v| sig(v, DIGITS)).unwrap_or_default()),
    ]);
    for (k, v) in facts {
        h.push_str(&format!("<dt>{}</dt><dd>{}</dd>\n", escape(k), escape(&v)));
    }
    h.push_str("</dl>\n");
    let rows: Vec<Vec<String>> = family
        .param_names()
        .iter()
        .zip(&curve.params)
        .zip(family.param_units())
        .map(|((n, v), kind)| {
            let (lo, hi) = c
                .intervals
                .get(*n)
                .map(|[l, u]| (sig(*l, DIGITS), sig(*u, DIGITS)))
                .unwrap_or_default();
            vec![
                n.to_string(),
                sig(*v, DIGITS),
                lo,
                hi,
                kind.label(curve.unit),
            ]
        })
        .collect();
    h.push_str(&text_table(
        "table-chosen",
        &["parameter", "estimate", "95% lower", "95% upper", "unit"],
        &rows,
        &[false, true, true, true, false],
    ));
    if let Some(cov) = &c.covariance {
        let rows: Vec<Vec<String>> = cov
            .names
            .iter()
            .zip(&cov.matrix)
            .map(|(n, row)| {
                let mut r = vec![n.clone()];
                r.extend(row.iter().map(|x| sig(*x, 4)));
                r
            })
            .collect();
        let mut header = vec!["covariance (estimation scale)"];
        header.extend(cov.names.iter().map(String::as_str));
        let numeric: Vec<bool> = (0..header.len()).map(|i| i > 0).collect();
        h.push_str(&text_table("table-covariance", &header, &rows, &numeric));
    }
    h.push_str("</section>\n");
    h
}

/// The chosen curve from a joint model across arms: the model, the arm, the covariate setting,
/// why it was chosen, the whole model's fit (its AIC is compared with the other joint models
/// only), its estimates on the estimation scale with Wald intervals, and the covariance of all
/// its parameters (what the draws sample from).
fn joint_chosen_section(
    result: &RunResult,
    chosen: &JointChosen,
    source: &crate::effects::curve::JointSource,
) -> String {
    let m = &chosen.summary;
    let line = |key: &str| {
        source
            .metadata
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.clone())
    };
    let mut h = String::from("<section id=\"chosen\">\n<h2>Chosen curve</h2>\n");
    h.push_str(&guide("The curve every later table is built from: one arm's curve from a model fitted to all arms at once (adjustments come on top of it); the covariance of all the model's parameters together is what the uncertainty draws sample from."));
    let setting = match (line("covariates_at"), line("covariates")) {
        (Some(at), _) => format!("fixed at {at}"),
        (None, Some(how)) => how,
        (None, None) => "none in the model".to_string(),
    };
    let mut facts = vec![
        (
            "joint model",
            line("joint_model").unwrap_or_else(|| format!("{} {}", m.family, m.model)),
        ),
        ("arm", chosen.arm.clone()),
        ("covariates", setting),
        ("chosen by", result.chosen_by.clone()),
    ];
    if let Some(reason) = &result.reason {
        facts.push(("why", reason.clone()));
    }
    facts.extend([
        ("parameter time unit", source.curve.unit.name().to_string()),
        ("log-likelihood (all arms)", sig(m.loglik, DIGITS)),
        ("AIC (all arms)", sig(m.aic, DIGITS)),
    ]);
    h.push_str("<dl>\n");
    for (k, v) in facts {
        h.push_str(&format!("<dt>{}</dt><dd>{}</dd>\n", escape(k), escape(&v)));
    }
    h.push_str("</dl>\n");
    h.push_str("<p>The AIC is that of the whole model over every arm: it is compared with the other joint models (a reason is needed in <code>[choice] reason</code> when a lower one exists), not with the separate fits, whose AIC is per arm; the likelihood-ratio test against the separate fits is in the effects section.</p>\n");
    // Wald intervals on the estimation scale, where the draws are normal (z = 1.959964).
    let rows: Vec<Vec<String>> = source
        .names
        .iter()
        .zip(&source.curve.theta)
        .enumerate()
        .map(|(i, (n, v))| {
            let se = source
                .covariance
                .get(i)
                .and_then(|r| r.get(i))
                .map_or(f64::NAN, |x| x.sqrt());
            vec![
                n.clone(),
                sig(*v, DIGITS),
                sig(v - 1.959963984540054 * se, DIGITS),
                sig(v + 1.959963984540054 * se, DIGITS),
                "estimation scale".to_string(),
            ]
        })
        .collect();
    h.push_str(&text_table(
        "table-chosen",
        &["parameter", "estimate", "95% lower", "95% upper", "scale"],
        &rows,
        &[false, true, true, true, false],
    ));
    let rows: Vec<Vec<String>> = source
        .names
        .iter()
        .zip(&source.covariance)
        .map(|(n, row)| {
            let mut r = vec![n.clone()];
            r.extend(row.iter().map(|x| sig(*x, 4)));
            r
        })
        .collect();
    let mut header = vec!["covariance (estimation scale)"];
    header.extend(source.names.iter().map(String::as_str));
    let numeric: Vec<bool> = (0..header.len()).map(|i| i > 0).collect();
    h.push_str(&text_table("table-covariance", &header, &rows, &numeric));
    h.push_str("</section>\n");
    h
}

/// The question the analysis answers: the population (title), the arm the tunnel table is
/// for, where the data come from, the general population compared with, the curve chosen.
fn question_section(result: &RunResult) -> String {
    let a = &result.analysis;
    let mut h = String::from("<section id=\"question\">\n<h2>The question</h2>\n");
    h.push_str(&guide("What this analysis is for: whose survival is extrapolated, from which data, and which curve is carried into the tunnel states. Every later section answers part of it."));
    let mut facts: Vec<(&str, String)> = vec![(
        "population",
        a.title
            .clone()
            .unwrap_or_else(|| "not stated (give title = \"...\" in the analysis file)".into()),
    )];
    facts.push((
        "arm modelled",
        result
            .chosen
            .arm()
            .map(str::to_string)
            .unwrap_or_else(|| "the only arm of the data".into()),
    ));
    let source = match &a.rebuild {
        Some(r) => format!(
            "{} (rebuilt from the digitised curve {}); {} subjects, {} events; time in {}",
            a.data_name, r.curve.name, result.fits.data.n, result.fits.data.events, a.time_unit
        ),
        None => format!(
            "{}; {} subjects, {} events; time in {}",
            a.data_name, result.fits.data.n, result.fits.data.events, a.time_unit
        ),
    };
    facts.push(("data source", source));
    if let Some(p) = result
        .fits
        .plausibility
        .as_ref()
        .and_then(|r| r.population.as_ref())
    {
        facts.push((
            "general population",
            format!(
                "{} ({}), age {} at entry",
                p.file,
                p.column,
                crate::format::readable(p.start_age)
            ),
        ));
    }
    // A joint model's curve with its arm and covariate setting.
    let label = match &result.curve {
        Base::Joint(j) => j.curve.label.clone(),
        Base::Parametric(_) => result.curve_label(),
    };
    let mut chosen = format!("{label} ({})", result.chosen_by);
    if let Some(reason) = &result.reason {
        chosen.push_str(&format!(": {reason}"));
    }
    facts.push(("curve carried forward", chosen));
    h.push_str("<dl>\n");
    for (k, v) in facts {
        h.push_str(&format!("<dt>{}</dt><dd>{}</dd>\n", escape(k), escape(&v)));
    }
    h.push_str("</dl>\n</section>\n");
    h
}

/// The plausibility section: the printed comparison (ranks, ΔAIC, AIC weights, landmarks,
/// means, targets, population) as `run` prints it, the landmark intervals per fit, the targets
/// and each arm's plot against the general population.
fn plausibility_section(result: &RunResult, figures: &[Figure]) -> String {
    use crate::plausibility::comparison::{
        population_text, survival_text, target_flag, years_label,
    };
    let fits = &result.fits;
    let mut h =
        String::from("<section id=\"plausibility\">\n<h2>Plausibility of the extrapolation</h2>\n");
    h.push_str(&guide("Read across each family's row: survival at the landmarks and the mean are what the extrapolation implies for patients; a fit outside an external target, or one whose hazard falls below the general population's, needs a reason before it is used."));
    let display = crate::plausibility::comparison::default_display_unit(fits);
    h.push_str(&format!(
        "<p>The comparison as <code>tunnelcast run</code> prints it (times in {display}):</p>\n<pre id=\"comparison\">{}</pre>\n",
        escape(&crate::plausibility::comparison::render(fits, display))
    ));
    let Some(record) = &fits.plausibility else {
        h.push_str("</section>\n");
        return h;
    };
    let how = if record.interval == "draws" {
        "2.5–97.5 percentiles of parameter draws"
    } else {
        "delta method on ln(−ln S), from each fit's covariance"
    };
    h.push_str(&format!(
        "<p>Survival at each landmark (years since entry) with its 95% interval ({how}); RMST: mean restricted to the arm's longest follow-up; mean: restricted to {} years; both in years. Also in <span class=\"file\">fit.json</span> (<code>landmarks</code>, <code>rmst_followup</code>, <code>mean_years</code>).</p>\n",
        crate::format::readable(record.mean_horizon_years)
    ));
    if let Some(p) = &record.population {
        h.push_str(&format!(
            "<p>General population: life table <span class=\"file\">{}</span> (column {}, SHA-256 <code>{}</code>), age {} at entry. “Below population from” is the first time after the end of follow-up at which a fit's hazard is below the population's hazard at the same age (constant within each year of age at −ln(1 − qx)); past the table's last age its last hazard is held.</p>\n",
            escape(&p.file),
            escape(&p.column),
            escape(&p.sha256),
            crate::format::readable(p.start_age)
        ));
    }
    let has_targets = fits.fits.iter().any(|f| !f.targets.is_empty());
    let has_population = fits
        .fits
        .iter()
        .any(|f| f.below_population_from_years.is_some());
    for arm in &fits.data.arms {
        let label = arm.arm.as_deref();
        if let Some(name) = label {
            h.push_str(&format!("<h3>Arm {}</h3>\n", escape(name)));
        }
        let mut header: Vec<String> = vec!["family".into()];
        header.extend(
            record
                .landmarks_years
                .iter()
                .map(|y| format!("S({}) (95% CI)", years_label(*y))),
        );
        header.extend(["RMST (y)".to_string(), "mean (y)".to_string()]);
        if has_targets {
            header.push("targets".into());
        }
        if has_population {
            header.push("below population from (y)".into());
        }
        let rows: Vec<Vec<String>> = fits
            .fits
            .iter()
            .filter(|f| f.arm.as_deref() == label && f.converged)
            .map(|f| {
                let mut row = vec![f.family.clone()];
                for (i, _) in record.landmarks_years.iter().enumerate() {
                    row.push(match f.landmarks.get(i) {
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
                let opt = |x: Option<f64>| {
                    x.map(|v| crate::format::fixed(v, 2))
                        .unwrap_or_else(|| "NA".into())
                };
                row.push(opt(f.rmst_followup));
                row.push(opt(f.mean_years));
                if has_targets {
                    row.push(target_flag(f));
                }
                if has_population {
                    row.push(population_text(f, record.mean_horizon_years));
                }
                row
            })
            .collect();
        let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
        let numeric: Vec<bool> = (0..header.len()).map(|i| i > 0).collect();
        h.push_str(&text_table(
            &format!("table-landmarks{}", crate::plot::file_stem(label)),
            &header_refs,
            &rows,
            &numeric,
        ));
        h.push_str(&figure(
            figures,
            &format!("population{}.svg", crate::plot::file_stem(label)),
            "Each fit's survival (and, in the arm carried forward, the chosen curve with its adjustments, in black) beside general-population survival from the same age at entry (thick grey line). A curve above the population's line implies patients outlive people of the same age in general.",
        ));
    }
    if !record.targets.is_empty() {
        h.push_str("<h3>External targets</h3>\n");
        let rows: Vec<Vec<String>> = record
            .targets
            .iter()
            .map(|t| {
                vec![
                    t.time.clone(),
                    t.arm.clone().unwrap_or_else(|| "every arm".into()),
                    crate::format::readable(t.lower),
                    crate::format::readable(t.upper),
                    t.source.clone().unwrap_or_default(),
                ]
            })
            .collect();
        h.push_str(&text_table(
            "table-targets",
            &["time", "arm", "lower", "upper", "source"],
            &rows,
            &[false, false, true, true, false],
        ));
    }
    h.push_str("</section>\n");
    h
}

/// The payoff section (`[payoffs]`): the schedule, the per-tunnel payoff columns, the method
/// table with its errors and the accrual plot. `None` without payoffs.
fn payoff_section(result: &RunResult, figures: &[Figure]) -> Option<String> {
    let p = result.payoffs.as_ref()?;
    let t = &result.tunnels;
    let mut h = String::from("<section id=\"payoffs\">\n<h2>Payoffs by time since entry</h2>\n");
    h.push_str(&guide("The payoff_NAME columns are what one person at the start of a tunnel accrues during its cycle, integrated exactly: a cohort engine multiplies them by the membership at the start of the cycle with no within-cycle correction. The method table shows what the usual boundary corrections would count instead."));
    h.push_str(&format!(
        "<p>Schedule from <span class=\"file\">{}</span> (SHA-256 <code>{}</code>), discounted at {} a year as (1 + r)^(−t); {}.</p>\n<dl>\n",
        escape(&p.file.file),
        escape(&p.file.sha256),
        p.discount.rate(),
        escape(p.tunnels.exactness.describe())
    ));
    for payoff in &p.file.schedule.payoffs {
        h.push_str(&format!(
            "<dt>{}</dt><dd><code>{}</code></dd>\n",
            escape(&payoff.column()),
            escape(&crate::cmd::payoff_args::describe_payoff(payoff))
        ));
    }
    h.push_str("</dl>\n");
    for w in &p.tunnels.warnings {
        h.push_str(&format!(
            "<p class=\"warning\">Warning: {}</p>\n",
            escape(w)
        ));
    }
    // The per-tunnel columns: tunnel, its cycle and the payoff columns of the tunnel table.
    let mut columns = vec![
        "tunnel".to_string(),
        format!("t_start ({})", t.time_unit),
        format!("t_end ({})", t.time_unit),
    ];
    columns.extend(p.tunnels.columns.iter().cloned());
    let rows: Vec<Vec<String>> = t
        .rows
        .iter()
        .enumerate()
        .take(listed_rows(t))
        .map(|(i, r)| {
            let mut row = vec![
                r.tunnel.to_string(),
                crate::format::sig(r.t_start, 6),
                crate::format::sig(r.t_end, 6),
            ];
            row.extend(p.tunnels.values.iter().map(|v| crate::format::sig(v[i], 6)));
            row
        })
        .collect();
    let header: Vec<&str> = columns.iter().map(String::as_str).collect();
    let numeric = vec![true; header.len()];
    h.push_str("<p>Per tunnel state (the same columns are in the tunnel table's files):</p>\n");
    h.push_str(&listed_note(
        result,
        listed_rows(t),
        t.rows.len(),
        "tunnels",
    ));
    h.push_str(&text_table(
        "table-payoff-tunnels",
        &header,
        &rows,
        &numeric,
    ));
    let n = result.horizon_cycles;
    h.push_str(&format!(
        "<p>Totals to the horizon ({} = {} {}) for one person entering at time 0, by within-cycle method, beside the exact total (the rate integrated against the curve, plus the one-offs); <code>cycle-integrated</code> uses the payoff columns above and equals the exact total. Also in <span class=\"file\">payoff_methods.*</span>. The truncation table above includes payoff_rel_error_NAME for every payoff; the suggested count requires them too (without the payoffs it would be {}).</p>\n",
        crate::format::counted(n, "cycle"),
        crate::format::readable(n as f64 * t.cycle),
        t.time_unit.name_for(n as f64 * t.cycle),
        p.suggested_without_payoffs
    ));
    if let Some(doc) = result.payoff_methods_document() {
        h.push_str(&html_table("table-payoff-methods", &doc.tables[0], |_| {
            true
        }));
    }
    h.push_str(&figure(
        figures,
        "payoffs.svg",
        "For each payoff, each method's running total minus the exact accrual, as a percentage of the exact discounted total, over time since entry: above zero the method has counted too much by then, below too little; the line's end is the method's error in the table.",
    ));
    h.push_str("</section>\n");
    Some(h)
}

/// The section on data rebuilt from a digitised curve: what from what, the cleaning, the
/// quality figures and the overlay plot; `None` when the analysis started from patient data.
fn rebuild_section(result: &RunResult, figures: &[Figure]) -> Option<String> {
    let (outcome, source) = (result.rebuild.as_ref()?, result.analysis.rebuild.as_ref()?);
    let mut h = String::from("<section id=\"rebuild\">\n<h2>Rebuilt data</h2>\n");
    h.push_str(&guide("The records fitted in this report are reconstructed, not observed; the smaller the differences below, the closer the rebuilt curve follows the published figure."));
    h.push_str(&format!(
        "<p class=\"caution\">{}</p>\n",
        escape(crate::cmd::run::compute::REBUILD_CAUTION)
    ));
    let mut from = format!(
        "the digitised Kaplan–Meier points <code>{}</code>",
        escape(&source.curve.name)
    );
    match &source.at_risk {
        Some(r) => from.push_str(&format!(
            " and the published numbers at risk <code>{}</code>",
            escape(&r.name)
        )),
        None => from.push_str(&format!(
            " without a risk table (number of patients given: {})",
            escape(&source.patients.join(", "))
        )),
    }
    if !source.events.is_empty() {
        from.push_str(&format!(
            ", with the published total events ({})",
            escape(&source.events.join(", "))
        ));
    }
    h.push_str(&format!(
        "<p>The {} records fitted above were rebuilt from {from} by the method of Guyot, Ades, Ouwens and Welton (2012), with the same code as <code>tunnelcast rebuild</code>; they are written to <span class=\"file\">{}</span>, the rebuild's own report to <span class=\"file\">rebuild.txt</span>, and the tables below to <span class=\"file\">rebuild_*</span>. Survival compared at each digitised point with the closer side of a rebuilt step.</p>\n",
        outcome.arms.iter().map(|a| a.quality.patients).sum::<u64>(),
        crate::analysis::REBUILT_FILE
    ));
    if !outcome.with_risk_table {
        h.push_str("<p class=\"warning\">Without a risk table the censoring pattern is assumed: numbers at risk, events and hazards are much less reliable than the curve itself (see docs/rebuild.md).</p>\n");
    }
    let documents = result.rebuild_documents();
    for (stem, doc) in &documents {
        if *stem == "rebuild_intervals" || doc.tables[0].rows.is_empty() {
            continue;
        }
        let id = format!("table-{}", stem.replace('_', "-"));
        let table = with_time_units(&doc.tables[0], result.analysis.time_unit);
        h.push_str(&html_table(&id, &table, |_| true));
    }
    h.push_str(&figure(
        figures,
        "rebuild.svg",
        "Digitised points (markers) over the Kaplan–Meier curve of the rebuilt data (step line), per arm; under the plot, the published numbers at risk above the rebuilt ones.",
    ));
    h.push_str("</section>\n");
    Some(h)
}

/// `x` at [`DIGITS`] significant digits without trailing zeros ("1", "5.16667").
fn short_number(x: f64) -> String {
    let text = sig(x, DIGITS);
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// The yearly summary of the tunnel table (`table-tunnels-yearly`), with its heading and a
/// line on how it is read.
fn yearly_section(table: &TunnelTable) -> String {
    let rows: Vec<Vec<String>> = yearly_summary(table)
        .iter()
        .map(|y| {
            vec![
                y.year.to_string(),
                short_number(y.from_years),
                short_number(y.to_years),
                y.tunnels.to_string(),
                sig(y.surv_start, DIGITS),
                sig(y.surv_end, DIGITS),
                sig(y.p_leave, DIGITS),
            ]
        })
        .collect();
    let mut h = String::from("<h3>By year since entry</h3>\n");
    h.push_str("<p>Each tunnel counted in the year its cycle starts in. S(start) and S(end): survival at the start of the year's first tunnel and the end of its last; leaving during the year = 1 − S(end)/S(start), the product of the year's (1 − p_exit) taken from one.</p>\n");
    h.push_str(&text_table(
        "table-tunnels-yearly",
        &[
            "year",
            "from (years)",
            "to (years)",
            "tunnels",
            "S(start)",
            "S(end)",
            "leaving during the year",
        ],
        &rows,
        &[true; 7],
    ));
    h
}

/// Counts shown in the report's truncation table: 1–12, about 25 spread out, the marked ones and the last.
fn shown_counts(n: usize, keep: &[usize]) -> Vec<usize> {
    let step = (n / 25).max(1);
    let mut counts: Vec<usize> = (1..=n.min(12)).collect();
    counts.extend((step..=n).step_by(step).filter(|k| *k > 12));
    counts.extend(keep.iter().copied().filter(|k| (1..=n).contains(k)));
    counts.push(n);
    counts.sort_unstable();
    counts.dedup();
    counts
}

/// The last path component of a file name.
fn file_name(path: &str) -> String {
    std::path::Path::new(path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_follow_the_civil_calendar() {
        // 0 is 1970-01-01 (Unix epoch); 951_782_400 is 2000-02-29 (a leap day); 1_700_000_000
        // is 2023-11-14 22:13:20 UTC (common practice: well-known timestamps).
        assert_eq!(format_utc(0), "1970-01-01 00:00 UTC");
        assert_eq!(format_utc(951_782_400), "2000-02-29 00:00 UTC");
        assert_eq!(format_utc(1_700_000_000), "2023-11-14 22:13 UTC");
    }

    #[test]
    fn the_stylesheet_takes_every_colour_from_the_house_palette() {
        use crate::plot::{hex, BAND, CAUTION, CAUTION_WASH, EMPIRICAL, GRID, MUTED, RULE, TINT};
        let palette: Vec<String> = [
            BAND,
            CAUTION,
            CAUTION_WASH,
            EMPIRICAL,
            GRID,
            MUTED,
            RULE,
            TINT,
        ]
        .into_iter()
        .map(hex)
        .collect();
        let css = style();
        let mut found = 0;
        for (i, _) in css.match_indices('#') {
            let digits = css[i + 1..]
                .chars()
                .take_while(char::is_ascii_hexdigit)
                .count();
            if !matches!(digits, 3 | 6) || css[i..].starts_with("#fff;") {
                continue; // a selector (`nav#contents`), or the page's white, as the plots'
            }
            let colour: String = css[i..].chars().take(7).collect();
            assert!(palette.contains(&colour), "{colour} is not in the palette");
            found += 1;
        }
        assert!(found >= 8, "{found} palette colours in the stylesheet");
        assert!(css.contains(".warning"), "warnings have a style");
    }

    /// A tunnel table of cycles of `cycle` (in `unit`) for S(t) = exp(−rate·t).
    fn exponential_table(unit: TimeUnit, cycle: f64, count: usize, rate: f64) -> TunnelTable {
        let rows = (1..=count)
            .map(|k| {
                let (t0, t1) = ((k - 1) as f64 * cycle, k as f64 * cycle);
                let (s0, s1) = ((-rate * t0).exp(), (-rate * t1).exp());
                crate::discretise::TunnelRow {
                    tunnel: k,
                    t_start: t0,
                    t_end: t1,
                    surv_start: s0,
                    surv_end: s1,
                    p_exit: 1.0 - s1 / s0,
                    p_next: s1 / s0,
                }
            })
            .collect();
        TunnelTable {
            time_unit: unit,
            cycle,
            rows,
            extra: Vec::new(),
            curve: "exponential".into(),
        }
    }

    #[test]
    fn quarterly_cycles_make_four_tunnels_a_year_and_a_short_last_year() {
        // 10 quarters: years 1 and 2 of 4 tunnels, year 3 of 2 ending at 2.5 years; with a
        // constant hazard each whole year is left with probability 1 − exp(−12·rate).
        let rate = 0.05;
        let table = exponential_table(TimeUnit::Months, 3.0, 10, rate);
        assert_eq!(listed_rows(&table), 8);
        let years = yearly_summary(&table);
        let counts: Vec<usize> = years.iter().map(|y| y.tunnels).collect();
        assert_eq!(counts, [4, 4, 2]);
        assert_eq!((years[2].from_years, years[2].to_years), (2.0, 2.5));
        for y in &years[..2] {
            let expected = -(-12.0 * rate).exp_m1();
            assert!((y.p_leave - expected).abs() < 1e-12, "{y:?}");
        }
        assert!((years[2].p_leave + (-6.0 * rate).exp_m1()).abs() < 1e-12);
    }

    #[test]
    fn weekly_cycles_follow_the_365_25_day_year() {
        // A year is 365.25/7 = 52.18 weeks (interface contract): tunnels starting at weeks
        // 0..=52 are in year 1 (53 of them), weeks 53..=104 in year 2; two years end at 104.36
        // weeks, so 105 tunnels are listed.
        let table = exponential_table(TimeUnit::Weeks, 1.0, 120, 0.01);
        assert_eq!(listed_rows(&table), 105);
        let counts: Vec<usize> = yearly_summary(&table).iter().map(|y| y.tunnels).collect();
        assert_eq!(counts, [53, 52, 15]);
    }

    #[test]
    fn twenty_four_months_is_two_years_despite_rounding() {
        // 24 months converted through days may land a rounding error either side of 2 years;
        // tunnel 25 (starting at month 24) is in year 3 and not listed.
        let table = exponential_table(TimeUnit::Months, 1.0, 36, 0.02);
        assert_eq!(listed_rows(&table), 24);
        let counts: Vec<usize> = yearly_summary(&table).iter().map(|y| y.tunnels).collect();
        assert_eq!(counts, [12, 12, 12]);
    }

    #[test]
    fn column_headings_may_break_after_underscores() {
        assert_eq!(heading("at_risk"), "at_<wbr/>risk");
        assert_eq!(heading("S(1 y) <"), "S(1 y) &lt;");
    }

    #[test]
    fn escapes_markup() {
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
