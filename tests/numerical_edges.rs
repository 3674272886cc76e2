//! Numerical edge cases of the fitter: degenerate data (all events at one time, a single event,
//! everything censored but one), times spanning twelve orders of magnitude, and maximum
//! likelihood running to a boundary. A family that cannot be fitted must be reported as not
//! converged with a reason while the others still fit; `fit` exits 0 when at least one family
//! converged and 1 when none did (the fit file is still written, every family marked).

use assert_cmd::Command;
use tunnelcast::fit::{fit_arm, FamilyFit};
use tunnelcast::input::Record;

fn records(pairs: &[(f64, bool)]) -> Vec<Record> {
    let mut r: Vec<Record> = pairs
        .iter()
        .map(|&(time, event)| Record { time, event })
        .collect();
    r.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    r
}

fn fit_all(recs: &[Record]) -> Vec<FamilyFit> {
    fit_arm(&tunnelcast::families::STANDARD, recs, None)
}

fn find<'a>(fits: &'a [FamilyFit], family: &str) -> &'a FamilyFit {
    fits.iter().find(|f| f.family == family).unwrap()
}

/// Every fit is either converged with finite numbers or not converged with a stated reason.
fn assert_reported(fits: &[FamilyFit]) {
    for f in fits {
        if f.converged {
            assert!(f.loglik.is_some_and(f64::is_finite), "{}", f.family);
            assert!(f.params.values().all(|v| v.is_finite()), "{}", f.family);
            assert!(f.covariance.is_some(), "{}", f.family);
        } else {
            let reason = f.message.as_deref().unwrap_or("");
            assert!(reason.len() > 10, "{} has no reason", f.family);
        }
    }
}

/// Exponential MLE: rate = events / total time at risk (from memory; the closed form of
/// d/dλ [d ln λ - λ Σt] = 0).
fn exponential_rate(recs: &[Record]) -> f64 {
    let d = recs.iter().filter(|r| r.event).count() as f64;
    d / recs.iter().map(|r| r.time).sum::<f64>()
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs()
}

#[test]
fn all_events_at_one_time_leave_two_parameter_families_unconverged_with_a_reason() {
    let recs = records(&[(30.0, true); 12]);
    let fits = fit_all(&recs);
    assert_reported(&fits);
    let exp = find(&fits, "exponential");
    assert!(exp.converged);
    assert!(close(exp.params["rate"], 1.0 / 30.0, 1e-9));
    // The likelihood of a shape family grows without bound as the distribution collapses onto
    // t = 30 (shape → ∞, or sigma → 0): no finite maximum exists (common practice).
    for family in ["weibull", "lognormal", "loglogistic"] {
        assert!(
            !find(&fits, family).converged,
            "{family} claims convergence"
        );
    }
}

#[test]
fn single_event_fits_the_exponential_only_where_identifiable() {
    let recs = records(&[(5.0, true)]);
    let fits = fit_all(&recs);
    assert_reported(&fits);
    let exp = find(&fits, "exponential");
    assert!(exp.converged);
    assert!(close(exp.params["rate"], 0.2, 1e-9));
    // One observation cannot identify two parameters (common practice).
    assert!(fits
        .iter()
        .filter(|f| f.family != "exponential")
        .all(|f| !f.converged));
}

#[test]
fn everyone_censored_but_one() {
    let mut pairs: Vec<(f64, bool)> = (1..=19).map(|i| (10.0 * i as f64, false)).collect();
    pairs.push((55.0, true));
    let recs = records(&pairs);
    let fits = fit_all(&recs);
    assert_reported(&fits);
    let exp = find(&fits, "exponential");
    assert!(exp.converged);
    assert!(close(exp.params["rate"], exponential_rate(&recs), 1e-9));
    assert!(close(exp.params["rate"], 1.0 / 1955.0, 1e-9));
}

/// Times 1e-6 … 1e6, evenly spaced on the log scale; every third subject censored.
fn twelve_decades(all_events: bool) -> Vec<Record> {
    let n = 121;
    let pairs: Vec<(f64, bool)> = (0..n)
        .map(|i| {
            let t = 10f64.powf(-6.0 + 12.0 * i as f64 / (n - 1) as f64);
            (t, all_events || i % 3 != 1)
        })
        .collect();
    records(&pairs)
}

