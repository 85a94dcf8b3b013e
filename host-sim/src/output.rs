//! Output files are written whole or not at all: each is written to a
//! temporary file in the destination folder and renamed into place.

use std::io::Write;
use std::path::Path;

use anyhow::{Context, Result};

/// Writes `bytes` to `path` atomically, creating the parent folder.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic_with(path, |f| f.write_all(bytes).map_err(Into::into))
}

/// Runs `fill` on a temporary file beside `path`, then renames it to `path`.
/// On any error the temporary file is removed and `path` is left as it was.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut std::fs::File) -> Result<()>,
) -> Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
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
    tmp.persist(path)
        .with_context(|| format!("cannot move the finished file to {}", path.display()))?;
    Ok(())
}

/// Writes a set of files all or nothing: each is written and flushed to a
/// temporary file beside its destination first; only when every one is
/// complete are they moved into place, and if a move fails, the files
/// already moved are put back as they were.
pub fn write_set_atomic(files: &[(&Path, &[u8])]) -> Result<()> {
    let mut staged = Vec::with_capacity(files.len());
    for &(path, bytes) in files {
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        std::fs::create_dir_all(dir)
            .with_context(|| format!("cannot create folder {}", dir.display()))?;
        let mut tmp = tempfile::NamedTempFile::new_in(dir)
            .with_context(|| format!("cannot create a temporary file in {}", dir.display()))?;
        tmp.write_all(bytes)
            .with_context(|| format!("cannot write {}", path.display()))?;
        tmp.as_file_mut()
            .sync_all()
            .with_context(|| format!("cannot flush {} to the disk", path.display()))?;
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            tmp.as_file()
                .set_permissions(std::fs::Permissions::from_mode(0o644))
                .ok();
        }
        staged.push((path, tmp));
    }
    // Every file is complete: keep the old versions aside, then move. On
    // any failure, put back what this call changed, newest first.
    let mut moved: Vec<(&Path, Option<tempfile::TempPath>)> = Vec::new();
    let mut result = Ok(());
    for (path, tmp) in staged {
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
        let dir = path
            .parent()
            .filter(|d| !d.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
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
