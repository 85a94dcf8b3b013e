//! Output files are written whole or not at all: each is written to a
//! temporary file in the destination folder and renamed into place.

use std::io::Write;
use std::path::Path;

use anyhow::{Context, Result};

/// Writes `bytes` to `path` atomically, creating the parent folder.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic_with(path, |f| f.write_all(bytes).map_err(Into::into))
}

/// Writes `bytes` to `path` whole or not at all (a temporary file renamed
/// into place) without waiting for the disk: a killed process leaves the
/// old file or the new one, never a part; after a power cut the file may be
/// empty, so a reader must be able to tell (`export` checks every shard's
/// sizes before it keeps it).
pub fn write_atomic_unsynced(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut s = Staged::new(path)?;
    s.file()
        .write_all(bytes)
        .with_context(|| format!("cannot write {}", path.display()))?;
    s.commit_unsynced()
}

/// Runs `fill` on a temporary file beside `path`, then renames it to `path`.
/// On any error the temporary file is removed and `path` is left as it was.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut std::fs::File) -> Result<()>,
) -> Result<()> {
    staged(path, fill)?
        .persist(path)
        .with_context(|| format!("cannot move the finished file to {}", path.display()))?;
    Ok(())
}

/// A finished temporary file beside `path` (its folder created): filled by
/// `fill`, flushed to the disk, with ordinary permissions.
fn staged(
    path: &Path,
    fill: impl FnOnce(&mut std::fs::File) -> Result<()>,
) -> Result<tempfile::NamedTempFile> {
    let dir = folder_of(path);
    std::fs::create_dir_all(dir)
        .with_context(|| format!("cannot create folder {}", dir.display()))?;
    let mut tmp = tempfile::NamedTempFile::new_in(dir)
        .with_context(|| format!("cannot create a temporary file in {}", dir.display()))?;
    fill(tmp.as_file_mut()).with_context(|| format!("cannot write {}", path.display()))?;
    tmp.as_file_mut()
        .sync_all()
        .with_context(|| format!("cannot flush {} to the disk", path.display()))?;
    // Temporary files are private; finished outputs get ordinary permissions.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .ok();
    }
    Ok(tmp)
}

/// The folder `path` is in (`.` for a bare file name).
fn folder_of(path: &Path) -> &Path {
    match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    }
}

/// Writes a set of files all or nothing: each is written and flushed to a
/// temporary file beside its destination first; only when every one is
/// complete are they moved into place, and if a move fails, the files
/// already moved are put back as they were.
pub fn write_set_atomic(files: &[(&Path, &[u8])]) -> Result<()> {
    write_set(files, true)
}

/// [`write_set_atomic`] without waiting for the disk (see
/// [`write_atomic_unsynced`]): for files a rerun rewrites.
pub fn write_set_atomic_unsynced(files: &[(&Path, &[u8])]) -> Result<()> {
    write_set(files, false)
}

fn write_set(files: &[(&Path, &[u8])], durable: bool) -> Result<()> {
    let mut ready = Vec::with_capacity(files.len());
    for &(path, bytes) in files {
        let tmp = if durable {
            staged(path, |f| f.write_all(bytes).map_err(Into::into))?
        } else {
            let mut s = Staged::new(path)?;
            s.file()
                .write_all(bytes)
                .with_context(|| format!("cannot write {}", path.display()))?;
            s.tmp
        };
        ready.push((path, tmp));
    }
    // Every file is complete: keep the old versions aside, then move. On
    // any failure, put back what this call changed, newest first.
    let mut moved: Vec<(&Path, Option<tempfile::TempPath>)> = Vec::new();
    let mut result = Ok(());
    for (path, tmp) in ready {
        match move_into_place(path, tmp) {
            Ok(previous) => moved.push((path, previous)),
            Err(e) => {
                result = Err(e);
                break;
            }
        }
    }
    if result.is_err() {
        for (p, keep) in moved.iter().rev() {
            match keep {
                Some(k) => {
                    let _ = std::fs::rename(k, p);
                }
                None => {
                    let _ = std::fs::remove_file(p);
                }
            }
        }
        return result;
    }
    // The old versions are no longer needed (dropping a TempPath deletes it).
    drop(moved);
    Ok(())
}

/// Moves a finished temporary file to `path`, keeping the file it replaces
/// (if any) aside; on failure `path` is as it was.
fn move_into_place(
    path: &Path,
    tmp: tempfile::NamedTempFile,
) -> Result<Option<tempfile::TempPath>> {
    let previous = if path.exists() {
        let dir = folder_of(path);
        let keep = tempfile::Builder::new()
            .prefix(".previous")
            .tempfile_in(dir)
            .with_context(|| format!("cannot create a temporary file in {}", dir.display()))?
            .into_temp_path();
        std::fs::rename(path, &keep)
            .with_context(|| format!("cannot move the old {} aside", path.display()))?;
        Some(keep)
    } else {
        None
    };
    if let Err(e) = tmp.persist(path) {
        if let Some(keep) = &previous {
            let _ = std::fs::rename(keep, path);
        }
        return Err(anyhow::Error::new(e.error))
            .with_context(|| format!("cannot move the finished file to {}", path.display()));
    }
    Ok(previous)
}

/// A file written in pieces beside its destination and moved into place
/// only when [`Staged::commit`] is called (flushed to the disk first);
/// dropped without a commit, it is removed.
pub struct Staged {
    tmp: tempfile::NamedTempFile,
    path: std::path::PathBuf,
}

impl Staged {
    /// A new temporary file beside `path` (its folder created).
    pub fn new(path: &Path) -> Result<Staged> {
        let dir = folder_of(path);
        std::fs::create_dir_all(dir)
            .with_context(|| format!("cannot create folder {}", dir.display()))?;
        let tmp = tempfile::NamedTempFile::new_in(dir)
            .with_context(|| format!("cannot create a temporary file in {}", dir.display()))?;
        Ok(Staged {
            tmp,
            path: path.to_path_buf(),
        })
    }

    /// The file being written.
    pub fn file(&mut self) -> &mut std::fs::File {
        self.tmp.as_file_mut()
    }

    /// Flushes the file to the disk and moves it to its destination.
    pub fn commit(self) -> Result<()> {
        self.tmp
            .as_file()
            .sync_all()
            .with_context(|| format!("cannot flush {} to the disk", self.path.display()))?;
        self.commit_unsynced()
    }

    /// Moves the file to its destination without waiting for the disk (see
    /// [`write_atomic_unsynced`]).
    pub fn commit_unsynced(self) -> Result<()> {
        let path = self.path;
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            self.tmp
                .as_file()
                .set_permissions(std::fs::Permissions::from_mode(0o644))
                .ok();
        }
        self.tmp
            .persist(&path)
            .with_context(|| format!("cannot move the finished file to {}", path.display()))?;
        Ok(())
    }
}
