//! stapes on a Cortex-M board, run under QEMU by the tests.
//!
//! Streams the test clip stored in flash through the front end in DMA-sized
//! blocks, raises a busy pin while each frame is computed, and reports over
//! semihosting: one line per frame with the exact bits of every band, then
//! the instruction clock's figures per stage and the stack high-water mark.
//! Cargo features pick the arithmetic (`f32`, `fixed16`, `fixed32`), the
//! preset (`preset-speech16k-40`, `preset-dsr8k-23`, `preset-tiny16k-10`)
//! and, with `form-compact`, the compact filterbank instead of the sparse one
//! (for presets that have it).
#![no_std]
#![no_main]

#[cfg(not(any(feature = "f32", feature = "fixed16", feature = "fixed32")))]
compile_error!("enable exactly one arithmetic feature: f32, fixed16 or fixed32");
#[cfg(not(any(
    feature = "preset-speech16k-40",
    feature = "preset-dsr8k-23",
    feature = "preset-tiny16k-10",
    feature = "preset-kws16k-mel40",
    feature = "preset-kws16k-mfcc10",
    feature = "preset-kws16k-pcen40"
)))]
compile_error!("enable exactly one preset feature");
#[cfg(all(
    feature = "model-input",
    not(any(
        feature = "preset-kws16k-mel40",
        feature = "preset-kws16k-mfcc10",
        feature = "preset-kws16k-pcen40"
    ))
))]
compile_error!("model-input runs a preset's stages: use a preset-kws16k-* feature");
#[cfg(all(feature = "level-map", not(feature = "preset-kws16k-mel40")))]
compile_error!("level-map maps kws16k-mel40's log: use preset-kws16k-mel40");

mod board;
mod emulator;

use core::fmt::Write;
use core::panic::PanicInfo;

use cortex_m_rt::entry;
use stapes_core::probe::{Stage, StageProbe};

use crate::board::SampleSource;
use crate::emulator::{Console, FlashClip, NoPin, Ticks};

#[cfg(feature = "preset-speech16k-40")]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "speech16k-40";
    include!("../../tables/speech16k-40.rs");
}
#[cfg(all(feature = "preset-dsr8k-23", not(feature = "preset-speech16k-40")))]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "dsr8k-23";
    include!("../../tables/dsr8k-23.rs");
}
#[cfg(all(
    feature = "preset-tiny16k-10",
    not(any(feature = "preset-speech16k-40", feature = "preset-dsr8k-23"))
))]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "tiny16k-10";
    include!("../../tables/tiny16k-10.rs");
}

#[cfg(all(
    feature = "preset-kws16k-mel40",
    not(any(
        feature = "preset-speech16k-40",
        feature = "preset-dsr8k-23",
        feature = "preset-tiny16k-10"
    ))
))]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "kws16k-mel40";
    include!("../../tables/kws16k-mel40.rs");
}
#[cfg(all(
    feature = "preset-kws16k-mfcc10",
    not(any(
        feature = "preset-speech16k-40",
        feature = "preset-dsr8k-23",
        feature = "preset-tiny16k-10",
        feature = "preset-kws16k-mel40"
    ))
))]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "kws16k-mfcc10";
    include!("../../tables/kws16k-mfcc10.rs");
}
#[cfg(all(
    feature = "preset-kws16k-pcen40",
    not(any(
        feature = "preset-speech16k-40",
        feature = "preset-dsr8k-23",
        feature = "preset-tiny16k-10",
        feature = "preset-kws16k-mel40",
        feature = "preset-kws16k-mfcc10"
    ))
))]
#[allow(dead_code)]
mod preset {
    pub const NAME: &str = "kws16k-pcen40";
    include!("../../tables/kws16k-pcen40.rs");
}

