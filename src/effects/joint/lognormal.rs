//! Log-normal across arms, accelerated failure time only: `mu + x·γ`. Log-survival far in the
//! upper tail comes from the one-sample family's guarded normal tail.

use super::{moved, JointFamily, Model};
use crate::families::{Family, LogNormal};

/// The lognormal reference curve with effects across arms.
pub struct JointLogNormal;

impl JointFamily for JointLogNormal {
    fn family(&self) -> &'static dyn Family {
        &LogNormal
    }
    fn models(&self) -> &'static [Model] {
        &[Model::Aft]
    }
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64> {
        debug_assert_eq!(model, Model::Aft);
        moved(base, 0, eta)
    }
    fn pull_back(&self, model: Model, _base: &[f64], _eta: f64, g: &[f64]) -> (Vec<f64>, f64) {
        debug_assert_eq!(model, Model::Aft);
        (g.to_vec(), g[0])
    }
}
