//! The firmware example on emulated Cortex-M4F (QEMU `mps2-an386`: f32,
//! fixed16, fixed32) and Cortex-M0 (QEMU `microbit`: fixed16, fixed32), for
//! every shipped preset: the frames it sends back must equal the host's run
//! of the same core on the same samples (identical bytes for the fixed paths;
//! for f32 identical or within 1 ulp, and the count of differing values is
//! reported). Also collects the figures: flash, RAM, instructions per frame
//! per stage. Installs QEMU with apt-get when it is missing and fails, never
//! skips, when it still cannot run it.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

use object::{Object, ObjectSection};
use stapes_core::config::FeatureConfig;
use stapes_core::table::FilterbankForm;
use stapes_sim::generate::GeneratedTables;
use stapes_tests::repo_root;

const STAGES: [&str; 6] = ["intake", "window", "fft", "spectrum", "mel", "log"];

fn ensure_qemu() -> PathBuf {
    let find = || {
        Command::new("sh")
            .args(["-c", "command -v qemu-system-arm"])
            .output()
            .ok()
            .filter(|o| o.status.success())
            .map(|o| PathBuf::from(String::from_utf8_lossy(&o.stdout).trim().to_string()))
    };
    if let Some(p) = find() {
        return p;
    }
    eprintln!("qemu-system-arm is missing: installing it with apt-get");
    let _ = Command::new("apt-get").args(["update", "-qq"]).status();
    let _ = Command::new("apt-get")
        .args(["install", "-y", "-qq", "qemu-system-arm"])
        .env("DEBIAN_FRONTEND", "noninteractive")
        .status();
    find().expect("qemu-system-arm is not installed and apt-get could not install it: install qemu-system-arm (Debian package) and rerun")
}

struct Board {
    target: &'static str,
    machine: &'static str,
    cpu: Option<&'static str>,
    arithmetics: &'static [&'static str],
}

const BOARDS: [Board; 2] = [
    Board {
        target: "thumbv7em-none-eabihf",
        machine: "mps2-an386",
        cpu: Some("cortex-m4"),
        arithmetics: &["f32", "fixed16", "fixed32"],
    },
    Board {
        target: "thumbv6m-none-eabi",
        machine: "microbit",
        cpu: None,
        arithmetics: &["fixed16", "fixed32"],
    },
];

/// The clip every build streams: the first second of the demo clip at 16 kHz.
fn clip(dir: &Path) -> (PathBuf, Vec<i16>) {
    let c = stapes_sim::synth::demo_clip(16_000, stapes_sim::synth::DEMO_SEED);
    let samples: Vec<i16> = c.samples[..16_000].to_vec();
    let path = dir.join("clip.raw");
    std::fs::write(
        &path,
        samples
            .iter()
            .flat_map(|s| s.to_le_bytes())
            .collect::<Vec<u8>>(),
    )
    .unwrap();
    (path, samples)
}

fn build(board: &Board, features: &str, clip: &Path) -> PathBuf {
    let dir = repo_root().join("firmware-example");
    let status = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()))
        .current_dir(&dir)
        .env("STAPES_CLIP", clip)
        .args([
            "build",
            "--release",
            // Its own target folder whatever CARGO_TARGET_DIR says: the
            // ELF is read from there.
            "--target-dir",
            "target",
            "--target",
            board.target,
            "--no-default-features",
            "--features",
        ])
        .arg(features)
        .status()
        .expect("run cargo for the firmware example");
    assert!(
        status.success(),
        "firmware build failed: {} {features}",
        board.target
    );
    dir.join("target")
        .join(board.target)
        .join("release/stapes-firmware-example")
}

struct Run {
    /// Each frame's bands as the firmware printed them (hex).
    frames: Vec<String>,
    ticks: Vec<(String, u64)>,
    frames_reported: u64,
    per_kilotick: u64,
    state: u64,
    stack: u64,
    /// `(frame index, CRC-32)` of each model window a model-input build handed out.
    windows: Vec<(usize, u32)>,
}

