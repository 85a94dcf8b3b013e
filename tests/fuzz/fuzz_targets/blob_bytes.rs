//! Any bytes as a table blob: parsed, viewed in every form and arithmetic,
//! and, where accepted, streamed through every front end. Nothing panics.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| stapes_tests::fuzzing::exercise_blob(data));
