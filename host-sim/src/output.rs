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
    tmp.as_file_mut().sync_all().ok();
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
