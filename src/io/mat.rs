//! MATLAB level-5 MAT-files (placeholder; filled in by the MAT-file work of
//! the foundation issue).

use super::{InputSpec, IoError, LoadedArray};

/// Read a variable `file.mat:variable`.
///
/// # Errors
/// Not built yet: always [`IoError::Format`].
pub fn read(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    Err(IoError::format(&spec.path, "the MAT-file reader is not built yet"))
}
