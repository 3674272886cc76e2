//! Weibull across arms, S(t) = exp(−(t/scale)^shape). AFT: `ln_scale + x·γ`. PH: the cumulative
//! hazard (t/scale)^shape·e^(x·β) is a Weibull with scale·e^(−x·β/shape), so
//! `ln_scale − x·β·e^(−ln_shape)`, which couples the coefficient with the shape in the chain
//! rule. The two describe the same fit (γ = −β/shape, AF = HR^(−1/shape)).

use super::{moved, JointFamily, Model};
use crate::families::{Family, Weibull};

/// The Weibull reference curve with effects across arms.
pub struct JointWeibull;

impl JointFamily for JointWeibull {
    fn family(&self) -> &'static dyn Family {
        &Weibull
    }
    fn models(&self) -> &'static [Model] {
        &[Model::Ph, Model::Aft]
    }
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64> {
        match model {
            Model::Ph => moved(base, 1, -eta * (-base[0]).exp()),
            Model::Aft => moved(base, 1, eta),
        }
    }
    fn pull_back(&self, model: Model, base: &[f64], eta: f64, g: &[f64]) -> (Vec<f64>, f64) {
        match model {
            Model::Ph => {
                let inv_shape = (-base[0]).exp();
                (vec![g[0] + g[1] * eta * inv_shape, g[1]], -g[1] * inv_shape)
            }
            Model::Aft => (g.to_vec(), g[1]),
        }
    }
}
