//! MATLAB level-5 MAT-files (the format of `save -v6` and `save -v7`), read
//! by our own parser of the published layout.
//!
//! # The format
//! Source: MathWorks, "MAT-File Format" (the level-5 chapter). A file is
//!
//! * a 128-byte header: 116 bytes of text, an 8-byte subsystem-data offset,
//!   a 2-byte version (0x0100) and the 2-byte endian indicator, the
//!   characters `M` `I` written as one 16-bit value, so a file whose bytes
//!   126–127 read `IM` is little-endian and `MI` big-endian; every number
//!   after the header uses that byte order;
//! * then data elements, each an 8-byte tag (4-byte data type, 4-byte byte
//!   count) and its data padded to a multiple of 8 bytes. When the upper 16
//!   bits of the first tag word are non-zero the element is in the *small
//!   data element* format: those bits hold the byte count (1–4), the lower 16
//!   the type, and the data sit in the second word;
//! * each variable is one `miMATRIX` element, or one `miCOMPRESSED` element
//!   whose zlib stream inflates to an `miMATRIX` element (not padded). An
//!   `miMATRIX` holds sub-elements: array flags (class in the low byte of the
//!   first word, flags complex `0x08`, global `0x04`, logical `0x02` in the
//!   next byte, and `nzmax` in the second word), dimensions (`miINT32`),
//!   the array name (`miINT8`), then for numeric classes the real part and,
//!   if complex, the imaginary part; for sparse matrices the row indices
//!   `ir`, the column starts `jc` (`cols + 1` entries) and the values `pr`
//!   (compressed sparse column storage, zero-based).
//!
//! # Conventions
//! * The data type of an element may be narrower than the class (MATLAB
//!   stores a double array of small integers as `miUINT8`, for instance):
//!   values are decoded from the element's own type, which converts to
//!   `f64` exactly for every type except `miINT64`/`miUINT64` beyond 2⁵³,
//!   and that loss is reported in the notes.
//! * MATLAB arrays are column-major and at least 2-D. The array returned has
//!   MATLAB's logical shape (a 1-D vector saved from NumPy comes back as
//!   `1 x n` or `n x 1`), in row-major order.
//! * Logical arrays (class `uint8` with the logical flag) read as 0/1 and are
//!   reported as [`StoredType::Bool`]; any non-zero byte is true, as in
//!   `scipy.io.loadmat`.
//! * Sparse matrices become dense; duplicate entries are summed, as
//!   `scipy.sparse` does when converting to dense.
//! * Complex variables are refused (hierax works with real arrays). Cell,
//!   struct, char, function-handle and object variables are listed but never
//!   taken as the default variable, and asking for one is an error.

use super::{read_bytes, InputSpec, IoError, LoadedArray, StoredType};
use ndarray::{ArrayD, IxDyn, ShapeBuilder};
use serde::Serialize;
use std::fmt;
use std::io::Read;
use std::path::Path;

/// Length of the file header.
const HEADER_LEN: usize = 128;
/// The signature an HDF5 file (MATLAB v7.3) carries after its 512-byte user block.
const HDF5_SIGNATURE: [u8; 8] = [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'];
/// How much of a compressed variable to inflate to read its name, class and
/// dimensions when listing: enough for any realistic header.
const HEADER_PREFIX: usize = 2048;
/// Largest dense matrix a sparse variable may expand to (2²⁸ values, 2 GiB).
const MAX_DENSE_FROM_SPARSE: usize = 1 << 28;

// Data types of data elements (MAT-File Format, level 5, table of data types).
const MI_INT8: u32 = 1;
const MI_UINT8: u32 = 2;
const MI_INT16: u32 = 3;
const MI_UINT16: u32 = 4;
const MI_INT32: u32 = 5;
const MI_UINT32: u32 = 6;
const MI_SINGLE: u32 = 7;
const MI_DOUBLE: u32 = 9;
const MI_INT64: u32 = 12;
const MI_UINT64: u32 = 13;
const MI_MATRIX: u32 = 14;
const MI_COMPRESSED: u32 = 15;
const MI_UTF8: u32 = 16;

// Array flag bits (the second byte of the first flags word).
const FLAG_COMPLEX: u8 = 0x08;
const FLAG_GLOBAL: u8 = 0x04;
const FLAG_LOGICAL: u8 = 0x02;

/// The MATLAB class of a variable (`mx*_CLASS` in the format description).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum MatClass {
    /// Cell array.
    Cell,
    /// Structure.
    Struct,
    /// Object.
    Object,
    /// Character array.
    Char,
    /// Sparse matrix (double or logical).
    Sparse,
    /// Double precision.
    Double,
    /// Single precision.
    Single,
    /// 8-bit signed.
    Int8,
    /// 8-bit unsigned (also the class of logical arrays).
    Uint8,
    /// 16-bit signed.
    Int16,
    /// 16-bit unsigned.
    Uint16,
    /// 32-bit signed.
    Int32,
    /// 32-bit unsigned.
    Uint32,
    /// 64-bit signed.
    Int64,
    /// 64-bit unsigned.
    Uint64,
    /// Function handle.
    Function,
    /// Opaque object (MATLAB classes such as `string` or `table`).
    Opaque,
    /// A class code the format description does not list.
    Unknown(u8),
}

impl MatClass {
    fn from_code(code: u8) -> Self {
        match code {
            1 => MatClass::Cell,
            2 => MatClass::Struct,
            3 => MatClass::Object,
            4 => MatClass::Char,
            5 => MatClass::Sparse,
            6 => MatClass::Double,
            7 => MatClass::Single,
            8 => MatClass::Int8,
            9 => MatClass::Uint8,
            10 => MatClass::Int16,
            11 => MatClass::Uint16,
            12 => MatClass::Int32,
            13 => MatClass::Uint32,
            14 => MatClass::Int64,
            15 => MatClass::Uint64,
            16 => MatClass::Function,
            17 => MatClass::Opaque,
            c => MatClass::Unknown(c),
        }
    }

    /// The stored type of a dense numeric class.
    fn stored(self) -> Option<StoredType> {
        Some(match self {
            MatClass::Double => StoredType::Float64,
            MatClass::Single => StoredType::Float32,
            MatClass::Int8 => StoredType::Int8,
            MatClass::Uint8 => StoredType::Uint8,
            MatClass::Int16 => StoredType::Int16,
            MatClass::Uint16 => StoredType::Uint16,
            MatClass::Int32 => StoredType::Int32,
            MatClass::Uint32 => StoredType::Uint32,
            MatClass::Int64 => StoredType::Int64,
            MatClass::Uint64 => StoredType::Uint64,
            _ => return None,
        })
    }

    /// How a user would call a variable of this class that hierax cannot read.
    fn noun(self) -> String {
        match self {
            MatClass::Cell => "a cell array".into(),
            MatClass::Struct => "a struct".into(),
            MatClass::Object | MatClass::Opaque => "an object".into(),
            MatClass::Char => "a char array".into(),
            MatClass::Function => "a function handle".into(),
            MatClass::Unknown(c) => format!("of unknown class {c}"),
            other => format!("a {other} array"),
        }
    }
}

