//! The committed C header (`firmware-example/c-api/include/stapes.h`) is
//! what cbindgen generates from the C API's source: a change to the API
//! that is not regenerated fails here.
//!
//! Regenerate with `STAPES_BLESS_HEADER=1 cargo test -p stapes-tests --test c_header`.

use std::path::PathBuf;

fn c_api() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../firmware-example/c-api")
}

fn generated() -> String {
    let dir = c_api();
    let config = cbindgen::Config::from_file(dir.join("cbindgen.toml")).expect("cbindgen.toml");
    let bindings = cbindgen::Builder::new()
        .with_config(config)
        .with_src(dir.join("src/lib.rs"))
        .generate()
        .expect("cbindgen reads the C API's source");
    let mut out = Vec::new();
    bindings.write(&mut out);
    String::from_utf8(out).expect("UTF-8 header")
}

#[test]
fn committed_header_matches_the_code() {
    let fresh = generated();
    let path = c_api().join("include/stapes.h");
    if std::env::var_os("STAPES_BLESS_HEADER").is_some() {
        std::fs::write(&path, &fresh).expect("write the header");
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed == fresh,
        "{} differs from what cbindgen generates from the C API's source: regenerate it with \
         `STAPES_BLESS_HEADER=1 cargo test -p stapes-tests --test c_header` and commit it",
        path.display()
    );
}

#[test]
fn header_states_every_function_and_size() {
    let h = generated();
    for name in [
        "stapes_f32_init_preset",
        "stapes_fixed16_init_blob",
        "stapes_fixed32_next_frame",
        "stapes_f32_reset",
        "stapes_window_push",
        "stapes_status_message",
        "STAPES_F32_STATE_WORDS",
        "STAPES_FIXED16_STATE_WORDS",
        "STAPES_STATE_ALIGN",
        "STAPES_WINDOW_STORAGE_BYTES",
    ] {
        assert!(h.contains(name), "the header lacks {name}");
    }
    // Status codes are int32_t constants, never C enums (whose size is the
    // compiler's choice).
    assert!(!h.contains("enum "), "the header declares an enum");
}
