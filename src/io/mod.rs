//! Getting data in and results out.
//!
//! Every input is named by one spec, `PATH[:KEY]`, dispatched on the file
//! extension:
//!
//! | extension            | reader                 | KEY                                  |
//! |----------------------|------------------------|--------------------------------------|
//! | `.csv` `.tsv` `.txt` | [`delimited`]          | optional column name                 |
//! | `.npy`               | [`npy`]                | none                                 |
//! | `.npz`               | [`npy`]                | array name (optional if only one)    |
//! | `.h5` `.hdf5`        | [`hdf5`]               | dataset path (optional if only one)  |
//! | `.mat`               | [`mat`] or [`hdf5`]    | variable (optional if only one)      |
//!
//! A `.mat` file is read as a level-5 MAT-file unless it is an HDF5 file
//! (MATLAB v7.3), which is detected from its signature after the 512-byte
//! user block.
//!
//! Every reader returns a [`LoadedArray`]: the values as `f64` (integers of up
//! to 53 bits and all `f32` values convert exactly), the type they were stored
//! as, and the row and column names when the file carries them. Roles
//! (connectome, series, map) are checked afterwards by [`validate`].
//!
//! Every writer goes through [`atomic`]: the file is written to a temporary
//! path beside the target and renamed only when complete, so a failure never
//! leaves a partial output.

pub mod atomic;
pub mod delimited;
mod error;
pub mod hdf5;
pub mod mat;
pub mod npy;
pub mod provenance;
pub mod table;
pub mod validate;

pub use error::IoError;

use ndarray::{Array1, Array2, ArrayD, Ix1, Ix2};
use serde::Serialize;
use std::fmt;
use std::path::{Path, PathBuf};

/// Extensions the readers understand, lower case, without the dot.
const KNOWN_EXTENSIONS: [&str; 8] = ["csv", "tsv", "txt", "npy", "npz", "h5", "hdf5", "mat"];

/// A parsed input spec `PATH[:KEY]`.
///
/// The key is split off at the first `:` that follows a known extension, so
/// `conn.h5:/dwi/counts`, `sc.mat:SC` and `confounds.tsv:framewise_displacement`
/// all parse, and a path without a key is taken whole.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct InputSpec {
    /// The file.
    pub path: PathBuf,
    /// The dataset, variable, array or column inside it.
    pub key: Option<String>,
}

impl InputSpec {
    /// Parse `PATH[:KEY]`.
    ///
    /// # Errors
    /// [`IoError::Spec`] when the spec is empty, the key is empty, or the path
    /// has no extension hierax reads.
    pub fn parse(spec: &str) -> Result<Self, IoError> {
        let bad = |reason: &str| IoError::Spec { spec: spec.to_string(), reason: reason.to_string() };
        if spec.trim().is_empty() {
            return Err(bad("is empty; expected PATH or PATH:KEY"));
        }
        let lower = spec.to_ascii_lowercase();
        let mut split_at = None;
        for ext in KNOWN_EXTENSIONS {
            let needle = format!(".{ext}:");
            if let Some(pos) = lower.find(&needle) {
                let cut = pos + needle.len() - 1;
                if split_at.is_none_or(|c| cut < c) {
                    split_at = Some(cut);
                }
            }
        }
        let (path, key) = match split_at {
            Some(cut) => {
                let key = &spec[cut + 1..];
                if key.is_empty() {
                    return Err(bad("has an empty KEY after `:`"));
                }
                (PathBuf::from(&spec[..cut]), Some(key.to_string()))
            }
            None => (PathBuf::from(spec), None),
        };
        let parsed = InputSpec { path, key };
        parsed.format()?;
        Ok(parsed)
    }

    /// A spec for `path` with an optional key.
    pub fn new(path: impl Into<PathBuf>, key: Option<&str>) -> Self {
        InputSpec { path: path.into(), key: key.map(str::to_string) }
    }

