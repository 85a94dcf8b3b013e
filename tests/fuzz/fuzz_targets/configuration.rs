//! Any text as a configuration file, and as command-line flags: either a
//! clear error, or a configuration whose generated tables validate.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| stapes_tests::fuzzing::exercise_configuration(data));
