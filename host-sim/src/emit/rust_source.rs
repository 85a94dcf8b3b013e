//! Rust source: `static` arrays and `static` table views, for `include!` in a
//! board crate that depends on `stapes-core`.

use std::fmt::Write;

use stapes_core::table::FilterbankForm;

use crate::generate::GeneratedTables;

fn array<T>(
    out: &mut String,
    name: &str,
    ty: &str,
    items: &[T],
    per_line: usize,
    fmt: impl Fn(&T) -> String,
) {
    // Windows on a word boundary: the Cortex-M4 front end reads their
    // 16-bit coefficients two at a time (`stapes_core::table::WordAligned`).
    let aligned = name.starts_with("WINDOW_");
    if aligned {
        let _ = writeln!(
            out,
            "pub static {name}: stapes_core::table::WordAligned<[{ty}; {}]> = stapes_core::table::WordAligned([",
            items.len()
        );
    } else {
        let _ = writeln!(out, "pub static {name}: [{ty}; {}] = [", items.len());
    }
    for chunk in items.chunks(per_line.max(1)) {
        let line: Vec<String> = chunk.iter().map(&fmt).collect();
        let _ = writeln!(out, "    {},", line.join(", "));
    }
    let _ = writeln!(out, "{}", if aligned { "]);" } else { "];" });
}

fn f32_literal(v: &f32) -> String {
    format!("{v:?}")
}

fn option<T>(v: Option<T>, f: impl Fn(T) -> String) -> String {
    v.map_or("None".into(), |x| format!("Some({})", f(x)))
}

/// The `StageConfig` literal of `stages`.
fn stage_literal(st: &stapes_core::StageConfig) -> String {
    if !st.any() {
        return "stapes_core::config::StageConfig::NONE".into();
    }
    let m = "stapes_core::stage_config";
    let pcen = option(st.pcen, |p| {
        format!(
            "stapes_core::pcen::PcenParams {{ alpha: {:?}, delta: {:?}, root: {:?}, epsilon: {:?}, time_constant_s: {:?} }}",
            p.alpha, p.delta, p.root, p.epsilon, p.time_constant_s
        )
    });
    let floor = option(st.range_floor, |r| {
        format!(
            "{m}::RangeFloorConfig {{ below_peak_db: {:?} }}",
            r.below_peak_db
        )
    });
    let level_map = option(st.level_map, |x| {
        format!(
            "{m}::LevelMapConfig {{ added_energy: {:?}, gain: {:?}, offset: {:?}, lower: {:?}, upper: {:?} }}",
            x.added_energy, x.gain, x.offset, x.lower, x.upper
        )
    });
    let mfcc = option(st.mfcc, |x| {
        format!(
            "{m}::MfccConfig {{ coefficients: {}, lifter: {:?}, log_energy: {} }}",
            x.coefficients, x.lifter, x.log_energy
        )
    });
    let quantise = option(st.quantise, |q| {
        format!(
            "{m}::QuantiseConfig {{ scale: {:?}, zero_point: {}, codes: stapes_core::quantise::CodeRange::{:?} }}",
            q.scale, q.zero_point, q.codes
        )
    });
    let window = option(st.model_window, |w| {
        format!(
            "{m}::ModelWindowConfig {{ frames: {}, stride: {} }}",
            w.frames, w.stride
        )
    });
    format!(
        "stapes_core::config::StageConfig {{\n        pcen: {pcen},\n        range_floor: {floor},\n        level_map: {level_map},\n        mfcc: {mfcc},\n        normalise: {},\n        quantise: {quantise},\n        model_window: {window},\n    }}",
        st.normalise
    )
}

fn soft_literal(v: &stapes_core::pcen_fixed::Soft) -> String {
    format!(
        "stapes_core::pcen_fixed::Soft {{ mantissa: {:#010x}, exponent: {} }}",
        v.mantissa, v.exponent
    )
}

