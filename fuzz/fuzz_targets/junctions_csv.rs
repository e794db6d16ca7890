//! `junctions.csv` in place of its seed, loaded and checked by the shared rules.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| firemain_fuzz::run("junctions.csv", data));
