//! Fuzz target: the duration parser (`"3 months"`), used by every cycle and horizon option.
#![no_main]

#[path = "../../tests/invariants/mod.rs"]
mod invariants;

libfuzzer_sys::fuzz_target!(|bytes: &[u8]| {
    invariants::duration(bytes);
});
