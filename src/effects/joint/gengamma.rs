//! Generalized gamma across arms, accelerated failure time only: `mu + x·γ`. Near q = 0 the
//! one-sample family's uniform expansion keeps the likelihood continuous through the log-normal.

use super::{moved, JointFamily, Model};
use crate::families::{Family, GeneralizedGamma};

/// The generalized gamma reference curve with effects across arms.
pub struct JointGeneralizedGamma;

impl JointFamily for JointGeneralizedGamma {
    fn family(&self) -> &'static dyn Family {
        &GeneralizedGamma
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
