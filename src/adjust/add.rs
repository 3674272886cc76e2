//! `--background-mode add`: the curve is disease-specific and background mortality is a second,
//! independent cause of exit, so the hazards add and the survival functions multiply.
//!
//! Exit by cause over a cycle [t0, t1): each cause's probability is its hazard integrated
//! against the joint survival S(u)/S(t0). Within a year of age the background hazard h_b is
//! constant, so P(background) = h_b ∫ S(u)/S(t0) du, done by adaptive Gauss–Kronrod over a
//! smooth, bounded integrand; P(disease) = ∫ h_d(u) S(u)/S(t0) du is the same integral taken by
//! parts, [S(a) - S(b)]/S(t0) - P(background), which needs no evaluation of a disease hazard that
//! may be unbounded near 0. The causes therefore sum to `p_exit` to rounding.

use super::background::BackgroundHazard;
use crate::curve::{Curve, PiecewiseHazard};
use crate::discretise::exit_probability;
use crate::numeric::integrate;
use crate::units::TimeUnit;

/// A disease-specific curve with background mortality added as a competing cause.
pub struct AddedCurve {
    /// Disease-specific curve (after any treatment effect).
    pub disease: Box<dyn Curve>,
    /// Background hazard, in the disease curve's time unit.
    pub background: BackgroundHazard,
}

impl AddedCurve {
    /// Probability of leaving by background mortality within [t0, t1) given presence at t0.
    fn background_share(&self, t0: f64, t1: f64) -> f64 {
        let log_d0 = self.disease.log_survival(t0);
        let mut points = vec![t0];
        points.extend(self.background.breakpoints(t0, t1));
        points.push(t1);
        let mut share = 0.0;
        // Background cumulative hazard from t0 to the start of the current piece.
        let mut so_far = 0.0;
        for piece in points.windows(2) {
            let (a, b) = (piece[0], piece[1]);
            let h = self.background.hazard(0.5 * (a + b));
            if h == f64::INFINITY {
                // Certain background death on reaching this age: everyone still present leaves.
                share += (self.disease.log_survival(a) - log_d0 - so_far).exp();
                break;
            }
            if h > 0.0 {
                let joint =
                    |u: f64| (self.disease.log_survival(u) - log_d0 - so_far - h * (u - a)).exp();
                share += h * integrate(joint, a, b, 1e-14);
            }
            so_far += h * (b - a);
        }
        share
    }
}