/// The stages after the filterbank of a kws16k preset, chained at compile
/// time from its configuration and generated stage tables: log (and, for
/// MFCC, the range floor and the DCT) or PCEN, then int8 codes.
#[cfg(feature = "model-input")]
mod chain {
    use super::preset;
    use stapes_core::{AffineQuantiser, FixedQuantiseStage, FixedTables, QuantiseStage, Then};
    #[cfg(not(feature = "preset-kws16k-pcen40"))]
    use stapes_core::{FixedLog, FloatLog};
    #[cfg(feature = "preset-kws16k-mfcc10")]
    use stapes_core::{FixedMfcc, FloatMfcc, RangeFloor};
    #[cfg(feature = "preset-kws16k-pcen40")]
    use stapes_core::{FixedPcen, FloatPcen};

    const V: usize = preset::STAGE_VALUES;
    const B: usize = preset::BANDS;

    #[cfg(all(feature = "preset-kws16k-mel40", not(feature = "level-map")))]
    pub type FloatLevels = FloatLog;
    #[cfg(feature = "level-map")]
    pub type FloatLevels = Then<FloatLog, stapes_core::FloatLevelMap>;
    #[cfg(feature = "preset-kws16k-mfcc10")]
    pub type FloatLevels = Then<Then<FloatLog, RangeFloor<f32>>, FloatMfcc<'static, V>>;
    #[cfg(feature = "preset-kws16k-pcen40")]
    pub type FloatLevels = FloatPcen<B>;
    /// The f32 chain.
    pub type Float = Then<FloatLevels, QuantiseStage<i8, V>>;

    #[cfg(all(feature = "preset-kws16k-mel40", not(feature = "level-map")))]
    pub type FixedLevels = FixedLog<'static, B>;
    #[cfg(feature = "level-map")]
    pub type FixedLevels = Then<FixedLog<'static, B>, stapes_core::FixedLevelMap>;

    /// The level map of `level-map` builds (`tests/firmware_qemu.rs` runs
    /// the host with the same): ln(E + 1e-6) in dB, halved, plus 20, at
    /// least -10.
    #[cfg(feature = "level-map")]
    pub const LEVEL_MAP: stapes_core::stage_config::LevelMapConfig =
        stapes_core::stage_config::LevelMapConfig {
            added_energy: 1e-6,
            gain: 0.5,
            offset: 20.0,
            lower: Some(-10.0),
            upper: None,
        };

    /// The preset's configuration with this build's stages.
    pub fn config() -> stapes_core::FeatureConfig {
        #[allow(unused_mut)]
        let mut c = preset::CONFIG;
        #[cfg(feature = "level-map")]
        {
            c.stages.level_map = Some(LEVEL_MAP);
        }
        c
    }
    #[cfg(feature = "preset-kws16k-mfcc10")]
    pub type FixedLevels = Then<
        Then<FixedLog<'static, B>, RangeFloor<stapes_core::fixed::types::I8F8>>,
        FixedMfcc<'static, V>,
    >;
    #[cfg(feature = "preset-kws16k-pcen40")]
    pub type FixedLevels = FixedPcen<B>;
    /// The fixed chain.
    pub type Fixed = Then<FixedLevels, FixedQuantiseStage<i8, V>>;

    #[allow(dead_code)]
    pub fn float() -> Option<Float> {
        let c = &config();
        preset::STAGE_TABLES.check(&preset::CONFIG).ok()?;
        let q = c.stages.quantise?;
        #[cfg(not(feature = "preset-kws16k-pcen40"))]
        let log = FloatLog::for_config(c);
        #[cfg(all(feature = "preset-kws16k-mel40", not(feature = "level-map")))]
        let levels = log;
        #[cfg(feature = "level-map")]
        let levels = Then(log, stapes_core::FloatLevelMap::for_config(c)?);
        #[cfg(feature = "preset-kws16k-pcen40")]
        let levels = {
            // The smoother's coefficient from the time constant and the hop,
            // once at start-up (the f32 board has an FPU).
            let p = c.stages.pcen?;
            FloatPcen::new(
                p,
                p.smoothing(c.hop_samples as f32 / c.sample_rate_hz as f32),
            )
            .ok()?
        };
        #[cfg(feature = "preset-kws16k-mfcc10")]
        let levels = Then(
            Then(log, RangeFloor::new(c.stages.range_floor?.below_peak_db)),
            FloatMfcc::new(preset::STAGE_TABLES.dct_f32(c)?).ok()?,
        );
        let quantiser = AffineQuantiser::new(q.scale, q.zero_point, q.codes).ok()?;
        Some(Then(levels, QuantiseStage::new(quantiser).ok()?))
    }

