//! Output folders hierax owns: each carries a marker file, only a folder with
//! a marker is ever replaced, and a folder is assembled under a hidden name
//! and renamed into place when complete (all or nothing).

use crate::io::IoError;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// The marker file inside every folder hierax writes.
pub const MARKER: &str = ".hierax-output.json";

/// What the marker records.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct Marker {
    /// Always `hierax`.
    pub generated_by: String,
    /// The hierax version.
    pub version: String,
    /// What the folder holds (`subject`, `cohort`, `energy`, …).
    pub kind: String,
    /// SHA-256 of the parameters as JSON, so a resumed run can tell whether
    /// the folder was made with the same settings.
    pub parameters_sha256: String,
    /// SHA-256 of the inputs' digests, in order (empty when not applicable).
    pub inputs_sha256: String,
}

impl Marker {
    /// A marker for a folder of `kind` made with `parameters` from inputs
    /// whose digests are `input_digests`.
    pub fn new(kind: &str, parameters: &serde_json::Value, input_digests: &[&str]) -> Self {
        use sha2::{Digest, Sha256};
        let hex = |b: &[u8]| Sha256::digest(b).iter().map(|x| format!("{x:02x}")).collect::<String>();
        Marker {
            generated_by: "hierax".into(),
            version: crate::VERSION.into(),
            kind: kind.into(),
            parameters_sha256: hex(parameters.to_string().as_bytes()),
            inputs_sha256: hex(input_digests.join("\n").as_bytes()),
        }
    }

    /// The marker of `dir`, if it has one that parses.
    pub fn read(dir: &Path) -> Option<Marker> {
        let text = std::fs::read_to_string(dir.join(MARKER)).ok()?;
        serde_json::from_str(&text).ok()
    }

    fn write(&self, dir: &Path) -> Result<(), IoError> {
        crate::io::table::write_json(&dir.join(MARKER), self)
    }
}

/// Refuse to replace `path` unless it does not exist or hierax made it.
///
/// # Errors
/// [`IoError::NotOurs`] when `path` exists and is a file, or a folder
/// without hierax's marker.
pub fn check_replaceable(path: &Path) -> Result<(), IoError> {
    if !path.exists() {
        return Ok(());
    }
    if !path.is_dir() {
        return Err(IoError::NotOurs {
            path: path.to_path_buf(),
            reason: "exists and is not a folder; hierax will not replace it".into(),
        });
    }
    if Marker::read(path).is_some() {
        return Ok(());
    }
    Err(IoError::NotOurs {
        path: path.to_path_buf(),
        reason: format!(
            "exists and was not written by hierax (it has no {MARKER}); hierax replaces only folders it made. \
             Choose another output folder, or move this one away yourself"
        ),
    })
}

/// Make sure `root` can hold hierax outputs: it is created if absent; an
/// existing folder must be empty or carry hierax's marker. The marker of
/// `kind` is written into it.
///
/// # Errors
/// [`IoError::NotOurs`] for a non-empty folder hierax did not make;
/// [`IoError::Os`] when it cannot be created.
pub fn claim_root(root: &Path, marker: &Marker) -> Result<(), IoError> {
    if root.exists() {
        let empty =
            std::fs::read_dir(root).map_err(|e| IoError::os(root, "cannot list", e))?.next().is_none();
        if !empty {
            check_replaceable(root)?;
        }
    }
    std::fs::create_dir_all(root).map_err(|e| IoError::os(root, "cannot create directory", e))?;
    marker.write(root)
}

/// A folder being assembled under a hidden name beside its final place. It
/// is removed if dropped before [`StagedFolder::commit`].
#[derive(Debug)]
pub struct StagedFolder {
    tmp: PathBuf,
    target: PathBuf,
    marker: Marker,
    committed: bool,
}

impl StagedFolder {
    /// Start assembling `parent/name`. `name` must be a single path
    /// component (checked), and an existing `parent/name` must be hierax's.
    ///
    /// # Errors
    /// [`IoError::NotOurs`], or [`IoError::Os`] when the folder cannot be made.
    pub fn begin(parent: &Path, name: &str, marker: Marker) -> Result<Self, IoError> {
        let single = Path::new(name).components().count() == 1
            && !name.is_empty()
            && !name.starts_with('.')
            && !name.contains(['/', '\\']);
        if !single {
            return Err(IoError::NotOurs {
                path: parent.join(name),
                reason: "an output folder name must be one plain path component".into(),
            });
        }
        let target = parent.join(name);
        check_replaceable(&target)?;
        let tmp = parent.join(format!(".{name}.{}.partial", std::process::id()));
        if tmp.exists() {
            // Only a staging folder of ours (it carries the marker from its start) is removed.
            if !tmp.join(MARKER).is_file() {
                return Err(IoError::NotOurs {
                    path: tmp,
                    reason: format!("is in the way of a staging folder and has no {MARKER}"),
                });
            }
            std::fs::remove_dir_all(&tmp).map_err(|e| IoError::os(&tmp, "cannot remove", e))?;
        }
        std::fs::create_dir_all(&tmp).map_err(|e| IoError::os(&tmp, "cannot create directory", e))?;
        // Marked from the start, so a later run can tell a dead run's staging from a user's folder.
        marker.write(&tmp)?;
        Ok(StagedFolder { tmp, target, marker, committed: false })
    }

