use super::*;
use crate::effects::design::{Subject, Term, TermKind};

fn small() -> Design {
    let data = [
        (2.0, true, 0.0, 1.0),
        (3.5, false, 0.0, -0.5),
        (5.0, true, 0.0, 0.3),
        (1.2, true, 1.0, 0.0),
        (7.5, true, 1.0, 2.0),
        (9.0, false, 1.0, 1.1),
        (4.4, true, 1.0, -1.0),
        (6.1, true, 0.0, 0.7),
        (6.1, false, 0.0, 0.7),
        (3.0, false, 1.0, 0.0),
    ];
    Design {
        arms: vec!["A".into(), "B".into()],
        reference: 0,
        terms: vec![
            Term {
                name: "arm_B".into(),
                kind: TermKind::Arm("B".into()),
            },
            Term {
                name: "b_age".into(),
                kind: TermKind::Numeric("age".into()),
            },
        ],
        subjects: data
            .iter()
            .map(|&(time, event, arm, age)| Subject {
                time,
                event,
                arm: arm as usize,
                x: vec![arm, age],
            })
            .collect(),
    }
}

/// A point of each family's estimation scale away from any special value (for the generalized
/// gamma both signs of q and one inside the uniform-expansion band near 0), then coefficients.
fn points(family: &dyn JointFamily) -> Vec<Vec<f64>> {
    let base: Vec<Vec<f64>> = match family.family().name() {
        "exponential" => vec![vec![-1.6]],
        "weibull" | "loglogistic" => vec![vec![0.2, 1.5]],
        "gompertz" => vec![vec![0.15, -2.0], vec![-0.3, -1.5]],
        "lognormal" => vec![vec![1.4, -0.2]],
        "generalized-gamma" => vec![
            vec![1.4, -0.2, 0.6],
            vec![1.4, -0.2, -0.5],
            vec![1.4, -0.2, 0.004],
        ],
        other => panic!("no test point for {other}"),
    };
    base.into_iter()
        .map(|mut b| {
            b.extend([-0.3, 0.4]);
            b
        })
        .collect()
}

#[test]
fn every_family_has_test_points() {
    assert_eq!(all().len(), 8);
    for (family, _) in all() {
        for theta in points(family) {
            assert_eq!(theta.len(), family.family().estimation_names().len() + 2);
        }
    }
}

#[test]
fn ln_survival_is_the_censored_likelihood() {
    // A censored record contributes ln S(t|x) to the likelihood: the two code paths agree.
    let mut design = small();
    design.subjects[0].event = false;
    design.subjects.truncate(1);
    let patterns = Patterns::new(&design);
    for (family, model) in all() {
        for theta in points(family) {
            let (ll, _) = loglik_gradient(family, model, &patterns, &theta);
            let s = &design.subjects[0];
            let direct = ln_survival_at(family, model, &theta, s.time, &s.x);
            assert!(
                (ll - direct).abs() < 1e-12,
                "{family:?} {model:?}: {ll} vs {direct}"
            );
        }
    }
}

#[test]
fn gradient_matches_differences() {
    // The analytic gradient (one-sample gradient pulled back through the shift) against
    // central differences of the log-likelihood, every family and model.
    let design = small();
    let patterns = Patterns::new(&design);
    for (family, model) in all() {
        for theta in points(family) {
            let (_, g) = loglik_gradient(family, model, &patterns, &theta);
            for j in 0..theta.len() {
                let h = 1e-6;
                let mut a = theta.clone();
                let mut b = theta.clone();
                a[j] += h;
                b[j] -= h;
                let num = (loglik_gradient(family, model, &patterns, &a).0
                    - loglik_gradient(family, model, &patterns, &b).0)
                    / (2.0 * h);
                assert!(
                    (g[j] - num).abs() < 1e-5 * (1.0 + num.abs()),
                    "{family:?} {model:?} {theta:?} {j}: {} vs {num}",
                    g[j]
                );
            }
        }
    }
}

