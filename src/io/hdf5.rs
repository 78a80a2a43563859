//! HDF5 input and output, on the pure-Rust crate `hdf5-pure` (no C library).
//!
//! # Reading
//!
//! [`read`] takes a spec `file.h5:/group/name` and returns the dataset as
//! `f64` values with the type it was stored as. The key may be left out when
//! the file holds exactly one numeric dataset. A leading `/` in the key is
//! optional. Stored types `float64`, `float32`, the 8/16/32/64-bit signed and
//! unsigned integers and h5py's boolean enum are read; every `float32` value
//! and every integer of magnitude up to 2^53 converts to `f64` exactly (a
//! larger integer is rounded to the nearest `f64`, and a note says so).
//! Chunked datasets with the deflate, shuffle, fletcher32, scale-offset and
//! LZF filters are decoded transparently.
//!
//! **MATLAB v7.3 files** (`.mat` files that are HDF5 files behind a 512-byte
//! user block) are read here too. A variable is a dataset at the root named by
//! the key (`sc.mat:SC`); a struct field is `sc.mat:s/field`. MATLAB stores
//! arrays column-major, so the HDF5 dataset of a MATLAB `rows × cols` matrix
//! has shape `cols × rows`. The reader reverses the axes back, so the user gets
//! MATLAB's `rows × cols` (an N-d array gets all its axes reversed). This is
//! done for `.mat` files only: an `.h5` file is returned in its HDF5 (C,
//! row-major) order whatever attributes it carries. MATLAB sparse variables
//! (a group with a `MATLAB_sparse` attribute holding `data`, `ir`, `jc`, i.e.
//! compressed sparse columns) are expanded to a dense matrix and flagged
//! [`LoadedArray::sparse`]. `MATLAB_class` `logical` reads as
//! [`StoredType::Bool`]; `char`, `cell` and empty variables are refused.
//!
//! **Large datasets.** A compressed dataset (or 2-D MATLAB variable) of at
//! least 32 MiB is decoded in row bands on every thread straight into the
//! result, so decompression uses every core and a MATLAB matrix needs no
//! second copy for its axis reversal; the file's SHA-256 is taken on a
//! second thread during the read (see `read_values_banded`). Peak memory is
//! then about 1.1x the decoded matrix (`cargo bench --bench hdf5_read`). One
//! layout is still read whole by `hdf5-pure`, at about 2x: chunks that each
//! span every row.
//!
//! Known limit of `hdf5-pure` 0.47.0 (see [`LATEST_CHUNKED_HINT`]): a chunked
//! dataset with more than one unlimited dimension in a file h5py wrote with
//! `libver="latest"` (a version-2 B-tree chunk index) cannot be read; the
//! error says how to re-create it. Every other layout h5py writes, at every
//! `libver`, reads.
//!
//! # Writing
//!
//! The per-subject output file is described with this module's own small tree
//! ([`Group`], [`Dataset`], [`DataValue`], [`AttrValue`]), so no other module
//! touches `hdf5-pure`. [`write_file`] builds the whole file in memory and
//! writes it through [`crate::io::atomic::write_bytes_atomic`], so a failure
//! never leaves a partial file. Conventions of the written file:
//!
//! - numbers are little-endian `float64` / `int64`, arrays in C (row-major)
//!   order, so h5py and pandas see the shapes hierax reports. MATLAB's
//!   `h5read` returns the transpose (it is column-major), as it does for
//!   every C-order HDF5 file;
//! - text (datasets and attributes) is variable-length UTF-8, which h5py
//!   decodes to `str` (fixed-length text would arrive as `bytes`) and
//!   MATLAB's `h5read`/`h5readatt` to `char`/cell. `hdf5-pure` gives each
//!   text attribute or dataset its own global-heap collection of at least
//!   4 KiB, so each costs about 4 KiB of file;
//! - numeric datasets of at least [`WriteOptions::compress_min_bytes`] bytes
//!   are chunked and compressed with shuffle + deflate (gzip), built-in HDF5
//!   filters every reader has. `hdf5-pure` writes chunked datasets only in the
//!   HDF5 1.10 file format, which is the default here (readable by HDF5 ≥ 1.10,
//!   h5py, MATLAB R2021b and later); [`WriteOptions::hdf5_1_8_format`] writes
//!   the 1.8 format, uncompressed, for older MATLAB releases.
//! - a table ([`Group::add_table`]) is a group holding one 1-D dataset per
//!   column and a `columns` attribute giving their order; in pandas:
//!   `pd.DataFrame({c: g[c][()] for c in g.attrs["columns"]})` (decode text
//!   columns with `.asstr()`).

use super::provenance::Provenance;
use super::table::{Column, Table};
use super::{InputSpec, IoError, LoadedArray, StoredType};
use hdf5_pure as h5;
use ndarray::{Array2, ArrayD, IxDyn};
use std::fmt;
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

// ---------------------------------------------------------------------------
// Reading
// ---------------------------------------------------------------------------

/// The advice given when a dataset uses the one chunk layout `hdf5-pure`
/// 0.47.0 cannot read: a version-2 B-tree chunk index. HDF5 1.10 and newer
/// give that index to chunked datasets with more than one unlimited dimension
/// (h5py `maxshape=(None, None)`) when the file's lower format bound is 1.10
/// or later (h5py `libver="latest"`, `"v110"`, `"v112"`, `"v114"`). Other
/// chunk indices (fixed array, extensible array, single chunk, implicit,
/// version-1 B-tree) read fine. h5py's `File.copy` keeps the index, so the
/// dataset must be re-created.
pub const LATEST_CHUNKED_HINT: &str = "it is chunked with a version-2 B-tree index (h5py libver=\"latest\" \
     with more than one unlimited dimension), which hdf5-pure 0.47.0 cannot read; re-create it with h5py in \
     a file opened with the default libver or libver=(\"earliest\", \"v114\"), e.g. \
     new.create_dataset(name, data=old[name][()]) (File.copy keeps the unreadable index)";

/// Largest number of elements a MATLAB sparse matrix may expand to (2^28,
/// 2 GiB of `f64`): larger ones are refused rather than exhausting memory.
const MAX_SPARSE_DENSE_ELEMENTS: usize = 1 << 28;

/// One dataset found in a file, for listings and error messages.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct H5DatasetInfo {
    /// Path inside the file: `/group/name` for HDF5 files, the variable name
    /// (`SC`, `s/field`) for MATLAB v7.3 files.
    pub path: String,
    /// Shape as the reader returns it (MATLAB order for `.mat` files).
    pub shape: Vec<usize>,
    /// Element type as a short name (`float64`, `int32`, `string`, `compound`, ...).
    pub dtype: String,
    /// The stored type when the dataset is numeric (readable by [`read`]).
    pub stored: Option<StoredType>,
    /// A MATLAB sparse matrix (a `data`/`ir`/`jc` group).
    pub sparse: bool,
}

impl H5DatasetInfo {
    /// Whether [`read`] can return this dataset.
    pub fn numeric(&self) -> bool {
        self.stored.is_some()
    }
}

impl fmt::Display for H5DatasetInfo {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let shape = if self.shape.is_empty() {
            "scalar".to_string()
        } else {
            self.shape.iter().map(usize::to_string).collect::<Vec<_>>().join("×")
        };
        let sparse = if self.sparse { " sparse" } else { "" };
        write!(f, "{} ({shape}{sparse} {})", self.path, self.dtype)
    }
}

/// Whether the spec's file is read with MATLAB conventions (a `.mat` file).
fn is_matlab(path: &Path) -> bool {
    path.extension().and_then(|e| e.to_str()).is_some_and(|e| e.eq_ignore_ascii_case("mat"))
}

/// Open for reading. The streaming backend fetches metadata and the chunks of
/// the one dataset asked for on demand, so reading one dataset of a large
/// file does not hold the whole file in memory.
fn open(path: &Path) -> Result<h5::File, IoError> {
    h5::File::open_streaming(path).map_err(|e| match e {
        h5::Error::Io(io) => IoError::os(path, "cannot read", io),
        other => IoError::format(path, format!("not a readable HDF5 file: {}", one_line(&other))),
    })
}

/// An `hdf5-pure` error as one line.
fn one_line(e: &impl fmt::Display) -> String {
    e.to_string().split_whitespace().collect::<Vec<_>>().join(" ")
}

/// The simplified datatype as the numeric type hierax reads, if it is one.
fn stored_of(dtype: &h5::DType) -> Option<StoredType> {
    use h5::DType as D;
    Some(match dtype {
        D::F64 => StoredType::Float64,
        D::F32 => StoredType::Float32,
        D::I8 => StoredType::Int8,
        D::I16 => StoredType::Int16,
        D::I32 => StoredType::Int32,
        D::I64 => StoredType::Int64,
        D::U8 => StoredType::Uint8,
        D::U16 => StoredType::Uint16,
        D::U32 => StoredType::Uint32,
        D::U64 => StoredType::Uint64,
        // h5py stores numpy bool as an enum {FALSE = 0, TRUE = 1} over int8.
        D::Enum(names) if is_bool_enum(names) => StoredType::Bool,
        _ => return None,
    })
}

