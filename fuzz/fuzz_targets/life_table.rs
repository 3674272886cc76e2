//! Fuzz target: the background life-table loader (`adjust::lifetable::parse`).
#![no_main]

#[path = "../../tests/invariants/mod.rs"]
mod invariants;

libfuzzer_sys::fuzz_target!(|bytes: &[u8]| {
    invariants::life_table(bytes);
});
