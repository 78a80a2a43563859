//! NumPy `.npy` and `.npz` files, through the `ndarray-npy` crate.
//!
//! Element types read: float64, float32, int8–int64, uint8–uint64 and bool,
//! little- or big-endian, C or Fortran order, `.npz` stored or deflated.
//! Values become `f64`; integers beyond ±2⁵³ would lose precision, and when
//! that happens it is said in the notes.

use super::provenance::{DigestingReader, FileDigest};
use super::{read_bytes, InputSpec, IoError, LoadedArray, StoredType};
use ndarray::{ArrayD, OwnedRepr};
use ndarray_npy::{NpzReader, ReadNpyError, ReadNpyExt, ReadNpzError, ReadableElement};
use std::io::Cursor;

const EXACT_LIMIT: f64 = 9_007_199_254_740_992.0; // 2^53

/// Where an array comes from: a `.npy` byte buffer or one member of an `.npz`.
trait NpySource {
    fn read_as<T: ReadableElement>(&mut self) -> Result<ArrayD<T>, ReadNpyError>;
}

/// A `.npy` file read straight into the array (no copy of the file's bytes
/// in memory); each decoding attempt reopens it. The attempt that decodes
/// also digests the file in the same pass.
struct NpyFile<'a> {
    path: &'a std::path::Path,
    digest: Option<FileDigest>,
}
impl NpySource for NpyFile<'_> {
    fn read_as<T: ReadableElement>(&mut self) -> Result<ArrayD<T>, ReadNpyError> {
        let f = std::fs::File::open(self.path).map_err(ReadNpyError::Io)?;
        let mut reader = DigestingReader::new(std::io::BufReader::with_capacity(1 << 20, f));
        let a = ArrayD::<T>::read_npy(&mut reader)?;
        self.digest = Some(reader.finish().map_err(ReadNpyError::Io)?);
        Ok(a)
    }
}

struct NpzMember<'a, 'b> {
    zip: &'a mut NpzReader<Cursor<&'b [u8]>>,
    name: String,
    /// An error of the archive itself (not of the array), kept to report.
    archive_error: Option<String>,
}
impl NpySource for NpzMember<'_, '_> {
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
    // float64 as stored: no conversion pass, no second copy.
    match src.read_as::<f64>() {
        Ok(a) => return Ok((a, StoredType::Float64)),
        Err(ReadNpyError::WrongDescriptor(_)) => {}
        Err(e) => return Err(e),
    }
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

/// The npy format's largest deflate expansion: zlib's maximum compression
/// ratio is about 1032:1 (RFC 1951 blocks of 258-byte matches), so a member
/// cannot hold more than this many bytes per compressed byte.
const MAX_DEFLATE_RATIO: u64 = 1032;

/// Header length and declared data size (bytes) of an npy stream, from its
/// preamble and header dictionary (NumPy's format: magic `\x93NUMPY`,
/// version, little-endian header length, then a Python dict literal with
/// `descr` and `shape`). Checked before anything is allocated, so a tiny
/// file that declares a huge array is refused instead of aborting the
/// process.
fn declared_size(head: &[u8]) -> Result<(u64, u64), String> {
    if head.len() < 10 || &head[..6] != b"\x93NUMPY" {
        return Err("it does not start with the NumPy magic string".into());
    }
    let (len, start) = match head[6] {
        1 => (u16::from_le_bytes([head[8], head[9]]) as u64, 10u64),
        2 | 3 if head.len() >= 12 => (u32::from_le_bytes([head[8], head[9], head[10], head[11]]) as u64, 12),
        v => return Err(format!("npy format version {v} is not supported")),
    };
    let end = (start + len).min(head.len() as u64) as usize;
    let dict = String::from_utf8_lossy(&head[start as usize..end]);
    let descr =
        dict.split("'descr'").nth(1).and_then(|r| r.split('\'').nth(1)).ok_or("the header has no 'descr'")?;
    let item: u64 =
        descr.trim_start_matches(['<', '>', '|', '=']).get(1..).and_then(|d| d.parse().ok()).unwrap_or(8);
    let shape = dict
        .split("'shape'")
        .nth(1)
        .and_then(|r| r.split('(').nth(1))
        .and_then(|r| r.split(')').next())
        .ok_or("the header has no 'shape'")?;
    let mut total = item;
    for d in shape.split(',').map(str::trim).filter(|d| !d.is_empty()) {
        let d: u64 = d.parse().map_err(|_| format!("shape entry `{d}` is not a number"))?;
        total = total.checked_mul(d).ok_or("the declared shape overflows")?;
    }
    Ok((start + len, total))
}

/// Refuse an npy stream whose declared data exceed `available` bytes.
fn check_declared(path: &std::path::Path, what: &str, head: &[u8], available: u64) -> Result<(), IoError> {
    let (header, data) = declared_size(head)
        .map_err(|e| IoError::format(path, format!("{what}not a readable .npy array: {e}")))?;
    if header.saturating_add(data) > available {
        return Err(IoError::format(
            path,
            format!(
                "{what}the header declares {data} bytes of data but only {} are present; the file is truncated or \
                 corrupt",
                available.saturating_sub(header)
            ),
        ));
    }
    Ok(())
}

/// Bytes of an npy file read for its header: enough for any version-1
/// header (at most 65,535 bytes of dictionary) with room to spare.
const NPY_HEAD_BYTES: usize = 1 << 17;

/// The first `max` bytes of `path` (fewer if the file is shorter).
fn read_head(path: &std::path::Path, max: usize) -> Result<Vec<u8>, IoError> {
    use std::io::Read;
    let f = std::fs::File::open(path).map_err(|e| IoError::os(path, "cannot open", e))?;
    let mut head = Vec::with_capacity(max.min(1 << 12));
    f.take(max as u64).read_to_end(&mut head).map_err(|e| IoError::os(path, "cannot read", e))?;
    Ok(head)
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
    // The header alone is checked against the file size before anything is allocated; the data
    // are then read straight into the array, so memory holds one copy.
    let head = read_head(&spec.path, NPY_HEAD_BYTES)?;
    let size = std::fs::metadata(&spec.path).map_err(|e| IoError::os(&spec.path, "cannot read", e))?.len();
    check_declared(&spec.path, "", &head, size)?;
    let mut file = NpyFile { path: &spec.path, digest: None };
    let (data, stored) = decode(&mut file).map_err(|e| IoError::format(&spec.path, describe(&e)))?;
    let mut la = finish(spec, data, stored);
    la.digest = file.digest;
    Ok(la)
}

/// The 2-D float64 array of a `.npy` file's bytes as a view, without a
/// copy, when the file stores native-endian float64 in either memory order
/// at an aligned offset (numpy pads the header to 64 bytes); `None` for
/// anything else, which the reader ([`read_npy_file`]) handles or refuses
/// with its own message. For memory-mapped files: the caller maps the file
/// (the library has no unsafe code) and borrows the view.
pub fn view_f64_matrix(bytes: &[u8]) -> Option<ndarray::ArrayView2<'_, f64>> {
    use ndarray_npy::ViewNpyExt;
    ndarray::ArrayView2::<f64>::view_npy(bytes).ok()
}

