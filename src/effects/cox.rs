//! The Cox proportional-hazards model with Efron's handling of tied event times (Efron,
//! 1977), fitted by Newton–Raphson with step halving; standard errors from the observed
//! information at the maximum.

use super::design::Design;
use crate::numeric::invert_positive_definite;

/// A fitted Cox model.
#[derive(Debug, Clone)]
pub struct CoxFit {
    /// Coefficients (log hazard ratios), in the order of the design's terms.
    pub coef: Vec<f64>,
    /// Covariance of the coefficients (inverse observed information).
    pub covariance: Vec<Vec<f64>>,
    /// Partial log-likelihood at the maximum.
    pub loglik: f64,
    /// Partial log-likelihood at all coefficients 0.
    pub loglik_null: f64,
    /// Whether Newton–Raphson converged.
    pub converged: bool,
    /// Newton–Raphson iterations used.
    pub iterations: usize,
    /// Per event (in time order): event time, and the Schoenfeld residual (Efron-weighted
    /// risk-set mean subtracted).
    pub schoenfeld: Vec<(f64, Vec<f64>)>,
}

impl CoxFit {
    /// Standard error of coefficient `j`.
    pub fn se(&self, j: usize) -> f64 {
        self.covariance[j][j].sqrt()
    }
}

/// Subjects sorted by time, covariates centred (the fit does not depend on centring; the
/// exponentials stay in range).
struct Sorted {
    time: Vec<f64>,
    event: Vec<bool>,
    x: Vec<Vec<f64>>,
}

fn sorted(design: &Design) -> Sorted {
    let p = design.p();
    let n = design.subjects.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| design.subjects[a].time.total_cmp(&design.subjects[b].time));
    let mut mean = vec![0.0; p];
    for s in &design.subjects {
        for j in 0..p {
            mean[j] += s.x[j] / n as f64;
        }
    }
    Sorted {
        time: order.iter().map(|&i| design.subjects[i].time).collect(),
        event: order.iter().map(|&i| design.subjects[i].event).collect(),
        x: order
            .iter()
            .map(|&i| {
                design.subjects[i]
                    .x
                    .iter()
                    .zip(&mean)
                    .map(|(v, m)| v - m)
                    .collect()
            })
            .collect(),
    }
}

/// Log-likelihood, score and observed information at `beta`; with `residuals`, also the
/// Schoenfeld residuals per event.
struct Evaluation {
    loglik: f64,
    score: Vec<f64>,
    info: Vec<Vec<f64>>,
    schoenfeld: Vec<(f64, Vec<f64>)>,
}

fn evaluate(data: &Sorted, beta: &[f64], residuals: bool) -> Evaluation {
    let n = data.time.len();
    let p = beta.len();
    let eta: Vec<f64> = data
        .x
        .iter()
        .map(|x| x.iter().zip(beta).map(|(a, b)| a * b).sum())
        .collect();
    let w: Vec<f64> = eta.iter().map(|e| e.exp()).collect();
    let mut loglik = 0.0;
    let mut score = vec![0.0; p];
    let mut info = vec![vec![0.0; p]; p];
    // Risk-set sums over subjects with time >= the current time, built from the end.
    let mut s0 = 0.0;
    let mut s1 = vec![0.0; p];
    let mut s2 = vec![vec![0.0; p]; p];
    let mut blocks: Vec<(f64, Vec<f64>)> = Vec::new();
    let mut end = n;
    while end > 0 {
        let t = data.time[end - 1];
        let mut start = end;
        while start > 0 && data.time[start - 1] == t {
            start -= 1;
        }
        // Add the whole tied block to the risk set; collect the events' sums.
        let mut d = 0usize;
        let mut d0 = 0.0;
        let mut d1 = vec![0.0; p];
        let mut d2 = vec![vec![0.0; p]; p];
        for i in start..end {
            let xi = &data.x[i];
            s0 += w[i];
            for j in 0..p {
                s1[j] += w[i] * xi[j];
                for k in 0..=j {
                    s2[j][k] += w[i] * xi[j] * xi[k];
                }
            }
            if data.event[i] {
                d += 1;
                loglik += eta[i];
                d0 += w[i];
                for j in 0..p {
                    score[j] += xi[j];
                    d1[j] += w[i] * xi[j];
                    for k in 0..=j {
                        d2[j][k] += w[i] * xi[j] * xi[k];
                    }
                }
            }
        }
        if d > 0 {
            let mut mean_sum = vec![0.0; p];
            for l in 0..d {
                let f = l as f64 / d as f64;
                let phi = s0 - f * d0;
                loglik -= phi.ln();
                let m: Vec<f64> = (0..p).map(|j| (s1[j] - f * d1[j]) / phi).collect();
                for j in 0..p {
                    score[j] -= m[j];
                    mean_sum[j] += m[j];
                    for k in 0..=j {
                        info[j][k] += (s2[j][k] - f * d2[j][k]) / phi - m[j] * m[k];
                    }
                }
            }
            if residuals {
                let mean: Vec<f64> = mean_sum.iter().map(|m| m / d as f64).collect();
                for i in start..end {
                    if data.event[i] {
                        let r = (0..p).map(|j| data.x[i][j] - mean[j]).collect();
                        blocks.push((t, r));
                    }
                }
            }
        }
        end = start;
    }
    for j in 0..p {
        for k in 0..j {
            info[k][j] = info[j][k];
        }
    }
    blocks.reverse();
    Evaluation {
        loglik,
        score,
        info,
        schoenfeld: blocks,
    }
}