impl Curve for AddedCurve {
    fn log_survival(&self, t: f64) -> f64 {
        let background = self.background.cumulative(0.0, t);
        if background == f64::INFINITY {
            return f64::NEG_INFINITY;
        }
        self.disease.log_survival(t) - background
    }
    fn hazard(&self, t: f64) -> f64 {
        self.disease.hazard(t) + self.background.hazard(t)
    }
    fn time_unit(&self) -> TimeUnit {
        self.disease.time_unit()
    }
    fn exit_by_cause(&self, t0: f64, t1: f64) -> Option<Vec<(&'static str, f64)>> {
        let p_exit = exit_probability(self.log_survival(t0), self.log_survival(t1));
        // Nobody is present at t0: attribute the (certain) exit to whichever cause emptied the state.
        let (disease, background) = if self.disease.log_survival(t0) == f64::NEG_INFINITY {
            (p_exit, 0.0)
        } else if self.background.cumulative(0.0, t0) == f64::INFINITY {
            (0.0, p_exit)
        } else {
            let background = self.background_share(t0, t1).clamp(0.0, p_exit);
            (p_exit - background, background)
        };
        Some(vec![("disease", disease), ("background", background)])
    }
    fn describe(&self) -> String {
        format!(
            "{}; background mortality added from {} ({}) from age {}",
            self.disease.describe(),
            self.background.table.file,
            self.background.table.column,
            crate::format::readable(self.background.start_age)
        )
    }
    /// The sum of the disease curve's pieces and the background's year-of-age pieces.
    fn piecewise_hazard(&self, until: f64) -> Option<PiecewiseHazard> {
        let disease = self.disease.piecewise_hazard(until)?;
        Some(disease.merged(&self.background.piecewise(until), |d, b| d + b))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::adjust::background::BeyondTable;
    use crate::adjust::lifetable::parse;
    use crate::curve::ParametricCurve;
    use crate::discretise::tunnel_table;
    use crate::families::{Exponential, Weibull};
    use crate::units::Duration;

    fn background(text: &str, start_age: f64, unit: TimeUnit) -> BackgroundHazard {
        let table = parse("life.csv", text.as_bytes(), None).unwrap();
        BackgroundHazard::new(table, start_age, BeyondTable::HoldLast, unit).unwrap()
    }

    #[test]
    fn two_constant_hazards_split_by_the_competing_risks_formula() {
        // Two constant hazards: P(cause j within Δ) = h_j/(h_1 + h_2)·(1 - e^-(h_1+h_2)Δ)
        // (standard competing-risks result, from memory).
        let qx: f64 = 0.04;
        let h_bg = -(-qx).ln_1p() / 12.0; // per month
        let h_d = 0.015;
        let curve = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Exponential, vec![h_d], TimeUnit::Months).unwrap(),
            ),
            background: background(
                "age,qx\n50,0.04\n51,0.04\n52,0.04\n",
                50.0,
                TimeUnit::Months,
            ),
        };
        let cycle = Duration {
            value: 3.0,
            unit: TimeUnit::Months,
        };
        let table = tunnel_table(&curve, cycle, 16);
        let total = h_d + h_bg;
        let p_total = 1.0 - (-total * 3.0).exp();
        let disease = &table.extra[0];
        let bg = &table.extra[1];
        assert_eq!(disease.0, "p_exit_disease");
        assert_eq!(bg.0, "p_exit_background");
        for (i, row) in table.rows.iter().enumerate() {
            assert!((row.p_exit - p_total).abs() < 1e-12);
            assert!(
                (disease.1[i] - h_d / total * p_total).abs() < 1e-12,
                "tunnel {}",
                i + 1
            );
            assert!(
                (bg.1[i] - h_bg / total * p_total).abs() < 1e-12,
                "tunnel {}",
                i + 1
            );
            assert!((disease.1[i] + bg.1[i] - row.p_exit).abs() < 1e-12);
        }
    }

    #[test]
    fn hazard_pieces_are_the_disease_rate_plus_each_year_of_age() {
        // Exponential 0.015 a month plus -ln(1 - qx)/12 a month within each year of age (the
        // interface's background rule), entry at 50.25: birthdays 9, 21 and 33 months after
        // entry; past the table's last age its hazard is held.
        let h_d = 0.015;
        let curve = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Exponential, vec![h_d], TimeUnit::Months).unwrap(),
            ),
            background: background(
                "age,qx\n50,0.04\n51,0.05\n52,0.07\n",
                50.25,
                TimeUnit::Months,
            ),
        };
        let pieces = curve.piecewise_hazard(40.0).unwrap();
        let month = |q: f64| -(-q).ln_1p() / 12.0;
        assert_eq!(pieces.cuts.len(), 3);
        for (got, want) in pieces.cuts.iter().zip([9.0, 21.0, 33.0]) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        let expected = [0.04, 0.05, 0.07, 0.07].map(|q| h_d + month(q));
        for (got, want) in pieces.rates.iter().zip(expected) {
            assert!((got - want).abs() < 1e-15, "{got} vs {want}");
        }
        for i in 0..=80 {
            let t = 0.5 * i as f64;
            let (a, b) = (pieces.cumulative(t), -curve.log_survival(t));
            assert!((a - b).abs() <= 1e-14 * b.max(1.0), "t {t}: {a} vs {b}");
        }
        let weibull = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Weibull, vec![0.7, 9.0], TimeUnit::Months).unwrap(),
            ),
            background: curve.background.clone(),
        };
        assert!(weibull.piecewise_hazard(40.0).is_none());
    }

    #[test]
    fn causes_sum_to_p_exit_across_birthdays_and_a_closing_certain_death() {
        // Causes sum to p_exit (definition of exit by cause); a Weibull with a hazard unbounded at 0,
        // yearly cycles crossing birthdays, and a table closing with qx = 1 inside a cycle.
        let curve = AddedCurve {
            disease: Box::new(
                ParametricCurve::new(&Weibull, vec![0.7, 9.0], TimeUnit::Years).unwrap(),
            ),
            background: background(
                "age,qx\n97,0.3\n98,0.35\n99,0.4\n100,1\n",
                97.4,
                TimeUnit::Years,
            ),
        };
        let cycle = Duration {
            value: 1.0,
            unit: TimeUnit::Years,
        };
        let table = tunnel_table(&curve, cycle, 6);
        for (i, row) in table.rows.iter().enumerate() {
            let sum = table.extra[0].1[i] + table.extra[1].1[i];
            assert!((sum - row.p_exit).abs() < 1e-12, "tunnel {}", i + 1);
            assert!(row.p_exit.is_finite() && row.surv_end.is_finite());
        }
        // Age 100 is reached at t = 2.6: the third cycle ends in certain death.
        assert_eq!(table.rows[2].p_exit, 1.0);
        assert_eq!(table.rows[2].surv_end, 0.0);
        assert_eq!(table.rows[5].p_exit, 1.0);
    }
}
