//! `stapes export` end to end, through the binary: resuming after SIGKILL,
//! output independent of the thread count, bad clips, layouts, augmentation
//! and the training split's statistics.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use stapes_sim::wav::write_wav_i16;

fn stapes(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_stapes"))
        .args(args)
        .output()
        .expect("run stapes");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into(),
        String::from_utf8_lossy(&out.stderr).into(),
    )
}

/// A clip of the project's own: a tone gliding from `f0`, with a little
/// deterministic noise.
fn clip(seed: u64, samples: usize) -> Vec<i16> {
    let mut state = seed
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    let f0 = 200.0 + 37.0 * seed as f64;
    (0..samples)
        .map(|i| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let noise = ((state >> 33) as f64 / (1u64 << 31) as f64 - 0.5) * 0.02;
            let t = i as f64 / 16000.0;
            let x = 0.25 * (2.0 * std::f64::consts::PI * (f0 * t + 150.0 * t * t)).sin() + noise;
            (x * 32768.0).round() as i16
        })
        .collect()
}

/// `labels` folders of `per_label` clips each (lengths vary by clip).
fn dataset(dir: &Path, labels: &[&str], per_label: usize) {
    for (l, label) in labels.iter().enumerate() {
        std::fs::create_dir_all(dir.join(label)).unwrap();
        for i in 0..per_label {
            let seed = (l * 100 + i) as u64;
            let len = 12000 + (seed as usize * 397) % 6000;
            write_wav_i16(
                &dir.join(label).join(format!("c{i:03}.wav")),
                16000,
                &clip(seed, len),
            )
            .unwrap();
        }
    }
}

