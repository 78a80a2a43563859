//! A mutation fuzzer for every reader, on stable Rust (cargo-fuzz needs a
//! nightly toolchain this project does not require): seed files from
//! `tests/data/` and `demo-data/` are mutated (bit flips, byte runs set to
//! extreme values, insertions, deletions, truncation, splices of two seeds,
//! length fields overwritten with huge numbers) and fed to the reader of
//! their format, `hierax::io::read_array` (CSV/TSV, .npy, .npz, MAT v5
//! compressed or not, HDF5 with and without keys) and the cohort's
//! participants table. A reader may return an error; a panic, an abort or a
//! hang is a finding. Seeded, so a finding reproduces from its seed.
//!
//! ```text
//! cargo run --release --example fuzz_readers -- [SECONDS] [SEED]
//! ```
//! Prints executions per target and the first panicking input (saved under
//! `target/fuzz-findings/`), and exits non-zero on any finding.
//! Research software: results are not for clinical decisions.

use hierax::io::{read_array, InputSpec};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

struct Target {
    name: &'static str,
    ext: &'static str,
    keys: Vec<Option<String>>,
    seeds: Vec<Vec<u8>>,
}

fn seeds(root: &Path, files: &[&str]) -> Vec<Vec<u8>> {
    files
        .iter()
        .filter_map(|f| std::fs::read(root.join(f)).ok())
        .map(|b| b[..b.len().min(1 << 20)].to_vec())
        .collect()
}

