//! Exponential across arms: PH multiplies the rate by e^(x·β) (`ln_rate + x·β`); AFT divides it
//! by e^(x·γ) (`ln_rate − x·γ`). The two are one model with γ = −β (AF = 1/HR).

use super::{moved, JointFamily, Model};
use crate::families::{Exponential, Family};

/// The exponential reference curve with effects across arms.
pub struct JointExponential;

impl JointFamily for JointExponential {
    fn family(&self) -> &'static dyn Family {
        &Exponential
    }
    fn models(&self) -> &'static [Model] {
        &[Model::Ph, Model::Aft]
    }
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64> {
        match model {
            Model::Ph => moved(base, 0, eta),
            Model::Aft => moved(base, 0, -eta),
        }
    }
    fn pull_back(&self, model: Model, _base: &[f64], _eta: f64, g: &[f64]) -> (Vec<f64>, f64) {
        match model {
            Model::Ph => (g.to_vec(), g[0]),
            Model::Aft => (g.to_vec(), -g[0]),
        }
    }
}
