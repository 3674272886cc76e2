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