impl fmt::Display for MatClass {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = match self {
            MatClass::Cell => "cell",
            MatClass::Struct => "struct",
            MatClass::Object => "object",
            MatClass::Char => "char",
            MatClass::Sparse => "sparse",
            MatClass::Double => "double",
            MatClass::Single => "single",
            MatClass::Int8 => "int8",
            MatClass::Uint8 => "uint8",
            MatClass::Int16 => "int16",
            MatClass::Uint16 => "uint16",
            MatClass::Int32 => "int32",
            MatClass::Uint32 => "uint32",
            MatClass::Int64 => "int64",
            MatClass::Uint64 => "uint64",
            MatClass::Function => "function handle",
            MatClass::Opaque => "opaque object",
            MatClass::Unknown(c) => return write!(f, "class {c}"),
        };
        f.write_str(s)
    }
}

/// One variable of a MAT-file, as [`list_variables`] reports it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct MatVariableInfo {
    /// The variable name.
    pub name: String,
    /// Its MATLAB class.
    pub class: MatClass,
    /// Its dimensions, as MATLAB reports them (at least two).
    pub dims: Vec<usize>,
    /// The logical flag (logical arrays and logical sparse matrices).
    pub logical: bool,
    /// The complex flag.
    pub complex: bool,
    /// The global flag.
    pub global: bool,
    /// Whether it is stored in a compressed element.
    pub compressed: bool,
    /// File offset of its data element.
    pub offset: usize,
}

impl MatVariableInfo {
    /// Whether it is a numeric, logical or sparse array (the kinds hierax reads,
    /// complex ones then being refused with their own message).
    pub fn is_numeric(&self) -> bool {
        self.class == MatClass::Sparse || self.class.stored().is_some()
    }

    /// The class as a user reads it: `int32`, `logical`, `sparse double`,
    /// `complex single`, `cell`, ...
    pub fn kind(&self) -> String {
        let base = match (self.class, self.logical) {
            (MatClass::Sparse, true) => "sparse logical".to_string(),
            (MatClass::Sparse, false) => "sparse double".to_string(),
            (c, true) if c.stored().is_some() => "logical".to_string(),
            (c, _) => c.to_string(),
        };
        if self.complex {
            format!("complex {base}")
        } else {
            base
        }
    }
}

impl fmt::Display for MatVariableInfo {
    /// `SC (int32 84x84)` for arrays hierax reads, `names (cell)` otherwise.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_numeric() {
            let dims: Vec<String> = self.dims.iter().map(usize::to_string).collect();
            write!(f, "{} ({} {})", self.name, self.kind(), dims.join("x"))
        } else {
            write!(f, "{} ({})", self.name, self.kind())
        }
    }
}

// --- byte-level reading -------------------------------------------------------

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Endian {
    Little,
    Big,
}

/// A failure inside a byte buffer: where, and what was wrong.
#[derive(Clone, Debug, PartialEq, Eq)]
struct Corrupt {
    offset: usize,
    what: String,
}

impl Corrupt {
    fn new(offset: usize, what: impl Into<String>) -> Self {
        Corrupt { offset, what: what.into() }
    }
}

/// Where a buffer's offsets point: into the file, or into the inflated data
/// of the compressed element at a file offset.
#[derive(Clone, Copy, Debug)]
enum Place {
    File,
    Inflated { element_at: usize },
}

fn corrupt_error(path: &Path, place: Place, c: Corrupt) -> IoError {
    let at = match place {
        Place::File => format!("at byte {}", c.offset),
        Place::Inflated { element_at } => format!(
            "in the compressed variable at byte {element_at}, at byte {} of its inflated data",
            c.offset
        ),
    };
    IoError::format(path, format!("corrupt or truncated level-5 MAT-file {at}: {}", c.what))
}

/// A byte buffer in the file's byte order. It ends where the enclosing element
/// ends, so a sub-element cannot read past its parent.
#[derive(Clone, Copy)]
struct Bytes<'a> {
    data: &'a [u8],
    endian: Endian,
}

impl<'a> Bytes<'a> {
    fn limit(self, end: usize) -> Self {
        Bytes { data: &self.data[..end.min(self.data.len())], endian: self.endian }
    }

    fn slice(self, at: usize, len: usize, what: &str) -> Result<&'a [u8], Corrupt> {
        match at.checked_add(len) {
            Some(end) if end <= self.data.len() => Ok(&self.data[at..end]),
            _ => Err(Corrupt::new(
                at,
                format!("{what} needs {len} bytes but only {} remain", self.data.len().saturating_sub(at)),
            )),
        }
    }

    fn u32(self, at: usize, what: &str) -> Result<u32, Corrupt> {
        let s = self.slice(at, 4, what)?;
        let a = [s[0], s[1], s[2], s[3]];
        Ok(match self.endian {
            Endian::Little => u32::from_le_bytes(a),
            Endian::Big => u32::from_be_bytes(a),
        })
    }
}

/// An element tag: its data type, byte count and where its data start.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Tag {
    /// Offset of the tag itself.
    at: usize,
    dtype: u32,
    nbytes: usize,
    data_at: usize,
    /// Small data element format (tag and data share 8 bytes).
    small: bool,
}

impl Tag {
    /// Where the next sub-element starts: data padded to a multiple of 8 bytes.
    fn next(&self) -> usize {
        if self.small {
            self.at + 8
        } else {
            self.data_at + self.nbytes.div_ceil(8) * 8
        }
    }
}

/// Read the tag at `at`, checking its data lie inside the buffer.
fn read_tag(b: Bytes<'_>, at: usize) -> Result<Tag, Corrupt> {
    let word = b.u32(at, "data element tag")?;
    if word >> 16 != 0 {
        let nbytes = (word >> 16) as usize;
        if nbytes > 4 {
            return Err(Corrupt::new(at, format!("small data element claims {nbytes} bytes; at most 4 fit")));
        }
        b.slice(at + 4, 4, "small data element")?;
        return Ok(Tag { at, dtype: word & 0xffff, nbytes, data_at: at + 4, small: true });
    }
    let nbytes = b.u32(at + 4, "data element tag")? as usize;
    b.slice(at + 8, nbytes, &format!("{} element", type_name(word)))?;
    Ok(Tag { at, dtype: word, nbytes, data_at: at + 8, small: false })
}

fn type_name(dtype: u32) -> String {
    match dtype {
        MI_INT8 => "miINT8".into(),
        MI_UINT8 => "miUINT8".into(),
        MI_INT16 => "miINT16".into(),
        MI_UINT16 => "miUINT16".into(),
        MI_INT32 => "miINT32".into(),
        MI_UINT32 => "miUINT32".into(),
        MI_SINGLE => "miSINGLE".into(),
        MI_DOUBLE => "miDOUBLE".into(),
        MI_INT64 => "miINT64".into(),
        MI_UINT64 => "miUINT64".into(),
        MI_MATRIX => "miMATRIX".into(),
        MI_COMPRESSED => "miCOMPRESSED".into(),
        MI_UTF8 => "miUTF8".into(),
        17 => "miUTF16".into(),
        18 => "miUTF32".into(),
        other => format!("data type {other}"),
    }
}

