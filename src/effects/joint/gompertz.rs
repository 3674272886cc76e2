//! Gompertz across arms, proportional hazards only (an acceleration factor would also change the
//! shape): h(t|x) = rate·e^(x·β)·e^(shape·t), i.e. `ln_rate + x·β`. Negative shapes (a plateau)
//! are handled by the one-sample family's guarded cumulative hazard.

use super::{moved, JointFamily, Model};
use crate::families::{Family, Gompertz};

/// The gompertz reference curve with effects across arms.
pub struct JointGompertz;

impl JointFamily for JointGompertz {
    fn family(&self) -> &'static dyn Family {
        &Gompertz
    }
    fn models(&self) -> &'static [Model] {
        &[Model::Ph]
    }
    fn shift(&self, model: Model, base: &[f64], eta: f64) -> Vec<f64> {
        debug_assert_eq!(model, Model::Ph);
        moved(base, 1, eta)
    }
    fn pull_back(&self, model: Model, _base: &[f64], _eta: f64, g: &[f64]) -> (Vec<f64>, f64) {
        debug_assert_eq!(model, Model::Ph);
        (g.to_vec(), g[1])
    }
}