fn is_bool_enum(names: &[String]) -> bool {
    names.len() == 2 && names[0] == "FALSE" && names[1] == "TRUE"
}

fn dtype_name(dtype: &h5::DType) -> String {
    use h5::DType as D;
    match stored_of(dtype) {
        Some(s) => s.to_string(),
        None => match dtype {
            D::String | D::VariableLengthString => "string".into(),
            D::Compound(_) => "compound".into(),
            D::Enum(_) => "enum".into(),
            D::Array(..) => "array".into(),
            D::ObjectReference => "reference".into(),
            _ => "unsupported type".into(),
        },
    }
}

fn to_usize_shape(path: &Path, shape: &[u64]) -> Result<Vec<usize>, IoError> {
    shape
        .iter()
        .map(|&d| {
            usize::try_from(d).map_err(|_| IoError::format(path, format!("dimension {d} is too large")))
        })
        .collect()
}

/// String value of an attribute, any string encoding.
fn attr_str<'a>(attrs: &'a std::collections::HashMap<String, h5::AttrValue>, name: &str) -> Option<&'a str> {
    attrs.get(name).and_then(h5::AttrValue::as_str)
}

fn attr_u64(attrs: &std::collections::HashMap<String, h5::AttrValue>, name: &str) -> Option<u64> {
    attrs.get(name).and_then(|a| a.as_u64().or_else(|| a.as_i64().and_then(|v| u64::try_from(v).ok())))
}

/// Walk the file and describe every dataset (and MATLAB sparse variable).
fn inventory(path: &Path, file: &h5::File) -> Result<Vec<H5DatasetInfo>, IoError> {
    let matlab = is_matlab(path);
    let mut out = Vec::new();
    walk(path, &file.root(), "", matlab, &mut out)?;
    out.sort_by(|a, b| a.path.cmp(&b.path));
    Ok(out)
}

fn walk(
    path: &Path,
    group: &h5::Group,
    prefix: &str,
    matlab: bool,
    out: &mut Vec<H5DatasetInfo>,
) -> Result<(), IoError> {
    let err =
        |e: h5::Error| IoError::format(path, format!("cannot list group `{prefix}/`: {}", one_line(&e)));
    let join = |name: &str| {
        if matlab && prefix.is_empty() {
            name.to_string()
        } else {
            format!("{prefix}/{name}")
        }
    };
    for (name, ds) in group.iter_datasets().map_err(err)? {
        out.push(describe_dataset(path, &ds, join(&name), matlab));
    }
    for (name, sub) in group.iter_groups().map_err(err)? {
        if matlab && name.starts_with('#') {
            // `#refs#` (cell contents) and `#subsystem#` (object data) are
            // MATLAB's bookkeeping, not variables.
            continue;
        }
        let full = join(&name);
        let attrs = sub.attrs().unwrap_or_default();
        if let Some(rows) = attr_u64(&attrs, "MATLAB_sparse") {
            out.push(describe_sparse(&sub, full, rows, &attrs));
        } else {
            walk(path, &sub, &full, matlab, out)?;
        }
    }
    Ok(())
}

fn describe_dataset(path: &Path, ds: &h5::Dataset, full: String, matlab: bool) -> H5DatasetInfo {
    let unreadable = |full: String| H5DatasetInfo {
        path: full,
        shape: Vec::new(),
        dtype: "unreadable".into(),
        stored: None,
        sparse: false,
    };
    let (Ok(dtype), Ok(shape)) = (ds.dtype(), ds.shape()) else {
        return unreadable(full);
    };
    let Ok(mut shape) = to_usize_shape(path, &shape) else {
        return unreadable(full);
    };
    let mut stored = stored_of(&dtype);
    let mut name = dtype_name(&dtype);
    if matlab {
        shape.reverse();
        let attrs = ds.attrs().unwrap_or_default();
        match attr_str(&attrs, "MATLAB_class") {
            Some("logical") if stored.is_some() => {
                stored = Some(StoredType::Bool);
                name = "logical".into();
            }
            Some(class @ ("char" | "cell" | "struct" | "function_handle")) => {
                stored = None;
                name = class.to_string();
            }
            _ => {}
        }
        if attr_u64(&attrs, "MATLAB_empty").is_some_and(|v| v != 0) {
            // An empty MATLAB array stores its dimensions as the data.
            stored = None;
            name = "empty".into();
            shape = vec![0, 0];
        }
    }
    H5DatasetInfo { path: full, shape, dtype: name, stored, sparse: false }
}

fn describe_sparse(
    group: &h5::Group,
    full: String,
    rows: u64,
    attrs: &std::collections::HashMap<String, h5::AttrValue>,
) -> H5DatasetInfo {
    let cols = group.dataset("jc").and_then(|d| d.shape()).ok().and_then(|s| s.first().copied());
    let class = attr_str(attrs, "MATLAB_class").unwrap_or("double");
    let stored = match class {
        "double" => Some(StoredType::Float64),
        "logical" => Some(StoredType::Bool),
        _ => None,
    };
    let data_ok =
        group.dataset("data").ok().and_then(|d| d.dtype().ok()).is_none_or(|d| stored_of(&d).is_some());
    H5DatasetInfo {
        path: full,
        shape: vec![rows as usize, cols.map_or(0, |c| c.saturating_sub(1) as usize)],
        dtype: if data_ok { class.to_string() } else { format!("{class} (complex)") },
        stored: if data_ok { stored } else { None },
        sparse: true,
    }
}

/// Every dataset in an HDF5 or MATLAB v7.3 file, with shape and type, sorted
/// by path (for `hierax inspect`). MATLAB shapes are given in MATLAB's order.
///
/// # Errors
/// [`IoError::Os`] when the file cannot be read; [`IoError::Format`] when it
/// is not a readable HDF5 file.
pub fn list_datasets(path: &Path) -> Result<Vec<H5DatasetInfo>, IoError> {
    let file = open(path)?;
    inventory(path, &file)
}

/// At most this many datasets are named in one error message.
const MAX_LISTED: usize = 40;

/// Datasets for an error message: comma separated, cut after [`MAX_LISTED`].
fn listing(items: &[&H5DatasetInfo]) -> String {
    if items.is_empty() {
        return "nothing".into();
    }
    let mut text = items.iter().take(MAX_LISTED).map(|i| i.to_string()).collect::<Vec<_>>().join(", ");
    if items.len() > MAX_LISTED {
        text.push_str(&format!(" and {} more", items.len() - MAX_LISTED));
    }
    text
}

/// Read a dataset `file.h5:/group/name` (or a MATLAB v7.3 variable
/// `file.mat:name`) as `f64` values in C (row-major) order.
///
/// The key is optional when the file holds exactly one numeric dataset.
/// MATLAB variables are returned in MATLAB's shape (the HDF5 axes reversed,
/// see the module docs) and sparse variables expanded to dense.
///
/// # Errors
/// - [`IoError::Os`] / [`IoError::Format`]: the file cannot be read or is not HDF5;
/// - [`IoError::KeyNeeded`]: no key and several numeric datasets (listed with shape and type);
/// - [`IoError::MissingKey`]: the key names nothing (every dataset is listed);
/// - [`IoError::Format`]: the key names a group, a non-numeric dataset, or a
///   dataset `hdf5-pure` cannot decode (with [`LATEST_CHUNKED_HINT`] for the
///   known `libver="latest"` limitation).
pub fn read(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    // The reader sees only the dataset's bytes, so the file is digested
    // beside it, on another thread, instead of in a second pass afterwards.
    std::thread::scope(|s| {
        let digest = s.spawn(|| super::provenance::sha256_file(&spec.path));
        let read = read_values_of(spec);
        let digest = digest.join().unwrap_or_else(|p| std::panic::resume_unwind(p));
        let mut out = read?;
        let (sha256, bytes) = digest?;
        out.digest = Some(super::provenance::FileDigest { sha256, bytes });
        Ok(out)
    })
}