#[test]
fn times_spanning_twelve_decades_match_closed_forms() {
    let recs = twelve_decades(true);
    let fits = fit_all(&recs);
    assert_reported(&fits);
    // Log-normal without censoring: mu = mean ln t, sigma² = mean (ln t - mu)² (the normal MLE on
    // ln t, from memory).
    let logs: Vec<f64> = recs.iter().map(|r| r.time.ln()).collect();
    let n = logs.len() as f64;
    let mu = logs.iter().sum::<f64>() / n;
    let sigma = (logs.iter().map(|l| (l - mu).powi(2)).sum::<f64>() / n).sqrt();
    let lognormal = find(&fits, "lognormal");
    assert!(lognormal.converged, "{:?}", lognormal.message);
    assert!(
        (lognormal.params["mu"] - mu).abs() < 1e-6,
        "{}",
        lognormal.params["mu"]
    );
    assert!(close(lognormal.params["sigma"], sigma, 1e-6));
    let exp = find(&fits, "exponential");
    assert!(close(exp.params["rate"], exponential_rate(&recs), 1e-9));
}

#[test]
fn weibull_across_twelve_decades_solves_its_score_equations() {
    let recs = twelve_decades(false);
    let fits = fit_all(&recs);
    assert_reported(&fits);
    let weibull = find(&fits, "weibull");
    assert!(weibull.converged, "{:?}", weibull.message);
    let (k, scale) = (weibull.params["shape"], weibull.params["scale"]);
    // Weibull profile score equations for right-censored data (from memory):
    // Σ t^k ln t / Σ t^k - 1/k - (1/d) Σ_events ln t = 0 and scale^k = Σ t^k / d.
    let d = recs.iter().filter(|r| r.event).count() as f64;
    let sum_tk: f64 = recs.iter().map(|r| r.time.powf(k)).sum();
    let sum_tk_ln: f64 = recs.iter().map(|r| r.time.powf(k) * r.time.ln()).sum();
    let mean_event_ln = recs
        .iter()
        .filter(|r| r.event)
        .map(|r| r.time.ln())
        .sum::<f64>()
        / d;
    let score = sum_tk_ln / sum_tk - 1.0 / k - mean_event_ln;
    assert!(score.abs() < 1e-6, "shape score {score}");
    assert!(close(scale.powf(k), sum_tk / d, 1e-6));
}

#[test]
fn changing_the_time_unit_by_a_million_rescales_the_scale_only() {
    // Accelerated-failure-time families are equivariant under t → c·t: shape unchanged, scale
    // multiplied by c (common practice).
    let recs = twelve_decades(false);
    let scaled: Vec<Record> = recs
        .iter()
        .map(|r| Record {
            time: r.time * 1e6,
            event: r.event,
        })
        .collect();
    let a = fit_all(&recs);
    let b = fit_all(&scaled);
    for family in ["weibull", "loglogistic"] {
        let (fa, fb) = (find(&a, family), find(&b, family));
        assert!(fa.converged && fb.converged, "{family}");
        assert!(
            close(fb.params["shape"], fa.params["shape"], 1e-6),
            "{family}"
        );
        assert!(
            close(fb.params["scale"], fa.params["scale"] * 1e6, 1e-6),
            "{family}"
        );
        assert!(close(
            fb.loglik.unwrap(),
            fa.loglik.unwrap() - log_jacobian(&recs),
            1e-6
        ));
    }
}

/// ln-likelihood shift of t → 1e6·t: each event density gains -ln 1e6 (from memory: f_ct(ct) = f_t(t)/c).
fn log_jacobian(recs: &[Record]) -> f64 {
    recs.iter().filter(|r| r.event).count() as f64 * 1e6f64.ln()
}

fn run_fit(data: &str, extra: &[&str]) -> (i32, String, String, Option<tunnelcast::fit::FitFile>) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("d.csv"), data).unwrap();
    let out = Command::cargo_bin("tunnelcast")
        .unwrap()
        .current_dir(dir.path())
        .args(["fit", "d.csv", "--time-unit", "days", "--json", "fit.json"])
        .args(extra)
        .output()
        .unwrap();
    let json = std::fs::read_to_string(dir.path().join("fit.json"))
        .ok()
        .map(|t| serde_json::from_str::<tunnelcast::fit::FitFile>(&t).unwrap());
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
        json,
    )
}

#[test]
fn exit_status_is_zero_when_one_family_converges_and_one_when_none_does() {
    let data = format!("time,event\n{}", "30,1\n".repeat(12));
    let (code, stdout, stderr, json) = run_fit(&data, &[]);
    assert_eq!(code, 0, "{stderr}");
    assert!(stdout.contains("weibull (not converged)"), "{stdout}");
    assert!(
        stdout.contains("note: weibull did not converge: "),
        "{stdout}"
    );
    let json = json.unwrap();
    assert!(json.fits.iter().any(|f| f.converged));
    assert!(json
        .fits
        .iter()
        .any(|f| !f.converged && f.message.is_some()));

    let (code, _, stderr, json) = run_fit(&data, &["--families", "weibull,loglogistic"]);
    assert_eq!(code, 1, "{stderr}");
    assert_eq!(stderr.trim(), "error: no family converged");
    assert!(json.unwrap().fits.iter().all(|f| !f.converged));
}
