//! Fuzz target: `tauscan::fuzzing::spec_loader` on arbitrary bytes (see that function's doc).
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    tauscan::fuzzing::spec_loader(data);
});