/// Read one array of a `.npz` archive; the key may be omitted when it holds one.
///
/// # Errors
/// [`IoError::KeyNeeded`] / [`IoError::MissingKey`] listing the arrays in the
/// archive, [`IoError::Format`] when it is not a readable archive.
pub fn read_npz_file(spec: &InputSpec) -> Result<LoadedArray, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let not_npz = |e: ReadNpzError| IoError::format(&spec.path, format!("not a readable .npz archive: {e}"));
    let mut zip = NpzReader::new(Cursor::new(&bytes[..])).map_err(not_npz)?;
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
    check_member(spec, &bytes, &key)?;
    let mut member = NpzMember { zip: &mut zip, name: key.clone(), archive_error: None };
    let decoded = decode(&mut member);
    if let Some(e) = member.archive_error {
        return Err(IoError::format(&spec.path, format!("array `{key}`: {e}")));
    }
    let (data, stored) =
        decoded.map_err(|e| IoError::format(&spec.path, format!("array `{key}`: {}", describe(&e))))?;
    let mut la = finish(spec, data, stored);
    la.spec.key = Some(key);
    la.digest = Some(FileDigest::of_bytes(&bytes));
    Ok(la)
}

/// Check an `.npz` member's declared array against what the archive can
/// hold: its stated uncompressed size, and at most [`MAX_DEFLATE_RATIO`]
/// bytes per compressed byte.
fn check_member(spec: &InputSpec, bytes: &[u8], key: &str) -> Result<(), IoError> {
    use std::io::Read;
    let bad = |e: String| IoError::format(&spec.path, format!("array `{key}`: {e}"));
    let mut archive = zip::ZipArchive::new(Cursor::new(bytes)).map_err(|e| bad(e.to_string()))?;
    let with_ext = format!("{key}.npy");
    let name = if archive.index_for_name(&with_ext).is_some() { with_ext } else { key.to_string() };
    let mut file = archive.by_name(&name).map_err(|e| bad(e.to_string()))?;
    let (size, compressed) = (file.size(), file.compressed_size());
    let bound = match file.compression() {
        zip::CompressionMethod::Stored => compressed,
        _ => compressed.saturating_mul(MAX_DEFLATE_RATIO),
    };
    let mut head = vec![0u8; 12];
    let got = file.read(&mut head).map_err(|e| bad(e.to_string()))?;
    head.truncate(got);
    if got >= 10 {
        let header = match head[6] {
            1 => 10 + u16::from_le_bytes([head[8], head[9]]) as u64,
            _ if got >= 12 => 12 + u32::from_le_bytes([head[8], head[9], head[10], head[11]]) as u64,
            _ => 12,
        };
        let mut rest = vec![0u8; (header.min(1 << 20) as usize).saturating_sub(got)];
        file.read_exact(&mut rest).map_err(|e| bad(format!("header: {e}")))?;
        head.extend_from_slice(&rest);
    }
    check_declared(&spec.path, &format!("array `{key}`: "), &head, size.min(bound))
}

