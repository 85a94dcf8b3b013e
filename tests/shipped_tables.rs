//! The committed tables under `tables/`: regenerating them changes no byte,
//! the Rust source compiles and equals the generator's views, and the C
//! headers compile with the system C compiler and hold the same values.

use std::path::Path;
use std::process::Command;

use stapes_core::table::FilterbankForm;
use stapes_sim::emit::{BlobContents, c_prefix, write_all};
use stapes_sim::generate::GeneratedTables;
use stapes_tests::{all_presets, repo_root};

#[allow(dead_code)]
mod speech16k_40 {
    include!("../tables/speech16k-40.rs");
}
#[allow(dead_code)]
mod dsr8k_23 {
    include!("../tables/dsr8k-23.rs");
}
#[allow(dead_code)]
mod tiny16k_10 {
    include!("../tables/tiny16k-10.rs");
}
#[allow(dead_code)]
mod kws16k_mel40 {
    include!("../tables/kws16k-mel40.rs");
}
#[allow(dead_code)]
mod kws16k_mfcc10 {
    include!("../tables/kws16k-mfcc10.rs");
}
#[allow(dead_code)]
mod kws16k_pcen40 {
    include!("../tables/kws16k-pcen40.rs");
}

#[test]
fn regenerating_the_shipped_tables_changes_no_byte() {
    let dir = tempfile::tempdir().unwrap();
    for (name, c) in all_presets() {
        let t = GeneratedTables::new(&c);
        write_all(
            &t,
            name,
            dir.path(),
            &format!("stapes tables --preset {name}"),
            BlobContents::ALL,
        )
        .unwrap();
        for ext in ["rs", "h", "bin"] {
            let file = format!("{name}.{ext}");
            let fresh = std::fs::read(dir.path().join(&file)).unwrap();
            let shipped =
                std::fs::read(repo_root().join("tables").join(&file)).unwrap_or_else(|e| {
                    panic!("tables/{file} missing ({e}): run `stapes tables --all-presets`")
                });
            assert!(
                fresh == shipped,
                "tables/{file} differs from a fresh generation: run `cargo run --release -p stapes-sim -- tables --all-presets` and commit"
            );
        }
    }
}

#[test]
fn the_rust_source_holds_the_generated_views() {
    let t = GeneratedTables::new(&speech16k_40::CONFIG);
    assert_eq!(
        speech16k_40::FINGERPRINT,
        speech16k_40::CONFIG.fingerprint()
    );
    assert_eq!(
        speech16k_40::TABLE_F32_SPARSE,
        t.view_f32(FilterbankForm::Sparse)
    );
    assert_eq!(
        speech16k_40::TABLE_F32_COMPACT,
        t.view_f32(FilterbankForm::Compact)
    );
    assert_eq!(
        speech16k_40::TABLE_Q15_SPARSE,
        t.view_q15(FilterbankForm::Sparse)
    );
    assert_eq!(
        speech16k_40::TABLE_Q15_COMPACT,
        t.view_q15(FilterbankForm::Compact)
    );
    let t = GeneratedTables::new(&dsr8k_23::CONFIG);
    assert_eq!(
        dsr8k_23::TABLE_F32_SPARSE,
        t.view_f32(FilterbankForm::Sparse)
    );
    assert_eq!(
        dsr8k_23::TABLE_Q15_SPARSE,
        t.view_q15(FilterbankForm::Sparse)
    );
    let t = GeneratedTables::new(&tiny16k_10::CONFIG);
    assert_eq!(
        tiny16k_10::TABLE_F32_COMPACT,
        t.view_f32(FilterbankForm::Compact)
    );
    assert_eq!(
        tiny16k_10::TABLE_Q15_COMPACT,
        t.view_q15(FilterbankForm::Compact)
    );
    for (module_config, stage_tables) in [
        (kws16k_mel40::CONFIG, kws16k_mel40::STAGE_TABLES),
        (kws16k_mfcc10::CONFIG, kws16k_mfcc10::STAGE_TABLES),
        (kws16k_pcen40::CONFIG, kws16k_pcen40::STAGE_TABLES),
    ] {
        let t = GeneratedTables::new(&module_config);
        assert_eq!(stage_tables, t.stages.view());
        stage_tables.check(&module_config).unwrap();
    }
    for (name, c) in all_presets() {
        let shipped = [
            speech16k_40::CONFIG,
            dsr8k_23::CONFIG,
            tiny16k_10::CONFIG,
            kws16k_mel40::CONFIG,
            kws16k_mfcc10::CONFIG,
            kws16k_pcen40::CONFIG,
        ];
        assert!(shipped.contains(&c), "{name} has no shipped Rust source");
    }
}