    /// Where to write the folder's files now.
    pub fn path(&self) -> &Path {
        &self.tmp
    }

    /// Write the marker and move the folder into place, replacing an earlier
    /// folder of hierax's.
    ///
    /// # Errors
    /// [`IoError`] when the marker cannot be written or a rename fails; the
    /// earlier folder is then left as it was.
    pub fn commit(mut self) -> Result<PathBuf, IoError> {
        self.marker.write(&self.tmp)?;
        if self.target.exists() {
            // Checked again: the folder may have appeared since `begin`.
            check_replaceable(&self.target)?;
            let old = self.tmp.with_extension("old");
            std::fs::rename(&self.target, &old)
                .map_err(|e| IoError::os(&self.target, "cannot move aside", e))?;
            if let Err(e) = std::fs::rename(&self.tmp, &self.target) {
                let _ = std::fs::rename(&old, &self.target);
                return Err(IoError::os(&self.target, "cannot rename into place", e));
            }
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&self.tmp, &self.target)
                .map_err(|e| IoError::os(&self.target, "cannot rename into place", e))?;
        }
        self.committed = true;
        Ok(self.target.clone())
    }
}

impl Drop for StagedFolder {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.tmp);
        }
    }
}

/// Write a command's files into the folder `out`, all or nothing: they are
/// assembled in a hidden folder beside `out` and renamed into place, so a
/// failure (a full disk included) leaves `out` as it was. An existing `out`
/// is replaced only when hierax made it.
///
/// # Errors
/// [`IoError::NotOurs`] for a folder hierax did not make or an `out` without
/// a final name (`.`, `/`); the writer's error, with nothing left behind.
pub fn write_folder(
    out: &Path,
    marker: Marker,
    write: impl FnOnce(&Path) -> Result<(), IoError>,
) -> Result<PathBuf, IoError> {
    let name =
        out.file_name().and_then(|n| n.to_str()).filter(|n| *n != "." && *n != "..").ok_or_else(|| {
            IoError::NotOurs {
                path: out.to_path_buf(),
                reason: "expected an output folder with a name of its own".into(),
            }
        })?;
    let parent = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    std::fs::create_dir_all(&parent).map_err(|e| IoError::os(&parent, "cannot create directory", e))?;
    let staged = StagedFolder::begin(&parent, name, marker)?;
    write(staged.path())?;
    staged.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_marked_folders_are_replaced() {
        let dir = tempfile::tempdir().unwrap();
        let victim = dir.path().join("sub-01");
        std::fs::create_dir(&victim).unwrap();
        std::fs::write(victim.join("bold.npy"), b"precious").unwrap();
        let m = Marker::new("subject", &serde_json::json!({}), &[]);
        let e = StagedFolder::begin(dir.path(), "sub-01", m.clone()).unwrap_err().to_string();
        assert!(e.contains("not written by hierax"), "{e}");
        assert_eq!(std::fs::read(victim.join("bold.npy")).unwrap(), b"precious");
        // A folder hierax made is replaced whole.
        let s = StagedFolder::begin(dir.path(), "sub-02", m.clone()).unwrap();
        std::fs::write(s.path().join("a.csv"), b"1").unwrap();
        let p = s.commit().unwrap();
        let s = StagedFolder::begin(dir.path(), "sub-02", m.clone()).unwrap();
        std::fs::write(s.path().join("b.csv"), b"2").unwrap();
        s.commit().unwrap();
        assert!(!p.join("a.csv").exists() && p.join("b.csv").exists() && p.join(MARKER).exists());
        // Names that could leave the parent are refused.
        for bad in ["..", "../x", "", ".hidden", "a/b"] {
            assert!(StagedFolder::begin(dir.path(), bad, m.clone()).is_err(), "{bad}");
        }
        // A dropped staging folder leaves nothing.
        let s = StagedFolder::begin(dir.path(), "sub-03", m).unwrap();
        let tmp = s.path().to_path_buf();
        drop(s);
        assert!(!tmp.exists() && !dir.path().join("sub-03").exists());
    }

    #[test]
    fn a_root_with_foreign_files_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("participants.tsv"), b"x").unwrap();
        let m = Marker::new("cohort", &serde_json::json!({}), &[]);
        assert!(claim_root(dir.path(), &m).is_err());
        let empty = dir.path().join("new");
        claim_root(&empty, &m).unwrap();
        claim_root(&empty, &m).unwrap();
    }
}
