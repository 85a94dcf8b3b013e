//! Any bytes as a WAV file, with every channel choice: an error or samples.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| stapes_tests::fuzzing::exercise_wav(data));