    #[allow(dead_code)]
    pub fn fixed(tables: &FixedTables<'static>) -> Option<Fixed> {
        let c = &config();
        let st = &preset::STAGE_TABLES;
        st.check(&preset::CONFIG).ok()?;
        #[cfg(not(feature = "preset-kws16k-pcen40"))]
        let log = FixedLog::for_tables(tables);
        #[cfg(all(feature = "preset-kws16k-mel40", not(feature = "level-map")))]
        let levels = log;
        #[cfg(feature = "level-map")]
        let levels = Then(log, stapes_core::FixedLevelMap::for_config(c)?);
        #[cfg(feature = "preset-kws16k-pcen40")]
        let levels = {
            let _ = tables;
            FixedPcen::new(st.fixed_pcen(c)?)
        };
        #[cfg(feature = "preset-kws16k-mfcc10")]
        let levels = Then(
            Then(log, st.fixed_range_floor(c)?),
            FixedMfcc::new(st.dct_q15(c)?).ok()?,
        );
        Some(Then(
            levels,
            FixedQuantiseStage::new(st.fixed_quantiser(c)?).ok()?,
        ))
    }
}

/// Samples per DMA half-buffer (deliberately not a multiple of the hop).
const BLOCK: usize = 128;

/// The core this build is for (set by build.rs from the target).
const CORE: &str = env!("STAPES_CORE");

/// The fixed path's precision in fixed builds.
#[cfg(feature = "fixed16")]
#[allow(dead_code)]
type Precision = stapes_core::fft::Fixed16;
#[cfg(not(feature = "fixed16"))]
#[allow(dead_code)]
type Precision = stapes_core::fft::Fixed32;

/// The arithmetic of this build.
const ARITH: &str = if cfg!(feature = "harness-only") {
    "none"
} else if cfg!(feature = "f32") {
    "f32"
} else if cfg!(feature = "fixed16") {
    "fixed16"
} else {
    "fixed32"
};

/// A frame value as the report prints it: its bits, in so many hex digits
/// (unused by the harness-only build).
#[allow(dead_code)]
trait Reported: Copy {
    const HEX_DIGITS: usize;
    fn bits(self) -> u32;
}
impl Reported for f32 {
    const HEX_DIGITS: usize = 8;
    fn bits(self) -> u32 {
        self.to_bits()
    }
}
impl Reported for stapes_core::fixed::types::I8F8 {
    const HEX_DIGITS: usize = 4;
    fn bits(self) -> u32 {
        self.to_bits() as u16 as u32
    }
}
impl Reported for i8 {
    const HEX_DIGITS: usize = 2;
    fn bits(self) -> u32 {
        self as u8 as u32
    }
}

/// Any front end of the core, as the board loop drives it.
#[allow(dead_code)]
struct Plain<F>(F);

impl<F: stapes_core::StreamingFrontEnd> UnderTest for Plain<F>
where
    F::Value: Reported,
{
    const ARITH: &'static str = ARITH;
    const HEX_DIGITS: usize = <F::Value as Reported>::HEX_DIGITS;
    type Band = F::Value;
    fn bits(b: F::Value) -> u32 {
        b.bits()
    }
    fn step<P: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut P,
    ) -> Option<(u64, &[F::Value])> {
        self.0
            .next_frame_with(input, probe)
            .map(|f| (f.index, f.bands))
    }
}

