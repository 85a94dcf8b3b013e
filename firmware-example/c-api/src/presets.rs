//! The shipped presets compiled into the library (one cargo feature each).
//! Each arithmetic reads only its own tables, so a firmware that calls one
//! arithmetic links one set.

use stapes_core::FeatureConfig;
use stapes_core::fixed_tables::FixedTables;
use stapes_core::stage_tables::StageTables;
use stapes_core::table::TableView;

#[allow(unused_imports)]
use crate::status::*;

/// A preset's configuration, one arithmetic's tables and its stage tables.
pub type Preset<T> = (FeatureConfig, T, StageTables<'static>);

macro_rules! presets {
    ($( $feature:literal, $code:ident, $module:ident, $file:literal, $stages:expr; )*) => {
        $(
            #[cfg(feature = $feature)]
            #[allow(dead_code)]
            mod $module {
                include!(concat!("../../../tables/", $file));
            }
        )*

        /// The preset's f32 tables, when compiled in.
        pub fn f32(preset: i32) -> Option<Preset<TableView<'static, f32>>> {
            match preset {
                $(
                    #[cfg(feature = $feature)]
                    $code => {
                        use $module as p;
                        Some((p::CONFIG, p::TABLE_F32_SPARSE, $stages))
                    }
                )*
                _ => None,
            }
        }

        /// The preset's 16-bit fixed tables, when compiled in.
        pub fn fixed16(preset: i32) -> Option<Preset<FixedTables<'static>>> {
            match preset {
                $(
                    #[cfg(feature = $feature)]
                    $code => {
                        use $module as p;
                        Some((p::CONFIG, p::FIXED16_SPARSE, $stages))
                    }
                )*
                _ => None,
            }
        }

        /// The preset's 32-bit fixed tables, when compiled in.
        pub fn fixed32(preset: i32) -> Option<Preset<FixedTables<'static>>> {
            match preset {
                $(
                    #[cfg(feature = $feature)]
                    $code => {
                        use $module as p;
                        Some((p::CONFIG, p::FIXED32_SPARSE, $stages))
                    }
                )*
                _ => None,
            }
        }
    };
}

presets! {
    "preset-speech16k-40", STAPES_PRESET_SPEECH16K_40, speech16k_40, "speech16k-40.rs", StageTables::NONE;
    "preset-dsr8k-23", STAPES_PRESET_DSR8K_23, dsr8k_23, "dsr8k-23.rs", StageTables::NONE;
    "preset-tiny16k-10", STAPES_PRESET_TINY16K_10, tiny16k_10, "tiny16k-10.rs", StageTables::NONE;
    "preset-kws16k-mel40", STAPES_PRESET_KWS16K_MEL40, kws16k_mel40, "kws16k-mel40.rs", p::STAGE_TABLES;
    "preset-kws16k-mfcc10", STAPES_PRESET_KWS16K_MFCC10, kws16k_mfcc10, "kws16k-mfcc10.rs", p::STAGE_TABLES;
    "preset-kws16k-pcen40", STAPES_PRESET_KWS16K_PCEN40, kws16k_pcen40, "kws16k-pcen40.rs", p::STAGE_TABLES;
}