fn run_qemu(qemu: &Path, board: &Board, elf: &Path) -> Run {
    let mut cmd = Command::new("timeout");
    cmd.arg("300").arg(qemu).args(["-machine", board.machine]);
    if let Some(cpu) = board.cpu {
        cmd.args(["-cpu", cpu]);
    }
    let out = cmd
        .args(["-display", "none", "-monitor", "none", "-serial", "none"])
        .args([
            "-semihosting-config",
            "enable=on,target=native",
            "-icount",
            "shift=0",
            "-kernel",
        ])
        .arg(elf)
        .stdin(std::process::Stdio::null())
        .output()
        .expect("run qemu-system-arm");
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert!(
        out.status.success(),
        "{} under {} exited with {:?}:\n{}\n{}",
        elf.display(),
        board.machine,
        out.status.code(),
        text,
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        text.contains("STAPES-END"),
        "no end marker from the firmware:\n{text}"
    );
    let mut run = Run {
        frames: Vec::new(),
        ticks: Vec::new(),
        frames_reported: 0,
        per_kilotick: 0,
        state: 0,
        stack: 0,
        windows: Vec::new(),
    };
    let field = |line: &str, key: &str| -> u64 {
        line.split_whitespace()
            .find_map(|kv| kv.strip_prefix(&format!("{key}=")))
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("no {key} in {line}"))
    };
    for line in text.lines() {
        if let Some(rest) = line.strip_prefix("F ") {
            let (index, hex) = rest.split_once(' ').expect("frame line");
            assert_eq!(
                index.parse::<usize>().unwrap(),
                run.frames.len(),
                "frame order"
            );
            run.frames.push(hex.to_string());
        } else if let Some(rest) = line.strip_prefix("W ") {
            let (index, crc) = rest.split_once(' ').expect("window line");
            run.windows.push((
                index.parse().unwrap(),
                u32::from_str_radix(crc, 16).expect("crc hex"),
            ));
        } else if line.starts_with("STAPES-TICKS") {
            run.frames_reported = field(line, "frames");
            for s in STAGES {
                run.ticks.push((s.to_string(), field(line, s)));
            }
            run.ticks.push(("total".into(), field(line, "total")));
        } else if line.starts_with("STAPES-CAL") {
            run.per_kilotick = field(line, "instructions_per_kilotick");
        } else if line.starts_with("STAPES-RAM") {
            run.state = field(line, "state");
            run.stack = field(line, "stack");
        }
    }
    run
}

/// Splits a frame's hex into values of `width` digits (4 for the fixed
/// paths' i16 bits, 8 for f32 bits).
fn regroup(hex: &str, width: usize) -> Vec<u32> {
    hex.as_bytes()
        .chunks(width)
        .map(|c| u32::from_str_radix(std::str::from_utf8(c).unwrap(), 16).expect("hex"))
        .collect()
}

fn section_sizes(elf: &Path) -> (u64, u64) {
    let data = std::fs::read(elf).unwrap();
    let file = object::File::parse(&*data).unwrap();
    let size = |name: &str| file.section_by_name(name).map_or(0, |s| s.size());
    let flash = size(".vector_table") + size(".text") + size(".rodata") + size(".data");
    let ram = size(".data") + size(".bss") + size(".uninit");
    (flash, ram)
}

/// The host's frames, from the runner that `export`, `features` and the
/// Python module use: this test ties all of them to the board's bits.
fn host_frames(
    arith: &str,
    config: &FeatureConfig,
    form: FilterbankForm,
    samples: &[i16],
) -> Vec<Vec<u32>> {
    use stapes_sim::check::{Arith, CoreTables};
    use stapes_sim::clip_runner::{ClipRunner, FlatValues, SampleSlice};
    let t = GeneratedTables::new(config);
    let (a, tables) = match arith {
        "f32" => (Arith::F32, CoreTables::Float(t.view_f32(form))),
        "fixed16" => (
            Arith::Fixed16,
            CoreTables::Fixed(t.fixed_tables(form).unwrap()),
        ),
        _ => (
            Arith::Fixed32,
            CoreTables::Fixed(t.fixed_tables(form).unwrap()),
        ),
    };
    let mut runner = ClipRunner::log_mel(config, a, tables, a != Arith::F32).unwrap();
    let bands = runner.values_per_frame();
    let mut out = runner.kind().empty();
    // Fed in chunks of 128, as the firmware's DMA-sized pieces.
    for piece in samples.chunks(128) {
        runner.push(SampleSlice::I16(piece), &mut out);
    }
    let words: Vec<u32> = match out {
        FlatValues::F32(v) => v.into_iter().map(f32::to_bits).collect(),
        FlatValues::I16(v) => v.into_iter().map(|x| x as u16 as u32).collect(),
        other => panic!("log-mel frames of an unexpected type: {other:?}"),
    };
    words.chunks(bands).map(|c| c.to_vec()).collect()
}