/// A front end as the board loop drives it.
trait UnderTest {
    const ARITH: &'static str;
    /// Hex digits per band in the report.
    const HEX_DIGITS: usize;
    type Band: Copy;
    fn bits(b: Self::Band) -> u32;
    fn step<P: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut P,
    ) -> Option<(u64, &[Self::Band])>;
    /// The CRC-32 of the model's input window when the last step handed one
    /// out (`model-input` builds only).
    fn window_crc(&self) -> Option<u32> {
        None
    }
}

/// The model's input in `model-input` builds: the preset's int8 codes into
/// its model window.
#[cfg(feature = "model-input")]
mod model_input {
    use stapes_core::crc32::Crc32;
    use stapes_core::probe::StageProbe;
    use stapes_core::{FrameWindow, StreamingFrontEnd};

    /// Frames the model reads (the preset's model window).
    pub const FRAMES: usize = match super::preset::CONFIG.stages.model_window {
        Some(w) => w.frames as usize,
        None => 1,
    };
    /// The model runs every `STRIDE` frames.
    pub const STRIDE: u32 = match super::preset::CONFIG.stages.model_window {
        Some(w) => w.stride,
        None => 1,
    };
    /// The front end and the model's window.
    pub struct WithWindow<F, const C: usize> {
        pub fe: F,
        pub window: FrameWindow<i8, FRAMES, C>,
        /// Whether the last frame completed a window the model would read.
        pub handed: bool,
    }
    impl<F: StreamingFrontEnd<Value = i8>, const C: usize> super::UnderTest for WithWindow<F, C> {
        const ARITH: &'static str = super::ARITH;
        const HEX_DIGITS: usize = <i8 as super::Reported>::HEX_DIGITS;
        type Band = i8;
        fn bits(b: i8) -> u32 {
            super::Reported::bits(b)
        }
        fn step<P: StageProbe>(
            &mut self,
            input: &mut &[i16],
            probe: &mut P,
        ) -> Option<(u64, &[i8])> {
            let frame = self.fe.next_frame_with(input, probe)?;
            self.handed = self.window.push(frame.bands).is_some();
            Some((frame.index, frame.bands))
        }
        fn window_crc(&self) -> Option<u32> {
            self.crc()
        }
    }
    impl<F, const C: usize> WithWindow<F, C> {
        /// The window's CRC-32 when the last frame handed it out; computed
        /// outside the timed call (it is the harness's report, not the
        /// front end's work).
        pub fn crc(&self) -> Option<u32> {
            let w = self.window.window().filter(|_| self.handed)?;
            let mut crc = Crc32::new();
            crc.update(bytemuck_bytes(w));
            Some(crc.finish())
        }
    }
    fn bytemuck_bytes(v: &[i8]) -> &[u8] {
        // i8 and u8 have the same size and alignment.
        let (ptr, len) = (v.as_ptr() as *const u8, v.len());
        #[allow(unsafe_code)]
        // SAFETY: reinterprets `len` initialised bytes of the same slice.
        unsafe {
            core::slice::from_raw_parts(ptr, len)
        }
    }
}

#[cfg(feature = "harness-only")]
mod under_test {
    use super::*;
    /// Drops every sample: no front end is linked.
    pub struct FrontEnd;
    pub fn make() -> Option<FrontEnd> {
        Some(FrontEnd)
    }
    impl UnderTest for FrontEnd {
        const ARITH: &'static str = super::ARITH;
        const HEX_DIGITS: usize = 4;
        type Band = u16;
        fn bits(b: u16) -> u32 {
            b as u32
        }
        fn step<P: StageProbe>(
            &mut self,
            input: &mut &[i16],
            probe: &mut P,
        ) -> Option<(u64, &[u16])> {
            // Read every sample, as a front end would, so the clip stays linked.
            let sum: i32 = input.iter().map(|&v| v as i32).sum();
            core::hint::black_box(sum);
            *input = &[];
            probe.start();
            None
        }
    }
}