/// [`read`] without the digest.
fn read_values_of(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    let path = spec.path.as_path();
    let matlab = is_matlab(path);
    let file = open(path)?;
    let items = inventory(path, &file)?;
    let kind = if matlab { "variable" } else { "dataset" };
    let info = match &spec.key {
        Some(key) => {
            let want = normalise_key(key, matlab);
            match items.iter().find(|i| i.path == want) {
                Some(i) => i,
                None => {
                    if file.group(want.trim_start_matches('/')).is_ok() {
                        let inside: Vec<&H5DatasetInfo> = items
                            .iter()
                            .filter(|i| i.path.starts_with(&format!("{}/", want.trim_end_matches('/'))))
                            .collect();
                        return Err(IoError::format(
                            path,
                            format!("`{key}` is a group, not a {kind}; it holds: {}", listing(&inside)),
                        ));
                    }
                    return Err(IoError::MissingKey {
                        path: path.to_path_buf(),
                        kind,
                        key: key.clone(),
                        available: listing(&items.iter().collect::<Vec<_>>()),
                    });
                }
            }
        }
        None => {
            let numeric: Vec<&H5DatasetInfo> = items.iter().filter(|i| i.numeric()).collect();
            match numeric.as_slice() {
                [one] => *one,
                [] => {
                    return Err(IoError::format(
                        path,
                        format!(
                            "holds no numeric {kind}; found: {}",
                            listing(&items.iter().collect::<Vec<_>>())
                        ),
                    ))
                }
                _ => {
                    return Err(IoError::KeyNeeded {
                        path: path.to_path_buf(),
                        kind,
                        available: listing(&numeric),
                    })
                }
            }
        }
    };
    let Some(stored) = info.stored else {
        return Err(IoError::format(
            path,
            format!("{kind} `{}` holds {} values; expected numbers", info.path, info.dtype),
        ));
    };
    let h5_path = info.path.trim_start_matches('/');
    let mut notes = Vec::new();
    let data = if info.sparse {
        let g = file
            .group(h5_path)
            .map_err(|e| IoError::format(path, format!("{kind} `{}`: {}", info.path, one_line(&e))))?;
        read_sparse(path, &info.path, &g)?
    } else {
        let ds = file
            .dataset(h5_path)
            .map_err(|e| IoError::format(path, format!("{kind} `{}`: {}", info.path, one_line(&e))))?;
        check_declared_size(path, &info.path, &ds)?;
        let raw_shape = to_usize_shape(path, &ds.shape().map_err(|e| read_err(path, &info.path, &ds, &e))?)?;
        // A MATLAB matrix is decoded straight into MATLAB's (transposed) order.
        let transposed = matlab && raw_shape.len() == 2;
        let (values, note, shape) = match read_values_banded(path, &info.path, &ds, &raw_shape, transposed)? {
            Some((v, note)) if transposed => (v, note, vec![raw_shape[1], raw_shape[0]]),
            Some((v, note)) => (v, note, raw_shape.clone()),
            None => {
                let (v, note) = read_values(path, &info.path, &ds)?;
                (v, note, raw_shape.clone())
            }
        };
        notes.extend(note);
        let arr = ArrayD::from_shape_vec(IxDyn(&shape), values).map_err(|_| {
            IoError::format(
                path,
                format!("{kind} `{}`: value count does not match shape {shape:?}", info.path),
            )
        })?;
        if matlab && shape == raw_shape {
            // Column-major MATLAB array: reverse the axes to MATLAB's shape.
            arr.reversed_axes().as_standard_layout().into_owned()
        } else {
            arr
        }
    };
    let mut out = LoadedArray::new(spec.clone(), data, stored);
    out.sparse = info.sparse;
    if spec.key.is_none() {
        notes.push(format!("read {kind} `{}`, the only numeric one in the file", info.path));
    }
    out.notes = notes;
    Ok(out)
}

fn normalise_key(key: &str, matlab: bool) -> String {
    let k = key.trim_matches('/');
    if matlab {
        k.to_string()
    } else {
        format!("/{k}")
    }
}

/// A read error for dataset `name`, with the re-save advice when it is the
/// known limitation of `hdf5-pure` 0.47.0 (see [`LATEST_CHUNKED_HINT`]).
fn read_err(path: &Path, name: &str, ds: &h5::Dataset, e: &h5::Error) -> IoError {
    if matches!(ds.layout(), Ok(h5::Layout::Chunked { index: h5::ChunkIndex::BTreeV2, .. })) {
        return IoError::format(path, format!("dataset `{name}`: {LATEST_CHUNKED_HINT}"));
    }
    IoError::format(path, format!("dataset `{name}`: cannot read its values: {}", one_line(e)))
}

const EXACT_INT: u64 = 1 << 53;

/// Refuse a dataset whose declared shape needs more memory than the file
/// could hold: more than [`MAX_EXPANSION`] bytes of float64 per byte of file
/// (deflate's largest ratio is about 1032:1; unallocated chunks read as fill
/// values, so a tiny corrupt file can otherwise declare terabytes and abort
/// the process before any read fails).
fn check_declared_size(path: &Path, name: &str, ds: &h5::Dataset) -> Result<(), IoError> {
    let shape = ds.shape().map_err(|e| read_err(path, name, ds, &e))?;
    let elements = shape.iter().try_fold(1u64, |acc, &d| acc.checked_mul(d));
    let file_bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    let limit = file_bytes.saturating_mul(MAX_EXPANSION).max(1 << 20);
    match elements.and_then(|n| n.checked_mul(8)) {
        Some(bytes) if bytes <= limit => Ok(()),
        _ => Err(IoError::format(
            path,
            format!(
                "dataset `{name}` declares shape {shape:?}, more than a {file_bytes}-byte file can hold; the file is \
                 corrupt"
            ),
        )),
    }
}

/// Bytes of decoded float64 allowed per byte of an HDF5 file (deflate's
/// largest expansion, about 1032:1, rounded up).
const MAX_EXPANSION: u64 = 1100;

/// Decoded values, flat, with the note on rounded integers if any.
type Decoded = (Vec<f64>, Option<String>);

/// The values of a numeric dataset as `f64`, flat, in stored order, with a
/// note when integers beyond 2^53 had to be rounded.
fn read_values(path: &Path, name: &str, ds: &h5::Dataset) -> Result<Decoded, IoError> {
    let e = |err: h5::Error| read_err(path, name, ds, &err);
    let dtype = ds.dtype().map_err(e)?;
    let Some(decode) = Decode::of(&dtype) else {
        return Err(IoError::format(
            path,
            format!("dataset `{name}` holds {} values; expected numbers", dtype_name(&dtype)),
        ));
    };
    let (values, rounded) = decode.read(ds, None).map_err(e)?;
    Ok((values, rounded_note(name, rounded)))
}

/// The note for `n` integers of dataset `name` rounded to float64, if any.
fn rounded_note(name: &str, n: usize) -> Option<String> {
    (n > 0).then(|| {
        format!("{n} integer values of `{name}` exceed 2^53 and were rounded to the nearest float64")
    })
}

/// Datasets of at least this many decoded bytes are read in row bands, one
/// band per thread (see [`read_values_banded`]). Below it a whole read is
/// fast and its second copy small. Our choice.
const BANDED_READ_MIN_BYTES: usize = 32 << 20;

/// Decoded bytes per window within a band: large enough that the per-read
/// overhead of `hdf5-pure` vanishes, small enough to stay in cache. Our choice.
const BANDED_WINDOW_BYTES: usize = 2 << 20;

/// How a numeric stored type decodes to `f64` in a row window.
#[derive(Clone, Copy)]
enum Decode {
    F64,
    F32,
    Signed,
    Unsigned,
    Bool,
}

impl Decode {
    /// The decoding of a stored type ([`stored_of`] classifies the HDF5 type once).
    fn of(dtype: &h5::DType) -> Option<Decode> {
        use StoredType as S;
        Some(match stored_of(dtype)? {
            S::Float64 => Decode::F64,
            S::Float32 => Decode::F32,
            S::Int8 | S::Int16 | S::Int32 | S::Int64 => Decode::Signed,
            S::Uint8 | S::Uint16 | S::Uint32 | S::Uint64 => Decode::Unsigned,
            S::Bool => Decode::Bool,
            _ => return None,
        })
    }

