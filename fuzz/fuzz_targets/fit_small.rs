//! Fuzz target: small accepted data sets (at most 64 records) through every standard family's
//! fit; no panic, nothing non-finite written, every non-converged family has a reason.
#![no_main]

#[path = "../../tests/invariants/mod.rs"]
mod invariants;

libfuzzer_sys::fuzz_target!(|bytes: &[u8]| {
    if bytes.len() > 2048 {
        return;
    }
    if let Some(data) = invariants::time_to_event_csv(bytes) {
        if data.n() <= 64 && data.arms.len() <= 2 {
            for arm in &data.arms {
                let fits = tunnelcast::fit::fit_arm(
                    &tunnelcast::families::STANDARD,
                    &arm.records,
                    arm.arm.as_deref(),
                );
                fits.iter().for_each(invariants::check_fit);
            }
        }
    }
});