#[cfg(all(
    feature = "f32",
    feature = "model-input",
    not(feature = "harness-only")
))]
mod under_test {
    use super::*;
    pub type FrontEnd = model_input::WithWindow<
        stapes_core::FloatFrontEnd<
            'static,
            { preset::FFT_POINTS },
            { preset::OVERLAP_SAMPLES },
            { preset::BANDS },
            chain::Float,
        >,
        { preset::STAGE_VALUES },
    >;
    pub fn make() -> Option<FrontEnd> {
        let fe = stapes_core::FloatFrontEnd::with_stages(
            preset::CONFIG,
            preset::TABLE_F32_SPARSE,
            chain::float()?,
        )
        .ok()?;
        Some(model_input::WithWindow {
            fe,
            window: stapes_core::FrameWindow::new(model_input::STRIDE),
            handed: false,
        })
    }
}

#[cfg(all(
    feature = "f32",
    not(feature = "model-input"),
    not(feature = "harness-only")
))]
mod under_test {
    use super::*;
    pub type FrontEnd = Plain<
        stapes_core::FloatFrontEnd<
            'static,
            { preset::FFT_POINTS },
            { preset::OVERLAP_SAMPLES },
            { preset::BANDS },
        >,
    >;
    pub fn make() -> Option<FrontEnd> {
        #[cfg(not(feature = "form-compact"))]
        let table = preset::TABLE_F32_SPARSE;
        #[cfg(feature = "form-compact")]
        let table = preset::TABLE_F32_COMPACT;
        stapes_core::FloatFrontEnd::new(preset::CONFIG, table)
            .ok()
            .map(Plain)
    }
}

#[cfg(all(
    any(feature = "fixed16", feature = "fixed32"),
    not(feature = "f32"),
    feature = "model-input",
    not(feature = "harness-only")
))]
mod under_test {
    use super::*;
    pub type FrontEnd = model_input::WithWindow<
        stapes_core::FixedFrontEnd<
            'static,
            Precision,
            { preset::FFT_POINTS },
            { preset::OVERLAP_SAMPLES },
            { preset::BANDS },
            chain::Fixed,
        >,
        { preset::STAGE_VALUES },
    >;
    pub fn make() -> Option<FrontEnd> {
        #[cfg(feature = "fixed16")]
        let tables = preset::FIXED16_SPARSE;
        #[cfg(not(feature = "fixed16"))]
        let tables = preset::FIXED32_SPARSE;
        let fe =
            stapes_core::FixedFrontEnd::with_stages(preset::CONFIG, tables, chain::fixed(&tables)?)
                .ok()?;
        Some(model_input::WithWindow {
            fe,
            window: stapes_core::FrameWindow::new(model_input::STRIDE),
            handed: false,
        })
    }
}

#[cfg(all(
    any(feature = "fixed16", feature = "fixed32"),
    not(feature = "f32"),
    not(feature = "model-input"),
    not(feature = "harness-only")
))]
mod under_test {
    use super::*;
    pub type FrontEnd = Plain<
        stapes_core::FixedFrontEnd<
            'static,
            Precision,
            { preset::FFT_POINTS },
            { preset::OVERLAP_SAMPLES },
            { preset::BANDS },
        >,
    >;
    pub fn make() -> Option<FrontEnd> {
        // The precision's own tables only: a 16-bit build links no Q31 array.
        #[cfg(all(feature = "fixed16", not(feature = "form-compact")))]
        let tables = preset::FIXED16_SPARSE;
        #[cfg(all(not(feature = "fixed16"), not(feature = "form-compact")))]
        let tables = preset::FIXED32_SPARSE;
        #[cfg(all(feature = "fixed16", feature = "form-compact"))]
        let tables = preset::FIXED16_COMPACT;
        #[cfg(all(not(feature = "fixed16"), feature = "form-compact"))]
        let tables = preset::FIXED32_COMPACT;
        stapes_core::FixedFrontEnd::new(preset::CONFIG, tables)
            .ok()
            .map(Plain)
    }
}

