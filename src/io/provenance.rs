//! Provenance: what produced an output, from which inputs, with which
//! parameters. Written into every output (HDF5 attributes, JSON summary).

use super::IoError;
use serde::Serialize;
use sha2::{Digest, Sha256};
use std::path::Path;

/// One input file and its digest.
#[derive(Clone, Debug, Serialize, PartialEq, Eq)]
pub struct InputRecord {
    /// The role the input played ("connectome", "series", "map", ...).
    pub role: String,
    /// The spec as given, `PATH[:KEY]`.
    pub spec: String,
    /// SHA-256 of the whole file, lower-case hex.
    pub sha256: String,
    /// File size in bytes.
    pub bytes: u64,
}

impl InputRecord {
    /// Digest the file behind `spec` for `role`.
    ///
    /// # Errors
    /// [`IoError::Os`] when the file cannot be read.
    pub fn of(role: &str, spec: &super::InputSpec) -> Result<Self, IoError> {
        let (sha256, bytes) = sha256_file(&spec.path)?;
        Ok(InputRecord { role: role.to_string(), spec: spec.to_string(), sha256, bytes })
    }

    /// The record of an input already read: the digest its reader took of
    /// the bytes as they were read, so the file is not read a second time
    /// (and the digest is of exactly what was analysed). The HDF5 reader,
    /// which sees only the dataset, digests the file on a second thread
    /// while it reads. A loaded array without a digest (built in memory)
    /// has its file digested here.
    ///
    /// # Errors
    /// [`IoError::Os`] when the file must be digested and cannot be read.
    pub fn of_loaded(role: &str, loaded: &super::LoadedArray) -> Result<Self, IoError> {
        match &loaded.digest {
            Some(d) => Ok(Self::of_digest(role, &loaded.spec, d.clone())),
            None => Self::of(role, &loaded.spec),
        }
    }

    /// The record of `spec`'s file from a digest already taken.
    pub fn of_digest(role: &str, spec: &super::InputSpec, digest: FileDigest) -> Self {
        InputRecord {
            role: role.to_string(),
            spec: spec.to_string(),
            sha256: digest.sha256,
            bytes: digest.bytes,
        }
    }
}

/// SHA-256 (FIPS 180-4) of a whole file's bytes, taken by the reader that
/// read them.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FileDigest {
    /// Lower-case hex.
    pub sha256: String,
    /// File size in bytes.
    pub bytes: u64,
}

impl FileDigest {
    /// The digest of bytes in memory.
    pub fn of_bytes(data: &[u8]) -> Self {
        FileDigest { sha256: hex(&Sha256::digest(data)), bytes: data.len() as u64 }
    }
}

/// A reader that digests every byte it passes on, so a file is hashed in
/// the same pass that reads it.
pub(crate) struct DigestingReader<R> {
    inner: R,
    hasher: Sha256,
    bytes: u64,
}

impl<R: std::io::Read> DigestingReader<R> {
    pub(crate) fn new(inner: R) -> Self {
        DigestingReader { inner, hasher: Sha256::new(), bytes: 0 }
    }

    /// Read whatever the consumer left (trailing bytes still belong to the
    /// file) and return the digest of all of it.
    pub(crate) fn finish(mut self) -> std::io::Result<FileDigest> {
        std::io::copy(&mut self.inner, &mut HashSink(&mut self.hasher, &mut self.bytes))?;
        Ok(FileDigest { sha256: hex(&self.hasher.finalize()), bytes: self.bytes })
    }
}

/// Pieces of a large read: each is hashed on a second thread while the next
/// is read (8 MiB: large enough that handing one over costs nothing, small
/// enough that the hash finishes soon after the last byte arrives).
const PIECE: usize = 8 << 20;

impl<R: std::io::Read> std::io::Read for DigestingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if buf.len() < 2 * PIECE {
            let n = self.inner.read(buf)?;
            self.hasher.update(&buf[..n]);
            self.bytes += n as u64;
            return Ok(n);
        }
        // A large read (an array's data in one call): SHA-256 is sequential, so it runs on its own
        // thread, one piece behind the copy, instead of after it.
        let (inner, hasher) = (&mut self.inner, &mut self.hasher);
        let (tx, rx) = std::sync::mpsc::sync_channel::<&[u8]>(2);
        let (filled, outcome) = std::thread::scope(|scope| {
            let hashing = scope.spawn(move || rx.into_iter().for_each(|piece| hasher.update(piece)));
            let mut total = 0;
            let mut outcome = Ok(());
            for chunk in buf.chunks_mut(PIECE) {
                let mut got = 0;
                while got < chunk.len() {
                    match inner.read(&mut chunk[got..]) {
                        Ok(0) => break,
                        Ok(n) => got += n,
                        Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                        Err(e) => {
                            outcome = Err(e);
                            break;
                        }
                    }
                }
                let full = got == chunk.len();
                let read: &[u8] = &chunk[..got];
                total += got;
                // The receiver lives until this loop ends, so the send cannot fail.
                let _ = tx.send(read);
                if !full || outcome.is_err() {
                    break;
                }
            }
            drop(tx);
            let joined = hashing.join();
            if joined.is_err() {
                outcome = Err(std::io::Error::other("the digest thread failed"));
            }
            (total, outcome)
        });
        self.bytes += filled as u64;
        outcome.map(|()| filled)
    }
}