#[test]
fn firmware_frames_equal_the_host_and_figures_are_collected() {
    let qemu = ensure_qemu();
    let dir = tempfile::tempdir().unwrap();
    let (clip_path, samples) = clip(dir.path());
    let mut table = String::new();
    let mut figures = Vec::new();
    let _ = writeln!(
        table,
        "| preset | arithmetic | core | form | flash B | RAM B (static + state + stack) | instructions per frame: intake / window / FFT / spectrum / mel / log | total | total ÷ FFT | frames vs host |"
    );
    let _ = writeln!(table, "|---|---|---|---|---|---|---|---|---|---|");
    for board in &BOARDS {
        for &arith in board.arithmetics {
            for ((preset, config), form) in stapes_tests::all_presets()
                .into_iter()
                .flat_map(|p| [(p, FilterbankForm::Sparse), (p, FilterbankForm::Compact)])
            {
                // Both forms where the preset has a compact one.
                if form == FilterbankForm::Compact && !GeneratedTables::new(&config).has_compact() {
                    continue;
                }
                let form_feature = match form {
                    FilterbankForm::Sparse => "",
                    FilterbankForm::Compact => ",form-compact",
                };
                // The harness alone first: the front end's flash and static RAM
                // are the full build's minus this one.
                let baseline = build(
                    board,
                    &format!("{arith},preset-{preset},harness-only"),
                    &clip_path,
                );
                let (base_flash, base_ram) = section_sizes(&baseline);
                let elf = build(
                    board,
                    &format!("{arith},preset-{preset}{form_feature}"),
                    &clip_path,
                );
                let run = run_qemu(&qemu, board, &elf);
                let width = if arith == "f32" { 8 } else { 4 };
                let got: Vec<Vec<u32>> = run.frames.iter().map(|nib| regroup(nib, width)).collect();
                let want = host_frames(arith, &config, form, &samples);
                assert!(
                    !got.is_empty(),
                    "{preset} {arith} {}: no frames",
                    board.machine
                );
                assert_eq!(
                    got.len(),
                    want.len(),
                    "{preset} {arith} {}: frame count",
                    board.machine
                );
                assert_eq!(run.frames_reported as usize, want.len());
                let mut differing = 0;
                for (i, (g, w)) in got.iter().zip(&want).enumerate() {
                    assert_eq!(g.len(), config.bands as usize, "frame {i} width");
                    for (b, (&gv, &wv)) in g.iter().zip(w).enumerate() {
                        if gv != wv {
                            differing += 1;
                            let ulps = (gv as i64 - wv as i64).abs();
                            assert!(
                                arith == "f32" && ulps <= 1,
                                "{preset} {arith} {}: frame {i} band {b}: board {gv:#x}, host {wv:#x}",
                                board.machine
                            );
                        }
                    }
                }
                let (full_flash, full_ram) = section_sizes(&elf);
                let (flash, static_ram) = (full_flash - base_flash, full_ram - base_ram);
                let per = |ticks: u64| ticks * run.per_kilotick / 1000 / run.frames_reported.max(1);
                let stage_instr: Vec<u64> =
                    run.ticks.iter().take(6).map(|(_, t)| per(*t)).collect();
                let total = per(run.ticks[6].1);
                figures.push(Figure {
                    preset: preset.to_string(),
                    arith: arith.to_string(),
                    core: board.target.to_string(),
                    flash,
                    ram: static_ram + run.state + run.stack,
                    instructions: total,
                    stages: stage_instr.clone(),
                    state: run.state,
                    stack: run.stack,
                    form,
                });
                let fft = stage_instr[2].max(1);
                let exact = if differing == 0 {
                    "identical".to_string()
                } else {
                    format!("{differing} values 1 ulp apart")
                };
                let _ = writeln!(
                    table,
                    "| {preset} | {arith} | {} | {} | {flash} | {} ({static_ram} + {} + {}) | {} | {total} | {:.2} | {exact} |",
                    board.machine,
                    form.name(),
                    static_ram + run.state + run.stack,
                    run.state,
                    run.stack,
                    stage_instr
                        .iter()
                        .map(u64::to_string)
                        .collect::<Vec<_>>()
                        .join(" / "),
                    total as f64 / fft as f64
                );
            }
        }
    }
    println!("{table}");
    let out = repo_root().join("target");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("firmware-figures.md"), &table).unwrap();
    print_fitted_costs(&figures);
    check_budget(&figures);
    model_input_builds(&qemu, &clip_path, &samples);
}