fn mutate(rng: &mut ChaCha8Rng, seed: &[u8], other: &[u8]) -> Vec<u8> {
    let mut b = seed.to_vec();
    let rounds = rng.random_range(1..=4);
    for _ in 0..rounds {
        if b.is_empty() {
            b.push(rng.random());
            continue;
        }
        let at = rng.random_range(0..b.len());
        match rng.random_range(0..8) {
            0 => b[at] ^= 1 << rng.random_range(0..8),
            1 => {
                let v = [0x00u8, 0xff, 0x7f, 0x80][rng.random_range(0..4)];
                let end = (at + rng.random_range(1..9)).min(b.len());
                b[at..end].fill(v);
            }
            2 => {
                let n = rng.random_range(1..64);
                let ins: Vec<u8> = (0..n).map(|_| rng.random()).collect();
                b.splice(at..at, ins);
            }
            3 => {
                let end = (at + rng.random_range(1..64)).min(b.len());
                b.drain(at..end);
            }
            4 => b.truncate(at),
            5 => {
                // A length field overwritten with a huge little- or big-endian number.
                let v: u32 = [u32::MAX, 0x7fff_ffff, 0x0100_0000, 200_000][rng.random_range(0..4)];
                let bytes = if rng.random_bool(0.5) { v.to_le_bytes() } else { v.to_be_bytes() };
                for (k, x) in bytes.iter().enumerate() {
                    if at + k < b.len() {
                        b[at + k] = *x;
                    }
                }
            }
            6 if !other.is_empty() => {
                let from = rng.random_range(0..other.len());
                let len = rng.random_range(1..=(other.len() - from).min(4096));
                b.splice(at..at, other[from..from + len].iter().copied());
            }
            _ => {
                // Text-level: a digit or separator swapped, for the delimited readers.
                let c =
                    [b'0', b'9', b'-', b'.', b',', b'\t', b'\n', b'"', b'e', b'n'][rng.random_range(0..10)];
                b[at] = c;
            }
        }
    }
    b
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let seconds: u64 = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(20);
    let seed: u64 = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(1);
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let t = |name, ext, keys: &[Option<&str>], files: &[&str]| Target {
        name,
        ext,
        keys: keys.iter().map(|k| k.map(str::to_string)).collect(),
        seeds: seeds(&root, files),
    };
    let targets = vec![
        t(
            "csv",
            "csv",
            &[None, Some("value"), Some("L_P01,L_P02")],
            &["demo-data/atlas/hierarchy.csv", "demo-data/sub-01/sub-01_connectome.csv"],
        ),
        t(
            "tsv",
            "tsv",
            &[None, Some("framewise_displacement"), Some("sphere_x,sphere_y,sphere_z")],
            &["demo-data/sub-01/sub-01_confounds.tsv", "demo-data/atlas/regions.tsv"],
        ),
        t(
            "npy",
            "npy",
            &[None],
            &[
                "tests/data/arrays/float64_c.npy",
                "tests/data/arrays/float32_f.npy",
                "tests/data/arrays/int64_c.npy",
                "tests/data/arrays/bool_c.npy",
                "tests/data/arrays/float64_be.npy",
            ],
        ),
        t(
            "npz",
            "npz",
            &[None, Some("counts"), Some("weights")],
            &["tests/data/arrays/two_compressed.npz", "tests/data/arrays/two_stored.npz"],
        ),
        t(
            "mat",
            "mat",
            &[None, Some("dbl"), Some("counts"), Some("W"), Some("dbl_u8"), Some("cube32")],
            &[
                "tests/data/arrays/numeric_v5.mat",
                "tests/data/arrays/numeric_v5_compressed.mat",
                "tests/data/arrays/handmade_be.mat",
                "tests/data/arrays/handmade_le_compressed.mat",
                "tests/data/arrays/mixed.mat",
            ],
        ),
        t(
            "h5",
            "h5",
            &[None, Some("/matrix_f64"), Some("/chunked_gzip"), Some("/f64"), Some("/grp/f32")],
            &["tests/data/h5/default.h5", "tests/data/h5/chunked_filters.h5"],
        ),
        t("participants", "tsv", &[], &["demo-data/participants.tsv"]),
    ];
    let dir = std::env::temp_dir().join(format!("hierax-fuzz-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temporary folder");
    let findings_dir = root.join("target/fuzz-findings");
    // A panic is caught and counted; silence the default hook's backtrace spam.
    std::panic::set_hook(Box::new(|_| {}));
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let per_target = Duration::from_secs(seconds) / targets.len() as u32;
    let mut findings = 0usize;
    let mut total = 0usize;
    for target in &targets {
        if target.seeds.is_empty() {
            eprintln!("fuzz: {}: no seed files found", target.name);
            findings += 1;
            continue;
        }
        let start = Instant::now();
        let (mut execs, mut errors) = (0usize, 0usize);
        while start.elapsed() < per_target {
            let s = &target.seeds[rng.random_range(0..target.seeds.len())];
            let o = &target.seeds[rng.random_range(0..target.seeds.len())];
            let input = mutate(&mut rng, s, o);
            let outcome = if target.name == "participants" {
                let cohort = dir.join("cohort");
                let _ = std::fs::create_dir_all(&cohort);
                std::fs::write(cohort.join("participants.tsv"), &input).expect("write");
                std::panic::catch_unwind(|| {
                    hierax::cohort::Manifest::discover(&cohort, &hierax::cohort::Patterns::default())
                        .map(|_| ())
                        .is_err()
                })
            } else {
                let path = dir.join(format!("input.{}", target.ext));
                std::fs::write(&path, &input).expect("write");
                let key = target.keys.get(rng.random_range(0..target.keys.len().max(1))).cloned().flatten();
                std::panic::catch_unwind(|| read_array(&InputSpec::new(&path, key.as_deref())).is_err())
            };
            execs += 1;
            match outcome {
                Ok(true) => errors += 1,
                Ok(false) => {}
                Err(_) => {
                    findings += 1;
                    let _ = std::fs::create_dir_all(&findings_dir);
                    let f = findings_dir.join(format!("{}-{}-{execs}.{}", target.name, seed, target.ext));
                    let _ = std::fs::write(&f, &input);
                    eprintln!("fuzz: {}: PANIC on input saved as {}", target.name, f.display());
                }
            }
        }
        total += execs;
        println!("fuzz: {:<13} {execs:>7} executions, {errors:>7} refused cleanly", target.name);
    }
    let _ = std::fs::remove_dir_all(&dir);
    println!("fuzz: {total} executions in {seconds} s (seed {seed}), {findings} finding(s)");
    if findings > 0 {
        std::process::exit(1);
    }
}