/// Fits the Cox model to the design's terms (Efron ties).
pub fn fit(design: &Design) -> CoxFit {
    let data = sorted(design);
    let p = design.p();
    let mut beta = vec![0.0; p];
    let mut current = evaluate(&data, &beta, false);
    let loglik_null = current.loglik;
    let mut converged = false;
    let mut iterations = 0;
    for iteration in 1..=100 {
        iterations = iteration;
        let Some(inv) = invert_positive_definite(&current.info) else {
            break;
        };
        let step: Vec<f64> = (0..p)
            .map(|j| (0..p).map(|k| inv[j][k] * current.score[k]).sum())
            .collect();
        let mut scale = 1.0;
        let mut accepted = None;
        for _ in 0..40 {
            let trial: Vec<f64> = beta.iter().zip(&step).map(|(b, s)| b + scale * s).collect();
            let next = evaluate(&data, &trial, false);
            if next.loglik.is_finite() && next.loglik >= current.loglik - 1e-12 {
                accepted = Some((trial, next));
                break;
            }
            scale /= 2.0;
        }
        let Some((trial, next)) = accepted else {
            break;
        };
        let change = next.loglik - current.loglik;
        let max_step = step.iter().fold(0.0f64, |m, s| m.max((scale * s).abs()));
        beta = trial;
        current = next;
        if change.abs() < 1e-13 * (1.0 + current.loglik.abs()) && max_step < 1e-9 {
            converged = true;
            break;
        }
    }
    let last = evaluate(&data, &beta, true);
    let covariance =
        invert_positive_definite(&last.info).unwrap_or_else(|| vec![vec![f64::NAN; p]; p]);
    if !covariance.iter().flatten().all(|v| v.is_finite()) {
        converged = false;
    }
    CoxFit {
        coef: beta,
        covariance,
        loglik: last.loglik,
        loglik_null,
        converged,
        iterations,
        schoenfeld: last.schoenfeld,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::effects::design::{Subject, Term, TermKind};

    /// Two subjects per arm, no ties: the partial likelihood is written out by hand.
    #[test]
    fn matches_hand_written_partial_likelihood() {
        let subjects = [
            (1.0, true, 1.0),
            (2.0, true, 0.0),
            (3.0, false, 1.0),
            (4.0, true, 0.0),
        ]
        .iter()
        .map(|&(time, event, x)| Subject {
            time,
            event,
            arm: x as usize,
            x: vec![x],
        })
        .collect();
        let design = Design {
            arms: vec!["A".into(), "B".into()],
            reference: 0,
            terms: vec![Term {
                name: "arm_B".into(),
                kind: TermKind::Arm("B".into()),
            }],
            subjects,
        };
        let fit = fit(&design);
        assert!(fit.converged);
        // l(b) = b - ln(2e^b + 2) - ln(e^b + 2) + 0 (last event alone in its risk set).
        let l = |b: f64| b - (2.0 * b.exp() + 2.0).ln() - (b.exp() + 2.0).ln();
        let b = fit.coef[0];
        let h = 1e-5;
        let derivative = (l(b + h) - l(b - h)) / (2.0 * h);
        assert!(derivative.abs() < 1e-8, "score {derivative}");
        assert!((fit.loglik - l(b)).abs() < 1e-12);
        let second = (l(b + h) - 2.0 * l(b) + l(b - h)) / (h * h);
        assert!((fit.covariance[0][0] * -second - 1.0).abs() < 1e-4);
    }
}
