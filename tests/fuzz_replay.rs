//! Every fuzz seed and every recorded finding, replayed through the code the
//! fuzz targets run (`stapes_tests::fuzzing`), in the ordinary test run.

use std::path::Path;

use stapes_tests::fuzzing;

fn replay(target: &str, run: impl Fn(&[u8])) -> usize {
    let root = stapes_tests::repo_root().join("tests/fuzz");
    let mut n = 0;
    for dir in [
        root.join("seeds").join(target),
        root.join("regressions").join(target),
    ] {
        let Ok(entries) = std::fs::read_dir(&dir) else {
            continue;
        };
        for entry in entries {
            let path = entry.unwrap().path();
            let bytes = std::fs::read(&path).unwrap();
            run(&bytes);
            n += 1;
        }
    }
    n
}

fn shipped_blobs() -> Vec<Vec<u8>> {
    std::fs::read_dir(stapes_tests::repo_root().join("tables"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p: &std::path::PathBuf| p.extension().is_some_and(|e| e == "bin"))
        .map(|p| std::fs::read(Path::new(&p)).unwrap())
        .collect()
}

#[test]
fn blob_inputs_replay() {
    replay("blob_bytes", fuzzing::exercise_blob);
    replay("blob_repaired", |b| {
        fuzzing::exercise_blob(&fuzzing::repair_blob(b))
    });
    // The blob targets' seeds are the shipped blobs: each streams through
    // every arithmetic, and repairing an intact blob changes nothing.
    for blob in shipped_blobs() {
        fuzzing::exercise_blob(&blob);
        assert_eq!(fuzzing::repair_blob(&blob), blob);
    }
}

#[test]
fn configuration_inputs_replay() {
    assert!(replay("configuration", fuzzing::exercise_configuration) >= 3);
}

#[test]
fn wav_inputs_replay() {
    assert!(replay("wav_reader", fuzzing::exercise_wav) >= 3);
}

#[test]
fn streaming_inputs_replay() {
    assert!(replay("streaming", fuzzing::exercise_streaming) >= 1);
}
