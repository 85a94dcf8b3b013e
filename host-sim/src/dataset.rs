//! A labelled dataset folder: which clips, their labels and their splits.
//!
//! Three layouts are read:
//! * **label folders**: `DIR/<label>/**.wav`; every clip is in one split,
//!   or split by a stable hash of its path (`--validation-percent`,
//!   `--test-percent`);
//! * **split folders**: `DIR/<split>/<label>/**.wav`, when every
//!   first-level folder is named `train`, `validation` or `test`;
//! * **a CSV manifest**: rows `path,label[,split]` (a header row naming
//!   those columns is allowed), paths relative to `DIR`.
//!
//! Folders whose names start with `.` or `_` are skipped (a place for
//! notes or noise recordings); files outside a label folder are listed as
//! skipped. Clips are sorted by path, so the order never depends on the
//! file system.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};

/// The split names the split-folder layout recognises, in output order.
pub const SPLIT_NAMES: [&str; 3] = ["train", "validation", "test"];

/// One clip of the dataset.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct DatasetClip {
    /// Where it is.
    pub path: PathBuf,
    /// Its path relative to the dataset folder, `/`-separated (how the
    /// manifests name it).
    pub relative: String,
    /// Its label.
    pub label: String,
    /// Its split.
    pub split: String,
}

/// A dataset's clips, labels and splits.
#[derive(Clone, Debug, Default)]
pub struct Dataset {
    /// Clips sorted by split (train, validation, test, then others by
    /// name), then by relative path.
    pub clips: Vec<DatasetClip>,
    /// Labels, sorted: a clip's label index is its position here.
    pub labels: Vec<String>,
    /// Files found that are not clips of the dataset, with the reason.
    pub skipped: Vec<(String, String)>,
}

/// How clips without a split of their own are split.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct HashSplit {
    /// Percent of clips for `validation`.
    pub validation_percent: f64,
    /// Percent of clips for `test`.
    pub test_percent: f64,
}

impl HashSplit {
    fn check(&self) -> Result<()> {
        let ok = |p: f64| p.is_finite() && (0.0..=100.0).contains(&p);
        if !ok(self.validation_percent)
            || !ok(self.test_percent)
            || self.validation_percent + self.test_percent > 100.0
        {
            bail!(
                "--validation-percent {} and --test-percent {} are not shares of the clips: \
                 give percentages from 0 to 100 that add up to at most 100",
                self.validation_percent,
                self.test_percent
            );
        }
        Ok(())
    }

    /// The split of a clip at `relative`: a stable hash of the path (CRC-32,
    /// IEEE 802.3) picks a point in [0, 100); adding clips later never moves
    /// a clip from one split to another.
    pub fn split_of(&self, relative: &str) -> &'static str {
        let mut crc = stapes_core::crc32::Crc32::new();
        crc.update(relative.as_bytes());
        let point = crc.finish() as f64 / (u32::MAX as f64 + 1.0) * 100.0;
        if point < self.validation_percent {
            "validation"
        } else if point < self.validation_percent + self.test_percent {
            "test"
        } else {
            "train"
        }
    }
}

fn hidden(name: &str) -> bool {
    name.starts_with('.') || name.starts_with('_')
}

fn is_wav(path: &Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("wav"))
}

fn sorted_entries(dir: &Path) -> Result<Vec<std::fs::DirEntry>> {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .with_context(|| format!("cannot read folder {}", dir.display()))?
        .collect::<std::io::Result<_>>()
        .with_context(|| format!("cannot read folder {}", dir.display()))?;
    entries.sort_by_key(|e| e.file_name());
    Ok(entries)
}

/// WAV files under `dir`, recursively, sorted; hidden folders skipped.
fn wavs_under(dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    for e in sorted_entries(dir)? {
        let path = e.path();
        let name = e.file_name().to_string_lossy().into_owned();
        let kind = e.file_type()?;
        if kind.is_dir() || (kind.is_symlink() && path.is_dir()) {
            if !hidden(&name) {
                wavs_under(&path, out)?;
            }
        } else if is_wav(&path) {
            out.push(path);
        }
    }
    Ok(())
}

fn relative(root: &Path, path: &Path) -> String {
    path.strip_prefix(root)
        .unwrap_or(path)
        .components()
        .map(|c| c.as_os_str().to_string_lossy())
        .collect::<Vec<_>>()
        .join("/")
}

fn split_rank(split: &str) -> (usize, String) {
    (
        SPLIT_NAMES
            .iter()
            .position(|s| *s == split)
            .unwrap_or(SPLIT_NAMES.len()),
        split.to_string(),
    )
}

impl Dataset {
    fn finish(mut clips: Vec<DatasetClip>, skipped: Vec<(String, String)>) -> Result<Dataset> {
        clips.sort_by(|a, b| {
            split_rank(&a.split)
                .cmp(&split_rank(&b.split))
                .then_with(|| a.relative.cmp(&b.relative))
        });
        if let Some(w) = clips.windows(2).find(|w| w[0].relative == w[1].relative) {
            bail!(
                "{} is listed twice: give each clip once (a clip in two splits or with two \
                 labels would leak between them)",
                w[0].relative
            );
        }
        let labels: BTreeSet<String> = clips.iter().map(|c| c.label.clone()).collect();
        Ok(Dataset {
            clips,
            labels: labels.into_iter().collect(),
            skipped,
        })
    }