/// Decoded numbers and whether any 64-bit integer lost precision.
#[derive(Debug)]
struct Numbers {
    values: Vec<f64>,
    lossy: bool,
}

/// Decode a numeric element into `f64`, from its own data type.
fn decode(b: Bytes<'_>, tag: &Tag, what: &str) -> Result<Numbers, Corrupt> {
    let data = b.slice(tag.data_at, tag.nbytes, what)?;
    let endian = b.endian;
    let size = match tag.dtype {
        MI_INT8 | MI_UINT8 => 1,
        MI_INT16 | MI_UINT16 => 2,
        MI_INT32 | MI_UINT32 | MI_SINGLE => 4,
        MI_DOUBLE | MI_INT64 | MI_UINT64 => 8,
        other => {
            return Err(Corrupt::new(
                tag.at,
                format!("{what}: expected numeric data, found {}", type_name(other)),
            ))
        }
    };
    if data.len() % size != 0 {
        return Err(Corrupt::new(
            tag.at,
            format!("{what}: {} bytes is not a whole number of {}", data.len(), type_name(tag.dtype)),
        ));
    }
    let mut lossy = false;
    macro_rules! conv {
        ($t:ty, $n:expr) => {
            conv!($t, $n, |_: $t, _: f64| true)
        };
        ($t:ty, $n:expr, $exact:expr) => {{
            let exact = $exact;
            data.chunks_exact($n)
                .map(|c| {
                    let mut a = [0u8; $n];
                    a.copy_from_slice(c);
                    let v = match endian {
                        Endian::Little => <$t>::from_le_bytes(a),
                        Endian::Big => <$t>::from_be_bytes(a),
                    };
                    let x = v as f64;
                    lossy |= !exact(v, x);
                    x
                })
                .collect::<Vec<f64>>()
        }};
    }
    let values = match tag.dtype {
        MI_INT8 => conv!(i8, 1),
        MI_UINT8 => conv!(u8, 1),
        MI_INT16 => conv!(i16, 2),
        MI_UINT16 => conv!(u16, 2),
        MI_INT32 => conv!(i32, 4),
        MI_UINT32 => conv!(u32, 4),
        MI_SINGLE => conv!(f32, 4),
        MI_DOUBLE => conv!(f64, 8),
        // `x as i64` saturates, so the round trip is the identity exactly when
        // the conversion did not round (2^63 itself rounds from i64::MAX).
        MI_INT64 => conv!(i64, 8, |v: i64, x: f64| x as i64 == v && x != 9_223_372_036_854_775_808.0),
        MI_UINT64 => conv!(u64, 8, |v: u64, x: f64| x as u64 == v && x != 18_446_744_073_709_551_616.0),
        _ => unreachable!("element size checked above"),
    };
    Ok(Numbers { values, lossy })
}

/// Decode a non-negative integer element (dimensions, sparse indices),
/// each value below `bound`.
fn decode_indices(b: Bytes<'_>, tag: &Tag, what: &str, bound: f64) -> Result<Vec<usize>, Corrupt> {
    if matches!(tag.dtype, MI_SINGLE | MI_DOUBLE) {
        return Err(Corrupt::new(
            tag.at,
            format!("{what}: expected integers, found {}", type_name(tag.dtype)),
        ));
    }
    let n = decode(b, tag, what)?;
    n.values
        .iter()
        .map(|&v| {
            if v >= 0.0 && v < bound {
                Ok(v as usize)
            } else {
                Err(Corrupt::new(tag.data_at, format!("{what}: value {v} is outside 0..{bound}")))
            }
        })
        .collect()
}

// --- miMATRIX ------------------------------------------------------------------

/// The array flags, dimensions and name of an `miMATRIX` element.
#[derive(Clone, Debug, PartialEq, Eq)]
struct MatrixHeader {
    class: MatClass,
    flags: u8,
    dims: Vec<usize>,
    name: String,
    /// Where the sub-elements after the name start.
    body_at: usize,
}

/// Parse the first three sub-elements of an `miMATRIX` whose data start at `at`.
fn matrix_header(b: Bytes<'_>, at: usize) -> Result<MatrixHeader, Corrupt> {
    let ft = read_tag(b, at)?;
    if ft.dtype != MI_UINT32 || ft.nbytes != 8 {
        return Err(Corrupt::new(
            at,
            format!(
                "array flags: expected 8 bytes of miUINT32, found {} bytes of {}",
                ft.nbytes,
                type_name(ft.dtype)
            ),
        ));
    }
    let word = b.u32(ft.data_at, "array flags")?;
    let class = MatClass::from_code((word & 0xff) as u8);
    let flags = ((word >> 8) & 0xff) as u8;
    let dt = read_tag(b, ft.next())?;
    let dims = decode_indices(b, &dt, "dimensions", f64::from(i32::MAX) + 1.0)?;
    if dims.is_empty() {
        return Err(Corrupt::new(dt.at, "dimensions: none given"));
    }
    let nt = read_tag(b, dt.next())?;
    if !matches!(nt.dtype, MI_INT8 | MI_UINT8 | MI_UTF8) {
        return Err(Corrupt::new(
            nt.at,
            format!("array name: expected miINT8, found {}", type_name(nt.dtype)),
        ));
    }
    let raw = b.slice(nt.data_at, nt.nbytes, "array name")?;
    let name = String::from_utf8_lossy(raw).trim_end_matches('\0').to_string();
    Ok(MatrixHeader { class, flags, dims, name, body_at: nt.next() })
}

/// Number of elements of `dims`, or an error when it overflows.
fn element_count(dims: &[usize], at: usize) -> Result<usize, Corrupt> {
    dims.iter()
        .try_fold(1usize, |acc, &d| acc.checked_mul(d))
        .ok_or_else(|| Corrupt::new(at, format!("dimensions {dims:?} overflow")))
}

/// The real part of a dense numeric array, column-major.
fn read_dense(b: Bytes<'_>, h: &MatrixHeader) -> Result<Numbers, Corrupt> {
    let want = element_count(&h.dims, h.body_at)?;
    let pr = read_tag(b, h.body_at)?;
    let n = decode(b, &pr, "real part")?;
    if n.values.len() != want {
        return Err(Corrupt::new(
            pr.at,
            format!("real part holds {} values but dimensions {:?} need {want}", n.values.len(), h.dims),
        ));
    }
    Ok(n)
}

