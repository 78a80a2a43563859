//! Benchmark (not a test) of reading a large series from HDF5 and MATLAB
//! v7.3 files (run with `cargo bench --bench hdf5_read`).
//!
//! An invented 1,200-frame x 20,000-region float64 series (192 MB) is
//! written three ways with `hdf5-pure`: an `.h5` dataset in gzip-1 + shuffle
//! chunks of 16 rows, the same uncompressed, and a `.mat` variable stored
//! column-major (20,000 x 1,200 on disk, `MATLAB_class` double) in gzip-1
//! chunks of 64 rows. Each is read by `hierax::io::read_array`, which decodes
//! compressed datasets in row bands on every thread, places a MATLAB matrix
//! straight into MATLAB's order and digests the file on a second thread, and
//! by the path it replaces in the same run: `hdf5-pure`'s whole read, the
//! axis reversal copy for MATLAB, then the file's SHA-256 in a second pass.
//! Printed: median wall time of 3, the ratio, and the peak memory each adds,
//! as a multiple of the decoded matrix.
//!
//! The machine is shared; figures are indicative only.

use hdf5_pure as h5;
use hierax::io::provenance::sha256_file;
use hierax::io::{read_array, InputSpec};
use ndarray::{ArrayD, IxDyn};
use std::path::Path;
use std::time::Instant;

const FRAMES: usize = 1200;
const REGIONS: usize = 20_000;
const REPS: usize = 3;

fn rss_bytes(field: &str) -> u64 {
    let s = std::fs::read_to_string("/proc/self/status").expect("read /proc/self/status");
    let line = s.lines().find(|l| l.starts_with(field)).expect("status field");
    line.split_whitespace().nth(1).and_then(|v| v.parse::<u64>().ok()).expect("a number") * 1024
}

/// Median seconds of `f` and the largest peak it added to the resident set.
fn measure(mut f: impl FnMut()) -> (f64, u64) {
    let mut times = Vec::new();
    let mut peak = 0;
    for _ in 0..REPS {
        // Linux: writing 5 to clear_refs resets the peak resident set size.
        std::fs::write("/proc/self/clear_refs", "5").expect("reset peak RSS");
        let before = rss_bytes("VmRSS:");
        let t = Instant::now();
        f();
        times.push(t.elapsed().as_secs_f64());
        peak = peak.max(rss_bytes("VmHWM:").saturating_sub(before));
    }
    times.sort_by(f64::total_cmp);
    (times[REPS / 2], peak)
}

/// The invented series, frames x regions, row-major: smooth in time, a
/// different frequency per region.
fn series() -> Vec<f64> {
    (0..FRAMES * REGIONS)
        .map(|k| {
            let (t, r) = ((k / REGIONS) as f64, (k % REGIONS) as f64);
            (t * (0.05 + 0.3 * r / REGIONS as f64)).sin() + 0.01 * ((k * 7919) % 101) as f64
        })
        .collect()
}

fn write(path: &Path, data: &[f64], shape: [u64; 2], chunk_rows: Option<u64>, matlab: bool) {
    let mut fb = h5::FileBuilder::new();
    let b = fb.create_dataset("bold");
    b.with_f64_data(data).with_shape(&shape);
    if let Some(rows) = chunk_rows {
        b.with_chunks(&[rows, shape[1]]).with_shuffle().with_deflate(1);
    }
    if matlab {
        b.set_attr("MATLAB_class", h5::AttrValue::VarLenString("double".into()));
    }
    std::fs::write(path, fb.finish().expect("build file")).expect("write file");
}

/// The replaced path: whole read, axis reversal for MATLAB, digest after.
fn previous(path: &Path, shape: [usize; 2], matlab: bool) -> usize {
    let file = h5::File::open_streaming(path).expect("open");
    let values = file.dataset("bold").expect("dataset").read_f64().expect("read");
    let arr = ArrayD::from_shape_vec(IxDyn(&shape), values).expect("shape");
    let arr = if matlab { arr.reversed_axes().as_standard_layout().into_owned() } else { arr };
    let (sha, _) = sha256_file(path).expect("digest");
    std::hint::black_box(sha);
    arr.len()
}

fn main() {
    let dir = tempfile::tempdir().expect("temporary folder");
    let data = series();
    let decoded = (data.len() * 8) as f64;
    let transposed: Vec<f64> = {
        let mut t = vec![0.0; data.len()];
        for (k, v) in data.iter().enumerate() {
            t[(k % REGIONS) * FRAMES + k / REGIONS] = *v;
        }
        t
    };
    let cases = [
        ("bold_gzip.h5", false, Some(16), "h5, gzip-1 chunks of 16 rows"),
        ("bold_plain.h5", false, None, "h5, contiguous"),
        ("bold_gzip.mat", true, Some(64), "MATLAB v7.3, gzip-1 chunks of 64 rows"),
    ];
    println!(
        "== {FRAMES} x {REGIONS} float64 ({:.0} MB decoded), {} threads",
        decoded / 1e6,
        rayon::current_num_threads()
    );
    println!(
        "{:<40} {:>12} {:>12} {:>7} {:>12} {:>12}",
        "file", "previous s", "hierax s", "ratio", "prev. peak", "hierax peak"
    );
    for (name, matlab, chunks, label) in cases {
        let path = dir.path().join(name);
        let stored = if matlab { [REGIONS as u64, FRAMES as u64] } else { [FRAMES as u64, REGIONS as u64] };
        write(&path, if matlab { &transposed } else { &data }, stored, chunks, matlab);
        let shape = [stored[0] as usize, stored[1] as usize];
        let spec = InputSpec::parse(&format!("{}:bold", path.display())).expect("spec");
        let la = read_array(&spec).expect("hierax read");
        assert_eq!(la.data.shape(), [FRAMES, REGIONS], "{name}: MATLAB's shape");
        assert!(la.data.iter().zip(&data).all(|(a, b)| a == b), "{name}: values differ");
        drop(la);
        let (t_prev, m_prev) = measure(|| {
            std::hint::black_box(previous(&path, shape, matlab));
        });
        let (t_new, m_new) = measure(|| {
            std::hint::black_box(read_array(&spec).expect("hierax read").data.len());
        });
        println!(
            "{label:<40} {t_prev:>12.3} {t_new:>12.3} {:>6.2}x {:>11.2}x {:>11.2}x",
            t_prev / t_new,
            m_prev as f64 / decoded,
            m_new as f64 / decoded
        );
    }
    println!("ratio = previous / hierax (above 1: hierax faster); peaks as multiples of the decoded matrix");
}
