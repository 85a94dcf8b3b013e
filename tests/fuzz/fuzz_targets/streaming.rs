//! Any samples in any chunking through every preset and arithmetic: the
//! chunked frames equal the whole-buffer frames bit for bit.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| stapes_tests::fuzzing::exercise_streaming(data));
