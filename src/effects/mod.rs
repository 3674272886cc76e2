//! Models across arms: the design (arm indicators and covariates), the Cox model and the test
//! of proportional hazards on its Schoenfeld residuals. (Fixed hazard ratios and acceleration
//! factors given by the user live in [`crate::adjust::effects`].)

pub mod cox;
pub mod curve;
pub mod design;
pub mod joint;
pub mod ph_test;
pub mod report;
