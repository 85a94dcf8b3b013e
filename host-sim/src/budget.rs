//! Predicts a front end's flash and RAM on a board before anything is built.
//!
//! * **Tables**: the exact bytes of the parts the arithmetic reads (window,
//!   sparse or compact filterbank, gains; for the fixed path its twiddles and
//!   constants), from the generator.
//! * **Code**: the front end's code for the arithmetic and core, measured once
//!   from the reference preset's firmware (the full build minus the
//!   harness-only build; `cargo test -p stapes-tests --test firmware_qemu`),
//!   plus, for `f32`, microfft's tables and unrolled code for the FFT size.
//!   The firmware test checks every preset's prediction against its build
//!   and fails beyond 10 %, so a compiler change that moves code size shows.
//! * **RAM**: the front end's state (FFT buffer, overlap store, band outputs,
//!   exactly from the configuration, plus the fixed overhead of the struct on a
//!   32-bit target) and the per-frame stack.

use std::fmt::Write;

use stapes_core::config::FeatureConfig;
use stapes_core::table::FilterbankForm;

use crate::check::Arith;
use crate::emit::PartSizes;
use crate::generate::GeneratedTables;

/// The cores the firmware example runs on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Core {
    /// Cortex-M0/M0+ (thumbv6m), no FPU.
    CortexM0,
    /// Cortex-M4F (thumbv7em, hard float).
    CortexM4F,
}

impl Core {
    /// Name as the command line spells it.
    pub fn name(self) -> &'static str {
        match self {
            Core::CortexM0 => "cortex-m0",
            Core::CortexM4F => "cortex-m4f",
        }
    }
}

/// A prediction, in bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Budget {
    /// Tables the arithmetic reads.
    pub tables: usize,
    /// Estimated code (and, for f32, microfft's own tables).
    pub code: usize,
    /// Front-end state.
    pub state: usize,
    /// Per-frame stack.
    pub stack: usize,
}

impl Budget {
    /// Flash: tables and code.
    pub fn flash_total(&self) -> usize {
        self.tables + self.code
    }
    /// RAM: state and stack.
    pub fn ram_total(&self) -> usize {
        self.state + self.stack
    }
}

/// Code of the front end for (core, arithmetic), without the FFT-size part;
/// measured from the speech16k-40 firmware (rustc 1.95, opt-level 3, LTO;
/// recalibrated after the front end became one type generic over the
/// arithmetic, each stage in its own module):
/// the full build's flash minus the harness-only build's, minus the tables.
/// `None` for the f32 path on Cortex-M0, which has no FPU.
fn code_bytes(core: Core, arith: Arith) -> Option<usize> {
    match (core, arith) {
        // 31 724 − 4 176 tables − 512 · 30.4 (microfft for 512 points).
        (Core::CortexM4F, Arith::F32) => Some(11_984),
        // 39 480 − 2 442 tables (the Cortex-M4 loops come in four shifts).
        (Core::CortexM4F, Arith::Fixed16) => Some(37_038),
        // 31 348 − 4 748 tables.
        (Core::CortexM4F, Arith::Fixed32) => Some(26_600),
        // 29 920 − 2 442 tables.
        (Core::CortexM0, Arith::Fixed16) => Some(27_478),
        // 32 684 − 4 748 tables.
        (Core::CortexM0, Arith::Fixed32) => Some(27_936),
        (Core::CortexM0, Arith::F32) => None,
    }
}

/// microfft's bytes that grow with the FFT size (sine table and unrolled
/// stages), per FFT point: (33 440 − 25 668) / (512 − 256), the code of the
/// speech16k-40 and tiny16k-10 f32 builds.
const MICROFFT_BYTES_PER_POINT_X10: usize = 304;

/// Struct overhead beyond the buffers on a 32-bit target (measured with
/// `size_of` in the speech16k-40 firmware: 3 880 B − 4·(512 + 352 + 40) for
/// f32, 2 296 B − (2·(512 + 352) + 6·40) for the fixed path).
const STATE_OVERHEAD_F32: usize = 264;
const STATE_OVERHEAD_FIXED: usize = 328;

