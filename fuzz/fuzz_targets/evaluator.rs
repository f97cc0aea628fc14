//! Fuzz target: `tauscan::fuzzing::evaluator` on arbitrary bytes (see that function's doc).
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    tauscan::fuzzing::evaluator(data);
});