/// The model's input on the boards (`model-input` builds of the kws16k
/// presets): each preset's stages after the filterbank (log; log, range
/// floor and MFCC; or PCEN; then int8 codes) and its 49-frame window, chained at compile
/// time from the generated tables. Every frame's codes and every window's
/// CRC-32 must equal the host's, which runs the same stage types chosen at
/// run time from the configuration (`stapes_sim::stages`); prints the
/// figures ("stages" holds everything after the filterbank).
fn model_input_builds(qemu: &Path, clip_path: &Path, samples: &[i16]) {
    use stapes_core::crc32::Crc32;
    use stapes_sim::check::{Arith, CoreTables};
    let form = FilterbankForm::Sparse;
    println!(
        "| model input (int8, 49-frame window) | arith | core | RAM B (state + stack) | instructions per frame: filterbank / stages after it / sample intake and window push | total | frames and windows vs host |"
    );
    println!("|---|---|---|---|---|---|---|");
    for (preset, level_map) in [
        ("kws16k-mel40", false),
        ("kws16k-mfcc10", false),
        ("kws16k-pcen40", false),
        ("kws16k-mel40", true),
    ] {
        let mut config = stapes_core::presets::by_name(preset).unwrap();
        if level_map {
            // firmware-example's `chain::LEVEL_MAP`.
            config.stages.level_map = Some(stapes_core::stage_config::LevelMapConfig {
                added_energy: 1e-6,
                gain: 0.5,
                offset: 20.0,
                lower: Some(-10.0),
                upper: None,
            });
        }
        let label = if level_map {
            format!("{preset} + level map")
        } else {
            preset.to_string()
        };
        let t = GeneratedTables::new(&config);
        let stage_tables = t.stages.view();
        // The host's codes and window CRCs for one arithmetic.
        let host = |arith: Arith| -> (Vec<Vec<u32>>, Vec<(usize, u32)>) {
            let core = match arith {
                Arith::F32 => CoreTables::Float(t.view_f32(form)),
                _ => CoreTables::Fixed(t.fixed_tables(form).unwrap()),
            };
            // The runner `export` and the Python module use.
            let mut runner = stapes_sim::clip_runner::ClipRunner::new(
                &config,
                arith,
                core,
                &stage_tables,
                None,
                true,
            )
            .unwrap();
            let values = runner.values_per_frame();
            let mut flat = runner.kind().empty();
            for piece in samples.chunks(128) {
                runner.push(stapes_sim::clip_runner::SampleSlice::I16(piece), &mut flat);
            }
            let codes: Vec<Vec<i64>> = (0..flat.len() / values)
                .map(|f| {
                    (0..values)
                        .map(|j| flat.get_f64(f * values + j) as i64)
                        .collect()
                })
                .collect();
            let w = config.stages.model_window.unwrap();
            let (f, k) = (w.frames as usize, w.stride as usize);
            let mut crcs = Vec::new();
            for end in f..=codes.len() {
                if (end - f) % k == 0 {
                    let bytes: Vec<u8> = codes[end - f..end]
                        .iter()
                        .flatten()
                        .map(|&v| v as i8 as u8)
                        .collect();
                    let mut crc = Crc32::new();
                    crc.update(&bytes);
                    crcs.push((end - 1, crc.finish()));
                }
            }
            let frames = codes
                .into_iter()
                .map(|r| r.into_iter().map(|v| v as i8 as u8 as u32).collect())
                .collect();
            (frames, crcs)
        };
        for (board, arith) in [
            (&BOARDS[0], Arith::F32),
            (&BOARDS[0], Arith::Fixed16),
            (&BOARDS[0], Arith::Fixed32),
            (&BOARDS[1], Arith::Fixed16),
        ] {
            let elf = build(
                board,
                &format!(
                    "{},preset-{preset},model-input{}",
                    arith.name(),
                    if level_map { ",level-map" } else { "" }
                ),
                clip_path,
            );
            let run = run_qemu(qemu, board, &elf);
            let got: Vec<Vec<u32>> = run.frames.iter().map(|h| regroup(h, 2)).collect();
            let (want, want_windows) = host(arith);
            assert_eq!(
                got,
                want,
                "model input {label} {} {}: codes",
                arith.name(),
                board.machine
            );
            assert_eq!(
                run.windows,
                want_windows,
                "model input {label} {} {}: windows",
                arith.name(),
                board.machine
            );
            assert!(!run.windows.is_empty());
            let per = |ticks: u64| ticks * run.per_kilotick / 1000 / run.frames_reported.max(1);
            // `stapes budget`'s prediction with the stages, within 10 %.
            let core = if board.target.starts_with("thumbv6m") {
                stapes_sim::budget::Core::CortexM0
            } else {
                stapes_sim::budget::Core::CortexM4F
            };
            let b = stapes_sim::budget::predict(&config, arith, core, form).unwrap();
            let i = stapes_sim::budget::predict_instructions(&config, arith, core, form).unwrap();
            let sb = stapes_sim::budget::predict_stages(&config, arith, core).unwrap();
            let instructions = i.total() + sb.instructions
                - if config.stages.pcen.is_some() {
                    i.log
                } else {
                    0.0
                };
            let ram = (b.ram_total() + sb.state) as f64;
            let measured_ram = (run.state + run.stack) as f64;
            let measured = per(run.ticks[6].1) as f64;
            let off = |p: f64, m: f64| (p - m).abs() / m;
            assert!(
                off(instructions, measured) <= 0.10 && off(ram, measured_ram) <= 0.10,
                "budget with stages off by more than 10 %: {label} {} {}: instructions predicted {instructions:.0} measured {measured:.0} (stages after the filterbank {}), RAM predicted {ram:.0} measured {measured_ram:.0}",
                arith.name(),
                board.machine,
                per(run.ticks[5].1)
            );
            println!(
                "| {label} | {} | {} | {} ({} + {}) | {} / {} / {} | {} | identical ({} frames, {} windows) |",
                arith.name(),
                board.machine,
                run.state + run.stack,
                run.state,
                run.stack,
                per(run.ticks[4].1),
                per(run.ticks[5].1),
                per(run.ticks[0].1),
                per(run.ticks[6].1),
                want.len(),
                run.windows.len()
            );
        }
    }
}

