//! A small network built from the fuzzer's bytes, loaded and solved.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| firemain_fuzz::solve::run(data));