    /// The reader this spec dispatches to, from the extension.
    ///
    /// # Errors
    /// [`IoError::Spec`] for an extension hierax does not read.
    pub fn format(&self) -> Result<Format, IoError> {
        let ext =
            self.path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).unwrap_or_default();
        Ok(match ext.as_str() {
            "csv" => Format::Delimited(delimited::Separator::Comma),
            "tsv" => Format::Delimited(delimited::Separator::Tab),
            "txt" => Format::Delimited(delimited::Separator::Whitespace),
            "npy" => Format::Npy,
            "npz" => Format::Npz,
            "h5" | "hdf5" => Format::Hdf5,
            "mat" => Format::Mat,
            _ => {
                return Err(IoError::Spec {
                    spec: self.to_string(),
                    reason: format!(
                        "unknown file type `.{ext}`; expected one of .{}",
                        KNOWN_EXTENSIONS.join(", .")
                    ),
                })
            }
        })
    }
}

impl fmt::Display for InputSpec {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.key {
            Some(k) => write!(f, "{}:{}", self.path.display(), k),
            None => write!(f, "{}", self.path.display()),
        }
    }
}

impl std::str::FromStr for InputSpec {
    type Err = IoError;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        InputSpec::parse(s)
    }
}

/// The reader an [`InputSpec`] dispatches to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// CSV, TSV or whitespace-separated text.
    Delimited(delimited::Separator),
    /// NumPy `.npy`.
    Npy,
    /// NumPy `.npz` archive.
    Npz,
    /// HDF5 file.
    Hdf5,
    /// MATLAB `.mat` (level 5, or v7.3 which is HDF5).
    Mat,
}

/// The element type an array was stored as, named as NumPy names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
#[non_exhaustive]
pub enum StoredType {
    /// 64-bit float.
    Float64,
    /// 32-bit float.
    Float32,
    /// Signed integers.
    Int8,
    /// 16-bit signed.
    Int16,
    /// 32-bit signed.
    Int32,
    /// 64-bit signed.
    Int64,
    /// Unsigned integers.
    Uint8,
    /// 16-bit unsigned.
    Uint16,
    /// 32-bit unsigned.
    Uint32,
    /// 64-bit unsigned.
    Uint64,
    /// Boolean / MATLAB logical.
    Bool,
    /// Numbers parsed from text.
    Text,
}

impl fmt::Display for StoredType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = match self {
            StoredType::Float64 => "float64",
            StoredType::Float32 => "float32",
            StoredType::Int8 => "int8",
            StoredType::Int16 => "int16",
            StoredType::Int32 => "int32",
            StoredType::Int64 => "int64",
            StoredType::Uint8 => "uint8",
            StoredType::Uint16 => "uint16",
            StoredType::Uint32 => "uint32",
            StoredType::Uint64 => "uint64",
            StoredType::Bool => "bool",
            StoredType::Text => "text",
        };
        f.write_str(s)
    }
}

/// An array read from a file, before any role-specific validation.
#[derive(Clone, Debug)]
pub struct LoadedArray {
    /// Where it came from.
    pub spec: InputSpec,
    /// The values, in the file's logical (row-major) order.
    pub data: ArrayD<f64>,
    /// The element type in the file.
    pub stored: StoredType,
    /// Whether the file stored it as a sparse matrix.
    pub sparse: bool,
    /// Row names (first text column of a delimited file), if any.
    pub row_names: Option<Vec<String>>,
    /// Column names (header of a delimited file), if any.
    pub col_names: Option<Vec<String>>,
    /// Remarks a user should see, e.g. how many `n/a` cells became NaN.
    pub notes: Vec<String>,
    /// SHA-256 of the whole file, taken while reading it (in the same pass,
    /// or for HDF5 on a second thread; see [`provenance::InputRecord::of_loaded`]).
    pub digest: Option<provenance::FileDigest>,
}

impl LoadedArray {
    /// A loaded array with no names and no notes.
    pub fn new(spec: InputSpec, data: ArrayD<f64>, stored: StoredType) -> Self {
        LoadedArray {
            spec,
            data,
            stored,
            sparse: false,
            row_names: None,
            col_names: None,
            notes: Vec::new(),
            digest: None,
        }
    }