/// The instruction model's unit costs refitted from these measurements, as
/// `stapes budget` states them (host-sim/src/budget.rs, `instruction_costs`):
/// everything from speech16k-40's sparse build (the compact weight's cost
/// from its compact build), the conditioning and magnitude terms from
/// dsr8k-23's remainder, the FFT's three terms from the FFTs of
/// speech16k-40, dsr8k-23 and kws16k-mel40; tiny16k-10 is held out. Printed
/// so that a change of the core's speed is carried into the model by
/// pasting, not by hand-tuning; also the measured stack.
fn print_fitted_costs(figures: &[Figure]) {
    let find_form = |preset: &str, arith: &str, core: &str, form: FilterbankForm| {
        figures
            .iter()
            .find(|f| f.preset == preset && f.arith == arith && f.core == core && f.form == form)
    };
    let find = |preset: &str, arith: &str, core: &str| {
        find_form(preset, arith, core, FilterbankForm::Sparse)
    };
    for core in ["thumbv7em-none-eabihf", "thumbv6m-none-eabi"] {
        for arith in ["f32", "fixed16", "fixed32"] {
            let (Some(s), Some(d), Some(k), Some(sc_form)) = (
                find("speech16k-40", arith, core),
                find("dsr8k-23", arith, core),
                find("kws16k-mel40", arith, core),
                find_form("speech16k-40", arith, core, FilterbankForm::Compact),
            ) else {
                continue;
            };
            let unit = |name: &str| {
                let c = stapes_core::presets::by_name(name).unwrap();
                let t = GeneratedTables::new(&c);
                let half = (c.fft_points / 2) as f64;
                (
                    c,
                    half,
                    t.sparse_q15.len() as f64,
                    t.compact_q15.len() as f64,
                )
            };
            let (sc, sh, sw, scw) = unit("speech16k-40");
            let (dc, dh, _, _) = unit("dsr8k-23");
            let st = |i: usize| s.stages[i] as f64;
            let dt = |i: usize| d.stages[i] as f64;
            let window = st(1) / sc.window_samples as f64;
            let conditioned =
                (dt(1) - window * dc.window_samples as f64) / dc.window_samples as f64;
            let bin = st(3) / sh;
            let magnitude = (dt(3) - bin * dh) / dh;
            // dsr8k-23's N/2 = 128 and kws16k-mel40's 512 points take an odd
            // number of levels, speech16k-40's 256 an even one: per
            // h·log2(h), per point, and per point of an odd level.
            let (_, kh, _, _) = unit("kws16k-mel40");
            let kt2 = k.stages[2] as f64;
            let fft = (kt2 / kh - dt(2) / dh) / (kh.log2() - dh.log2());
            let odd_point = dt(2) / dh - fft * dh.log2();
            let fft_point = (st(2) - fft * sh * sh.log2()) / sh;
            let odd_level = odd_point - fft_point;
            // kws16k-mel40's spectrum beyond its bins: the offset's add-back
            // on its window spectrum's bins (16-bit data).
            let kc = stapes_core::presets::by_name("kws16k-mel40").unwrap();
            let k_bins = (GeneratedTables::new(&kc).window_spectrum.len() / 2).max(1) as f64;
            let offset_bin = if arith == "fixed16" {
                (k.stages[3] as f64 - bin * kh) / k_bins
            } else {
                0.0
            };
            println!(
                "fitted costs {core} {arith}: c({:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}, {:.2}); stack {} B",
                st(0) / sc.hop_samples as f64,
                window,
                conditioned,
                fft,
                fft_point,
                odd_level,
                bin,
                magnitude,
                offset_bin,
                st(4) / sw,
                st(5) / sc.bands as f64,
                sc_form.stages[4] as f64 / scw,
                s.stack
            );
        }
    }
}