/// Every file under `dir` (relative path → bytes), `summary.txt` excepted
/// (it holds the run's time).
fn tree(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(root, &p, out);
            } else {
                let rel = p.strip_prefix(root).unwrap().to_string_lossy().into_owned();
                if rel != "summary.txt" {
                    out.insert(rel, std::fs::read(&p).unwrap());
                }
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

fn manifests(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|r| {
            r.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| {
                    p.file_name()
                        .unwrap()
                        .to_string_lossy()
                        .starts_with("manifest-")
                })
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// A `.npy` file's shape and body length, from its header.
fn npy_shape(path: &Path) -> (String, Vec<usize>, usize) {
    let b = std::fs::read(path).unwrap();
    assert_eq!(&b[..6], b"\x93NUMPY", "{}", path.display());
    let len = u16::from_le_bytes([b[8], b[9]]) as usize;
    assert_eq!((10 + len) % 64, 0, "header padded to 64 bytes");
    let h = std::str::from_utf8(&b[10..10 + len]).unwrap();
    let descr = h
        .split("'descr': '")
        .nth(1)
        .unwrap()
        .split('\'')
        .next()
        .unwrap();
    let shape = h
        .split("'shape': (")
        .nth(1)
        .unwrap()
        .split(')')
        .next()
        .unwrap();
    let dims = shape
        .split(',')
        .filter(|s| !s.trim().is_empty())
        .map(|s| s.trim().parse().unwrap())
        .collect();
    (descr.to_string(), dims, b.len() - 10 - len)
}

#[test]
fn a_killed_export_resumes_without_redoing_finished_shards_and_matches_a_clean_run() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    // 20 distinct clips, each linked 40 times: 800 clips of fixed32 work
    // (the slowest arithmetic), 80 shards of 10.
    let labels = ["down", "up"];
    dataset(&tmp.path().join("seed"), &labels, 10);
    for label in labels {
        std::fs::create_dir_all(data.join(label)).unwrap();
        for i in 0..10 {
            let src = tmp
                .path()
                .join("seed")
                .join(label)
                .join(format!("c{i:03}.wav"));
            for k in 0..40 {
                std::fs::hard_link(&src, data.join(label).join(format!("c{i:03}-{k:02}.wav")))
                    .unwrap();
            }
        }
    }
    let args = |out: &Path| -> Vec<String> {
        [
            "export",
            "--input-dir",
            data.to_str().unwrap(),
            "--output-dir",
            out.to_str().unwrap(),
            "--arith",
            "fixed32",
            "--shard-clips",
            "10",
            "--threads",
            "1",
            "--frames",
            "100",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let killed = tmp.path().join("killed");
    let mut child = Command::new(env!("CARGO_BIN_EXE_stapes"))
        .args(args(&killed))
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while manifests(&killed.join("train")).len() < 3 {
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "no shard finished"
        );
        std::thread::sleep(Duration::from_millis(2));
    }
    assert!(
        child.try_wait().unwrap().is_none(),
        "the export finished before it could be killed: give it more work"
    );
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    let finished = manifests(&killed.join("train"));
    assert!(finished.len() < 80, "killed before the end");
    // Every finished shard's rows are in the split's array being built.
    let partial = killed.join("train/features.npy.partial");
    let (descr, shape, _) = npy_shape(&partial);
    assert_eq!(descr, "<f4");
    assert_eq!(
        shape,
        vec![800, 100, 40],
        "the header keeps room for every clip"
    );
    let header = std::fs::metadata(&partial).unwrap().len() as usize;
    assert!(header >= 128 + finished.len() * 10 * 100 * 40 * 4);
    let mut stamps = Vec::new();
    for m in &finished {
        stamps.push((m.clone(), std::fs::metadata(m).unwrap().modified().unwrap()));
    }
    // The rerun keeps them, finishes the rest and leaves no temporary file.
    let rerun: Vec<String> = args(&killed);
    let rerun: Vec<&str> = rerun.iter().map(String::as_str).collect();
    let (code, out, err) = stapes(&rerun);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("resumed"), "{out}");
    assert!(
        out.contains(&format!("kept from before {}", finished.len())),
        "{out}"
    );
    for (m, t) in stamps {
        assert_eq!(
            std::fs::metadata(&m).unwrap().modified().unwrap(),
            t,
            "{} redone",
            m.display()
        );
    }
    let clean = tmp.path().join("clean");
    let fresh: Vec<String> = args(&clean);
    let fresh: Vec<&str> = fresh.iter().map(String::as_str).collect();
    assert_eq!(stapes(&fresh).0, 0);
    let (a, b) = (tree(&killed), tree(&clean));
    assert!(a.keys().all(|k| !k.contains(".tmp")), "{:?}", a.keys());
    assert_eq!(a.keys().collect::<Vec<_>>(), b.keys().collect::<Vec<_>>());
    for (k, v) in &a {
        assert!(v == &b[k], "{k} differs from a clean run");
    }
    // Rows a power cut left short are found, and their shards redone
    // (with every shard after them: the split's array is appended in
    // order).
    let f = killed.join("train/features.npy");
    let len = std::fs::metadata(&f).unwrap().len();
    std::fs::OpenOptions::new()
        .write(true)
        .open(&f)
        .unwrap()
        .set_len(len / 2)
        .unwrap();
    let (code, out, err) = stapes(&rerun);
    assert_eq!(code, 0, "{out}{err}");
    assert!(
        out.contains("kept from before 39 (41 found incomplete and redone)"),
        "{out}"
    );
    assert_eq!(tree(&killed), b);
}

#[test]
fn the_output_does_not_depend_on_the_thread_count() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["left", "right", "stop"], 12);
    let noise = tmp.path().join("noise");
    std::fs::create_dir_all(&noise).unwrap();
    write_wav_i16(&noise.join("hum.wav"), 16000, &clip(99, 40000)).unwrap();
    let run = |threads: &str, out: &Path| {
        let (code, o, e) = stapes(&[
            "export",
            "--input-dir",
            data.to_str().unwrap(),
            "--output-dir",
            out.to_str().unwrap(),
            "--preset",
            "kws16k-mfcc10",
            "--arith",
            "fixed16",
            "--raw",
            "--shard-clips",
            "7",
            "--validation-percent",
            "20",
            "--test-percent",
            "20",
            "--augment-copies",
            "2",
            "--gain-db",
            "-12:6",
            "--noise-dir",
            noise.to_str().unwrap(),
            "--snr-db",
            "5:20",
            "--shift-ms",
            "100",
            "--threads",
            threads,
        ]);
        assert_eq!(code, 0, "{o}{e}");
    };
    let (one, two) = (tmp.path().join("one"), tmp.path().join("two"));
    run("1", &one);
    run("2", &two);
    let (a, b) = (tree(&one), tree(&two));
    assert_eq!(a, b);
    // int8 codes, the model's input; augmented copies only in train.
    let (descr, shape, _) = npy_shape(&one.join("train/features.npy"));
    assert_eq!(descr, "|i1");
    assert_eq!(shape[2], 10);
    let train = String::from_utf8(a["train/manifest.csv"].clone()).unwrap();
    assert!(
        train
            .lines()
            .any(|l| l.contains(",2,") && l.contains("noise hum.wav")),
        "{train}"
    );
    for split in ["validation", "test"] {
        let m = String::from_utf8(a[&format!("{split}/manifest.csv")].clone()).unwrap();
        assert!(m.lines().skip(1).all(|l| l.contains(",none,")), "{m}");
    }
}

