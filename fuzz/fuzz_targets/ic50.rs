#![no_main]
//! Fuzz target `ic50`: see common::TARGETS.

mod common;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = (common::TARGETS.iter().find(|t| t.0 == "ic50").expect("listed").1)(data);
});