    /// The values of `ds` as `f64`, all of them or the row window
    /// `(start, count)`, and how many integers beyond 2^53 were rounded.
    fn read(self, ds: &h5::Dataset, rows: Option<(u64, u64)>) -> Result<(Vec<f64>, usize), h5::Error> {
        let widen = |v: Vec<i64>| {
            let big = v.iter().filter(|x| x.unsigned_abs() > EXACT_INT).count();
            (v.into_iter().map(|x| x as f64).collect(), big)
        };
        Ok(match (self, rows) {
            (Decode::F64, None) => (ds.read_f64()?, 0),
            (Decode::F64, Some((s, c))) => (ds.read_f64_rows(s, c)?, 0),
            (Decode::F32, None) => (ds.read_f32()?.into_iter().map(f64::from).collect(), 0),
            (Decode::F32, Some((s, c))) => (ds.read_f32_rows(s, c)?.into_iter().map(f64::from).collect(), 0),
            (Decode::Signed, None) => widen(ds.read_i64()?),
            (Decode::Signed, Some((s, c))) => widen(ds.read_i64_rows(s, c)?),
            (Decode::Unsigned, _) => {
                let v = match rows {
                    None => ds.read_u64()?,
                    Some((s, c)) => ds.read_u64_rows(s, c)?,
                };
                let big = v.iter().filter(|&&x| x > EXACT_INT).count();
                (v.into_iter().map(|x| x as f64).collect(), big)
            }
            (Decode::Bool, _) => {
                // hdf5-pure decodes an enum through its integer base: FALSE = 0, TRUE = 1.
                let v = match rows {
                    None => ds.read_i64()?,
                    Some((s, c)) => ds.read_i64_rows(s, c)?,
                };
                (v.into_iter().map(|x| if x != 0 { 1.0 } else { 0.0 }).collect(), 0)
            }
        })
    }

    /// Decode rows `[start, start + count)` of `ds` into `out` (exactly that
    /// many values); the number of integers beyond 2^53 that were rounded.
    fn rows_into(
        self,
        (path, name, ds): (&Path, &str, &h5::Dataset),
        start: u64,
        count: u64,
        out: &mut [f64],
    ) -> Result<usize, IoError> {
        let (v, rounded) =
            self.read(ds, Some((start, count))).map_err(|err| read_err(path, name, ds, &err))?;
        if v.len() != out.len() {
            return Err(IoError::format(
                path,
                format!(
                    "dataset `{name}`: rows {start}..{} decoded to {} values, expected {}",
                    start + count,
                    v.len(),
                    out.len()
                ),
            ));
        }
        out.copy_from_slice(&v);
        Ok(rounded)
    }
}

/// The values of a large dataset read in row bands on every core, when
/// that beats [`read_values`]: the output is allocated once and each thread,
/// with its own handle on the file, decodes its band window by window, so
/// decompression, the costly part of reading a compressed dataset, is spread
/// over the threads (1,200 x 91,282 float64 in h5py's gzip-1 chunks:
/// 2.6-2.7 s against 3.8-4.1 s whole, 2 threads), and peak memory is the
/// output plus a few windows.
///
/// With `transposed` (a 2-D MATLAB variable, stored column-major) the rows
/// are placed as the columns of the result, which is then MATLAB's
/// `cols × rows` of the stored shape in row-major order: the reversal of
/// axes needs no second copy of the matrix.
///
/// Bands and windows are whole multiples of the chunks' extent along the
/// first axis, so no chunk is decoded twice. `None` when banding does not
/// apply, and the caller reads the dataset whole: an unfiltered dataset
/// kept as stored (its whole read is already windowed, one copy, and bound
/// by I/O; banding measured no faster), one under [`BANDED_READ_MIN_BYTES`],
/// of rank 0, or chunked with fewer than two chunks along the first axis
/// (each window would decode every chunk again). `hdf5-pure` 0.47.0 reads
/// that last kind whole, holding its stored bytes beside the decoded values
/// (about 2x).
fn read_values_banded(
    path: &Path,
    name: &str,
    ds: &h5::Dataset,
    shape: &[usize],
    transposed: bool,
) -> Result<Option<Decoded>, IoError> {
    read_values_banded_by(path, name, ds, shape, transposed, (BANDED_READ_MIN_BYTES, BANDED_WINDOW_BYTES))
}

/// [`read_values_banded`] with its two sizes given (tests use small ones).
fn read_values_banded_by(
    path: &Path,
    name: &str,
    ds: &h5::Dataset,
    shape: &[usize],
    transposed: bool,
    (min_bytes, window_bytes): (usize, usize),
) -> Result<Option<Decoded>, IoError> {
    use rayon::prelude::*;
    let e = |err: h5::Error| read_err(path, name, ds, &err);
    let Some(decode) = Decode::of(&ds.dtype().map_err(e)?) else {
        return Ok(None);
    };
    let Some((&rows, inner)) = shape.split_first() else {
        return Ok(None);
    };
    let row_len: usize = inner.iter().product();
    let total = rows.saturating_mul(row_len);
    let band = match ds.chunk_shape().map_err(e)? {
        Some(c) => c.first().and_then(|&b| usize::try_from(b).ok()).unwrap_or(1).max(1),
        None => 1,
    };
    let worth = transposed || !ds.filter_pipeline().is_empty();
    if !worth || total.saturating_mul(8) < min_bytes || row_len == 0 || rows < 2 * band {
        return Ok(None);
    }
    let window = (window_bytes / (8 * row_len)).max(1).div_ceil(band) * band;
    let parts = rayon::current_num_threads().clamp(1, rows / band);
    let part_rows = rows.div_ceil(parts).div_ceil(band) * band;
    let mut values = Vec::new();
    values.try_reserve_exact(total).map_err(|_| {
        IoError::format(path, format!("dataset `{name}`: cannot allocate {total} values of shape {shape:?}"))
    })?;
    values.resize(total, 0.0);
    let h5_path = name.trim_start_matches('/');
    // A handle per thread: the streaming reader holds a file cursor.
    let reopen = || -> Result<_, IoError> {
        let file = open(path)?;
        let ds = file.dataset(h5_path).map_err(|err| IoError::format(path, one_line(&err)))?;
        Ok(ds)
    };
    let rounded = if transposed {
        let rows_into = |ds: &h5::Dataset, start: usize, count: usize, out: &mut [f64]| {
            decode.rows_into((path, name, ds), start as u64, count as u64, out)
        };
        read_bands_transposed(&mut values, (rows, row_len), (part_rows, window), &reopen, &rows_into)?
    } else {
        let per_part: Vec<usize> = values
            .par_chunks_mut(part_rows * row_len)
            .enumerate()
            .map(|(p, part)| {
                let ds = reopen()?;
                let mut rounded = 0;
                for (w, out) in part.chunks_mut(window * row_len).enumerate() {
                    let start = p * part_rows + w * window;
                    let count = out.len() / row_len;
                    rounded += decode.rows_into((path, name, &ds), start as u64, count as u64, out)?;
                }
                Ok(rounded)
            })
            .collect::<Result<_, IoError>>()?;
        per_part.iter().sum()
    };
    Ok(Some((values, rounded_note(name, rounded))))
}

/// The per-thread dataset handle and window decoder of a banded read.
type Reopen<'a> = dyn Fn() -> Result<h5::Dataset, IoError> + Sync + 'a;
type RowsInto<'a> = dyn Fn(&h5::Dataset, usize, usize, &mut [f64]) -> Result<usize, IoError> + Sync + 'a;

/// The transposed arm of [`read_values_banded_by`]: one thread per band of
/// `part_rows` stored rows decodes it window by window and hands each window
/// over a bounded channel (so at most about two windows per thread stand
/// beside the output); this thread places stored row `r` of the
/// `rows × row_len` dataset as column `r` of `out` (`row_len × rows`,
/// row-major). Returns the rounded-integer count.
fn read_bands_transposed(
    out: &mut [f64],
    (rows, row_len): (usize, usize),
    (part_rows, window): (usize, usize),
    reopen: &Reopen<'_>,
    rows_into: &RowsInto<'_>,
) -> Result<usize, IoError> {
    let parts = rows.div_ceil(part_rows);
    std::thread::scope(|s| {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Result<(usize, Vec<f64>, usize), IoError>>(parts);
        for p in 0..parts {
            let tx = tx.clone();
            s.spawn(move || {
                let run = || -> Result<(), IoError> {
                    let ds = reopen()?;
                    let end = ((p + 1) * part_rows).min(rows);
                    let mut start = p * part_rows;
                    while start < end {
                        let count = window.min(end - start);
                        let mut buf = vec![0.0; count * row_len];
                        let rounded = rows_into(&ds, start, count, &mut buf)?;
                        if tx.send(Ok((start, buf, rounded))).is_err() {
                            return Ok(()); // the receiver stopped at an error
                        }
                        start += count;
                    }
                    Ok(())
                };
                if let Err(e) = run() {
                    let _ = tx.send(Err(e));
                }
            });
        }
        drop(tx);
        let mut rounded = 0;
        for window in rx {
            let (start, buf, r) = window?;
            rounded += r;
            let count = buf.len() / row_len;
            // Each output row takes a contiguous run of `count` values.
            for (j, dst) in out.chunks_mut(rows).enumerate() {
                for (i, d) in dst[start..start + count].iter_mut().enumerate() {
                    *d = buf[i * row_len + j];
                }
            }
        }
        Ok(rounded)
    })
}