    /// The dataset in `dir`: from `manifest` when given, otherwise from its
    /// folders; clips without a split get one from `split`.
    pub fn discover(dir: &Path, manifest: Option<&Path>, split: HashSplit) -> Result<Dataset> {
        split.check()?;
        if !dir.is_dir() {
            bail!(
                "--input-dir {} is not a folder: give the dataset's folder (one folder per \
                 label, or a CSV manifest with --manifest)",
                dir.display()
            );
        }
        let data = match manifest {
            Some(m) => Self::from_manifest(dir, m, split)?,
            None => Self::from_folders(dir, split)?,
        };
        if data.clips.is_empty() {
            bail!(
                "{} holds no WAV clip in a label folder: put each label's clips in a folder \
                 named after the label (DIR/<label>/*.wav), or give a CSV manifest with \
                 --manifest",
                dir.display()
            );
        }
        Ok(data)
    }

    fn from_folders(dir: &Path, split: HashSplit) -> Result<Dataset> {
        let mut folders = Vec::new();
        let mut skipped = Vec::new();
        for e in sorted_entries(dir)? {
            let name = e.file_name().to_string_lossy().into_owned();
            let path = e.path();
            if path.is_dir() {
                if !hidden(&name) {
                    folders.push((name, path));
                }
            } else if is_wav(&path) {
                skipped.push((
                    relative(dir, &path),
                    "not in a label folder: move it into DIR/<label>/".to_string(),
                ));
            }
        }
        let split_layout = !folders.is_empty()
            && folders
                .iter()
                .all(|(n, _)| SPLIT_NAMES.contains(&n.as_str()));
        let mut clips = Vec::new();
        let mut label_folder = |label: &str, folder: &Path, fixed_split: Option<&str>| {
            let mut wavs = Vec::new();
            wavs_under(folder, &mut wavs)?;
            for path in wavs {
                let rel = relative(dir, &path);
                let split = fixed_split
                    .unwrap_or_else(|| split.split_of(&rel))
                    .to_string();
                clips.push(DatasetClip {
                    path,
                    relative: rel,
                    label: label.to_string(),
                    split,
                });
            }
            anyhow::Ok(())
        };
        if split_layout {
            for (split_name, split_dir) in &folders {
                for e in sorted_entries(split_dir)? {
                    let name = e.file_name().to_string_lossy().into_owned();
                    let path = e.path();
                    if path.is_dir() {
                        if !hidden(&name) {
                            label_folder(&name, &path, Some(split_name))?;
                        }
                    } else if is_wav(&path) {
                        skipped.push((
                            relative(dir, &path),
                            "not in a label folder: move it into DIR/<split>/<label>/".into(),
                        ));
                    }
                }
            }
        } else {
            for (name, path) in &folders {
                label_folder(name, path, None)?;
            }
        }
        Self::finish(clips, skipped)
    }

    fn from_manifest(dir: &Path, manifest: &Path, split: HashSplit) -> Result<Dataset> {
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .trim(csv::Trim::All)
            .from_path(manifest)
            .with_context(|| format!("cannot read manifest {}", manifest.display()))?;
        let mut clips = Vec::new();
        for (i, row) in reader.records().enumerate() {
            let line = i + 1;
            let row = row.map_err(|e| {
                anyhow!(
                    "manifest {} line {line}: {e}: give rows of path,label[,split]",
                    manifest.display()
                )
            })?;
            let field = |k: usize| row.get(k).unwrap_or("").to_string();
            if line == 1 && field(0).eq_ignore_ascii_case("path") {
                continue; // the header row
            }
            if row.len() == 1 && field(0).is_empty() {
                continue; // a blank line
            }
            if !(2..=3).contains(&row.len()) || field(0).is_empty() || field(1).is_empty() {
                bail!(
                    "manifest {} line {line} has {} field(s) ({:?}): give path,label or \
                     path,label,split",
                    manifest.display(),
                    row.len(),
                    row.iter().collect::<Vec<_>>()
                );
            }
            let rel = field(0).replace('\\', "/");
            if Path::new(&rel).is_absolute() || rel.split('/').any(|c| c == "..") {
                bail!(
                    "manifest {} line {line}: {rel} is not a path inside --input-dir: give \
                     paths relative to {}",
                    manifest.display(),
                    dir.display()
                );
            }
            let path = dir.join(&rel);
            let split_name = match field(2) {
                s if s.is_empty() => split.split_of(&rel).to_string(),
                s => s,
            };
            clips.push(DatasetClip {
                path,
                relative: rel,
                label: field(1),
                split: split_name,
            });
        }
        Self::finish(clips, Vec::new())
    }

    /// The splits present, in output order.
    pub fn splits(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for c in &self.clips {
            if out.last() != Some(&c.split) {
                out.push(c.split.clone());
            }
        }
        out
    }

    /// A clip's label index.
    pub fn label_index(&self, label: &str) -> usize {
        self.labels
            .binary_search_by(|l| l.as_str().cmp(label))
            .expect("every clip's label is listed")
    }
}
