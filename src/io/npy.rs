//! NumPy `.npy` and `.npz` files, through the `ndarray-npy` crate.
//!
//! Element types read: float64, float32, int8–int64, uint8–uint64 and bool,
//! little- or big-endian, C or Fortran order, `.npz` stored or deflated.
//! Values become `f64`; integers beyond ±2⁵³ would lose precision, and when
//! that happens it is said in the notes.

use super::{read_bytes, InputSpec, IoError, LoadedArray, StoredType};
use ndarray::{ArrayD, OwnedRepr};
use ndarray_npy::{NpzReader, ReadNpyError, ReadNpyExt, ReadNpzError, ReadableElement};
use std::io::Cursor;

const EXACT_LIMIT: f64 = 9_007_199_254_740_992.0; // 2^53

/// Where an array comes from: a `.npy` byte buffer or one member of an `.npz`.
trait NpySource {
    fn read_as<T: ReadableElement>(&mut self) -> Result<ArrayD<T>, ReadNpyError>;
}

struct NpyBytes<'a>(&'a [u8]);
impl NpySource for NpyBytes<'_> {
    fn read_as<T: ReadableElement>(&mut self) -> Result<ArrayD<T>, ReadNpyError> {
        ArrayD::<T>::read_npy(Cursor::new(self.0))
    }
}

struct NpzMember<'a> {
    zip: &'a mut NpzReader<Cursor<Vec<u8>>>,
    name: String,
    /// An error of the archive itself (not of the array), kept to report.
    archive_error: Option<String>,
}
impl NpySource for NpzMember<'_> {
    fn read_as<T: ReadableElement>(&mut self) -> Result<ArrayD<T>, ReadNpyError> {
        match self.zip.by_name::<OwnedRepr<T>, ndarray::IxDyn>(&self.name) {
            Ok(a) => Ok(a),
            Err(ReadNpzError::Npy(e)) => Err(e),
            Err(other) => {
                self.archive_error = Some(other.to_string());
                Err(ReadNpyError::MissingData)
            }
        }
    }
}

/// Decode trying each element type in turn until the descriptor matches.
fn decode<S: NpySource>(src: &mut S) -> Result<(ArrayD<f64>, StoredType), ReadNpyError> {
    macro_rules! attempt {
        ($t:ty, $stored:expr, $conv:expr) => {
            match src.read_as::<$t>() {
                Ok(a) => return Ok((a.mapv($conv), $stored)),
                Err(ReadNpyError::WrongDescriptor(_)) => {}
                Err(e) => return Err(e),
            }
        };
    }
    attempt!(f64, StoredType::Float64, |v| v);
    attempt!(f32, StoredType::Float32, f64::from);
    attempt!(i64, StoredType::Int64, |v| v as f64);
    attempt!(i32, StoredType::Int32, f64::from);
    attempt!(i16, StoredType::Int16, f64::from);
    attempt!(i8, StoredType::Int8, f64::from);
    attempt!(u64, StoredType::Uint64, |v| v as f64);
    attempt!(u32, StoredType::Uint32, f64::from);
    attempt!(u16, StoredType::Uint16, f64::from);
    attempt!(u8, StoredType::Uint8, f64::from);
    // The last attempt returns its own error, naming the descriptor found.
    src.read_as::<bool>().map(|a| (a.mapv(|v| if v { 1.0 } else { 0.0 }), StoredType::Bool))
}

fn describe(e: &ReadNpyError) -> String {
    match e {
        ReadNpyError::WrongDescriptor(d) => {
            format!("element type {d} is not supported; expected float64/32, (u)int8-64 or bool")
        }
        other => format!("not a readable .npy array: {other}"),
    }
}

fn finish(spec: &InputSpec, data: ArrayD<f64>, stored: StoredType) -> LoadedArray {
    // A Fortran-order file decodes to a column-major buffer; store it row-major
    // as `LoadedArray` promises, so raw-buffer users see the logical order.
    let data = if data.is_standard_layout() { data } else { data.as_standard_layout().into_owned() };
    let mut la = LoadedArray::new(spec.clone(), data, stored);
    if matches!(stored, StoredType::Int64 | StoredType::Uint64)
        && la.data.iter().any(|v| v.abs() >= EXACT_LIMIT)
    {
        // Checked after conversion, so values of magnitude 2^53 or more are flagged: some of them
        // (those that are odd) rounded when they became float64.
        la.notes.push("integers of magnitude 2^53 or more may have lost precision as float64".into());
    }
    la
}

