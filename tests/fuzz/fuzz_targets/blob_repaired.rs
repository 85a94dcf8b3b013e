//! Bytes as a table blob with its magic, length, fingerprint and CRC
//! repaired, so that mutations reach the sections' contents.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let repaired = stapes_tests::fuzzing::repair_blob(data);
    stapes_tests::fuzzing::exercise_blob(&repaired);
});
