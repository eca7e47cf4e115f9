//! Fuzz target `raw`: see `fuzz/harness.rs` for what the input bytes mean.
#![no_main]

#[path = "../harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = harness::raw(data);
});