/// Per-frame stack measured by stack painting in the speech16k-40 firmware.
fn stack_bytes(core: Core, arith: Arith) -> usize {
    match (core, arith) {
        (Core::CortexM4F, Arith::F32) => 128,
        (Core::CortexM4F, Arith::Fixed16) => 168,
        (Core::CortexM4F, Arith::Fixed32) => 168,
        (Core::CortexM0, Arith::Fixed16) => 232,
        (Core::CortexM0, _) => 280,
    }
}

/// The tables `arith` reads in `form`.
pub fn table_bytes(tables: &GeneratedTables, arith: Arith, form: FilterbankForm) -> usize {
    let p = PartSizes::of(tables);
    let compact = form == FilterbankForm::Compact;
    match arith {
        Arith::F32 => p.window_f32 + p.filterbank(false, compact),
        Arith::Fixed16 => p.window_q15 + p.filterbank(true, compact) + p.twiddles_q15 + 16,
        Arith::Fixed32 => {
            p.window_q15 + p.window_q31 + p.filterbank(true, compact) + p.twiddles_q31 + 16
        }
    }
}

/// Predicts flash and RAM for `config` in `arith` on `core`; `None` for the
/// f32 path on a core without an FPU.
pub fn predict(
    config: &FeatureConfig,
    arith: Arith,
    core: Core,
    form: FilterbankForm,
) -> Option<Budget> {
    let tables = GeneratedTables::new(config);
    let n = config.fft_points as usize;
    let overlap = config.overlap_samples();
    let bands = config.bands as usize;
    let (state, fft_code) = match arith {
        Arith::F32 => (
            4 * (n + overlap + bands) + STATE_OVERHEAD_F32,
            MICROFFT_BYTES_PER_POINT_X10 * n / 10,
        ),
        // Frame buffer, raw overlap, one energy word and one level per band.
        Arith::Fixed16 => (2 * (n + overlap) + 6 * bands + STATE_OVERHEAD_FIXED, 0),
        Arith::Fixed32 => (4 * n + 2 * overlap + 6 * bands + STATE_OVERHEAD_FIXED, 0),
    };
    Some(Budget {
        tables: table_bytes(&tables, arith, form),
        code: code_bytes(core, arith)? + fft_code,
        state,
        stack: stack_bytes(core, arith),
    })
}

/// Instructions per frame, per stage (QEMU's count; see [`predict_instructions`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StageInstructions {
    /// Taking in one hop of samples.
    pub intake: f64,
    /// Conditioning, normalisation and window.
    pub window: f64,
    /// The FFT.
    pub fft: f64,
    /// Power or magnitude per bin.
    pub spectrum: f64,
    /// Filterbank sums.
    pub mel: f64,
    /// Log, gains and floor.
    pub log: f64,
}

impl StageInstructions {
    /// All stages.
    pub fn total(&self) -> f64 {
        self.intake + self.window + self.fft + self.spectrum + self.mel + self.log
    }
}

/// Instructions per unit of work for (core, arithmetic): per hop sample,
/// per window sample (plus per conditioned sample), per `(N/2)·log2(N/2)`
/// of the FFT and per point (plus per point where `log2(N/2)` is odd), per bin (plus per bin of a magnitude spectrum), per sparse
/// filterbank weight, per band. Fitted to the firmware's QEMU counts
/// (`bash tests/firmware-figures.sh` prints them refitted as `fitted costs`): everything from speech16k-40, the
/// conditioning, odd-level and magnitude terms from dsr8k-23's remainder; tiny16k-10
/// is held out. The firmware test keeps every preset's total within 10 %.
struct InstructionCosts {
    intake: f64,
    window: f64,
    conditioned: f64,
    fft: f64,
    /// Per complex point of the FFT, every size (the real split and the
    /// passes' fixed work).
    fft_point: f64,
    /// Per complex point when `log2(N/2)` is odd (a radix-2 first level
    /// before the radix-4 passes); with `fft` and `fft_point` fitted from
    /// speech16k-40's (even), dsr8k-23's and kws16k-mel40's (odd) FFTs.
    odd_level: f64,
    bin: f64,
    magnitude_bin: f64,
    /// Per bin of the window spectrum the 16-bit path adds the frame's
    /// offset back to (zero-padded windows), fitted from kws16k-mel40's
    /// spectrum remainder.
    offset_bin: f64,
    weight: f64,
    band: f64,
    /// Per weight of the compact form (each feeds two bands), in place of
    /// `weight`.
    compact_weight: f64,
}

