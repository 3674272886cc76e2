//! The annual discount rate of payoffs, checked once: (1 + R)^-t with t in years, whatever the
//! curve's or the cycle's time unit.

use crate::units::TimeUnit;

/// A checked annual discount rate R (finite, above -1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Discount {
    annual: f64,
}

impl Discount {
    /// No discounting.
    pub const NONE: Discount = Discount { annual: 0.0 };

    /// The discount rate R a year; refused unless finite and above -1 (R = -1 would make every
    /// later amount infinite).
    pub fn annual(rate: f64) -> Result<Discount, String> {
        if !rate.is_finite() || rate <= -1.0 {
            return Err(format!(
                "discount rate {rate} must be a finite annual rate above -1 (e.g. 0.035)"
            ));
        }
        Ok(Discount { annual: rate })
    }

    /// R, a year.
    pub fn rate(&self) -> f64 {
        self.annual
    }

    /// The continuous discount rate δ = ln(1 + R) per one `unit` of time, so that
    /// (1 + R)^-t = e^(-δ·t) with t in `unit`.
    pub fn per_unit(&self, unit: TimeUnit) -> f64 {
        self.annual.ln_1p() * unit.factor_to(TimeUnit::Years)
    }

    /// (1 + R)^-t for a time `t` in `unit`.
    pub fn factor(&self, t: f64, unit: TimeUnit) -> f64 {
        (-self.per_unit(unit) * t).exp()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factor_is_the_annual_rate_compounded_in_years() {
        let d = Discount::annual(0.035).unwrap();
        // (1.035)^-1 after a year, however the year is written (interface: 12 months, 365.25 days).
        let year = 1.0 / 1.035;
        assert!((d.factor(1.0, TimeUnit::Years) - year).abs() < 1e-15);
        assert!((d.factor(12.0, TimeUnit::Months) - year).abs() < 1e-15);
        assert!((d.factor(365.25, TimeUnit::Days) - year).abs() < 1e-15);
        assert!((d.factor(30.0, TimeUnit::Months) - 1.035f64.powf(-2.5)).abs() < 1e-15);
        assert_eq!(Discount::NONE.factor(1e6, TimeUnit::Days), 1.0);
        assert!(Discount::annual(-1.0).is_err());
        assert!(Discount::annual(f64::NAN).is_err());
    }
}