#[test]
fn a_gain_copy_is_the_clip_scaled_before_the_board_arithmetic() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["go"], 2);
    let out = tmp.path().join("out");
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--arith",
        "fixed16",
        "--raw",
        "--augment-copies",
        "1",
        "--gain-db",
        "-20:-20",
        "--frames",
        "120",
    ]);
    assert_eq!(code, 0, "{o}{e}");
    // Row 1 is copy 1 of go/c000.wav: the clip at -20 dB, rounded to 16
    // bits, then padded with zeros to 120 frames.
    let x = clip(0, 12000);
    let scaled: Vec<i16> = x
        .iter()
        .map(|&v| (v as f64 / 32768.0 * 0.1 * 32768.0).round() as i16)
        .collect();
    let mut padded = scaled.clone();
    padded.resize(512 + 119 * 160, 0);
    let wav = tmp.path().join("scaled.wav");
    write_wav_i16(&wav, 16000, &padded).unwrap();
    let one = tmp.path().join("one.npy");
    let (code, o, e) = stapes(&[
        "features",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        one.to_str().unwrap(),
        "--arith",
        "fixed16",
        "--raw",
    ]);
    assert_eq!(code, 0, "{o}{e}");
    let packed = std::fs::read(out.join("train/features.npy")).unwrap();
    let want = std::fs::read(&one).unwrap();
    let body = |b: &[u8]| {
        let len = u16::from_le_bytes([b[8], b[9]]) as usize;
        b[10 + len..].to_vec()
    };
    let row = 120 * 40 * 2;
    assert_eq!(&body(&packed)[row..2 * row], &body(&want)[..]);
    let manifest = std::fs::read_to_string(out.join("train/manifest.csv")).unwrap();
    assert!(manifest.contains("gain -20.00 dB"), "{manifest}");
}

#[test]
fn bad_clips_are_listed_and_the_rest_go_on_unless_strict() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["go", "stop"], 3);
    std::fs::write(data.join("go/broken.wav"), b"not a wav file at all").unwrap();
    write_wav_i16(&data.join("stop/eight-k.wav"), 8000, &clip(1, 8000)).unwrap();
    let out = tmp.path().join("out");
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--frames",
        "98",
    ]);
    assert_eq!(code, 3, "{o}{e}");
    assert!(o.contains("train: 6 rows, 2 failed"), "{o}");
    let failed = std::fs::read_to_string(out.join("train/failed-00000.csv")).unwrap();
    assert!(
        failed.contains("go/broken.wav") && failed.contains("RIFF"),
        "{failed}"
    );
    assert!(
        failed.contains("stop/eight-k.wav") && failed.contains("8000 Hz"),
        "{failed}"
    );
    let (_, shape, _) = npy_shape(&out.join("train/features.npy"));
    assert_eq!(shape, vec![6, 98, 40]);

    let strict = tmp.path().join("strict");
    let (code, _, err) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        strict.to_str().unwrap(),
        "--frames",
        "98",
        "--strict",
    ]);
    assert_eq!(code, 2);
    assert!(
        err.contains("--strict") && err.contains("go/broken.wav"),
        "{err}"
    );
}

