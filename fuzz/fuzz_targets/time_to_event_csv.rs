//! Fuzz target: the time-to-event CSV loader (`input::parse`), first byte choosing the options.
#![no_main]

#[path = "../../tests/invariants/mod.rs"]
mod invariants;

libfuzzer_sys::fuzz_target!(|bytes: &[u8]| {
    invariants::time_to_event_csv(bytes);
});