/// A sparse matrix (`ir`, `jc`, `pr`) expanded to a dense row-major buffer
/// (built directly in row-major order, so no reordering copy is needed).
///
/// Entry k (for `jc[c] <= k < jc[c+1]`) is `pr[k]` at row `ir[k]`, column `c`
/// (compressed sparse column storage). Duplicates add, as in
/// `scipy.sparse.csc_matrix.toarray`. In a logical sparse matrix an entry is
/// true when any of its stored values is non-zero, and one without `pr` has
/// all stored entries true.
fn read_sparse(b: Bytes<'_>, h: &MatrixHeader) -> Result<Vec<f64>, Corrupt> {
    let (rows, cols) = match h.dims[..] {
        [r, c] => (r, c),
        _ => {
            return Err(Corrupt::new(
                h.body_at,
                format!("a sparse matrix has 2 dimensions, found {:?}", h.dims),
            ))
        }
    };
    let total = element_count(&h.dims, h.body_at)?;
    if total > MAX_DENSE_FROM_SPARSE {
        return Err(Corrupt::new(
            h.body_at,
            format!("sparse matrix of {rows}x{cols} is too large to expand to a dense array"),
        ));
    }
    let ir_tag = read_tag(b, h.body_at)?;
    let ir = decode_indices(b, &ir_tag, "sparse row indices (ir)", rows as f64)?;
    let jc_tag = read_tag(b, ir_tag.next())?;
    let jc = decode_indices(b, &jc_tag, "sparse column starts (jc)", f64::from(u32::MAX))?;
    if jc.len() != cols + 1 || jc[0] != 0 || jc.windows(2).any(|w| w[0] > w[1]) {
        return Err(Corrupt::new(
            jc_tag.at,
            format!(
                "sparse column starts (jc): expected {} non-decreasing values from 0, found {} values",
                cols + 1,
                jc.len()
            ),
        ));
    }
    let nnz = jc[cols];
    if ir.len() < nnz {
        return Err(Corrupt::new(
            ir_tag.at,
            format!("sparse row indices (ir): {nnz} entries needed, {} stored", ir.len()),
        ));
    }
    let logical = h.flags & FLAG_LOGICAL != 0;
    let pr = if jc_tag.next() < b.data.len() {
        let pr_tag = read_tag(b, jc_tag.next())?;
        let pr = decode(b, &pr_tag, "sparse values (pr)")?.values;
        if pr.len() < nnz {
            return Err(Corrupt::new(
                pr_tag.at,
                format!("sparse values (pr): {nnz} entries needed, {} stored", pr.len()),
            ));
        }
        pr
    } else if logical {
        vec![1.0; nnz]
    } else {
        return Err(Corrupt::new(jc_tag.next(), "sparse values (pr) are missing"));
    };
    // Only the stored entries are touched, so the zeros of a large sparse
    // matrix stay untouched (lazily allocated) memory.
    let mut dense = vec![0.0; total];
    for c in 0..cols {
        for k in jc[c]..jc[c + 1] {
            let cell = &mut dense[ir[k] * cols + c];
            if !logical {
                *cell += pr[k];
            } else if pr[k] != 0.0 {
                *cell = 1.0;
            }
        }
    }
    Ok(dense)
}

/// A column-major buffer of shape `dims` as a row-major (standard layout) array.
fn column_major_to_array(dims: &[usize], values: Vec<f64>) -> Result<ArrayD<f64>, String> {
    let a = ArrayD::from_shape_vec(IxDyn(dims).f(), values).map_err(|e| e.to_string())?;
    Ok(a.as_standard_layout().into_owned())
}

// --- the file ------------------------------------------------------------------

/// Where a variable's `miMATRIX` element is.
#[derive(Clone, Copy, Debug)]
enum Body {
    /// Uncompressed: the element's data span `at..end` of the file.
    Plain { at: usize, end: usize },
    /// Compressed: the zlib stream spans `at..end` of the file; the element tag is at `tag_at`.
    Compressed { tag_at: usize, at: usize, end: usize },
}

struct Entry {
    info: MatVariableInfo,
    body: Body,
}

/// Check the 128-byte header and return the byte order and subsystem offset.
fn parse_header(path: &Path, bytes: &[u8]) -> Result<(Endian, Option<usize>), IoError> {
    let v73 = || {
        IoError::format(
            path,
            "is a MATLAB v7.3 (HDF5) file, not a level-5 MAT-file; it is read by the HDF5 reader",
        )
    };
    if bytes.len() >= 520 && bytes[512..520] == HDF5_SIGNATURE {
        return Err(v73());
    }
    if bytes.len() < HEADER_LEN {
        return Err(IoError::format(
            path,
            format!(
                "is not a level-5 MAT-file: it has {} bytes, fewer than the 128-byte header",
                bytes.len()
            ),
        ));
    }
    let endian = match &bytes[126..128] {
        b"IM" => Endian::Little,
        b"MI" => Endian::Big,
        other => {
            let hint = if bytes[..4].contains(&0) {
                " (it looks like a level-4 MAT-file, which hierax does not read; re-save it with save -v7)"
            } else {
                ""
            };
            return Err(IoError::format(
                path,
                format!(
                    "is not a level-5 MAT-file: bad header at byte 126: endian indicator {:?}, \
                     expected \"IM\" or \"MI\"{hint}",
                    String::from_utf8_lossy(other)
                ),
            ));
        }
    };
    let version = match endian {
        Endian::Little => u16::from_le_bytes([bytes[124], bytes[125]]),
        Endian::Big => u16::from_be_bytes([bytes[124], bytes[125]]),
    };
    match version {
        0x0100 => {}
        0x0200 => return Err(v73()),
        v => {
            return Err(IoError::format(
                path,
                format!("unsupported MAT-file version 0x{v:04x} at byte 124; expected 0x0100 (level 5)"),
            ))
        }
    }
    let mut off = [0u8; 8];
    off.copy_from_slice(&bytes[116..124]);
    // Zero or all spaces mean "no subsystem data".
    let subsys = match endian {
        Endian::Little => u64::from_le_bytes(off),
        Endian::Big => u64::from_be_bytes(off),
    };
    let subsys = if subsys == 0 || off == [b' '; 8] { None } else { usize::try_from(subsys).ok() };
    Ok((endian, subsys))
}

/// Inflate a zlib stream, at most `limit` bytes when given. Returns the bytes
/// and whether the stream was inflated to its end.
fn inflate(data: &[u8], limit: Option<usize>) -> std::io::Result<(Vec<u8>, bool)> {
    let mut out = Vec::new();
    let mut dec = flate2::read::ZlibDecoder::new(data);
    match limit {
        Some(n) => {
            dec.take(n as u64 + 1).read_to_end(&mut out)?;
            let complete = out.len() <= n;
            out.truncate(n);
            Ok((out, complete))
        }
        None => {
            dec.read_to_end(&mut out)?;
            Ok((out, true))
        }
    }
}