#[test]
fn another_plan_in_the_output_folder_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["go"], 2);
    let out = tmp.path().join("out");
    let base = [
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
    ];
    assert_eq!(stapes(&base).0, 0);
    let mut other = base.to_vec();
    other.extend(["--arith", "fixed16"]);
    let (code, _, err) = stapes(&other);
    assert_eq!(code, 2);
    assert!(
        err.contains("another plan") && err.contains("fixed16"),
        "{err}"
    );
    // A folder that holds something else is not written into.
    let busy = tmp.path().join("busy");
    std::fs::create_dir_all(&busy).unwrap();
    std::fs::write(busy.join("notes.txt"), "mine").unwrap();
    let (code, _, err) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        busy.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("not empty"), "{err}");
}

#[test]
fn a_manifest_and_split_folders_give_labels_and_splits() {
    let tmp = tempfile::tempdir().unwrap();
    // Split folders.
    let data = tmp.path().join("split");
    dataset(&data.join("train"), &["go", "stop"], 2);
    dataset(&data.join("test"), &["go"], 1);
    let out = tmp.path().join("out1");
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(
        o.contains("train: 4 rows") && o.contains("test: 1 rows"),
        "{o}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("labels.txt")).unwrap(),
        "go\nstop\n"
    );
    // A CSV manifest with a header, quoted fields and its own splits.
    let flat = tmp.path().join("flat");
    dataset(&flat, &["a"], 3);
    std::fs::write(
        tmp.path().join("list.csv"),
        "path,label,split\na/c000.wav,\"yes, please\",train\na/c001.wav,no,validation\na/c002.wav,no\n",
    )
    .unwrap();
    let out = tmp.path().join("out2");
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        flat.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--manifest",
        tmp.path().join("list.csv").to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(
        o.contains("train: 2 rows") && o.contains("validation: 1 rows"),
        "{o}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("labels.txt")).unwrap(),
        "no\nyes, please\n"
    );
    // A manifest row that leaves the dataset folder is refused.
    std::fs::write(tmp.path().join("bad.csv"), "../x.wav,go\n").unwrap();
    let (code, _, err) = stapes(&[
        "export",
        "--input-dir",
        flat.to_str().unwrap(),
        "--output-dir",
        tmp.path().join("out3").to_str().unwrap(),
        "--manifest",
        tmp.path().join("bad.csv").to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("not a path inside"), "{err}");
}

#[test]
fn the_statistics_are_the_training_frames_mean_and_deviation() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["go", "stop"], 4);
    let out = tmp.path().join("out");
    // Each clip's own length (one .npy per clip): no padding frame.
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--per-clip",
    ]);
    assert_eq!(code, 0, "{o}{e}");
    let mut sum = vec![0f64; 40];
    let mut sq = vec![0f64; 40];
    let mut n = 0f64;
    for label in ["go", "stop"] {
        for i in 0..4 {
            let p = out.join(format!("train/clips/{label}/c{i:03}.0.npy"));
            let b = std::fs::read(&p).unwrap();
            let len = u16::from_le_bytes([b[8], b[9]]) as usize;
            let v: Vec<f32> = b[10 + len..]
                .chunks_exact(4)
                .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
                .collect();
            for f in v.chunks(40) {
                n += 1.0;
                for (j, &x) in f.iter().enumerate() {
                    sum[j] += x as f64;
                    sq[j] += x as f64 * x as f64;
                }
            }
        }
    }
    let text = std::fs::read_to_string(out.join("statistics.toml")).unwrap();
    let list = |key: &str| -> Vec<f64> {
        let line = text.lines().find(|l| l.starts_with(key)).unwrap();
        line.split('[')
            .nth(1)
            .unwrap()
            .trim_end_matches(']')
            .split(',')
            .map(|s| s.trim().parse().unwrap())
            .collect()
    };
    let (mean, dev) = (list("mean"), list("deviation"));
    for j in 0..40 {
        let m = sum[j] / n;
        let d = (sq[j] / n - m * m).sqrt();
        assert!(
            (mean[j] - m).abs() < 1e-4 * m.abs().max(1.0),
            "band {j}: {} vs {m}",
            mean[j]
        );
        assert!(
            (dev[j] - d).abs() < 1e-3 * d.max(1.0),
            "band {j}: {} vs {d}",
            dev[j]
        );
    }
    assert!(
        out.join("board-tables/speech16k-40-normalised.bin")
            .exists()
    );
}