/// The arrays of a `.npz` archive as `name (shape dtype)`, for listing.
///
/// # Errors
/// As [`read_npz_file`].
pub fn list_npz(path: &std::path::Path) -> Result<Vec<String>, IoError> {
    let bytes = read_bytes(path)?;
    let not_npz = |e: ReadNpzError| IoError::format(path, format!("not a readable .npz archive: {e}"));
    let mut zip = NpzReader::new(Cursor::new(&bytes[..])).map_err(not_npz)?;
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

#[cfg(test)]
mod tests {
    use super::*;

    /// A 128-byte file whose header declares 200000 x 200000 float64 (320 GB).
    fn huge_header() -> Vec<u8> {
        let dict = "{'descr': '<f8', 'fortran_order': False, 'shape': (200000, 200000), }";
        let mut h = format!("{dict:<117}\n").into_bytes();
        let mut b = b"\x93NUMPY\x01\x00".to_vec();
        b.extend_from_slice(&(h.len() as u16).to_le_bytes());
        b.append(&mut h);
        b.extend_from_slice(&[0u8; 16]);
        b
    }

    #[test]
    fn a_float64_matrix_file_is_viewed_in_place_in_either_order() {
        let dir = tempfile::tempdir().unwrap();
        let m = ndarray::Array2::from_shape_fn((4, 3), |(i, j)| (i * 3 + j) as f64 - 0.5);
        for (name, a) in
            [("c.npy", m.clone()), ("f.npy", m.t().as_standard_layout().reversed_axes().to_owned())]
        {
            let path = dir.path().join(name);
            ndarray_npy::write_npy(&path, &a).unwrap();
            let bytes = std::fs::read(&path).unwrap();
            let fortran = String::from_utf8_lossy(&bytes[..128]).contains("'fortran_order': True");
            assert_eq!(fortran, name == "f.npy");
            let v = view_f64_matrix(&bytes).unwrap();
            assert_eq!(v, m.view(), "{name}");
        }
        // Anything else is left to the reader: float32, 1-D, or a file cut short.
        let path = dir.path().join("s.npy");
        ndarray_npy::write_npy(&path, &m.mapv(|v| v as f32)).unwrap();
        assert!(view_f64_matrix(&std::fs::read(&path).unwrap()).is_none());
        ndarray_npy::write_npy(&path, &ndarray::Array1::<f64>::zeros(5)).unwrap();
        assert!(view_f64_matrix(&std::fs::read(&path).unwrap()).is_none());
        ndarray_npy::write_npy(&path, &m).unwrap();
        let bytes = std::fs::read(&path).unwrap();
        assert!(view_f64_matrix(&bytes[..bytes.len() - 8]).is_none());
    }

    #[test]
    fn the_digest_taken_while_reading_equals_the_file_digest() {
        // float64 decodes on the first attempt, int32 after several: both digest the whole file.
        let dir = tempfile::tempdir().unwrap();
        for (name, a) in [
            ("f.npy", ndarray::arr2(&[[1.0f64, 2.0], [3.0, 4.0]]).into_dyn()),
            ("i.npy", ndarray::arr2(&[[1.0f64, -2.0], [3.0, 7.0]]).into_dyn()),
        ] {
            let p = dir.path().join(name);
            if name == "i.npy" {
                ndarray_npy::write_npy(&p, &a.mapv(|v| v as i32)).unwrap();
            } else {
                ndarray_npy::write_npy(&p, &a).unwrap();
            }
            let la = read_npy_file(&InputSpec::new(&p, None)).unwrap();
            assert_eq!(la.data, a);
            let (sha, bytes) = super::super::provenance::sha256_file(&p).unwrap();
            assert_eq!(la.digest, Some(FileDigest { sha256: sha, bytes }), "{name}");
        }
    }

    #[test]
    fn a_tiny_file_declaring_a_huge_array_is_refused_before_allocating() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("bomb.npy");
        std::fs::write(&p, huge_header()).unwrap();
        let e = read_npy_file(&InputSpec::new(&p, None)).unwrap_err().to_string();
        assert!(e.contains("declares 320000000000 bytes of data but only 16 are present"), "{e}");
        // The same member inside an .npz archive (stored, then deflated).
        for method in [zip::CompressionMethod::Stored, zip::CompressionMethod::Deflated] {
            let z = dir.path().join("bomb.npz");
            let mut w = zip::ZipWriter::new(std::fs::File::create(&z).unwrap());
            let opts = zip::write::SimpleFileOptions::default().compression_method(method);
            w.start_file("a.npy", opts).unwrap();
            std::io::Write::write_all(&mut w, &huge_header()).unwrap();
            w.finish().unwrap();
            let e = read_npz_file(&InputSpec::new(&z, Some("a"))).unwrap_err().to_string();
            assert!(e.contains("array `a`: the header declares 320000000000 bytes"), "{method:?}: {e}");
        }
    }
}
