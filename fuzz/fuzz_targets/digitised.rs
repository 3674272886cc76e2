//! Fuzz target: the digitised-curve and risk-table readers of `rebuild`.
#![no_main]

#[path = "../../tests/invariants/mod.rs"]
mod invariants;

libfuzzer_sys::fuzz_target!(|bytes: &[u8]| {
    invariants::digitised(bytes);
});