#[test]
fn per_clip_files_are_checked_on_resume_and_a_missing_one_is_redone() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    dataset(&data, &["go", "stop"], 5);
    let out = tmp.path().join("out");
    let args = [
        "export",
        "--input-dir",
        data.to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--per-clip",
        "--shard-clips",
        "3",
        "--arith",
        "fixed32",
    ];
    let (code, o, e) = stapes(&args);
    assert_eq!(code, 0, "{o}{e}");
    let before = tree(&out);
    // Each clip's own length, no padding.
    let (_, shape, _) = npy_shape(&out.join("train/clips/go/c000.0.npy"));
    assert_eq!(shape[1], 40);
    // A clip file lost after its shard finished: that shard and the ones
    // after it are redone, and the folder is as before.
    std::fs::remove_file(out.join("train/clips/stop/c001.0.npy")).unwrap();
    let (code, o, e) = stapes(&args);
    assert_eq!(code, 0, "{o}{e}");
    assert!(o.contains("found incomplete and redone"), "{o}");
    assert_eq!(tree(&out), before);
}

#[test]
fn a_trimmed_clip_aligned_at_the_end_keeps_its_last_samples_and_float_input_works() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data/go");
    std::fs::create_dir_all(&data).unwrap();
    // A float clip of 20,000 samples; 50 frames take 512 + 49·160 = 8352.
    let x: Vec<f32> = clip(4, 20000).iter().map(|&v| v as f32 / 32768.0).collect();
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: 16000,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(data.join("f.wav"), spec).unwrap();
    x.iter().for_each(|&v| w.write_sample(v).unwrap());
    w.finalize().unwrap();
    let out = tmp.path().join("out");
    let (code, o, e) = stapes(&[
        "export",
        "--input-dir",
        tmp.path().join("data").to_str().unwrap(),
        "--output-dir",
        out.to_str().unwrap(),
        "--frames",
        "50",
        "--align",
        "end",
    ]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(o.contains("trimmed 1"), "{o}");
    // The same as `features` of the clip's last 8352 samples.
    let tail = tmp.path().join("tail.wav");
    let mut w = hound::WavWriter::create(&tail, spec).unwrap();
    x[20000 - 8352..]
        .iter()
        .for_each(|&v| w.write_sample(v).unwrap());
    w.finalize().unwrap();
    let one = tmp.path().join("one.npy");
    let (code, o, e) = stapes(&[
        "features",
        "--input",
        tail.to_str().unwrap(),
        "--output",
        one.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{o}{e}");
    let body = |p: &Path| {
        let b = std::fs::read(p).unwrap();
        let len = u16::from_le_bytes([b[8], b[9]]) as usize;
        b[10 + len..].to_vec()
    };
    assert_eq!(body(&out.join("train/features.npy")), body(&one));
}
