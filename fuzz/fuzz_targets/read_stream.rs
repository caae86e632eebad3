#![no_main]
//! Fuzz target `read_stream`: see common::TARGETS.

mod common;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = (common::TARGETS.iter().find(|t| t.0 == "read_stream").expect("listed").1)(data);
});
