//! HDF5 input and output (placeholder; filled in by the HDF5 work of the
//! foundation issue).

use super::{InputSpec, IoError, LoadedArray};
use std::path::Path;

/// Whether `path` is an HDF5 file: the signature `\x89HDF\r\n\x1a\n` at
/// offset 0 or at a user-block offset 512, 1024, 2048, ... (MATLAB v7.3
/// files have a 512-byte user block).
///
/// # Errors
/// [`IoError::Os`] when the file cannot be read.
pub fn is_hdf5_file(path: &Path) -> Result<bool, IoError> {
    use std::io::{Read, Seek, SeekFrom};
    const SIG: [u8; 8] = [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'];
    let mut f = std::fs::File::open(path).map_err(|e| IoError::os(path, "cannot open", e))?;
    let len = f.metadata().map_err(|e| IoError::os(path, "cannot open", e))?.len();
    let mut offset = 0u64;
    while offset + 8 <= len {
        let mut buf = [0u8; 8];
        f.seek(SeekFrom::Start(offset)).map_err(|e| IoError::os(path, "cannot read", e))?;
        f.read_exact(&mut buf).map_err(|e| IoError::os(path, "cannot read", e))?;
        if buf == SIG {
            return Ok(true);
        }
        offset = if offset == 0 { 512 } else { offset * 2 };
    }
    Ok(false)
}

/// Read a dataset `file.h5:/group/name`.
///
/// # Errors
/// Not built yet: always [`IoError::Format`].
pub fn read(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    Err(IoError::format(&spec.path, "the HDF5 reader is not built yet"))
}