fn instruction_costs(core: Core, arith: Arith) -> Option<InstructionCosts> {
    let c = |intake,
             window,
             conditioned,
             fft,
             fft_point,
             odd_level,
             bin,
             magnitude_bin,
             offset_bin,
             weight,
             band,
             compact_weight| {
        InstructionCosts {
            intake,
            window,
            conditioned,
            fft,
            fft_point,
            odd_level,
            bin,
            magnitude_bin,
            offset_bin,
            weight,
            band,
            compact_weight,
        }
    };
    match (core, arith) {
        (Core::CortexM4F, Arith::F32) => Some(c(
            3.75, 1.89, 0.79, 11.93, -9.89, -1.59, 3.12, 5.10, 0.00, 3.58, 26.10, 20.15,
        )),
        (Core::CortexM4F, Arith::Fixed16) => Some(c(
            3.22, 9.49, 87.94, 7.13, 59.74, 15.78, 6.96, 47.50, 107.92, 11.54, 35.92, 31.03,
        )),
        (Core::CortexM4F, Arith::Fixed32) => Some(c(
            3.54, 20.54, 48.74, 16.55, 73.98, 8.92, 16.52, 272.45, 0.00, 18.39, 36.00, 41.07,
        )),
        (Core::CortexM0, Arith::Fixed16) => Some(c(
            3.41, 34.95, 268.46, 20.31, 120.80, 16.36, 11.42, 253.16, 385.23, 31.46, 88.40, 70.67,
        )),
        (Core::CortexM0, Arith::Fixed32) => Some(c(
            5.77, 61.47, 132.19, 60.03, 60.80, 27.01, 111.18, 832.84, 0.00, 35.73, 88.20, 82.40,
        )),
        (Core::CortexM0, Arith::F32) => None,
    }
}

/// Predicts the instructions per frame, per stage, for `config` with the
/// filterbank in `form` (the sparse form where the configuration has no
/// compact one). QEMU counts instructions, not cycles: see [`hop_share`].
pub fn predict_instructions(
    config: &FeatureConfig,
    arith: Arith,
    core: Core,
    form: FilterbankForm,
) -> Option<StageInstructions> {
    let k = instruction_costs(core, arith)?;
    let half = (config.fft_points / 2) as f64;
    let w = config.window_samples as f64;
    let conditioned = config.dc_removal_pole.is_some() || config.pre_emphasis.is_some();
    let magnitude = config.spectrum == stapes_core::config::SpectrumKind::Magnitude;
    let tables = GeneratedTables::new(config);
    let mel = if form == FilterbankForm::Compact && tables.has_compact() {
        k.compact_weight * tables.compact_q15.len() as f64
    } else {
        k.weight * tables.sparse_q15.len() as f64
    };
    Some(StageInstructions {
        intake: k.intake * config.hop_samples as f64,
        window: k.window * w + if conditioned { k.conditioned * w } else { 0.0 },
        fft: k.fft * half * half.log2()
            + k.fft_point * half
            + if config.fft_points.trailing_zeros() % 2 == 0 {
                k.odd_level * half
            } else {
                0.0
            },
        spectrum: k.bin * half
            + if magnitude {
                k.magnitude_bin * half
            } else {
                0.0
            }
            + k.offset_bin * (tables.window_spectrum.len() / 2) as f64,
        mel,
        log: k.band * config.bands as f64,
    })
}

/// Cycles per instruction on real Cortex-M4 silicon with flash wait states
/// (shared/DESIGN.md): QEMU's instruction count times this range.
pub const CYCLES_PER_INSTRUCTION: (f64, f64) = (1.2, 2.5);