/// Adds the ticks of each stage of each frame.
struct StageClock<'a> {
    ticks: &'a Ticks,
    last: u32,
    sums: [u64; 5],
}

impl StageProbe for StageClock<'_> {
    #[inline(always)]
    fn start(&mut self) {
        self.last = self.ticks.now();
    }
    #[inline(always)]
    fn mark(&mut self, done: Stage) {
        let now = self.ticks.now();
        self.sums[done as usize] += Ticks::elapsed(self.last, now) as u64;
        self.last = now;
    }
}

#[entry]
fn main() -> ! {
    let Some(peripherals) = cortex_m::Peripherals::take() else {
        emulator::fail()
    };
    let ticks = Ticks::start(peripherals.SYST);
    let mut console = Console::open();
    let Some(mut fe) = under_test::make() else {
        let _ = writeln!(
            console,
            "STAPES-ERROR the table does not fit the configuration"
        );
        emulator::fail()
    };
    run(&mut fe, &ticks, &mut console)
}

fn run<F: UnderTest>(fe: &mut F, ticks: &Ticks, console: &mut Console) -> ! {
    let _ = writeln!(
        console,
        "STAPES-BEGIN preset={} arith={} core={} block={} bands={}",
        preset::NAME,
        F::ARITH,
        CORE,
        BLOCK,
        preset::BANDS
    );
    let mut source = FlashClip::new(emulator::CLIP);
    let mut pin = NoPin;
    let mut block = [0i16; BLOCK];
    let mut clock = StageClock {
        ticks,
        last: 0,
        sums: [0; 5],
    };
    let (mut frames, mut call_ticks, mut stack) = (0u64, 0u64, 0usize);
    loop {
        let n = source.read(&mut block);
        if n == 0 {
            break;
        }
        let mut rest = &block[..n];
        loop {
            let painted = emulator::paint_stack();
            let t0 = ticks.now();
            let frame = board::while_high(&mut pin, || fe.step(&mut rest, &mut clock));
            call_ticks += Ticks::elapsed(t0, ticks.now()) as u64;
            stack = stack.max(emulator::stack_used(painted));
            let Some((index, bands)) = frame else { break };
            frames += 1;
            let mut line: heapless::String<600> = heapless::String::new();
            let _ = write!(line, "F {index} ");
            for &b in bands {
                let _ = write!(line, "{:0width$x}", F::bits(b), width = F::HEX_DIGITS);
            }
            let _ = writeln!(console, "{line}");
            if let Some(crc) = fe.window_crc() {
                let _ = writeln!(console, "W {index} {crc:08x}");
            }
        }
    }
    let s = clock.sums;
    let stages: u64 = s.iter().sum();
    let _ = writeln!(
        console,
        "STAPES-TICKS frames={frames} total={call_ticks} intake={} window={} fft={} spectrum={} mel={} log={}",
        call_ticks.saturating_sub(stages),
        s[0],
        s[1],
        s[2],
        s[3],
        s[4]
    );
    let _ = writeln!(
        console,
        "STAPES-CAL instructions_per_kilotick={}",
        ticks.instructions_per_kilotick()
    );
    let _ = writeln!(
        console,
        "STAPES-RAM state={} stack={stack}",
        core::mem::size_of::<F>()
    );
    let _ = writeln!(console, "STAPES-END");
    emulator::succeed()
}

#[panic_handler]
fn panic(info: &PanicInfo) -> ! {
    let mut c = Console::open();
    let _ = writeln!(c, "STAPES-PANIC {info}");
    emulator::fail()
}