    /// The array as a matrix. A 1-D array becomes one column.
    ///
    /// # Errors
    /// [`IoError::Invalid`] when the array has more than two dimensions.
    pub fn matrix(&self) -> Result<Array2<f64>, IoError> {
        match self.data.ndim() {
            1 => {
                let v = self.data.view().into_dimensionality::<Ix1>().expect("ndim checked");
                Ok(v.to_owned().insert_axis(ndarray::Axis(1)))
            }
            2 => Ok(self.data.view().into_dimensionality::<Ix2>().expect("ndim checked").to_owned()),
            d => Err(IoError::invalid(
                &self.spec,
                "shape",
                format!("expected a 1-D or 2-D array, found {d}-D {:?}", self.data.shape()),
            )),
        }
    }

    /// The array as a matrix, consuming it without copying the values (a
    /// 1-D array becomes one column).
    ///
    /// # Errors
    /// [`IoError::Invalid`] when the array has more than two dimensions.
    pub fn into_matrix(self) -> Result<Array2<f64>, IoError> {
        let spec = self.spec;
        let shape = self.data.shape().to_vec();
        match shape.len() {
            1 => Ok(self
                .data
                .into_dimensionality::<Ix1>()
                .expect("ndim checked")
                .insert_axis(ndarray::Axis(1))),
            2 => Ok(self.data.into_dimensionality::<Ix2>().expect("ndim checked")),
            d => Err(IoError::invalid(
                &spec,
                "shape",
                format!("expected a 1-D or 2-D array, found {d}-D {shape:?}"),
            )),
        }
    }

    /// The array as a vector: a 1-D array, or a matrix with one row or one column.
    ///
    /// # Errors
    /// [`IoError::Invalid`] for any other shape.
    pub fn vector(&self) -> Result<Array1<f64>, IoError> {
        let shape = self.data.shape();
        let non_singleton: Vec<usize> = shape.iter().copied().filter(|&s| s != 1).collect();
        if non_singleton.len() <= 1 {
            Ok(Array1::from_iter(self.data.iter().copied()))
        } else {
            Err(IoError::invalid(
                &self.spec,
                "shape",
                format!("expected one value per region (a vector), found shape {shape:?}"),
            ))
        }
    }
}

/// Region names when no input names them: `region-001`, `region-002`, …
/// (three digits at least, so they sort in order). The one default used by
/// every command and table.
pub fn default_region_names(n: usize) -> Vec<String> {
    (1..=n).map(|i| format!("region-{i:03}")).collect()
}

/// Read the array named by `spec`, dispatching on its extension.
///
/// # Errors
/// Any [`IoError`] of the reader: the file cannot be opened, is not in the
/// format its extension promises, or lacks the key.
pub fn read_array(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    match spec.format()? {
        Format::Delimited(sep) => delimited::read(spec, sep),
        Format::Npy => npy::read_npy_file(spec),
        Format::Npz => npy::read_npz_file(spec),
        Format::Hdf5 => hdf5::read(spec),
        Format::Mat => {
            if hdf5::is_hdf5_file(&spec.path)? {
                hdf5::read(spec)
            } else {
                mat::read(spec)
            }
        }
    }
}

/// Read a whole file into memory, naming it on failure.
pub(crate) fn read_bytes(path: &Path) -> Result<Vec<u8>, IoError> {
    std::fs::read(path).map_err(|e| IoError::os(path, "cannot read", e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_splits_key_after_known_extension() {
        let s = InputSpec::parse("data/conn.h5:/dwi/counts").unwrap();
        assert_eq!(s.path, PathBuf::from("data/conn.h5"));
        assert_eq!(s.key.as_deref(), Some("/dwi/counts"));
        let s = InputSpec::parse("sc.MAT:SC").unwrap();
        assert_eq!(s.key.as_deref(), Some("SC"));
        let s = InputSpec::parse("sub-01_conf.tsv").unwrap();
        assert_eq!(s.key, None);
        assert_eq!(s.to_string(), "sub-01_conf.tsv");
    }

    #[test]
    fn spec_rejects_unknown_extension_and_empty_key() {
        let e = InputSpec::parse("conn.xlsx").unwrap_err().to_string();
        assert!(e.contains("unknown file type `.xlsx`"), "{e}");
        let e = InputSpec::parse("conn.npz:").unwrap_err().to_string();
        assert!(e.contains("empty KEY"), "{e}");
        assert!(InputSpec::parse("  ").is_err());
    }
}