/// The share of each hop's real time the front end takes at `clock_mhz`, as
/// (low, high) over [`CYCLES_PER_INSTRUCTION`].
pub fn hop_share(instructions: f64, config: &FeatureConfig, clock_mhz: f64) -> (f64, f64) {
    let hop_s = config.hop_samples as f64 / config.sample_rate_hz as f64;
    let seconds = |cpi: f64| instructions * cpi / (clock_mhz * 1e6);
    (
        seconds(CYCLES_PER_INSTRUCTION.0) / hop_s,
        seconds(CYCLES_PER_INSTRUCTION.1) / hop_s,
    )
}

/// The printed budget.
pub fn report(
    name: &str,
    config: &FeatureConfig,
    arith: Arith,
    core: Core,
    form: FilterbankForm,
    clock_mhz: f64,
) -> anyhow::Result<String> {
    let b = predict(config, arith, core, form).ok_or_else(|| {
        anyhow::anyhow!("the f32 path needs an FPU: on Cortex-M0 use --arith fixed16 or fixed32")
    })?;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "budget: {name}, {} on {}, {} filterbank (predicted before building)",
        arith.name(),
        core.name(),
        form.name()
    );
    let _ = writeln!(
        s,
        "  flash  {:>7} B = tables {} + code {} (estimate)",
        b.flash_total(),
        b.tables,
        b.code
    );
    let _ = writeln!(
        s,
        "  RAM    {:>7} B = front-end state {} + per-frame stack {}",
        b.ram_total(),
        b.state,
        b.stack
    );
    let _ = writeln!(
        s,
        "  (code and stack are calibrated from the reference preset's firmware; the firmware test keeps every preset within 10 %)"
    );
    if let Some(i) = predict_instructions(config, arith, core, form) {
        let _ = writeln!(
            s,
            "  instructions per frame {:>7.0} = intake {:.0} + window {:.0} + FFT {:.0} + spectrum {:.0} + mel {:.0} + log {:.0} (QEMU count; the firmware test keeps every preset within 10 %)",
            i.total(),
            i.intake,
            i.window,
            i.fft,
            i.spectrum,
            i.mel,
            i.log
        );
        let stages = predict_stages(config, arith, core);
        if let Some(sb) = stages {
            let _ = writeln!(
                s,
                "  stages after the log: tables {} B, state {} B (the model's window included), {:.0} instructions per frame on top of the log (PCEN replaces it); frame total {:.0}",
                sb.tables,
                sb.state,
                sb.instructions,
                i.total() + sb.instructions
                    - if config.stages.pcen.is_some() {
                        i.log
                    } else {
                        0.0
                    }
            );
            let _ = writeln!(
                s,
                "  with the stages: flash {} B, RAM {} B",
                b.flash_total() + sb.tables,
                b.ram_total() + sb.state
            );
        }
        let total = i.total() + stages.map_or(0.0, |sb| sb.instructions)
            - if stages.is_some() && config.stages.pcen.is_some() {
                i.log
            } else {
                0.0
            };
        let (lo, hi) = hop_share(total, config, clock_mhz);
        let hop_ms = 1e3 * config.hop_samples as f64 / config.sample_rate_hz as f64;
        let _ = writeln!(
            s,
            "  at {clock_mhz} MHz: {:.1}-{:.1} % of each {hop_ms:.1} ms hop ({}-{} cycles per instruction, flash wait states included; instructions are not cycles)",
            100.0 * lo,
            100.0 * hi,
            CYCLES_PER_INSTRUCTION.0,
            CYCLES_PER_INSTRUCTION.1
        );
    }
    Ok(s)
}

/// The stages after the log of a configuration: flash of their tables, RAM
/// of their state (outputs, carried state and the model's window) and
/// instructions per frame on top of the log.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StageBudget {
    /// Tables the arithmetic's stages read.
    pub tables: usize,
    /// Stage state, including the model's window (written twice).
    pub state: usize,
    /// Instructions per frame for the stages after the log (the log itself
    /// is [`StageInstructions::log`]), and the window's push.
    pub instructions: f64,
}