#[test]
fn a_front_end_sized_exactly_from_the_source_matches_the_host() {
    use stapes_core::FloatFrontEnd;
    type Exact = FloatFrontEnd<
        'static,
        { tiny16k_10::FFT_POINTS },
        { tiny16k_10::OVERLAP_SAMPLES },
        { tiny16k_10::BANDS },
    >;
    let mut fe = Exact::new(tiny16k_10::CONFIG, tiny16k_10::TABLE_F32_SPARSE).unwrap();
    let x = stapes_tests::noise_i16(&mut stapes_tests::rng(40), 5000, 0.3);
    let mut got = Vec::new();
    let mut rest = &x[..];
    while let Some(f) = fe.next_frame(&mut rest) {
        got.push(f.bands.to_vec());
    }
    let t = GeneratedTables::new(&tiny16k_10::CONFIG);
    let want = stapes_sim::run::run_float(
        &tiny16k_10::CONFIG,
        t.view_f32(FilterbankForm::Sparse),
        &stapes_sim::run::Samples::I16(x),
        5000,
    )
    .unwrap();
    assert_eq!(got, want);
}

fn c_sum_program(prefix: &str, t: &GeneratedTables) -> (String, String) {
    let mut arrays = vec![
        (
            format!("{prefix}_window_f32"),
            true,
            t.window_f32.iter().map(|&v| v as f64).collect::<Vec<_>>(),
        ),
        (
            format!("{prefix}_window_q15"),
            false,
            t.window_q15.iter().map(|&v| v as f64).collect(),
        ),
        (
            format!("{prefix}_sparse_weights_f32"),
            true,
            t.sparse_f32.iter().map(|&v| v as f64).collect(),
        ),
        (
            format!("{prefix}_sparse_weights_q15"),
            false,
            t.sparse_q15.iter().map(|&v| v as f64).collect(),
        ),
    ];
    if t.has_compact() {
        arrays.push((
            format!("{prefix}_compact_weights_f32"),
            true,
            t.compact_f32.iter().map(|&v| v as f64).collect(),
        ));
        arrays.push((
            format!("{prefix}_compact_weights_q15"),
            false,
            t.compact_q15.iter().map(|&v| v as f64).collect(),
        ));
    }
    let mut body = String::new();
    let mut expect = String::new();
    for (name, _, values) in &arrays {
        body.push_str(&format!(
            "{{ double s = 0; for (unsigned i = 0; i < sizeof {name} / sizeof {name}[0]; i++) s += (double){name}[i]; printf(\"%u %.17g\\n\", (unsigned)(sizeof {name} / sizeof {name}[0]), s); }}\n"
        ));
        let s: f64 = values.iter().sum();
        expect.push_str(&format!("{} {}\n", values.len(), s));
    }
    (body, expect)
}

#[test]
fn the_c_headers_compile_and_hold_the_same_values() {
    let dir = tempfile::tempdir().unwrap();
    for (name, c) in all_presets() {
        let t = GeneratedTables::new(&c);
        let prefix = c_prefix(name);
        let (body, expect) = c_sum_program(&prefix, &t);
        let header = repo_root().join("tables").join(format!("{name}.h"));
        let src = format!(
            "#include <stdio.h>\n#include \"{}\"\n#include \"{}\"\nint main(void) {{\n{body}return 0;\n}}\n",
            header.display(),
            header.display()
        );
        let c_file = dir.path().join(format!("{prefix}.c"));
        let exe = dir.path().join(&prefix);
        std::fs::write(&c_file, src).unwrap();
        let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
        let out = Command::new(&cc)
            .args([
                "-std=c99",
                "-Wall",
                "-Wextra",
                "-Werror",
                "-Wno-unused-const-variable",
                "-O0",
                "-o",
            ])
            .arg(&exe)
            .arg(&c_file)
            .output()
            .unwrap_or_else(|e| {
                panic!("cannot run the C compiler `{cc}` ({e}): install gcc or set CC")
            });
        assert!(
            out.status.success(),
            "{name}.h does not compile:\n{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let run = Command::new(&exe).output().unwrap();
        // f64 sums of the same values in the same order agree to the last bit;
        // print Rust's with shortest round-trip formatting and parse C's.
        let got: Vec<(usize, f64)> = String::from_utf8_lossy(&run.stdout)
            .lines()
            .map(|l| {
                let mut p = l.split(' ');
                (
                    p.next().unwrap().parse().unwrap(),
                    p.next().unwrap().parse().unwrap(),
                )
            })
            .collect();
        let want: Vec<(usize, f64)> = expect
            .lines()
            .map(|l| {
                let mut p = l.split(' ');
                (
                    p.next().unwrap().parse().unwrap(),
                    p.next().unwrap().parse().unwrap(),
                )
            })
            .collect();
        assert_eq!(got, want, "{name}.h values");
        assert!(Path::new(&header).exists());
    }
}