fn read_index(path: &Path, name: &str, g: &h5::Group, member: &str) -> Result<Vec<u64>, IoError> {
    match g.dataset(member) {
        Ok(ds) => ds.read_u64().map_err(|e| read_err(path, &format!("{name}/{member}"), &ds, &e)),
        Err(e) => {
            Err(IoError::format(path, format!("sparse variable `{name}`: no `{member}`: {}", one_line(&e))))
        }
    }
}

/// Expand a MATLAB sparse variable (compressed sparse columns: `jc` column
/// pointers of length cols + 1, `ir` 0-based row indices, `data` values;
/// rows from the `MATLAB_sparse` attribute) to a dense `rows × cols` matrix.
fn read_sparse(path: &Path, name: &str, g: &h5::Group) -> Result<ArrayD<f64>, IoError> {
    let bad = |what: String| IoError::format(path, format!("sparse variable `{name}`: {what}"));
    let attrs = g.attrs().map_err(|e| bad(one_line(&e)))?;
    let rows = attr_u64(&attrs, "MATLAB_sparse").ok_or_else(|| bad("no MATLAB_sparse attribute".into()))?;
    let rows = usize::try_from(rows).map_err(|_| bad(format!("row count {rows} is too large")))?;
    let jc = read_index(path, name, g, "jc")?;
    let cols = jc.len().checked_sub(1).ok_or_else(|| bad("`jc` is empty".into()))?;
    let nnz = jc[cols] as usize;
    // MATLAB omits `ir` and `data` for an all-zero sparse matrix.
    let (ir, data) = if nnz == 0 && g.dataset("ir").is_err() {
        (Vec::new(), Vec::new())
    } else {
        let ds = g.dataset("data").map_err(|e| bad(format!("no `data`: {}", one_line(&e))))?;
        (read_index(path, name, g, "ir")?, read_values(path, &format!("{name}/data"), &ds)?.0)
    };
    if ir.len() != nnz || data.len() != nnz {
        return Err(bad(format!(
            "`jc` ends at {nnz} but `ir` has {} and `data` {} entries",
            ir.len(),
            data.len()
        )));
    }
    let total = rows.checked_mul(cols).filter(|&t| t <= MAX_SPARSE_DENSE_ELEMENTS).ok_or_else(|| {
        bad(format!("{rows}×{cols} is too large to expand to a dense matrix (limit {MAX_SPARSE_DENSE_ELEMENTS} entries)"))
    })?;
    let mut dense = vec![0.0; total];
    for j in 0..cols {
        let (a, b) = (jc[j] as usize, jc[j + 1] as usize);
        if a > b || b > nnz {
            return Err(bad(format!("`jc` must be non-decreasing up to {nnz}; column {j} spans {a}..{b}")));
        }
        for k in a..b {
            let i = ir[k] as usize;
            if i >= rows {
                return Err(bad(format!("row index {i} in `ir` is outside 0..{rows}")));
            }
            dense[i * cols + j] = data[k];
        }
    }
    ArrayD::from_shape_vec(IxDyn(&[rows, cols]), dense).map_err(|_| bad("inconsistent shape".into()))
}

// ---------------------------------------------------------------------------
// Writing: hierax's own tree, turned into an HDF5 file in one go.
// ---------------------------------------------------------------------------

/// An attribute value. Written as little-endian `float64` / `int64` scalars
/// or 1-D arrays, and variable-length UTF-8 strings.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum AttrValue {
    /// A float.
    F64(f64),
    /// An integer.
    I64(i64),
    /// A text value.
    Str(String),
    /// A 1-D array of floats.
    F64List(Vec<f64>),
    /// A 1-D array of integers.
    I64List(Vec<i64>),
    /// A 1-D array of text values.
    StrList(Vec<String>),
}

/// The values of a dataset: row-major (C order) numbers with their shape, or
/// a 1-D array of text values.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum DataValue {
    /// `float64` values; `shape` may be empty for a scalar.
    F64 {
        /// Dimensions; their product must equal `data.len()`.
        shape: Vec<usize>,
        /// Values in row-major order.
        data: Vec<f64>,
    },
    /// `int64` values.
    I64 {
        /// Dimensions; their product must equal `data.len()`.
        shape: Vec<usize>,
        /// Values in row-major order.
        data: Vec<i64>,
    },
    /// A 1-D array of variable-length UTF-8 strings.
    Str(Vec<String>),
}

impl DataValue {
    /// The shape: as given for numbers, `[n]` for text.
    pub fn shape(&self) -> Vec<usize> {
        match self {
            DataValue::F64 { shape, .. } | DataValue::I64 { shape, .. } => shape.clone(),
            DataValue::Str(v) => vec![v.len()],
        }
    }
}

/// A dataset of a [`Group`]: a name, values and attributes.
#[derive(Clone, Debug, PartialEq)]
pub struct Dataset {
    name: String,
    value: DataValue,
    attrs: Vec<(String, AttrValue)>,
}

impl Dataset {
    /// Set (or replace) an attribute.
    pub fn set_attr(&mut self, name: &str, value: AttrValue) -> &mut Self {
        set_attr_in(&mut self.attrs, name, value);
        self
    }
    /// The dataset's name within its group.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// The values.
    pub fn value(&self) -> &DataValue {
        &self.value
    }
    /// The attributes in the order they were set.
    pub fn attrs(&self) -> &[(String, AttrValue)] {
        &self.attrs
    }
    /// The attribute called `name`.
    pub fn attr(&self, name: &str) -> Option<&AttrValue> {
        self.attrs.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }
}

fn set_attr_in(attrs: &mut Vec<(String, AttrValue)>, name: &str, value: AttrValue) {
    match attrs.iter_mut().find(|(n, _)| n == name) {
        Some(slot) => slot.1 = value,
        None => attrs.push((name.to_string(), value)),
    }
}

/// A group of an output file: attributes, datasets and subgroups, in the
/// order they were added. The root of a file is a group whose name is ignored.
#[derive(Clone, Debug, PartialEq)]
pub struct Group {
    name: String,
    attrs: Vec<(String, AttrValue)>,
    datasets: Vec<Dataset>,
    groups: Vec<Group>,
}

impl Group {
    /// An empty group called `name`.
    pub fn new(name: &str) -> Self {
        Group { name: name.to_string(), attrs: Vec::new(), datasets: Vec::new(), groups: Vec::new() }
    }

    /// The group's name within its parent.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Set (or replace) an attribute.
    pub fn set_attr(&mut self, name: &str, value: AttrValue) -> &mut Self {
        set_attr_in(&mut self.attrs, name, value);
        self
    }

    /// The attributes in the order they were set.
    pub fn attrs(&self) -> &[(String, AttrValue)] {
        &self.attrs
    }

    /// The attribute called `name`.
    pub fn attr(&self, name: &str) -> Option<&AttrValue> {
        self.attrs.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }

    /// The datasets directly in this group.
    pub fn datasets(&self) -> &[Dataset] {
        &self.datasets
    }

    /// The subgroups directly in this group.
    pub fn groups(&self) -> &[Group] {
        &self.groups
    }

    /// The dataset called `name` directly in this group.
    pub fn dataset(&self, name: &str) -> Option<&Dataset> {
        self.datasets.iter().find(|d| d.name == name)
    }

    /// The subgroup called `name` directly in this group.
    pub fn group(&self, name: &str) -> Option<&Group> {
        self.groups.iter().find(|g| g.name == name)
    }

    /// Add (or replace) a dataset and return it for attributes.
    pub fn add_dataset(&mut self, name: &str, value: DataValue) -> &mut Dataset {
        let ds = Dataset { name: name.to_string(), value, attrs: Vec::new() };
        match self.datasets.iter().position(|d| d.name == name) {
            Some(i) => {
                self.datasets[i] = ds;
                &mut self.datasets[i]
            }
            None => {
                self.datasets.push(ds);
                self.datasets.last_mut().expect("just pushed")
            }
        }
    }

    /// Add a matrix as a `rows × cols` `float64` dataset (C order, so h5py
    /// and numpy see `rows × cols`; MATLAB's `h5read` sees the transpose).
    pub fn add_matrix(&mut self, name: &str, m: &Array2<f64>) -> &mut Dataset {
        let shape = vec![m.nrows(), m.ncols()];
        // `iter` walks in logical row-major order whatever the memory layout.
        self.add_dataset(name, DataValue::F64 { shape, data: m.iter().copied().collect() })
    }

    /// Add a 1-D `float64` dataset.
    pub fn add_vector(&mut self, name: &str, v: &[f64]) -> &mut Dataset {
        self.add_dataset(name, DataValue::F64 { shape: vec![v.len()], data: v.to_vec() })
    }

    /// Add (or replace) a subgroup and return it.
    pub fn add_group(&mut self, group: Group) -> &mut Group {
        match self.groups.iter().position(|g| g.name == group.name) {
            Some(i) => {
                self.groups[i] = group;
                &mut self.groups[i]
            }
            None => {
                self.groups.push(group);
                self.groups.last_mut().expect("just pushed")
            }
        }
    }