/// Inflate a compressed element no further than the size its own
/// `miMATRIX` tag declares (8 + nbytes), so a stream that inflates beyond
/// its declaration (a "zip bomb") costs no more memory than the variable it
/// claims to hold. A stream shorter than its declaration is returned whole
/// and reported by the caller's bounds checks.
fn inflate_declared(stream: &[u8], endian: Endian) -> std::io::Result<(Vec<u8>, bool)> {
    let (tag, _) = inflate(stream, Some(8))?;
    if tag.len() < 8 {
        return Ok((tag, true));
    }
    let mut n = [0u8; 4];
    n.copy_from_slice(&tag[4..8]);
    let nbytes = match endian {
        Endian::Little => u32::from_le_bytes(n),
        Endian::Big => u32::from_be_bytes(n),
    } as usize;
    inflate(stream, Some(8 + nbytes))
}

/// The `miMATRIX` tag at the start of inflated data, and the buffer limited to it.
fn inflated_matrix(buf: &[u8], endian: Endian, complete: bool) -> Result<(Bytes<'_>, Tag), Corrupt> {
    let b = Bytes { data: buf, endian };
    let dtype = b.u32(0, "compressed element's matrix tag")?;
    if dtype != MI_MATRIX {
        return Err(Corrupt::new(0, format!("expected an miMATRIX element, found {}", type_name(dtype))));
    }
    let nbytes = b.u32(4, "compressed element's matrix tag")? as usize;
    let tag = Tag { at: 0, dtype, nbytes, data_at: 8, small: false };
    if complete {
        b.slice(8, nbytes, "miMATRIX element")?;
    }
    Ok((b.limit(8 + nbytes), tag))
}

/// Walk the file's top-level elements and read each variable's header.
fn scan(path: &Path, bytes: &[u8]) -> Result<(Endian, Vec<Entry>), IoError> {
    let (endian, subsys) = parse_header(path, bytes)?;
    let file = Bytes { data: bytes, endian };
    let in_file = |c| corrupt_error(path, Place::File, c);
    let mut entries = Vec::new();
    let mut at = HEADER_LEN;
    while at < bytes.len() {
        let tag = read_tag(file, at).map_err(in_file)?;
        // Top-level elements are not padded after miCOMPRESSED data (MATLAB and
        // scipy both write the next tag straight after the stream).
        let next = if tag.small { tag.next() } else { tag.data_at + tag.nbytes };
        let is_subsystem = subsys == Some(at);
        match tag.dtype {
            MI_MATRIX if !tag.small && tag.nbytes > 0 && !is_subsystem => {
                let b = file.limit(next);
                let h = matrix_header(b, tag.data_at).map_err(in_file)?;
                entries.push(Entry {
                    info: info_of(h, false, at),
                    body: Body::Plain { at: tag.data_at, end: next },
                });
            }
            MI_COMPRESSED if !tag.small && !is_subsystem => {
                let place = Place::Inflated { element_at: at };
                let stream = &bytes[tag.data_at..next];
                let h = compressed_header(stream, endian).map_err(|e| match e {
                    Inflate::Io(e) => IoError::format(
                        path,
                        format!("the compressed variable at byte {at} does not inflate: {e}"),
                    ),
                    Inflate::Corrupt(c) => corrupt_error(path, place, c),
                })?;
                entries.push(Entry {
                    info: info_of(h, true, at),
                    body: Body::Compressed { tag_at: at, at: tag.data_at, end: next },
                });
            }
            // Subsystem data, empty placeholders and other element types are
            // not variables.
            _ => {}
        }
        at = next;
    }
    entries.retain(|e| !e.info.name.is_empty());
    Ok((endian, entries))
}

enum Inflate {
    Io(std::io::Error),
    Corrupt(Corrupt),
}

/// The header of a compressed variable, inflating only a prefix when that suffices.
fn compressed_header(stream: &[u8], endian: Endian) -> Result<MatrixHeader, Inflate> {
    let (prefix, complete) = inflate(stream, Some(HEADER_PREFIX)).map_err(Inflate::Io)?;
    if !complete {
        let parsed = inflated_matrix(&prefix, endian, false).and_then(|(b, t)| matrix_header(b, t.data_at));
        if let Ok(h) = parsed {
            return Ok(h);
        }
    }
    let (full, _) =
        if complete { (prefix, true) } else { inflate_declared(stream, endian).map_err(Inflate::Io)? };
    let (b, t) = inflated_matrix(&full, endian, true).map_err(Inflate::Corrupt)?;
    matrix_header(b, t.data_at).map_err(Inflate::Corrupt)
}

fn info_of(h: MatrixHeader, compressed: bool, offset: usize) -> MatVariableInfo {
    MatVariableInfo {
        name: h.name,
        class: h.class,
        dims: h.dims,
        logical: h.flags & FLAG_LOGICAL != 0,
        complex: h.flags & FLAG_COMPLEX != 0,
        global: h.flags & FLAG_GLOBAL != 0,
        compressed,
        offset,
    }
}

fn listing(entries: &[Entry]) -> String {
    if entries.is_empty() {
        return "no variables".into();
    }
    entries.iter().map(|e| e.info.to_string()).collect::<Vec<_>>().join(", ")
}

/// The variables a level-5 MAT-file holds, in file order: name, class,
/// dimensions and flags, read from each variable's header without decoding
/// its values. Variables of every class are listed (cell, struct, char,
/// objects too); [`MatVariableInfo::is_numeric`] tells which hierax reads.
///
/// # Errors
/// [`IoError::Os`] when the file cannot be read; [`IoError::Format`] when it
/// is not a level-5 MAT-file (bad header, MATLAB v7.3) or is truncated or
/// corrupt (naming the byte offset).
pub fn list_variables(path: &Path) -> Result<Vec<MatVariableInfo>, IoError> {
    let bytes = read_bytes(path)?;
    let (_, entries) = scan(path, &bytes)?;
    Ok(entries.into_iter().map(|e| e.info).collect())
}

/// Read a variable `file.mat:variable` of a level-5 MAT-file (see the module
/// documentation for the format and conventions). Without a key, the file's
/// only numeric variable is taken.
///
/// The array has MATLAB's shape (rows × cols, or N-D), converted from
/// MATLAB's column-major order to row-major; `stored` is the MATLAB class
/// (`logical` as [`StoredType::Bool`]); sparse matrices are expanded to dense
/// and flagged `sparse`.
///
/// # Errors
/// * [`IoError::MissingKey`] when the variable is absent, and
///   [`IoError::KeyNeeded`] when no key is given and the file holds several
///   numeric variables, both listing the variables as `SC (int32 84x84),
///   names (cell)`;
/// * [`IoError::Format`] when the variable is complex, or not a numeric or
///   logical array (cell, struct, char, function handle, object), when the
///   file is not a level-5 MAT-file (naming MATLAB v7.3 files as such), or
///   when it is truncated or corrupt (naming the byte offset).
pub fn read(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let mut la = read_from_bytes(spec, &bytes)?;
    la.digest = Some(super::provenance::FileDigest::of_bytes(&bytes));
    Ok(la)
}

