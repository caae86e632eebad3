#![no_main]
//! Fuzz target `km`: see common::TARGETS.

mod common;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = (common::TARGETS.iter().find(|t| t.0 == "km").expect("listed").1)(data);
});