/// A measured front end: flash and RAM of the front end alone.
struct Figure {
    preset: String,
    arith: String,
    core: String,
    flash: u64,
    ram: u64,
    /// Instructions per frame, all stages.
    instructions: u64,
    /// Instructions per frame per stage: intake, window, FFT, spectrum, mel, log.
    stages: Vec<u64>,
    /// Front-end state and per-frame stack, bytes.
    state: u64,
    stack: u64,
    /// The filterbank form built.
    form: FilterbankForm,
}

/// `stapes budget` predicts flash, RAM and instructions per frame before
/// anything is built; each prediction must be within 10 % of the measured
/// firmware.
fn check_budget(figures: &[Figure]) {
    let mut report = String::new();
    for f in figures {
        let config = stapes_core::presets::by_name(&f.preset).unwrap();
        let arith = match f.arith.as_str() {
            "f32" => stapes_sim::check::Arith::F32,
            "fixed16" => stapes_sim::check::Arith::Fixed16,
            _ => stapes_sim::check::Arith::Fixed32,
        };
        let core = if f.core.starts_with("thumbv6m") {
            stapes_sim::budget::Core::CortexM0
        } else {
            stapes_sim::budget::Core::CortexM4F
        };
        let b = stapes_sim::budget::predict(&config, arith, core, f.form)
            .expect("a supported combination");
        let flash_err = (b.flash_total() as f64 - f.flash as f64).abs() / f.flash as f64;
        let ram_err = (b.ram_total() as f64 - f.ram as f64).abs() / f.ram as f64;
        let instr = stapes_sim::budget::predict_instructions(&config, arith, core, f.form)
            .expect("a supported combination")
            .total();
        let instr_err = (instr - f.instructions as f64).abs() / f.instructions as f64;
        let _ = writeln!(
            report,
            "{} {} {} {}: flash predicted {} measured {} ({:.1} %), RAM predicted {} measured {} ({:.1} %), instructions predicted {:.0} measured {} ({:.1} %); state predicted {} B, measured {} B",
            f.preset,
            f.arith,
            f.core,
            f.form.name(),
            b.flash_total(),
            f.flash,
            100.0 * flash_err,
            b.ram_total(),
            f.ram,
            100.0 * ram_err,
            instr,
            f.instructions,
            100.0 * instr_err,
            b.state,
            f.state
        );
    }
    println!("{report}");
    for line in report.lines() {
        let pct: Vec<f64> = line
            .split('(')
            .skip(1)
            .map(|p| p.split(' ').next().unwrap().parse().unwrap())
            .collect();
        assert!(
            pct.iter().all(|&p| p <= 10.0),
            "budget off by more than 10 %: {line}"
        );
    }
}