/// The stage tables' arrays and `STAGE_TABLES`, for a configuration with stages.
fn stage_tables(s: &mut String, tables: &GeneratedTables) {
    let v = tables.stages.view();
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "/// Values per frame after the stages (MFCC coefficients or bands)."
    );
    let _ = writeln!(
        s,
        "pub const STAGE_VALUES: usize = {};",
        tables.config.stage_values()
    );
    let slice = |name: &str, len: usize| {
        if len == 0 {
            "&[]".to_string()
        } else {
            format!("&{name}")
        }
    };
    for (name, items) in [
        ("DCT_F32", v.dct_f32),
        ("LIFTER_F32", v.lifter_f32),
        ("NORMALISE_MEAN", v.mean),
        ("NORMALISE_DEVIATION", v.deviation),
    ] {
        if !items.is_empty() {
            array(s, name, "f32", items, 6, f32_literal);
        }
    }
    for (name, items) in [("DCT_Q15", v.dct_q15), ("LIFTER_Q11", v.lifter_q11)] {
        if !items.is_empty() {
            array(s, name, "i16", items, 12, |v| v.to_string());
        }
    }
    for (name, items) in [
        ("NORMALISE_OFFSETS", v.norm_offsets),
        ("NORMALISE_MULTIPLIERS", v.norm_multipliers),
    ] {
        if !items.is_empty() {
            array(s, name, "i32", items, 8, |v| v.to_string());
        }
    }
    let f = &v.fixed;
    let p = &f.pcen;
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "/// The tables of the stages after the filterbank (check with `STAGE_TABLES.check(&CONFIG)`)."
    );
    let _ = writeln!(
        s,
        "pub static STAGE_TABLES: stapes_core::stage_tables::StageTables<'static> = stapes_core::stage_tables::StageTables {{"
    );
    let _ = writeln!(s, "    dct_f32: {},", slice("DCT_F32", v.dct_f32.len()));
    let _ = writeln!(s, "    dct_q15: {},", slice("DCT_Q15", v.dct_q15.len()));
    let _ = writeln!(
        s,
        "    lifter_f32: {},",
        slice("LIFTER_F32", v.lifter_f32.len())
    );
    let _ = writeln!(
        s,
        "    lifter_q11: {},",
        slice("LIFTER_Q11", v.lifter_q11.len())
    );
    let _ = writeln!(s, "    mean: {},", slice("NORMALISE_MEAN", v.mean.len()));
    let _ = writeln!(
        s,
        "    deviation: {},",
        slice("NORMALISE_DEVIATION", v.deviation.len())
    );
    let _ = writeln!(
        s,
        "    norm_offsets: {},",
        slice("NORMALISE_OFFSETS", v.norm_offsets.len())
    );
    let _ = writeln!(
        s,
        "    norm_multipliers: {},",
        slice("NORMALISE_MULTIPLIERS", v.norm_multipliers.len())
    );
    let _ = writeln!(
        s,
        "    fixed: stapes_core::stage_tables::FixedStageParams {{"
    );
    let _ = writeln!(
        s,
        "        pcen: stapes_core::pcen_fixed::FixedPcenParams {{ alpha_q16: {}, root_q16: {}, smoothing_q31: {}, epsilon: {}, delta: {}, delta_root: {} }},",
        p.alpha_q16,
        p.root_q16,
        p.smoothing_q31,
        soft_literal(&p.epsilon),
        soft_literal(&p.delta),
        soft_literal(&p.delta_root)
    );
    let _ = writeln!(s, "        quantise_multiplier: {},", f.quantise_multiplier);
    let _ = writeln!(s, "        quantise_shift: {},", f.quantise_shift);
    let _ = writeln!(
        s,
        "        quantise_fraction_bits: {},",
        f.quantise_fraction_bits
    );
    let _ = writeln!(s, "        range_floor_q8: {},", f.range_floor_q8);
    let _ = writeln!(s, "        norm_shift: {},", f.norm_shift);
    let _ = writeln!(s, "    }},");
    let _ = writeln!(s, "}};");
}

