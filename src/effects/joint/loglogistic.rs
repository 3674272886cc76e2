//! Log-logistic across arms, accelerated failure time only: `ln_scale + x·γ`.

use super::{moved, JointFamily, Model};
use crate::families::{Family, LogLogistic};

/// The loglogistic reference curve with effects across arms.
pub struct JointLogLogistic;

impl JointFamily for JointLogLogistic {
    fn family(&self) -> &'static dyn Family {
        &LogLogistic
    }
    fn models(&self) -> &'static [Model] {
        &[Model::Aft]
    }
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64> {
        debug_assert_eq!(model, Model::Aft);
        moved(base, 1, eta)
    }
    fn pull_back(&self, model: Model, _base: &[f64], _eta: f64, g: &[f64]) -> (Vec<f64>, f64) {
        debug_assert_eq!(model, Model::Aft);
        (g.to_vec(), g[1])
    }
}
