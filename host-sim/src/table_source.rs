//! Where a command's tables come from: generated from a configuration, or
//! read from a checked blob (`--table-blob`).

use anyhow::{Context, Result, anyhow, bail};
use stapes_core::blob::TableBlob;
use stapes_core::config::FeatureConfig;
use stapes_core::fixed_tables::FixedTables;
use stapes_core::table::{FilterbankForm, TableView};

use crate::check::{Arith, CoreTables};
use crate::cli::InputArgs;
use crate::config_source::{ConfigArgs, NamedConfig};
use crate::generate::GeneratedTables;

/// Tables for a command: generated from a configuration, or read from a blob.
pub enum LoadedTables {
    /// Generated in memory.
    Generated(String, Box<GeneratedTables>),
    /// A blob's bytes in 4-byte-aligned storage, and its length.
    Blob(String, Vec<u32>, usize),
}

impl LoadedTables {
    /// Resolves the configuration options (or `--table-blob`).
    pub fn load(config: &ConfigArgs, input: &InputArgs) -> Result<LoadedTables> {
        match &input.table_blob {
            Some(path) => {
                let given = config.given();
                if !given.is_empty() {
                    bail!(
                        "--table-blob {} carries its own configuration, so {} would be \
                         ignored: drop {}, or generate tables for the changed configuration \
                         with `stapes tables` and pass that blob",
                        path.display(),
                        given.join(", "),
                        if given.len() == 1 { "it" } else { "them" }
                    );
                }
                let bytes = std::fs::read(path)
                    .with_context(|| format!("cannot read table blob {}", path.display()))?;
                let mut words = vec![0u32; bytes.len().div_ceil(4)];
                bytemuck::cast_slice_mut::<u32, u8>(&mut words)[..bytes.len()]
                    .copy_from_slice(&bytes);
                let loaded = LoadedTables::Blob(path.display().to_string(), words, bytes.len());
                let cfg = loaded.config()?;
                cfg.validate().map_err(|e| {
                    anyhow!(
                        "table blob {}: its configuration is invalid: {e}",
                        path.display()
                    )
                })?;
                Ok(loaded)
            }
            None => {
                let NamedConfig {
                    name,
                    config,
                    statistics,
                } = config.resolve()?;
                Ok(LoadedTables::Generated(
                    name,
                    Box::new(GeneratedTables::with_statistics(&config, statistics)?),
                ))
            }
        }
    }

    fn blob(&self) -> Result<Option<TableBlob<'_>>> {
        match self {
            LoadedTables::Blob(path, words, len) => {
                let bytes = &bytemuck::cast_slice::<u32, u8>(words)[..*len];
                TableBlob::parse(bytes)
                    .map(Some)
                    .map_err(|e| anyhow!("{path}: {e}"))
            }
            LoadedTables::Generated(..) => Ok(None),
        }
    }

    /// Name for reports.
    pub fn name(&self) -> &str {
        match self {
            LoadedTables::Generated(n, _) | LoadedTables::Blob(n, ..) => n,
        }
    }

    /// The configuration.
    pub fn config(&self) -> Result<FeatureConfig> {
        match self {
            LoadedTables::Generated(_, t) => Ok(t.config),
            LoadedTables::Blob(..) => Ok(self.blob()?.expect("blob").config()),
        }
    }

    /// An `f32` view in `form`.
    pub fn view_f32(&self, form: FilterbankForm) -> Result<TableView<'_, f32>> {
        match self {
            LoadedTables::Generated(name, t) => {
                if form == FilterbankForm::Compact && !t.has_compact() {
                    return Err(anyhow!(
                        "{name} has no compact filterbank (rounded-centre-bin triangles): use --form sparse"
                    ));
                }
                Ok(t.view_f32(form))
            }
            LoadedTables::Blob(path, ..) => self
                .blob()?
                .expect("blob")
                .view::<f32>(form)
                .map_err(|e| anyhow!("{path}: {e}")),
        }
    }
}

impl LoadedTables {
    /// The checked tables of the stages after the filterbank.
    pub fn stage_tables(&self) -> Result<stapes_core::StageTables<'_>> {
        match self {
            LoadedTables::Generated(name, t) => {
                let v = t.stages.view();
                v.check(&t.config).map_err(|e| anyhow!("{name}: {e}"))?;
                Ok(v)
            }
            LoadedTables::Blob(path, ..) => self
                .blob()?
                .expect("blob")
                .stage_tables()
                .map_err(|e| anyhow!("{path}: {e}")),
        }
    }

    /// Fixed-point tables in `form`.
    pub fn fixed_tables(&self, form: FilterbankForm) -> Result<FixedTables<'_>> {
        match self {
            LoadedTables::Generated(name, t) => {
                if form == FilterbankForm::Compact && !t.has_compact() {
                    return Err(anyhow!(
                        "{name} has no compact filterbank (rounded-centre-bin triangles): use --form sparse"
                    ));
                }
                t.fixed_tables(form).ok_or_else(|| {
                    anyhow!(
                        "{name}: the fixed path cannot represent floor_db = {} (its output spans +-128 dB or +-128 ln units); raise floor_db",
                        t.config.floor_db
                    )
                })
            }
            LoadedTables::Blob(path, ..) => self
                .blob()?
                .expect("blob")
                .fixed_tables(form)
                .map_err(|e| anyhow!("{path}: {e}")),
        }
    }

    /// The tables `arith` reads, in `form`.
    pub fn core_tables(&self, arith: Arith, form: FilterbankForm) -> Result<CoreTables<'_>> {
        Ok(match arith {
            Arith::F32 => CoreTables::Float(self.view_f32(form)?),
            Arith::Fixed16 | Arith::Fixed32 => CoreTables::Fixed(self.fixed_tables(form)?),
        })
    }
}