    /// Add a table as a subgroup `name` holding one 1-D dataset per column
    /// (`float64`, `int64` or UTF-8 text) and a `columns` attribute listing
    /// the column names in order, so that pandas can rebuild it:
    /// `pd.DataFrame({c: g[c][()] for c in g.attrs["columns"]})`.
    pub fn add_table(&mut self, name: &str, table: &Table) -> &mut Group {
        let mut g = Group::new(name);
        let names: Vec<String> = table.names().iter().map(|s| s.to_string()).collect();
        for col in &names {
            let value = match table.column(col) {
                Some(Column::F64(v)) => DataValue::F64 { shape: vec![v.len()], data: v.clone() },
                Some(Column::I64(v)) => DataValue::I64 { shape: vec![v.len()], data: v.clone() },
                Some(Column::Str(v)) => DataValue::Str(v.clone()),
                Some(Column::OptI64(v)) => DataValue::F64 {
                    shape: vec![v.len()],
                    data: v.iter().map(|x| x.map_or(f64::NAN, |x| x as f64)).collect(),
                },
                None => continue,
            };
            g.add_dataset(col, value);
        }
        g.set_attr("columns", AttrValue::StrList(names));
        g.set_attr("n_rows", AttrValue::I64(table.n_rows() as i64));
        self.add_group(g)
    }

    /// Write the provenance record as attributes: `hierax_version`,
    /// `command`, `created_utc`, `notice`, `parameters_json` (the parameters
    /// as JSON text), and the parallel string lists `input_specs`,
    /// `input_roles`, `input_sha256`.
    pub fn set_provenance(&mut self, p: &Provenance) -> &mut Self {
        let list = |f: fn(&super::provenance::InputRecord) -> &String| {
            AttrValue::StrList(p.inputs.iter().map(|r| f(r).clone()).collect())
        };
        self.set_attr("hierax_version", AttrValue::Str(p.version.to_string()));
        self.set_attr("command", AttrValue::Str(p.command.clone()));
        self.set_attr("created_utc", AttrValue::Str(p.created_utc.clone()));
        self.set_attr("notice", AttrValue::Str(p.notice.to_string()));
        self.set_attr("parameters_json", AttrValue::Str(p.parameters.to_string()));
        self.set_attr("input_specs", list(|r| &r.spec));
        self.set_attr("input_roles", list(|r| &r.role));
        self.set_attr("input_sha256", list(|r| &r.sha256));
        self
    }
}

/// How [`write_file_with`] lays the file out.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub struct WriteOptions {
    /// Numeric datasets of at least this many bytes are chunked and
    /// compressed (shuffle + deflate); `None` writes everything contiguous.
    /// Default 64 KiB: smaller datasets gain little and stay simplest to read.
    pub compress_min_bytes: Option<usize>,
    /// Deflate level 1–9; default 4, a common speed/size compromise (no source).
    pub deflate_level: u32,
    /// Write the HDF5 1.8 file format (version 2 superblock) instead of 1.10,
    /// for MATLAB releases before R2021b. `hdf5-pure` writes chunked datasets
    /// only in the 1.10 format, so this turns compression off.
    pub hdf5_1_8_format: bool,
}

impl Default for WriteOptions {
    fn default() -> Self {
        WriteOptions { compress_min_bytes: Some(64 * 1024), deflate_level: 4, hdf5_1_8_format: false }
    }
}

/// Write `root` to `path` with [`WriteOptions::default`], atomically.
///
/// # Errors
/// As [`write_file_with`].
pub fn write_file(path: &Path, root: &Group) -> Result<(), IoError> {
    write_file_with(path, root, &WriteOptions::default())
}

/// Write `root` (its attributes, datasets and subgroups; its own name is
/// ignored) to `path`. The file is built in memory and then written through
/// [`super::atomic::write_bytes_atomic`], so on any error no file (and no
/// temporary file) is left behind and an existing `path` is untouched.
///
/// # Errors
/// [`IoError::Format`] naming `path` when a name is empty or contains `/`,
/// two members of a group share a name, a shape does not match its data, or
/// `hdf5-pure` refuses the layout; [`IoError::Os`] when writing fails.
pub fn write_file_with(path: &Path, root: &Group, options: &WriteOptions) -> Result<(), IoError> {
    let bytes = to_bytes(path, root, options)?;
    super::atomic::write_bytes_atomic(path, &bytes)
}

/// Build the file image of `root` in memory.
fn to_bytes(path: &Path, root: &Group, options: &WriteOptions) -> Result<Vec<u8>, IoError> {
    check_group(path, root, "")?;
    let mut fb = h5::FileBuilder::new();
    if options.hdf5_1_8_format {
        fb.with_libver_bounds(h5::LibVer::Earliest, h5::LibVer::V18);
    }
    let opts = WriteOptions {
        compress_min_bytes: options.compress_min_bytes.filter(|_| !options.hdf5_1_8_format),
        ..options.clone()
    };
    for (name, value) in &root.attrs {
        fb.set_attr(name, to_h5_attr(value));
    }
    for ds in &root.datasets {
        fill_dataset(fb.create_dataset(&ds.name), ds, &opts);
    }
    for g in &root.groups {
        let mut gb = fb.create_group(&g.name);
        fill_group(&mut gb, g, &opts);
        fb.add_group(gb.finish());
    }
    fb.finish().map_err(|e| IoError::format(path, format!("cannot build the HDF5 file: {}", one_line(&e))))
}

fn fill_group(gb: &mut h5::GroupBuilder, g: &Group, opts: &WriteOptions) {
    for (name, value) in &g.attrs {
        gb.set_attr(name, to_h5_attr(value));
    }
    for ds in &g.datasets {
        fill_dataset(gb.create_dataset(&ds.name), ds, opts);
    }
    for sub in &g.groups {
        let mut sb = gb.create_group(&sub.name);
        fill_group(&mut sb, sub, opts);
        gb.add_group(sb.finish());
    }
}

fn fill_dataset(b: &mut h5::DatasetBuilder, ds: &Dataset, opts: &WriteOptions) {
    let shape_u64 = |s: &[usize]| s.iter().map(|&d| d as u64).collect::<Vec<u64>>();
    match &ds.value {
        DataValue::F64 { shape, data } => {
            b.with_f64_data(data).with_shape(&shape_u64(shape));
            compress(b, shape, 8, opts);
        }
        DataValue::I64 { shape, data } => {
            b.with_i64_data(data).with_shape(&shape_u64(shape));
            compress(b, shape, 8, opts);
        }
        DataValue::Str(v) => {
            let refs: Vec<&str> = v.iter().map(String::as_str).collect();
            b.with_vlen_strings(&refs);
        }
    }
    for (name, value) in &ds.attrs {
        b.set_attr(name, to_h5_attr(value));
    }
}

/// Chunk and compress a numeric dataset of `shape` when it is large enough.
/// Chunks are whole rows (leading axis), about 1 MiB each: reading any row
/// range then touches few chunks.
fn compress(b: &mut h5::DatasetBuilder, shape: &[usize], elem: usize, opts: &WriteOptions) {
    let Some(min) = opts.compress_min_bytes else { return };
    let n: usize = shape.iter().product();
    if shape.is_empty() || n == 0 || n.saturating_mul(elem) < min {
        return;
    }
    let row_bytes = shape[1..].iter().product::<usize>().saturating_mul(elem).max(1);
    let rows = (1usize << 20).div_euclid(row_bytes).clamp(1, shape[0]);
    let mut chunk: Vec<u64> = shape.iter().map(|&d| d as u64).collect();
    chunk[0] = rows as u64;
    b.with_chunks(&chunk).with_shuffle().with_deflate(opts.deflate_level.clamp(1, 9));
}

fn to_h5_attr(v: &AttrValue) -> h5::AttrValue {
    match v {
        AttrValue::F64(x) => h5::AttrValue::F64(*x),
        AttrValue::I64(x) => h5::AttrValue::I64(*x),
        AttrValue::Str(s) => h5::AttrValue::VarLenString(s.clone()),
        AttrValue::F64List(x) => h5::AttrValue::F64Array(x.clone()),
        AttrValue::I64List(x) => h5::AttrValue::I64Array(x.clone()),
        AttrValue::StrList(x) => h5::AttrValue::VarLenStringArray(x.clone()),
    }
}