/// The Rust source for `tables`, generated as `command` describes.
pub fn rust_source(tables: &GeneratedTables, command: &str) -> String {
    let c = &tables.config;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// Generated by `{command}`. Do not edit: regenerate instead."
    );
    let _ = writeln!(
        s,
        "// Include with `include!` in a crate that depends on stapes-core."
    );
    let _ = writeln!(s);
    let _ = writeln!(s, "/// The configuration these tables were generated for.");
    let _ = writeln!(
        s,
        "pub const CONFIG: stapes_core::config::FeatureConfig = stapes_core::config::FeatureConfig {{"
    );
    let _ = writeln!(s, "    sample_rate_hz: {},", c.sample_rate_hz);
    let _ = writeln!(s, "    window_samples: {},", c.window_samples);
    let _ = writeln!(s, "    fft_points: {},", c.fft_points);
    let _ = writeln!(s, "    hop_samples: {},", c.hop_samples);
    let _ = writeln!(
        s,
        "    window: stapes_core::config::WindowShape::{:?},",
        c.window
    );
    let _ = writeln!(s, "    dc_removal_pole: {:?},", c.dc_removal_pole);
    let _ = writeln!(s, "    pre_emphasis: {:?},", c.pre_emphasis);
    let _ = writeln!(s, "    bands: {},", c.bands);
    let _ = writeln!(s, "    low_edge_hz: {:?},", c.low_edge_hz);
    let _ = writeln!(s, "    high_edge_hz: {:?},", c.high_edge_hz);
    let _ = writeln!(
        s,
        "    mel_scale: stapes_core::config::MelScale::{:?},",
        c.mel_scale
    );
    let _ = writeln!(
        s,
        "    triangles: stapes_core::config::TrianglePlacement::{:?},",
        c.triangles
    );
    let _ = writeln!(
        s,
        "    band_gain: stapes_core::config::BandGain::{:?},",
        c.band_gain
    );
    let _ = writeln!(
        s,
        "    spectrum: stapes_core::config::SpectrumKind::{:?},",
        c.spectrum
    );
    let _ = writeln!(s, "    log: stapes_core::config::LogKind::{:?},", c.log);
    let _ = writeln!(s, "    floor_db: {:?},", c.floor_db);
    let _ = writeln!(s, "    stages: {},", stage_literal(&c.stages));
    let _ = writeln!(s, "}};");
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "/// `CONFIG.fingerprint()`, checked when a front end is built."
    );
    let _ = writeln!(s, "pub const FINGERPRINT: u32 = {:#010x};", c.fingerprint());
    let _ = writeln!(s, "/// FFT buffer elements a front end needs.");
    let _ = writeln!(s, "pub const FFT_POINTS: usize = {};", c.fft_points);
    let _ = writeln!(s, "/// Overlap store elements a front end needs.");
    let _ = writeln!(
        s,
        "pub const OVERLAP_SAMPLES: usize = {};",
        c.overlap_samples()
    );
    let _ = writeln!(s, "/// Mel bands per frame.");
    let _ = writeln!(s, "pub const BANDS: usize = {};", c.bands);
    let _ = writeln!(s);
    array(
        &mut s,
        "WINDOW_F32",
        "f32",
        &tables.window_f32,
        6,
        f32_literal,
    );
    array(&mut s, "WINDOW_Q15", "i16", &tables.window_q15, 12, |v| {
        v.to_string()
    });
    array(&mut s, "WINDOW_Q31", "i32", &tables.window_q31, 8, |v| {
        v.to_string()
    });
    array(&mut s, "SPARSE_SPANS", "[u16; 2]", &tables.spans, 8, |v| {
        format!("[{}, {}]", v[0], v[1])
    });
    array(
        &mut s,
        "SPARSE_WEIGHTS_F32",
        "f32",
        &tables.sparse_f32,
        6,
        f32_literal,
    );
    array(
        &mut s,
        "SPARSE_WEIGHTS_Q15",
        "i16",
        &tables.sparse_q15,
        12,
        |v| v.to_string(),
    );
    if tables.has_compact() {
        array(
            &mut s,
            "COMPACT_SEGMENT_STARTS",
            "u16",
            &tables.segment_starts,
            14,
            |v| v.to_string(),
        );
        array(
            &mut s,
            "COMPACT_WEIGHTS_F32",
            "f32",
            &tables.compact_f32,
            6,
            f32_literal,
        );
        array(
            &mut s,
            "COMPACT_WEIGHTS_Q15",
            "i16",
            &tables.compact_q15,
            12,
            |v| v.to_string(),
        );
    }
    if let Some(g) = &tables.gains_f32 {
        array(&mut s, "BAND_GAINS_F32", "f32", g, 6, f32_literal);
    }
    if let Some(g) = &tables.gains_q15 {
        array(&mut s, "BAND_GAINS_Q15", "i16", g, 12, |v| v.to_string());
    }
    array(
        &mut s,
        "TWIDDLES_Q15",
        "i16",
        &tables.twiddles_q15,
        12,
        |v| v.to_string(),
    );
    array(
        &mut s,
        "TWIDDLES_Q31",
        "i32",
        &tables.twiddles_q31,
        8,
        |v| v.to_string(),
    );
    if !tables.window_spectrum.is_empty() {
        array(
            &mut s,
            "OFFSET_SPECTRUM_Q16",
            "i32",
            &tables.window_spectrum,
            8,
            |v| v.to_string(),
        );
    }
    if let Some(p) = &tables.fixed_params {
        let _ = writeln!(s);
        let _ = writeln!(s, "/// Constants of the fixed-point path.");
        let _ = writeln!(
            s,
            "pub const FIXED_PARAMS: stapes_core::fixed_tables::FixedParams = stapes_core::fixed_tables::FixedParams {{"
        );
        let _ = writeln!(
            s,
            "    dc_pole: stapes_core::fixed::types::I1F31::from_bits({}),",
            p.dc_pole.to_bits()
        );
        let _ = writeln!(
            s,
            "    pre_emphasis: stapes_core::fixed::types::I1F15::from_bits({}),",
            p.pre_emphasis.to_bits()
        );
        let _ = writeln!(
            s,
            "    floor: stapes_core::fixed::types::I8F8::from_bits({}),",
            p.floor.to_bits()
        );
        let _ = writeln!(
            s,
            "    log2_to_output: stapes_core::fixed::types::I16F16::from_bits({}),",
            p.log2_to_output.to_bits()
        );
        let _ = writeln!(s, "}};");
        for form in tables.forms() {
            let name = if form == FilterbankForm::Sparse {
                "SPARSE"
            } else {
                "COMPACT"
            };
            let lower = name.to_lowercase();
            // Both precisions' arrays, then each precision's own only (a board
            // links just what it reads).
            let spectrum16 = if tables.window_spectrum.is_empty() {
                "&[]"
            } else {
                "&OFFSET_SPECTRUM_Q16"
            };
            for (static_name, doc, q15, q31, window, spectrum) in [
                (
                    format!("FIXED_{name}"),
                    format!("Fixed-point tables, {lower} filterbank."),
                    "&TWIDDLES_Q15",
                    "&TWIDDLES_Q31",
                    "&WINDOW_Q31.0",
                    spectrum16,
                ),
                (
                    format!("FIXED16_{name}"),
                    format!(
                        "Fixed-point tables for 16-bit data only, {lower} filterbank (a board links only these)."
                    ),
                    "&TWIDDLES_Q15",
                    "&[]",
                    "&[]",
                    spectrum16,
                ),
                (
                    format!("FIXED32_{name}"),
                    format!(
                        "Fixed-point tables for 32-bit data only, {lower} filterbank (a board links only these)."
                    ),
                    "&[]",
                    "&TWIDDLES_Q31",
                    "&WINDOW_Q31.0",
                    "&[]",
                ),
            ] {
                let _ = writeln!(s);
                let _ = writeln!(s, "/// {doc}");
                let _ = writeln!(
                    s,
                    "pub static {static_name}: stapes_core::fixed_tables::FixedTables<'static> = stapes_core::fixed_tables::FixedTables {{"
                );
                let _ = writeln!(s, "    table: TABLE_Q15_{name},");
                let _ = writeln!(s, "    twiddles_q15: {q15},");
                let _ = writeln!(s, "    twiddles_q31: {q31},");
                let _ = writeln!(s, "    window_q31: {window},");
                let _ = writeln!(s, "    window_spectrum: {spectrum},");
                let _ = writeln!(s, "    params: FIXED_PARAMS,");
                let _ = writeln!(s, "}};");
            }
        }
    }
    for (ty, suffix) in [("f32", "F32"), ("i16", "Q15")] {
        for form in tables.forms() {
            let (form_name, filterbank) = match form {
                FilterbankForm::Sparse => (
                    "SPARSE",
                    format!(
                        "stapes_core::table::Filterbank::Sparse {{ spans: &SPARSE_SPANS, weights: &SPARSE_WEIGHTS_{suffix} }}"
                    ),
                ),
                FilterbankForm::Compact => (
                    "COMPACT",
                    format!(
                        "stapes_core::table::Filterbank::Compact {{ segment_starts: &COMPACT_SEGMENT_STARTS, weights: &COMPACT_WEIGHTS_{suffix} }}"
                    ),
                ),
            };
            let gains = if tables.gains_f32.is_some() {
                format!("Some(&BAND_GAINS_{suffix})")
            } else {
                "None".into()
            };
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "/// {suffix} weights, {} filterbank.",
                form_name.to_lowercase()
            );
            let _ = writeln!(
                s,
                "pub static TABLE_{suffix}_{form_name}: stapes_core::table::TableView<'static, {ty}> = stapes_core::table::TableView {{"
            );
            let _ = writeln!(s, "    fingerprint: FINGERPRINT,");
            let _ = writeln!(s, "    window: &WINDOW_{suffix}.0,");
            let _ = writeln!(s, "    filterbank: {filterbank},");
            let _ = writeln!(s, "    band_gains: {gains},");
            let _ = writeln!(s, "}};");
        }
    }
    if tables.config.stages.any() {
        stage_tables(&mut s, tables);
    }
    s
}
