//! Atomic file output: write beside the target, then rename.
//!
//! A reader never sees a half-written file and a failed run leaves nothing
//! behind: the temporary file is removed on every error path (including a
//! panic in the writer closure, through `Drop`).

use super::IoError;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// A temporary file beside `target` that is deleted unless committed.
struct Pending {
    tmp: PathBuf,
    committed: bool,
}

impl Drop for Pending {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// The temporary path used for `target`: hidden, in the same directory (so
/// the rename stays on one file system) and unique to this process.
pub fn temporary_path(target: &Path) -> PathBuf {
    let name = target.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp_name = format!(".{name}.{}.partial", std::process::id());
    target.with_file_name(tmp_name)
}

/// Create `target` by streaming into `write`, atomically.
///
/// Parent directories are created. On success the data are flushed and
/// synced before the rename.
///
/// # Errors
/// [`IoError::Os`] naming `target` when the directory, the temporary file,
/// the writer or the rename fails.
pub fn write_atomic<F>(target: &Path, write: F) -> Result<(), IoError>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    if let Some(dir) = target.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|e| IoError::os(dir, "cannot create directory", e))?;
    }
    let mut pending = Pending { tmp: temporary_path(target), committed: false };
    let file = std::fs::File::create(&pending.tmp).map_err(|e| IoError::os(target, "cannot create", e))?;
    let mut w = BufWriter::new(file);
    write(&mut w).map_err(|e| IoError::os(target, "cannot write", e))?;
    let file = w.into_inner().map_err(|e| IoError::os(target, "cannot write", e.into_error()))?;
    file.sync_all().map_err(|e| IoError::os(target, "cannot write", e))?;
    drop(file);
    std::fs::rename(&pending.tmp, target).map_err(|e| IoError::os(target, "cannot rename into place", e))?;
    pending.committed = true;
    Ok(())
}

/// Write `bytes` to `target` atomically.
///
/// # Errors
/// As [`write_atomic`].
pub fn write_bytes_atomic(target: &Path, bytes: &[u8]) -> Result<(), IoError> {
    write_atomic(target, |w| w.write_all(bytes))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn failed_write_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.csv");
        let r = write_atomic(&target, |w| {
            w.write_all(b"half")?;
            Err(std::io::Error::other("boom"))
        });
        assert!(r.is_err());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn success_renames_into_place() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("sub").join("out.txt");
        write_bytes_atomic(&target, b"ok").unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"ok");
        assert_eq!(std::fs::read_dir(target.parent().unwrap()).unwrap().count(), 1);
    }
}
