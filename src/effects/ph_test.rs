//! Test of proportional hazards on the Schoenfeld residuals of a Cox fit (Grambsch and
//! Therneau, 1994, Biometrika 81:515–526, the score-test approximation of their section 4):
//! each coefficient is allowed to drift linearly in a transform g(t) of time, here
//! 1 − KM(t) (the Kaplan–Meier estimate of the pooled data, right-continuous), and the drift
//! is tested per term (1 df) and jointly (p df).

use super::cox::CoxFit;
use super::design::Design;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// The test of one term.
#[derive(Debug, Clone, PartialEq)]
pub struct TermTest {
    /// Chi-square statistic (1 df).
    pub chi2: f64,
    /// Upper-tail p-value.
    pub p_value: f64,
}

/// The per-term and global tests, and the scaled residuals for the plot.
#[derive(Debug, Clone)]
pub struct PhTest {
    /// Per term, in the order of the design's terms.
    pub terms: Vec<TermTest>,
    /// Global statistic.
    pub chi2: f64,
    /// Degrees of freedom of the global test (number of terms).
    pub df: usize,
    /// Upper-tail p-value of the global test.
    pub p_value: f64,
    /// Per event: time, g(time), scaled Schoenfeld residuals (β + d·V·r, an estimate of β(t)).
    pub scaled: Vec<(f64, f64, Vec<f64>)>,
}

/// 1 − KM(t) of the pooled data at each of `times` (right-continuous).
pub fn one_minus_km(design: &Design, times: &[f64]) -> Vec<f64> {
    let mut data: Vec<(f64, bool)> = design.subjects.iter().map(|s| (s.time, s.event)).collect();
    data.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = data.len();
    let mut steps: Vec<(f64, f64)> = Vec::new();
    let mut surv = 1.0;
    let mut i = 0;
    while i < n {
        let t = data[i].0;
        let at_risk = (n - i) as f64;
        let mut d = 0.0;
        let mut j = i;
        while j < n && data[j].0 == t {
            if data[j].1 {
                d += 1.0;
            }
            j += 1;
        }
        if d > 0.0 {
            surv *= 1.0 - d / at_risk;
            steps.push((t, surv));
        }
        i = j;
    }
    times
        .iter()
        .map(|&t| {
            let k = steps.partition_point(|s| s.0 <= t);
            1.0 - if k == 0 { 1.0 } else { steps[k - 1].1 }
        })
        .collect()
}

fn chi2_sf(x: f64, df: usize) -> f64 {
    match ChiSquared::new(df as f64) {
        Ok(dist) if x.is_finite() => dist.sf(x.max(0.0)),
        _ => f64::NAN,
    }
}

/// Runs the test on a fitted Cox model of `design`.
pub fn test(design: &Design, fit: &CoxFit) -> PhTest {
    let p = fit.coef.len();
    let d = fit.schoenfeld.len();
    let times: Vec<f64> = fit.schoenfeld.iter().map(|(t, _)| *t).collect();
    let g = one_minus_km(design, &times);
    let g_mean = g.iter().sum::<f64>() / d.max(1) as f64;
    let xx: Vec<f64> = g.iter().map(|v| v - g_mean).collect();
    let sxx: f64 = xx.iter().map(|v| v * v).sum();
    let v = &fit.covariance;
    let mut u = vec![0.0; p];
    for (k, (_, r)) in fit.schoenfeld.iter().enumerate() {
        for j in 0..p {
            u[j] += xx[k] * r[j];
        }
    }
    let uv: Vec<f64> = (0..p)
        .map(|j| (0..p).map(|k| u[k] * v[k][j]).sum())
        .collect();
    let dn = d as f64;
    let chi2 = dn * (0..p).map(|j| uv[j] * u[j]).sum::<f64>() / sxx;
    let terms = (0..p)
        .map(|j| {
            let c = dn * uv[j] * uv[j] / (v[j][j] * sxx);
            TermTest {
                chi2: c,
                p_value: chi2_sf(c, 1),
            }
        })
        .collect();
    let scaled = fit
        .schoenfeld
        .iter()
        .zip(&g)
        .map(|((t, r), &gk)| {
            let s = (0..p)
                .map(|j| fit.coef[j] + dn * (0..p).map(|k| v[j][k] * r[k]).sum::<f64>())
                .collect();
            (*t, gk, s)
        })
        .collect();
    PhTest {
        terms,
        chi2,
        df: p,
        p_value: chi2_sf(chi2, p),
        scaled,
    }
}