/// [`read`] on the file's bytes.
fn read_from_bytes(spec: &InputSpec, bytes: &[u8]) -> Result<LoadedArray, IoError> {
    let path = &spec.path;
    let (endian, entries) = scan(path, bytes)?;
    let entry = match &spec.key {
        Some(k) => entries.iter().find(|e| &e.info.name == k).ok_or_else(|| IoError::MissingKey {
            path: path.clone(),
            kind: "variable",
            key: k.clone(),
            available: listing(&entries),
        })?,
        None => {
            let numeric: Vec<&Entry> = entries.iter().filter(|e| e.info.is_numeric()).collect();
            match numeric[..] {
                [only] => only,
                [] => {
                    return Err(IoError::format(
                        path,
                        format!("holds no numeric or logical variable; found: {}", listing(&entries)),
                    ))
                }
                _ => {
                    return Err(IoError::KeyNeeded {
                        path: path.clone(),
                        kind: "variable",
                        available: listing(&entries),
                    })
                }
            }
        }
    };
    let info = &entry.info;
    if !info.is_numeric() {
        return Err(IoError::format(
            path,
            format!("variable `{}` is {}; expected a numeric or logical array", info.name, info.class.noun()),
        ));
    }
    if info.complex {
        return Err(IoError::format(
            path,
            format!("variable `{}` is a {} array; hierax reads real arrays only", info.name, info.kind()),
        ));
    }

    let file = Bytes { data: bytes, endian };
    let (data, lossy) = match entry.body {
        Body::Plain { at, end } => {
            decode_variable(file.limit(end), at).map_err(|c| corrupt_error(path, Place::File, c))?
        }
        Body::Compressed { tag_at, at, end } => {
            let (buf, _) = inflate_declared(&bytes[at..end], endian).map_err(|e| {
                IoError::format(
                    path,
                    format!("the compressed variable at byte {tag_at} does not inflate: {e}"),
                )
            })?;
            let place = Place::Inflated { element_at: tag_at };
            let (b, t) = inflated_matrix(&buf, endian, true).map_err(|c| corrupt_error(path, place, c))?;
            decode_variable(b, t.data_at).map_err(|c| corrupt_error(path, place, c))?
        }
    };
    let stored = if info.logical {
        StoredType::Bool
    } else if info.class == MatClass::Sparse {
        StoredType::Float64
    } else {
        info.class.stored().unwrap_or(StoredType::Float64)
    };
    let mut la = LoadedArray::new(InputSpec::new(path.clone(), Some(&info.name)), data, stored);
    la.sparse = info.class == MatClass::Sparse;
    if lossy {
        la.notes.push("64-bit integers beyond 2^53 lost precision when converted to float64".into());
    }
    Ok(la)
}