#[test]
fn patterns_collapse_ties_within_a_pattern_only() {
    let design = small();
    let patterns = Patterns::new(&design);
    // Distinct (arm, age) rows: (0,1) (0,-0.5) (0,0.3) (1,0) (1,2) (1,1.1) (1,-1) (0,0.7).
    assert_eq!(patterns.len(), 8);
    // (6.1, event) and (6.1, censored) share pattern (0, 0.7): one time, two at risk.
    let k = patterns
        .x
        .iter()
        .position(|x| x == &vec![0.0, 0.7])
        .unwrap();
    let r = patterns.ranges[k].clone();
    assert_eq!(&patterns.time[r.clone()], &[6.1]);
    assert_eq!(&patterns.total[r.clone()], &[2.0]);
    assert_eq!(&patterns.events[r], &[1.0]);
}

/// A seeded invented two-arm trial: Weibull times (shape 1.3, scale 20) with log hazard ratio
/// 0.3 for arm B and `age_effect` per unit of a standard-normal age (0 without it), censoring
/// uniform on 6–48; times rounded to `step` (ties when coarse). `levels` > 0 adds a text
/// covariate with that many levels (log hazard ratio 0.2 per level), as indicators.
fn trial(n: usize, seed: u64, step: f64, age: bool, levels: usize) -> Design {
    use rand_chacha::rand_core::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut uniform = move || ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let mut terms = vec![Term {
        name: "arm_B".into(),
        kind: TermKind::Arm("B".into()),
    }];
    if age {
        terms.push(Term {
            name: "b_age".into(),
            kind: TermKind::Numeric("age".into()),
        });
    }
    for level in 1..levels {
        terms.push(Term {
            name: format!("b_site_{level}"),
            kind: TermKind::Level("site".into(), level.to_string()),
        });
    }
    let subjects = (0..n)
        .map(|_| {
            let arm = usize::from(uniform() < 0.5);
            let mut x = vec![arm as f64];
            let mut lp = 0.3 * arm as f64;
            if age {
                let (u1, u2) = (uniform(), uniform());
                let a = (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos();
                x.push(a);
                lp += 0.2 * a;
            }
            if levels > 0 {
                let site = ((uniform() * levels as f64) as usize).min(levels - 1);
                for level in 1..levels {
                    x.push(if site == level { 1.0 } else { 0.0 });
                }
                lp += 0.2 * site as f64;
            }
            let t = 20.0 * (-uniform().ln() / f64::exp(lp)).powf(1.0 / 1.3);
            let c = 6.0 + 42.0 * uniform();
            Subject {
                time: ((t.min(c) / step).round() * step).max(step),
                event: t <= c,
                arm,
                x,
            }
        })
        .collect();
    Design {
        arms: vec!["A".into(), "B".into()],
        reference: 0,
        terms,
        subjects,
    }
}

/// Σ over subjects of d·ln h(t|x) + ln S(t|x), from the one-sample family's `log_hazard` and
/// `log_survival` at the shifted parameters: the likelihood written out per subject, without
/// the families' `loglik_grad` sums nor any collapsing.
fn loglik_by_subject(
    family: &dyn JointFamily,
    model: Model,
    design: &Design,
    theta: &[f64],
) -> f64 {
    let m = base_len(family);
    let one = family.family();
    design
        .subjects
        .iter()
        .map(|s| {
            let eta = linear_predictor(&s.x, &theta[m..]);
            let params = one.to_natural(&family.shift(model, &theta[..m], eta));
            let hazard = if s.event {
                one.log_hazard(&params, s.time)
            } else {
                0.0
            };
            hazard + one.log_survival(&params, s.time)
        })
        .sum()
}

#[test]
fn collapsing_ties_does_not_change_the_likelihood_or_the_fit() {
    // Many ties: times rounded to whole units (about 50 distinct values) within each of the
    // 2 × 3 patterns of arm and a three-level text covariate. Collapsed (one weighted record
    // per pattern, time and event) against one record per subject, and against the
    // likelihood written out per subject: log-likelihood to 1e-9 relative (rounding of sums
    // over 4,000 terms is about 1e-13), the fits' estimates to 1e-6.
    let design = trial(4_000, 17, 1.0, false, 3);
    let collapsed = Patterns::new(&design);
    let each = Patterns::each_record(&design);
    assert_eq!(collapsed.len(), 6);
    assert_eq!(each.records(), 4_000);
    assert!(collapsed.records() < 400, "{}", collapsed.records());
    for (family, model) in all() {
        for mut theta in points(family) {
            theta.truncate(base_len(family));
            theta.extend([0.3, -0.2, 0.25]);
            let (a, ga) = loglik_gradient(family, model, &collapsed, &theta);
            let (b, gb) = loglik_gradient(family, model, &each, &theta);
            let c = loglik_by_subject(family, model, &design, &theta);
            assert!(
                (a - b).abs() < 1e-9 * b.abs(),
                "{family:?} {model:?}: {a} vs {b}"
            );
            assert!(
                (a - c).abs() < 1e-9 * c.abs(),
                "{family:?} {model:?}: {a} vs {c}"
            );
            for (x, y) in ga.iter().zip(&gb) {
                assert!(
                    (x - y).abs() < 1e-9 * (1.0 + y.abs()),
                    "{family:?} {model:?}"
                );
            }
        }
        let fa = fit_plain(family, model, &collapsed).unwrap();
        let fb = fit_plain(family, model, &each).unwrap();
        assert!(fa.converged && fb.converged, "{family:?} {model:?}");
        assert!(
            (fa.loglik - fb.loglik).abs() < 1e-9 * fb.loglik.abs(),
            "{family:?} {model:?}: {} vs {}",
            fa.loglik,
            fb.loglik
        );
        for (x, y) in fa.theta.iter().zip(&fb.theta) {
            assert!((x - y).abs() < 1e-6, "{family:?} {model:?}: {x} vs {y}");
        }
    }
}

#[test]
fn identical_rows_collapse_with_a_continuous_covariate() {
    // A continuous covariate rounded to one decimal: subjects repeating (arm, value, time)
    // are one record; the likelihood is the per-subject one.
    let mut design = trial(3_000, 5, 1.0, true, 0);
    for s in &mut design.subjects {
        s.x[1] = (s.x[1] * 10.0).round() / 10.0;
    }
    let collapsed = Patterns::new(&design);
    assert!(collapsed.records() < 3_000);
    for (family, model) in all() {
        let theta = points(family).remove(0);
        let (a, _) = loglik_gradient(family, model, &collapsed, &theta);
        let c = loglik_by_subject(family, model, &design, &theta);
        assert!(
            (a - c).abs() < 1e-9 * c.abs(),
            "{family:?} {model:?}: {a} vs {c}"
        );
    }
}

#[test]
fn subsample_warm_start_reaches_the_full_data_maximum() {
    // 200,000 subjects, two arms, a continuous covariate: above the large-data threshold, so
    // `fit_patterns` takes the subsample warm start. Against the plain path (every start,
    // Newton with the differenced information on the full data at each step): log-likelihood
    // at least the plain one less 1e-12 relative (about 6e-7 here, a few hundred times the
    // rounding of a sum over 200,000 terms; a parameter off by 1e-3 of its standard error
    // would lose 5e-7), estimates within 1e-2 standard errors.
    let design = trial(200_000, 2026, 0.001, true, 0);
    let patterns = Patterns::new(&design);
    assert!(patterns.records() > crate::fit::SUBSAMPLE_ABOVE);
    for (family, model) in all() {
        let warm = fit_large(family, model, &patterns).expect("the warm start converges");
        let plain = fit_plain(family, model, &patterns).unwrap();
        assert!(plain.converged, "{family:?} {model:?}");
        assert!(
            warm.loglik >= plain.loglik - 1e-12 * plain.loglik.abs(),
            "{family:?} {model:?}: {} vs {}",
            warm.loglik,
            plain.loglik
        );
        for j in 0..warm.theta.len() {
            let se = plain.covariance[j][j].sqrt();
            assert!(
                (warm.theta[j] - plain.theta[j]).abs() < 1e-2 * se,
                "{family:?} {model:?} {j}: {} vs {} (se {se})",
                warm.theta[j],
                plain.theta[j]
            );
            let warm_se = warm.covariance[j][j].sqrt();
            assert!(
                (warm_se / se - 1.0).abs() < 1e-3,
                "{family:?} {model:?} {j}"
            );
        }
        eprintln!(
            "{family:?} {model:?}: warm {} plain {} (difference {:.3e})",
            warm.loglik,
            plain.loglik,
            warm.loglik - plain.loglik
        );
    }
}