/// Instructions per unit of the stages after the log, for (core, arithmetic):
/// per quantised value, per MFCC multiply-add (the range floor's per-band
/// work folded in), per PCEN band (in place of the log), and the model
/// window's push (fixed plus per value). The fixed precisions share the
/// stages' code. Fitted to the firmware's `model-input` builds of the three
/// kws16k presets (`bash tests/firmware-figures.sh`; the firmware test keeps
/// them within 10 %).
fn stage_costs(core: Core, arith: Arith) -> Option<[f64; 5]> {
    match (core, arith) {
        (Core::CortexM4F, Arith::F32) => Some([48.8, 5.85, 340.6, 134.0, 1.43]),
        (Core::CortexM4F, _) => Some([74.6, 5.8, 343.8, 0.0, 0.0]),
        (Core::CortexM0, Arith::F32) => None,
        (Core::CortexM0, _) => Some([149.0, 10.0, 1059.0, 0.0, 0.0]),
    }
}

/// Instructions per value of the level map with an added energy (the
/// log-add: libm's `expf` and `log1pf` on the f32 path; a table step and
/// 64-bit multiplies on the fixed ones), measured on QEMU by
/// `tests/firmware_qemu.rs` (the kws16k-mel40 level-map builds: the stages'
/// count less the plain kws16k-mel40 build's, over 40 bands). A map without
/// an added energy is predicted with the same figure, an upper bound.
fn level_map_cost(core: Core, arith: Arith) -> Option<f64> {
    match (core, arith) {
        (Core::CortexM4F, Arith::F32) => Some(108.6),
        (Core::CortexM4F, _) => Some(64.5),
        (Core::CortexM0, Arith::F32) => None,
        (Core::CortexM0, _) => Some(193.5),
    }
}

/// Predicts the stages after the log for `config`; `None` without stages or
/// for the f32 path on a core without an FPU.
pub fn predict_stages(config: &FeatureConfig, arith: Arith, core: Core) -> Option<StageBudget> {
    let st = &config.stages;
    if !st.any() {
        return None;
    }
    let [quantise, mac, pcen, push, push_per] = stage_costs(core, arith)?;
    let b = config.bands as usize;
    let c = config.stage_values();
    let stages = crate::model_input::GeneratedStageTables::new(config, None).ok();
    let v = stages.as_ref().map(|s| s.view());
    let fixed = arith != Arith::F32;
    let tables = v.map_or(0, |v| {
        if fixed {
            2 * (v.dct_q15.len() + v.lifter_q11.len())
                + 4 * (v.norm_offsets.len() + v.norm_multipliers.len())
                + 4 * stapes_core::stage_tables::FIXED_STAGE_WORDS
        } else {
            4 * (v.dct_f32.len() + v.lifter_f32.len() + v.mean.len() + v.deviation.len())
        }
    });
    let mut state = 0;
    let mut instructions = 0.0;
    if st.pcen.is_some() {
        // The smoother per band (f32, or a 32-bit mantissa and exponent),
        // and the fixed stage's own outputs; its work replaces the log's.
        state += if fixed { 12 * b } else { 4 * b } + 8;
        instructions += pcen * b as f64;
    }
    if st.range_floor.is_some() {
        state += 4;
    }
    if st.level_map.is_some() {
        state += if fixed { 40 } else { 24 };
        instructions += level_map_cost(core, arith)? * b as f64;
    }
    if st.mfcc.is_some() {
        state += 4 * c + 16;
        instructions += mac * (b * c) as f64;
    }
    if st.normalise && !fixed && st.quantise.is_some() {
        // One affine quantiser per value.
        state += 12 * c;
    }
    if st.quantise.is_some() {
        state += c + 24;
        instructions += quantise * c as f64;
    }
    if let Some(w) = st.model_window {
        state += 2 * w.frames as usize * c * if st.quantise.is_some() { 1 } else { 4 } + 24;
        instructions += push + push_per * c as f64;
    }
    Some(StageBudget {
        tables,
        state,
        instructions,
    })
}
