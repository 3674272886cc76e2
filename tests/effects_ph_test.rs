//! Power and size of the test of proportional hazards (Grambsch and Therneau, 1994) on seeded
//! simulated trials: it must reject on crossing hazards and keep its level on proportional
//! hazards. Times are drawn by inverting the Weibull survival function (common practice).

use tunnelcast::draws::NormalStream;
use tunnelcast::effects::design::{Design, Subject, Term, TermKind};
use tunnelcast::effects::report::analyse;

fn uniform(rng: &mut NormalStream) -> f64 {
    ((rng.next_u64() >> 11) as f64 + 0.5) / 9_007_199_254_740_992.0
}

/// Weibull time with survival exp(-(t/scale)^shape).
fn weibull(rng: &mut NormalStream, shape: f64, scale: f64) -> f64 {
    scale * (-uniform(rng).ln()).powf(1.0 / shape)
}

/// One trial of `n` per arm: arm A Weibull(1, 12); arm B Weibull(shape_b, scale_b);
/// censoring uniform on (6, 36).
fn trial(rng: &mut NormalStream, n: usize, shape_b: f64, scale_b: f64) -> Design {
    let mut subjects = Vec::new();
    for arm in 0..2 {
        for _ in 0..n {
            let t = if arm == 0 {
                weibull(rng, 1.0, 12.0)
            } else {
                weibull(rng, shape_b, scale_b)
            };
            let c = 6.0 + 30.0 * uniform(rng);
            subjects.push(Subject {
                time: t.min(c),
                event: t <= c,
                arm,
                x: vec![arm as f64],
            });
        }
    }
    Design {
        arms: vec!["A".into(), "B".into()],
        reference: 0,
        terms: vec![Term {
            name: "arm_B".into(),
            kind: TermKind::Arm("B".into()),
        }],
        subjects,
    }
}

fn rejection_rate(seed: u64, shape_b: f64, scale_b: f64) -> f64 {
    let mut rng = NormalStream::new(seed);
    let replicates = 200;
    let mut rejected = 0;
    for _ in 0..replicates {
        let design = trial(&mut rng, 150, shape_b, scale_b);
        let (_, _, summary) = analyse(&design);
        assert!(summary.converged);
        if summary.ph_test.p_value < 0.05 {
            rejected += 1;
        }
    }
    rejected as f64 / replicates as f64
}

#[test]
fn rejects_crossing_hazards_and_keeps_its_level_under_proportional_hazards() {
    // Arm B Weibull with the same shape 1 and scale 20: hazard ratio (12/20) = 0.6, constant.
    let size = rejection_rate(17, 1.0, 20.0);
    // 200 replicates at a 5% level: binomial standard deviation 1.5 points, so 10% is more
    // than three standard deviations above the nominal level.
    assert!(size <= 0.10, "rejection rate under PH {size}");
    // Arm B Weibull shape 2.5, scale 14: hazard below arm A's early, above it late.
    let power = rejection_rate(18, 2.5, 14.0);
    assert!(power >= 0.90, "power against crossing hazards {power}");
    eprintln!("PH test: size {size}, power {power}");
}
