#![no_main]

// each target uses one harness of the shared file
#[allow(dead_code)]
#[path = "../harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::spec(data));