/// Decode the numeric `miMATRIX` whose data start at `at` into a row-major
/// array of MATLAB's shape (logical values as 0/1), and whether precision was lost.
fn decode_variable(b: Bytes<'_>, at: usize) -> Result<(ArrayD<f64>, bool), Corrupt> {
    let h = matrix_header(b, at)?;
    let (mut data, lossy) = if h.class == MatClass::Sparse {
        let dense = read_sparse(b, &h)?;
        let a = ArrayD::from_shape_vec(IxDyn(&h.dims), dense)
            .map_err(|e| Corrupt::new(h.body_at, e.to_string()))?;
        (a, false)
    } else {
        let n = read_dense(b, &h)?;
        let a = column_major_to_array(&h.dims, n.values).map_err(|e| Corrupt::new(h.body_at, e))?;
        (a, n.lossy)
    };
    if h.flags & FLAG_LOGICAL != 0 && h.class != MatClass::Sparse {
        // Any non-zero byte is true (sparse ones are mapped in `read_sparse`).
        data.mapv_inplace(|v| if v != 0.0 { 1.0 } else { 0.0 });
    }
    Ok((data, lossy))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Build elements in either byte order (a miniature writer for tests).
    struct W(Endian);
    impl W {
        fn u32(&self, v: u32) -> [u8; 4] {
            match self.0 {
                Endian::Little => v.to_le_bytes(),
                Endian::Big => v.to_be_bytes(),
            }
        }
        fn element(&self, dtype: u32, payload: &[u8], small_ok: bool) -> Vec<u8> {
            let n = payload.len();
            let mut out = Vec::new();
            if small_ok && n <= 4 {
                out.extend(self.u32(((n as u32) << 16) | dtype));
                out.extend(payload);
                out.resize(8, 0);
            } else {
                out.extend(self.u32(dtype));
                out.extend(self.u32(n as u32));
                out.extend(payload);
                out.resize(8 + n.div_ceil(8) * 8, 0);
            }
            out
        }
        fn i32s(&self, v: &[i32]) -> Vec<u8> {
            v.iter().flat_map(|&x| self.u32(x as u32)).collect()
        }
        fn f64s(&self, v: &[f64]) -> Vec<u8> {
            v.iter()
                .flat_map(|&x| match self.0 {
                    Endian::Little => x.to_le_bytes(),
                    Endian::Big => x.to_be_bytes(),
                })
                .collect()
        }
        fn matrix(&self, class: u8, flags: u8, dims: &[i32], name: &str, parts: &[Vec<u8>]) -> Vec<u8> {
            let mut flag_words = Vec::new();
            flag_words.extend(self.u32(u32::from(class) | (u32::from(flags) << 8)));
            flag_words.extend(self.u32(0));
            let mut body = self.element(MI_UINT32, &flag_words, false);
            body.extend(self.element(MI_INT32, &self.i32s(dims), false));
            body.extend(self.element(MI_INT8, name.as_bytes(), true));
            for p in parts {
                body.extend(p);
            }
            let mut out = Vec::new();
            out.extend(self.u32(MI_MATRIX));
            out.extend(self.u32(body.len() as u32));
            out.extend(body);
            out
        }
    }

    #[test]
    fn tag_normal_and_small_in_both_byte_orders() {
        for endian in [Endian::Little, Endian::Big] {
            let w = W(endian);
            let mut buf = w.element(MI_DOUBLE, &w.f64s(&[1.5, -2.0]), true);
            buf.extend(w.element(MI_INT16, &[0, 7], true));
            let b = Bytes { data: &buf, endian };
            let t = read_tag(b, 0).unwrap();
            assert_eq!(t, Tag { at: 0, dtype: MI_DOUBLE, nbytes: 16, data_at: 8, small: false });
            assert_eq!(t.next(), 24);
            assert_eq!(decode(b, &t, "x").unwrap().values, vec![1.5, -2.0]);
            let s = read_tag(b, 24).unwrap();
            assert_eq!(s, Tag { at: 24, dtype: MI_INT16, nbytes: 2, data_at: 28, small: true });
            assert_eq!(s.next(), 32);
            // Bytes [0, 7] are 7 big-endian and 1792 little-endian.
            let want = if endian == Endian::Big { 7.0 } else { 1792.0 };
            assert_eq!(decode(b, &s, "x").unwrap().values, vec![want]);
        }
        // The byte order of the small-format word, written out by hand: a
        // little-endian small element of 3 bytes of miUINT8 is 02 00 03 00.
        let buf = [2u8, 0, 3, 0, 10, 20, 30, 0];
        let b = Bytes { data: &buf, endian: Endian::Little };
        let t = read_tag(b, 0).unwrap();
        assert!(t.small && t.dtype == MI_UINT8 && t.nbytes == 3);
        assert_eq!(decode(b, &t, "x").unwrap().values, vec![10.0, 20.0, 30.0]);
        let buf = [0u8, 3, 0, 2, 10, 20, 30, 0];
        let t = read_tag(Bytes { data: &buf, endian: Endian::Big }, 0).unwrap();
        assert!(t.small && t.dtype == MI_UINT8 && t.nbytes == 3);
    }

    #[test]
    fn tag_errors_name_the_offset() {
        let w = W(Endian::Little);
        let buf = w.element(MI_DOUBLE, &w.f64s(&[1.0, 2.0]), false);
        let short = &buf[..20];
        let e = read_tag(Bytes { data: short, endian: Endian::Little }, 0).unwrap_err();
        assert_eq!(e.offset, 8);
        assert!(e.what.contains("miDOUBLE element needs 16 bytes but only 12 remain"), "{}", e.what);
        // A small element claiming more than 4 bytes.
        let bad = [9u8, 0, 5, 0, 0, 0, 0, 0];
        let e = read_tag(Bytes { data: &bad, endian: Endian::Little }, 0).unwrap_err();
        assert!(e.what.contains("claims 5 bytes"), "{}", e.what);
        // Data that are not a whole number of values.
        let odd = w.element(MI_INT32, &[1, 2, 3, 4, 5, 6], false);
        let b = Bytes { data: &odd, endian: Endian::Little };
        let e = decode(b, &read_tag(b, 0).unwrap(), "real part").unwrap_err();
        assert!(e.what.contains("6 bytes is not a whole number of miINT32"), "{}", e.what);
    }

    #[test]
    fn int64_beyond_2_pow_53_is_flagged_lossy() {
        let w = W(Endian::Little);
        let exact: Vec<u8> = [1i64 << 53, -(1i64 << 53)].iter().flat_map(|v| v.to_le_bytes()).collect();
        let b_exact = w.element(MI_INT64, &exact, false);
        let b = Bytes { data: &b_exact, endian: Endian::Little };
        assert!(!decode(b, &read_tag(b, 0).unwrap(), "x").unwrap().lossy);
        let inexact: Vec<u8> = ((1i64 << 53) + 1).to_le_bytes().to_vec();
        let b_inexact = w.element(MI_INT64, &inexact, false);
        let b = Bytes { data: &b_inexact, endian: Endian::Little };
        assert!(decode(b, &read_tag(b, 0).unwrap(), "x").unwrap().lossy);
        let max: Vec<u8> = u64::MAX.to_le_bytes().to_vec();
        let b_max = w.element(MI_UINT64, &max, false);
        let b = Bytes { data: &b_max, endian: Endian::Little };
        assert!(decode(b, &read_tag(b, 0).unwrap(), "x").unwrap().lossy);
    }

    #[test]
    fn column_major_is_reordered_to_matlab_shape() {
        // MATLAB A = [1 2 3; 4 5 6] is stored 1 4 2 5 3 6.
        let a = column_major_to_array(&[2, 3], vec![1.0, 4.0, 2.0, 5.0, 3.0, 6.0]).unwrap();
        assert_eq!(a.shape(), &[2, 3]);
        assert!(a.is_standard_layout());
        assert_eq!(a.iter().copied().collect::<Vec<_>>(), vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
        // 3-D: element (i, j, k) of a 2x3x2 array sits at i + 2j + 6k.
        let col: Vec<f64> = (0..12).map(f64::from).collect();
        let a = column_major_to_array(&[2, 3, 2], col).unwrap();
        for i in 0..2 {
            for j in 0..3 {
                for k in 0..2 {
                    assert_eq!(a[[i, j, k]], (i + 2 * j + 6 * k) as f64);
                }
            }
        }
    }

    #[test]
    fn double_class_with_uint8_data_small_element_big_endian() {
        let w = W(Endian::Big);
        // 2x2 double [10 30; 20 40] stored as 4 bytes of miUINT8: a small element.
        let m = w.matrix(6, 0, &[2, 2], "a", &[w.element(MI_UINT8, &[10, 20, 30, 40], true)]);
        let b = Bytes { data: &m, endian: Endian::Big };
        let h = matrix_header(b, 8).unwrap();
        assert_eq!(h.class, MatClass::Double);
        assert_eq!(h.dims, vec![2, 2]);
        assert_eq!(h.name, "a");
        let (a, lossy) = decode_variable(b, 8).unwrap();
        assert!(!lossy);
        assert_eq!(a.shape(), &[2, 2]);
        assert_eq!(a.iter().copied().collect::<Vec<_>>(), vec![10.0, 30.0, 20.0, 40.0]);
    }

    #[test]
    fn sparse_to_dense_and_logical_sparse() {
        let w = W(Endian::Little);
        // 3x3, entries (0,0)=1, (2,0)=2, (1,2)=3 in CSC: ir 0 2 1, jc 0 2 2 3.
        let parts = [
            w.element(MI_INT32, &w.i32s(&[0, 2, 1]), true),
            w.element(MI_INT32, &w.i32s(&[0, 2, 2, 3]), true),
            w.element(MI_DOUBLE, &w.f64s(&[1.0, 2.0, 3.0]), true),
        ];
        let m = w.matrix(5, 0, &[3, 3], "sp", &parts);
        let b = Bytes { data: &m, endian: Endian::Little };
        let h = matrix_header(b, 8).unwrap();
        // Row-major: [1 0 0; 0 0 3; 2 0 0].
        let want = vec![1.0, 0.0, 0.0, 0.0, 0.0, 3.0, 2.0, 0.0, 0.0];
        assert_eq!(read_sparse(b, &h).unwrap(), want);
        let (a, _) = decode_variable(b, 8).unwrap();
        assert_eq!((a.shape(), a.iter().copied().collect::<Vec<_>>()), (&[3usize, 3][..], want));
        // Logical sparse with uint8 values (small element) reads as 0/1.
        let parts = [
            w.element(MI_INT32, &w.i32s(&[1]), true),
            w.element(MI_INT32, &w.i32s(&[0, 0, 1]), true),
            w.element(MI_UINT8, &[1], true),
        ];
        let m = w.matrix(5, FLAG_LOGICAL, &[2, 2], "l", &parts);
        let b = Bytes { data: &m, endian: Endian::Little };
        let (a, _) = decode_variable(b, 8).unwrap();
        assert_eq!(a.iter().copied().collect::<Vec<_>>(), vec![0.0, 0.0, 0.0, 1.0]);
        // A row index beyond the row count is caught.
        let parts = [
            w.element(MI_INT32, &w.i32s(&[5]), true),
            w.element(MI_INT32, &w.i32s(&[0, 1, 1]), true),
            w.element(MI_DOUBLE, &w.f64s(&[1.0]), true),
        ];
        let m = w.matrix(5, 0, &[2, 2], "bad", &parts);
        let b = Bytes { data: &m, endian: Endian::Little };
        let e = decode_variable(b, 8).unwrap_err();
        assert!(e.what.contains("sparse row indices (ir): value 5 is outside 0..2"), "{}", e.what);
        // jc of the wrong length.
        let parts = [
            w.element(MI_INT32, &w.i32s(&[0]), true),
            w.element(MI_INT32, &w.i32s(&[0, 1]), true),
            w.element(MI_DOUBLE, &w.f64s(&[1.0]), true),
        ];
        let m = w.matrix(5, 0, &[2, 2], "bad", &parts);
        let e = decode_variable(Bytes { data: &m, endian: Endian::Little }, 8).unwrap_err();
        assert!(e.what.contains("expected 3 non-decreasing values from 0, found 2"), "{}", e.what);
    }

    #[test]
    fn value_count_must_match_dimensions() {
        let w = W(Endian::Little);
        let m = w.matrix(6, 0, &[2, 2], "x", &[w.element(MI_DOUBLE, &w.f64s(&[1.0, 2.0, 3.0]), true)]);
        let e = decode_variable(Bytes { data: &m, endian: Endian::Little }, 8).unwrap_err();
        assert!(e.what.contains("real part holds 3 values but dimensions [2, 2] need 4"), "{}", e.what);
    }

    #[test]
    fn a_stream_inflating_beyond_its_declared_size_is_capped() {
        use std::io::Write;
        let w = W(Endian::Little);
        let m = w.matrix(12, 0, &[1, 2], "conn", &[w.element(MI_INT32, &w.i32s(&[4, -5]), true)]);
        let declared = m.len();
        // 64 MiB of zeros after the variable: the stream inflates far beyond what the tag declares.
        let mut z = flate2::write::ZlibEncoder::new(Vec::new(), flate2::Compression::default());
        z.write_all(&m).unwrap();
        z.write_all(&vec![0u8; 64 << 20]).unwrap();
        let stream = z.finish().unwrap();
        let (buf, complete) = inflate_declared(&stream, Endian::Little).unwrap();
        assert_eq!(buf.len(), declared);
        assert!(!complete);
    }

    #[test]
    fn compressed_header_and_truncated_stream() {
        use std::io::Write;
        let w = W(Endian::Little);
        // A name longer than the inflated prefix forces the full-inflate path too.
        for name in ["conn".to_string(), "n".repeat(HEADER_PREFIX + 10)] {
            let m = w.matrix(12, 0, &[1, 2], &name, &[w.element(MI_INT32, &w.i32s(&[4, -5]), true)]);
            let mut z = flate2::write::ZlibEncoder::new(Vec::new(), flate2::Compression::default());
            z.write_all(&m).unwrap();
            let stream = z.finish().unwrap();
            let h = compressed_header(&stream, Endian::Little).ok().unwrap();
            assert_eq!((h.class, h.dims.clone(), h.name.len()), (MatClass::Int32, vec![1, 2], name.len()));
            let (buf, complete) = inflate(&stream, None).unwrap();
            assert!(complete);
            let (b, t) = inflated_matrix(&buf, Endian::Little, true).unwrap();
            let (a, _) = decode_variable(b, t.data_at).unwrap();
            assert_eq!(a.iter().copied().collect::<Vec<_>>(), vec![4.0, -5.0]);
            // A cut stream fails to inflate or inflates short; either way it is an error.
            let cut = &stream[..stream.len() / 2];
            match inflate(cut, None) {
                Err(_) => {}
                Ok((buf, _)) => {
                    let e = inflated_matrix(&buf, Endian::Little, true)
                        .and_then(|(b, t)| decode_variable(b, t.data_at))
                        .unwrap_err();
                    assert!(e.what.contains("needs"), "{}", e.what);
                }
            }
        }
    }

    /// Every truncation length and every single flipped byte (XOR 0xFF) of
    /// three small fixtures, read under each of their keys: a value or an
    /// error naming the file, never a panic.
    #[test]
    fn damaged_files_never_panic() {
        let files: [(&str, &[u8]); 3] = [
            ("mixed.mat", include_bytes!("../../tests/data/arrays/mixed.mat")),
            ("handmade_be.mat", include_bytes!("../../tests/data/arrays/handmade_be.mat")),
            (
                "handmade_le_compressed.mat",
                include_bytes!("../../tests/data/arrays/handmade_le_compressed.mat"),
            ),
        ];
        let (mut attempts, mut errors) = (0usize, 0usize);
        for (name, original) in files {
            let path = Path::new(name);
            let (_, entries) = scan(path, original).unwrap();
            let keys: Vec<String> = entries.into_iter().map(|e| e.info.name).collect();
            assert!(keys.len() >= 4, "{keys:?}");
            let mut check = |bytes: &[u8]| {
                for key in &keys {
                    attempts += 1;
                    if let Err(e) = read_from_bytes(&InputSpec::new(path, Some(key)), bytes) {
                        errors += 1;
                        let msg = e.to_string();
                        assert!(msg.starts_with(name) && !msg.contains('\n'), "{msg}");
                    }
                }
            };
            for len in 0..original.len() {
                check(&original[..len]);
            }
            for pos in 0..original.len() {
                let mut bytes = original.to_vec();
                bytes[pos] ^= 0xff;
                check(&bytes);
            }
        }
        // Truncations are nearly always refused; flipped value bytes read fine.
        assert!(errors * 2 > attempts, "{errors} errors in {attempts} reads");
    }

    #[test]
    fn header_checks() {
        let p = Path::new("x.mat");
        let mut h = vec![b' '; 128];
        h[..10].copy_from_slice(b"MATLAB 5.0");
        h[116..124].fill(0);
        h[124..126].copy_from_slice(&0x0100u16.to_le_bytes());
        h[126..128].copy_from_slice(b"IM");
        assert_eq!(parse_header(p, &h).unwrap(), (Endian::Little, None));
        let mut be = h.clone();
        be[124..126].copy_from_slice(&0x0100u16.to_be_bytes());
        be[126..128].copy_from_slice(b"MI");
        assert_eq!(parse_header(p, &be).unwrap().0, Endian::Big);
        let mut v73 = h.clone();
        v73[124..126].copy_from_slice(&0x0200u16.to_le_bytes());
        let e = parse_header(p, &v73).unwrap_err().to_string();
        assert!(e.contains("is a MATLAB v7.3 (HDF5) file"), "{e}");
        let mut v4 = h.clone();
        v4[..4].copy_from_slice(&[0, 0, 0, 0]);
        v4[126..128].copy_from_slice(b"\0\0");
        let e = parse_header(p, &v4).unwrap_err().to_string();
        assert!(e.contains("level-4 MAT-file"), "{e}");
        let e = parse_header(p, &h[..100]).unwrap_err().to_string();
        assert!(e.contains("it has 100 bytes, fewer than the 128-byte header"), "{e}");
    }
}