/// Refuse what would make an invalid or ambiguous file, before any byte is written.
fn check_group(path: &Path, g: &Group, at: &str) -> Result<(), IoError> {
    let bad = |what: String| IoError::format(path, format!("cannot write group `{}/`: {what}", at));
    let mut seen = std::collections::HashSet::new();
    let names = g.datasets.iter().map(|d| d.name.as_str()).chain(g.groups.iter().map(|s| s.name.as_str()));
    for name in names {
        if name.is_empty() || name.contains('/') || name == "." {
            return Err(bad(format!("member name `{name}` is empty or contains `/`")));
        }
        if !seen.insert(name) {
            return Err(bad(format!("two members are called `{name}`")));
        }
    }
    for ds in &g.datasets {
        let (shape, len) = match &ds.value {
            DataValue::F64 { shape, data } => (shape, data.len()),
            DataValue::I64 { shape, data } => (shape, data.len()),
            DataValue::Str(_) => continue,
        };
        let n = shape.iter().try_fold(1usize, |acc, &d| acc.checked_mul(d));
        if n != Some(len) {
            return Err(bad(format!("dataset `{}` has shape {shape:?} but {len} values", ds.name)));
        }
    }
    for sub in &g.groups {
        check_group(path, sub, &format!("{at}/{}", sub.name))?;
    }
    Ok(())
}

/// Read a whole HDF5 file back into hierax's tree: every group, every
/// `float64`/`float32` dataset as [`DataValue::F64`], every integer dataset
/// as [`DataValue::I64`], every string dataset as [`DataValue::Str`], and
/// every attribute [`AttrValue`] can hold (floats as `F64`, integers as
/// `I64`, strings of any encoding as `Str`, 1-D arrays as lists). Datasets
/// and attributes of other types are skipped. Members and attributes are
/// sorted by name (HDF5 keeps no insertion order unless asked). The root is
/// called `/`.
///
/// # Errors
/// [`IoError::Format`] when the file cannot be parsed or a member read, or an
/// unsigned integer exceeds `i64::MAX`.
pub fn read_tree(path: &Path) -> Result<Group, IoError> {
    let file = open(path)?;
    tree_of(path, &file.root(), "/")
}

fn tree_of(path: &Path, g: &h5::Group, name: &str) -> Result<Group, IoError> {
    let err = |what: &str, e: h5::Error| IoError::format(path, format!("`{name}`: {what}: {}", one_line(&e)));
    let mut out = Group::new(name.rsplit('/').next().filter(|s| !s.is_empty()).unwrap_or("/"));
    out.attrs = attrs_of(path, g.attrs().map_err(|e| err("attributes", e))?)?;
    let mut datasets: Vec<(String, h5::Dataset)> =
        g.iter_datasets().map_err(|e| err("members", e))?.collect();
    datasets.sort_by(|a, b| a.0.cmp(&b.0));
    for (dname, ds) in datasets {
        let full = format!("{}/{dname}", name.trim_end_matches('/'));
        let e = |err: h5::Error| read_err(path, &full, &ds, &err);
        let shape = to_usize_shape(path, &ds.shape().map_err(e)?)?;
        let value = match ds.dtype().map_err(e)? {
            h5::DType::F64 | h5::DType::F32 => {
                DataValue::F64 { shape, data: read_values(path, &full, &ds)?.0 }
            }
            h5::DType::I8 | h5::DType::I16 | h5::DType::I32 | h5::DType::I64 => {
                DataValue::I64 { shape, data: ds.read_i64().map_err(e)? }
            }
            h5::DType::U8 | h5::DType::U16 | h5::DType::U32 | h5::DType::U64 => {
                let v = ds.read_u64().map_err(e)?;
                let data =
                    v.into_iter().map(i64::try_from).collect::<Result<Vec<i64>, _>>().map_err(|_| {
                        IoError::format(path, format!("dataset `{full}`: value exceeds i64::MAX"))
                    })?;
                DataValue::I64 { shape, data }
            }
            h5::DType::String | h5::DType::VariableLengthString => {
                DataValue::Str(ds.read_string().map_err(e)?)
            }
            _ => continue,
        };
        let attrs = attrs_of(path, ds.attrs().map_err(e)?)?;
        out.datasets.push(Dataset { name: dname, value, attrs });
    }
    let mut groups: Vec<(String, h5::Group)> = g.iter_groups().map_err(|e| err("members", e))?.collect();
    groups.sort_by(|a, b| a.0.cmp(&b.0));
    for (gname, sub) in groups {
        let full = format!("{}/{gname}", name.trim_end_matches('/'));
        out.groups.push(tree_of(path, &sub, &full)?);
    }
    Ok(out)
}