struct HashSink<'a>(&'a mut Sha256, &'a mut u64);
impl std::io::Write for HashSink<'_> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.0.update(buf);
        *self.1 += buf.len() as u64;
        Ok(buf.len())
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// Everything needed to say how an output was made.
#[derive(Clone, Debug, Serialize)]
pub struct Provenance {
    /// Always "hierax".
    pub tool: &'static str,
    /// [`crate::VERSION`].
    pub version: &'static str,
    /// The command that ran, e.g. "demo" or "subject".
    pub command: String,
    /// Creation time, UTC, RFC 3339. Taken from `SOURCE_DATE_EPOCH` when set,
    /// so that outputs can be made byte-reproducible.
    pub created_utc: String,
    /// The inputs with their digests.
    pub inputs: Vec<InputRecord>,
    /// Every parameter used, as JSON.
    pub parameters: serde_json::Value,
    /// Fixed reminder carried by every output.
    pub notice: &'static str,
}

/// The notice written into every output.
pub const RESEARCH_NOTICE: &str = "Research software: results are not for clinical decisions.";

impl Provenance {
    /// A record for `command` with no inputs yet.
    pub fn new(command: &str, parameters: serde_json::Value) -> Self {
        Provenance {
            tool: "hierax",
            version: crate::VERSION,
            command: command.to_string(),
            created_utc: now_rfc3339(),
            inputs: Vec::new(),
            parameters,
            notice: RESEARCH_NOTICE,
        }
    }
}

/// SHA-256 of a file, streamed, as lower-case hex, with the file size.
///
/// # Errors
/// [`IoError::Os`] when the file cannot be read.
pub fn sha256_file(path: &Path) -> Result<(String, u64), IoError> {
    use std::io::Read;
    let mut f = std::fs::File::open(path).map_err(|e| IoError::os(path, "cannot open", e))?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    let mut total = 0u64;
    loop {
        let n = f.read(&mut buf).map_err(|e| IoError::os(path, "cannot read", e))?;
        if n == 0 {
            break;
        }
        total += n as u64;
        hasher.update(&buf[..n]);
    }
    Ok((hex(&hasher.finalize()), total))
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Current UTC time as `YYYY-MM-DDThh:mm:ssZ` (or `SOURCE_DATE_EPOCH`).
pub fn now_rfc3339() -> String {
    let secs =
        std::env::var("SOURCE_DATE_EPOCH").ok().and_then(|s| s.parse::<i64>().ok()).unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_secs() as i64)
                .unwrap_or(0)
        });
    rfc3339_from_unix(secs)
}

/// Format Unix seconds as RFC 3339 UTC, via the days-to-civil algorithm of
/// Hinnant ("chrono-Compatible Low-Level Date Algorithms", 2013).
pub fn rfc3339_from_unix(secs: i64) -> String {
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", rem / 3600, (rem % 3600) / 60, rem % 60)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_abc_matches_fips_180_2_example() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("abc");
        std::fs::write(&p, b"abc").unwrap();
        let (h, n) = sha256_file(&p).unwrap();
        assert_eq!(h, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
        assert_eq!(n, 3);
    }

    #[test]
    fn digests_of_bytes_and_of_a_read_pass_equal_the_file_digest() {
        // FIPS 180-2, Appendix B.2: the 56-byte two-block message.
        let msg = b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
        let expected = "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1";
        assert_eq!(FileDigest::of_bytes(msg).sha256, expected);
        // A consumer that reads only part of the stream: finish() digests the rest.
        let mut r = DigestingReader::new(&msg[..]);
        let mut head = [0u8; 10];
        std::io::Read::read_exact(&mut r, &mut head).unwrap();
        let d = r.finish().unwrap();
        assert_eq!((d.sha256.as_str(), d.bytes), (expected, 56));
        // A read large enough to be digested piecewise on a second thread: the same digest as in
        // one pass (FIPS 180-2, Appendix B.3: one million `a`, here read as 40 MiB + the rest).
        let million = vec![b'a'; 1_000_000];
        let want = "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0";
        assert_eq!(FileDigest::of_bytes(&million).sha256, want);
        let big: Vec<u8> = (0..(5 * PIECE + 12_345)).map(|i| (i % 251) as u8).collect();
        let mut r = DigestingReader::new(&big[..]);
        let mut out = vec![0u8; big.len()];
        std::io::Read::read_exact(&mut r, &mut out).unwrap();
        assert_eq!(out, big);
        assert_eq!(r.finish().unwrap(), FileDigest::of_bytes(&big));
    }

    #[test]
    fn unix_time_formats_as_rfc3339() {
        // Reference values printed by GNU coreutils `date -u -d @SECS` (9.1).
        assert_eq!(rfc3339_from_unix(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339_from_unix(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339_from_unix(1_798_761_599), "2026-12-31T23:59:59Z");
    }
}