/// Read a `.npy` file.
///
/// # Errors
/// [`IoError::Spec`] when a KEY is given (a `.npy` holds one array),
/// [`IoError::Format`] when the file is not a readable array.
pub fn read_npy_file(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    if let Some(k) = &spec.key {
        return Err(IoError::Spec {
            spec: spec.to_string(),
            reason: format!("a .npy file holds one array; drop the key `{k}`"),
        });
    }
    let bytes = read_bytes(&spec.path)?;
    let (data, stored) =
        decode(&mut NpyBytes(&bytes)).map_err(|e| IoError::format(&spec.path, describe(&e)))?;
    Ok(finish(spec, data, stored))
}

/// Read one array of a `.npz` archive; the key may be omitted when it holds one.
///
/// # Errors
/// [`IoError::KeyNeeded`] / [`IoError::MissingKey`] listing the arrays in the
/// archive, [`IoError::Format`] when it is not a readable archive.
pub fn read_npz_file(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let not_npz = |e: ReadNpzError| IoError::format(&spec.path, format!("not a readable .npz archive: {e}"));
    let mut zip = NpzReader::new(Cursor::new(bytes)).map_err(not_npz)?;
    let names: Vec<String> = zip
        .names()
        .map_err(not_npz)?
        .into_iter()
        .map(|n| n.strip_suffix(".npy").map(str::to_string).unwrap_or(n))
        .collect();
    let key = match &spec.key {
        Some(k) if names.iter().any(|n| n == k) => k.clone(),
        Some(k) => {
            return Err(IoError::MissingKey {
                path: spec.path.clone(),
                kind: "array",
                key: k.clone(),
                available: names.join(", "),
            })
        }
        None if names.len() == 1 => names[0].clone(),
        None => {
            return Err(IoError::KeyNeeded {
                path: spec.path.clone(),
                kind: "array",
                available: names.join(", "),
            })
        }
    };
    let mut member = NpzMember { zip: &mut zip, name: key.clone(), archive_error: None };
    let decoded = decode(&mut member);
    if let Some(e) = member.archive_error {
        return Err(IoError::format(&spec.path, format!("array `{key}`: {e}")));
    }
    let (data, stored) =
        decoded.map_err(|e| IoError::format(&spec.path, format!("array `{key}`: {}", describe(&e))))?;
    let mut la = finish(spec, data, stored);
    la.spec.key = Some(key);
    Ok(la)
}

/// The arrays of a `.npz` archive as `name (shape dtype)`, for listing.
///
/// # Errors
/// As [`read_npz_file`].
pub fn list_npz(path: &std::path::Path) -> Result<Vec<String>, IoError> {
    let bytes = read_bytes(path)?;
    let not_npz = |e: ReadNpzError| IoError::format(path, format!("not a readable .npz archive: {e}"));
    let mut zip = NpzReader::new(Cursor::new(bytes)).map_err(not_npz)?;
    let names: Vec<String> = zip.names().map_err(not_npz)?;
    let mut out = Vec::new();
    for raw in names {
        let name = raw.strip_suffix(".npy").unwrap_or(&raw).to_string();
        let mut member = NpzMember { zip: &mut zip, name: raw.clone(), archive_error: None };
        let described = match decode(&mut member) {
            Ok((a, stored)) => {
                let dims: Vec<String> = a.shape().iter().map(|d| d.to_string()).collect();
                format!("{name} ({} {stored})", dims.join("x"))
            }
            Err(e) => format!("{name} (unreadable: {})", describe(&e)),
        };
        out.push(described);
    }
    Ok(out)
}

/// Write `data` as a float64 `.npy` file at `path`, atomically.
///
/// # Errors
/// [`IoError::Os`] when the file cannot be written.
pub fn write_npy_f64(path: &std::path::Path, data: &ArrayD<f64>) -> Result<(), IoError> {
    use ndarray_npy::WriteNpyExt;
    super::atomic::write_atomic(path, |w| data.write_npy(w).map_err(|e| std::io::Error::other(e.to_string())))
}