fn attrs_of(
    path: &Path,
    attrs: std::collections::HashMap<String, h5::AttrValue>,
) -> Result<Vec<(String, AttrValue)>, IoError> {
    use h5::AttrValue as A;
    let mut out: Vec<(String, AttrValue)> = Vec::new();
    for (name, v) in attrs {
        let ours = match &v {
            A::F64(x) => AttrValue::F64(*x),
            A::F32(x) => AttrValue::F64(f64::from(*x)),
            A::F64Array(x) => AttrValue::F64List(x.clone()),
            A::F32Array(x) => AttrValue::F64List(x.iter().map(|&y| f64::from(y)).collect()),
            A::I8(_) | A::I16(_) | A::I32(_) | A::I64(_) | A::U8(_) | A::U16(_) | A::U32(_) | A::U64(_) => {
                match v.as_i64() {
                    Some(x) => AttrValue::I64(x),
                    None => {
                        return Err(IoError::format(path, format!("attribute `{name}` exceeds i64::MAX")))
                    }
                }
            }
            A::I8Array(_)
            | A::I16Array(_)
            | A::I32Array(_)
            | A::I64Array(_)
            | A::U8Array(_)
            | A::U16Array(_)
            | A::U32Array(_)
            | A::U64Array(_) => match v.to_i64s() {
                Some(x) => AttrValue::I64List(x),
                None => return Err(IoError::format(path, format!("attribute `{name}` exceeds i64::MAX"))),
            },
            A::StringArray(_)
            | A::AsciiStringArray(_)
            | A::VarLenStringArray(_)
            | A::VarLenAsciiStringArray(_)
            | A::VarLenAsciiCharArray(_) => match v.as_strings() {
                Some(s) => AttrValue::StrList(s.to_vec()),
                None => continue,
            },
            _ => match v.as_str() {
                Some(s) => AttrValue::Str(s.to_string()),
                None => continue,
            },
        };
        out.push((name, ours));
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::PathBuf;

    #[test]
    fn shape_mismatch_and_duplicate_names_are_refused_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("bad.h5");
        let mut root = Group::new("/");
        root.add_dataset("x", DataValue::F64 { shape: vec![2, 2], data: vec![1.0; 3] });
        let e = write_file(&p, &root).unwrap_err().to_string();
        assert!(e.contains("shape [2, 2] but 3 values"), "{e}");
        let mut root = Group::new("/");
        root.add_vector("x", &[1.0]);
        root.add_group(Group::new("x"));
        let e = write_file(&p, &root).unwrap_err().to_string();
        assert!(e.contains("two members are called `x`"), "{e}");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    /// A `.mat` image with one sparse variable `W` built from raw parts.
    fn sparse_file(dir: &Path, rows: u64, jc: &[u64], ir: &[u64], data: &[f64]) -> std::path::PathBuf {
        let mut fb = h5::FileBuilder::new();
        fb.with_userblock(512);
        let mut g = fb.create_group("W");
        g.set_attr("MATLAB_class", h5::AttrValue::AsciiString("double".into()));
        g.set_attr("MATLAB_sparse", h5::AttrValue::U64(rows));
        g.create_dataset("jc").with_u64_data(jc);
        g.create_dataset("ir").with_u64_data(ir);
        g.create_dataset("data").with_f64_data(data);
        fb.add_group(g.finish());
        let p = dir.join("w.mat");
        std::fs::write(&p, fb.finish().unwrap()).unwrap();
        p
    }

    #[test]
    fn sparse_matrix_expands_in_column_order() {
        // 2×3 [[0, 5, 0], [7, 0, 9]] in CSC: jc = [0, 1, 2, 3], ir = [1, 0, 1].
        let dir = tempfile::tempdir().unwrap();
        let p = sparse_file(dir.path(), 2, &[0, 1, 2, 3], &[1, 0, 1], &[7.0, 5.0, 9.0]);
        let a = read(&InputSpec::new(&p, None)).unwrap();
        assert!(a.sparse);
        assert_eq!(a.data.shape(), &[2, 3]);
        assert_eq!(a.data.iter().copied().collect::<Vec<_>>(), vec![0.0, 5.0, 0.0, 7.0, 0.0, 9.0]);
    }

    #[test]
    fn malformed_sparse_matrices_are_errors_not_panics() {
        let dir = tempfile::tempdir().unwrap();
        type Case<'a> = (u64, &'a [u64], &'a [u64], &'a [f64], &'a str);
        let cases: [Case; 4] = [
            (2, &[0, 1, 5], &[0], &[1.0], "`jc` ends at 5 but `ir` has 1"),
            (2, &[0, 1, 1], &[4], &[1.0], "row index 4 in `ir` is outside 0..2"),
            (2, &[0, 2, 1], &[0], &[1.0], "`jc` must be non-decreasing up to 1; column 0 spans 0..2"),
            (1 << 40, &[0, 0, 0], &[], &[], "too large to expand"),
        ];
        for (rows, jc, ir, data, want) in cases {
            let p = sparse_file(dir.path(), rows, jc, ir, data);
            let e = read(&InputSpec::new(&p, Some("W"))).unwrap_err().to_string();
            assert!(e.contains("sparse variable `W`") && e.contains(want), "{e}");
        }
    }

    #[test]
    fn long_listings_are_cut() {
        let items: Vec<H5DatasetInfo> = (0..45)
            .map(|i| H5DatasetInfo {
                path: format!("/d{i}"),
                shape: vec![1],
                dtype: "float64".into(),
                stored: Some(StoredType::Float64),
                sparse: false,
            })
            .collect();
        let text = listing(&items.iter().collect::<Vec<_>>());
        assert!(text.starts_with("/d0 (1 float64), /d1 (1 float64)"), "{text}");
        assert!(text.contains("/d39 (1 float64) and 5 more"), "{text}");
        assert!(!text.contains("/d40 "), "{text}");
    }

    #[test]
    fn listing_names_shape_and_type() {
        let info = H5DatasetInfo {
            path: "/a".into(),
            shape: vec![2, 3],
            dtype: "int32".into(),
            stored: Some(StoredType::Int32),
            sparse: false,
        };
        assert_eq!(info.to_string(), "/a (2×3 int32)");
        let scalar = H5DatasetInfo { shape: vec![], ..info };
        assert_eq!(scalar.to_string(), "/a (scalar int32)");
        assert_eq!(normalise_key("grp/x/", false), "/grp/x");
        assert_eq!(normalise_key("/SC", true), "SC");
    }

    /// A chunked, shuffled and deflated dataset of `rows` × 40 in a file.
    fn compressed_file(
        dir: &Path,
        rows: usize,
        band: u64,
        fill: impl FnOnce(&mut h5::DatasetBuilder),
    ) -> PathBuf {
        let mut fb = h5::FileBuilder::new();
        let b = fb.create_dataset("x");
        fill(b);
        b.with_shape(&[rows as u64, 40]).with_chunks(&[band, 40]).with_shuffle().with_deflate(1);
        let path = dir.join("x.h5");
        std::fs::write(&path, fb.finish().unwrap()).unwrap();
        path
    }

    #[test]
    fn banded_reads_equal_the_whole_read_for_every_stored_type() {
        // Bands of 504 rows (2 threads) and windows of one 7-row chunk band
        // over 1,000 rows: the last band and window are short.
        let dir = tempfile::tempdir().unwrap();
        let rows = 1000;
        let n = rows * 40;
        let f64s: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
        let f32s: Vec<f32> = f64s.iter().map(|&v| v as f32).collect();
        let mut i64s: Vec<i64> = (0..n as i64).map(|i| i * 7 - 3000).collect();
        i64s[12_345] = (1 << 60) + 1;
        let u8s: Vec<u8> = (0..n).map(|i| (i % 251) as u8).collect();
        type Fill<'a> = Box<dyn FnOnce(&mut h5::DatasetBuilder) + 'a>;
        let fills: Vec<Fill> = vec![
            Box::new(|b| {
                b.with_f64_data(&f64s);
            }),
            Box::new(|b| {
                b.with_f32_data(&f32s);
            }),
            Box::new(|b| {
                b.with_i64_data(&i64s);
            }),
            Box::new(|b| {
                b.with_u8_data(&u8s);
            }),
        ];
        for fill in fills {
            let path = compressed_file(dir.path(), rows, 7, fill);
            let file = open(&path).unwrap();
            let ds = file.dataset("x").unwrap();
            let whole = read_values(&path, "/x", &ds).unwrap();
            let banded = read_values_banded_by(&path, "/x", &ds, &[rows, 40], false, (0, 7 * 40 * 8))
                .unwrap()
                .unwrap();
            assert_eq!(banded, whole);
        }
        // The one integer beyond 2^53 is noted by both.
        let path = compressed_file(dir.path(), rows, 7, |b| {
            b.with_i64_data(&i64s);
        });
        let file = open(&path).unwrap();
        let ds = file.dataset("x").unwrap();
        let (_, note) = read_values_banded_by(&path, "/x", &ds, &[rows, 40], false, (0, 1)).unwrap().unwrap();
        assert!(note.unwrap().starts_with("1 integer values"));
    }

    #[test]
    fn transposed_banded_reads_equal_the_whole_read_with_its_axes_reversed() {
        let dir = tempfile::tempdir().unwrap();
        let rows = 1000;
        let data: Vec<f64> = (0..rows * 40).map(|i| (i as f64 * 0.11).cos()).collect();
        let want = Array2::from_shape_vec((rows, 40), data.clone()).unwrap().reversed_axes();
        let want: Vec<f64> = want.as_standard_layout().iter().copied().collect();
        let compressed = compressed_file(dir.path(), rows, 7, |b| {
            b.with_f64_data(&data);
        });
        let mut fb = h5::FileBuilder::new();
        fb.create_dataset("x").with_f64_data(&data).with_shape(&[rows as u64, 40]);
        let plain = dir.path().join("plain.h5");
        std::fs::write(&plain, fb.finish().unwrap()).unwrap();
        for path in [compressed, plain] {
            let file = open(&path).unwrap();
            let ds = file.dataset("x").unwrap();
            // Windows of 7 rows (one chunk band) and of 1 row (unchunked).
            let (got, note) =
                read_values_banded_by(&path, "/x", &ds, &[rows, 40], true, (0, 7 * 40 * 8)).unwrap().unwrap();
            assert_eq!(got, want, "{}", path.display());
            assert!(note.is_none());
        }
    }

    #[test]
    fn banding_is_declined_where_it_would_not_help() {
        let dir = tempfile::tempdir().unwrap();
        let data = vec![1.5; 1000 * 40];
        let declined = |path: &Path, sizes: (usize, usize)| {
            let ds = open(path).unwrap().dataset("x").unwrap();
            read_values_banded_by(path, "/x", &ds, &[1000, 40], false, sizes).unwrap().is_none()
        };
        let compressed = |band: u64| {
            compressed_file(dir.path(), 1000, band, |b| {
                b.with_f64_data(&data);
            })
        };
        // One chunk band spans every row: each window would decode it again.
        assert!(declined(&compressed(1000), (0, 1)));
        // Below the size threshold.
        assert!(declined(&compressed(7), (BANDED_READ_MIN_BYTES, BANDED_WINDOW_BYTES)));
        assert!(!declined(&compressed(7), (0, 1)));
        // Unfiltered: the whole read is already one copy.
        let mut fb = h5::FileBuilder::new();
        fb.create_dataset("x").with_f64_data(&data).with_shape(&[1000, 40]);
        let path = dir.path().join("plain.h5");
        std::fs::write(&path, fb.finish().unwrap()).unwrap();
        assert!(declined(&path, (0, 1)));
    }

    #[test]
    fn the_digest_taken_beside_the_read_is_the_file_digest() {
        let dir = tempfile::tempdir().unwrap();
        let data = vec![2.5; 100 * 40];
        let path = compressed_file(dir.path(), 100, 7, |b| {
            b.with_f64_data(&data);
        });
        let la = read(&InputSpec::parse(&format!("{}:/x", path.display())).unwrap()).unwrap();
        let (sha, bytes) = super::super::provenance::sha256_file(&path).unwrap();
        let d = la.digest.unwrap();
        assert_eq!((d.sha256, d.bytes), (sha, bytes));
    }

    #[test]
    fn chunking_covers_whole_rows_of_about_one_mebibyte() {
        let opts = WriteOptions::default();
        let mut fb = h5::FileBuilder::new();
        // 400 × 400 float64 = 1.28 MB: 327 rows of 3200 bytes per chunk.
        let data = vec![0.5; 400 * 400];
        let b = fb.create_dataset("m");
        b.with_f64_data(&data).with_shape(&[400, 400]);
        compress(b, &[400, 400], 8, &opts);
        let file = h5::File::from_bytes(fb.finish().unwrap()).unwrap();
        let ds = file.dataset("m").unwrap();
        assert_eq!(ds.chunk_shape().unwrap(), Some(vec![327, 400]));
        assert_eq!(ds.filters(), vec![2, 1]);
        assert_eq!(ds.read_f64().unwrap(), data);
    }
}
