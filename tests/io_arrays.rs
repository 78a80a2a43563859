//! The `.npy`, `.npz` and level-5 `.mat` readers against reference fixtures.
//!
//! The fixtures in `tests/data/arrays/` and their `expected.json` come from
//! `tests/reference/make_array_fixtures.py` (numpy 2.1.3, scipy 1.14.1; files
//! written by `numpy.save`/`savez`/`savez_compressed` and
//! `scipy.io.savemat`, plus two MAT-files built byte by byte and checked by
//! `scipy.io.loadmat`). Comparison is exact: every value must have the same
//! `f64` bit pattern as the reference (no tolerance: all stored types convert
//! to float64 exactly).

use crate::util::{data, hierax, run};
use hierax::io::mat::{list_variables, MatClass};
use hierax::io::{read_array, InputSpec};
use serde::Deserialize;
use std::path::{Path, PathBuf};

#[derive(Deserialize)]
struct Expected {
    numpy: String,
    scipy: String,
    fixtures: Vec<Fixture>,
}

#[derive(Deserialize)]
struct Fixture {
    file: String,
    key: Option<String>,
    shape: Vec<usize>,
    dtype: String,
    sparse: bool,
    values: Vec<String>,
}

fn expected() -> Expected {
    let text = std::fs::read_to_string(data("arrays/expected.json")).expect("expected.json is committed");
    serde_json::from_str(&text).expect("expected.json parses")
}

/// An exact float64 from its string: a round-trip decimal repr (Rust's parser
/// is correctly rounded) or `0x` and the bit pattern (NaN).
fn exact(s: &str) -> f64 {
    match s.strip_prefix("0x") {
        Some(hex) => f64::from_bits(u64::from_str_radix(hex, 16).expect("hex bits")),
        None => s.parse().expect("float repr"),
    }
}

fn spec(file: &str, key: Option<&str>) -> InputSpec {
    let path = data(&format!("arrays/{file}"));
    let text = match key {
        Some(k) => format!("{}:{k}", path.display()),
        None => path.display().to_string(),
    };
    InputSpec::parse(&text).expect("spec parses")
}

fn err_of(file: &str, key: Option<&str>) -> String {
    match read_array(&spec(file, key)) {
        Ok(la) => panic!("{file}:{key:?} read as {:?}, expected an error", la.data.shape()),
        Err(e) => e.to_string(),
    }
}

#[test]
fn every_fixture_matches_the_reference_bit_for_bit() {
    let exp = expected();
    assert_eq!((exp.numpy.as_str(), exp.scipy.as_str()), ("2.1.3", "1.14.1"));
    let mut failures = Vec::new();
    for f in &exp.fixtures {
        let label = format!("{}:{}", f.file, f.key.as_deref().unwrap_or("-"));
        let la = match read_array(&spec(&f.file, f.key.as_deref())) {
            Ok(la) => la,
            Err(e) => {
                failures.push(format!("{label}: {e}"));
                continue;
            }
        };
        if la.data.shape() != f.shape.as_slice() {
            failures.push(format!("{label}: shape {:?}, expected {:?}", la.data.shape(), f.shape));
            continue;
        }
        if la.stored.to_string() != f.dtype {
            failures.push(format!("{label}: stored {}, expected {}", la.stored, f.dtype));
        }
        if la.sparse != f.sparse {
            failures.push(format!("{label}: sparse {}, expected {}", la.sparse, f.sparse));
        }
        // Row-major in memory too, so a caller taking the raw buffer gets the
        // logical order (LoadedArray's documented contract).
        if !la.data.is_standard_layout() {
            failures.push(format!("{label}: not in row-major (standard) memory layout"));
        }
        assert_eq!(la.data.len(), f.values.len(), "{label}");
        // `iter()` walks the logical row-major order whatever the memory layout.
        for (i, (got, want)) in la.data.iter().zip(&f.values).enumerate() {
            let want = exact(want);
            if got.to_bits() != want.to_bits() {
                failures.push(format!("{label}: value {i} is {got:e}, expected {want:e}"));
                break;
            }
        }
    }
    assert!(failures.is_empty(), "{} failures:\n{}", failures.len(), failures.join("\n"));
    assert!(exp.fixtures.len() >= 60, "only {} fixtures", exp.fixtures.len());
}

#[test]
fn every_fixture_file_is_checked() {
    let exp = expected();
    let dir = data("arrays");
    let mut untested = Vec::new();
    for entry in std::fs::read_dir(&dir).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().into_owned();
        let is_array = [".npy", ".npz", ".mat"].iter().any(|e| name.ends_with(e));
        if is_array && !exp.fixtures.iter().any(|f| f.file == name) {
            untested.push(name);
        }
    }
    assert!(untested.is_empty(), "fixtures without expected values: {untested:?}");
}

#[test]
fn default_variable_is_the_only_numeric_one() {
    // mixed.mat holds W beside a cell, a char array and a struct.
    let la = read_array(&spec("mixed.mat", None)).unwrap();
    assert_eq!(la.spec.key.as_deref(), Some("W"));
    assert_eq!(la.data.shape(), &[3, 3]);
    let la = read_array(&spec("connectome_84.mat", None)).unwrap();
    assert_eq!(la.spec.key.as_deref(), Some("SC"));
    assert_eq!(la.stored.to_string(), "int32");
}

#[test]
fn missing_variable_lists_what_the_file_holds() {
    let e = err_of("mixed.mat", Some("SC"));
    assert!(
        e.ends_with("no variable `SC`; found: W (double 3x3), names (cell), label (char), info (struct)"),
        "{e}"
    );
    assert!(e.contains("mixed.mat"), "{e}");
}

#[test]
fn several_numeric_variables_need_a_key() {
    let e = err_of("numeric_v5_compressed.mat", None);
    assert!(
        e.contains("holds several variables (counts (int32 4x6), dbl (double 3x5), sgl (single 2x3)"),
        "{e}"
    );
    assert!(e.contains("mask (logical 3x2)"), "{e}");
    assert!(e.contains("sp (sparse double 6x5), splog (sparse logical 4x3), cube (double 2x3x4)"), "{e}");
    assert!(e.contains("rowvec (double 1x4)); name one as"), "{e}");
    let e = err_of("two_stored.npz", None);
    assert!(e.contains("holds several arrays (counts, weights)"), "{e}");
    let e = err_of("two_compressed.npz", Some("nope"));
    assert!(e.ends_with("no array `nope`; found: counts, weights"), "{e}");
}

#[test]
fn non_numeric_and_complex_variables_are_refused_by_name() {
    let e = err_of("mixed.mat", Some("names"));
    assert!(e.ends_with("variable `names` is a cell array; expected a numeric or logical array"), "{e}");
    let e = err_of("mixed.mat", Some("label"));
    assert!(e.ends_with("variable `label` is a char array; expected a numeric or logical array"), "{e}");
    let e = err_of("mixed.mat", Some("info"));
    assert!(e.ends_with("variable `info` is a struct; expected a numeric or logical array"), "{e}");
    for file in ["handmade_be.mat", "handmade_le_compressed.mat"] {
        let e = err_of(file, Some("z"));
        assert!(e.ends_with("variable `z` is a complex double array; hierax reads real arrays only"), "{e}");
    }
}

#[test]
fn list_variables_reports_class_dims_and_flags() {
    let vars = list_variables(&data("arrays/mixed.mat")).unwrap();
    let names: Vec<&str> = vars.iter().map(|v| v.name.as_str()).collect();
    assert_eq!(names, ["W", "names", "label", "info"]);
    assert_eq!(vars[0].class, MatClass::Double);
    assert_eq!(vars[0].dims, [3, 3]);
    assert_eq!(vars[1].class, MatClass::Cell);
    assert_eq!(vars[1].dims, [1, 3]);
    assert_eq!(vars[2].class, MatClass::Char);
    assert!(vars.iter().all(|v| v.compressed));
    let vars = list_variables(&data("arrays/handmade_be.mat")).unwrap();
    let splog = vars.iter().find(|v| v.name == "splog").unwrap();
    assert!(splog.class == MatClass::Sparse && splog.logical && !splog.compressed);
    let z = vars.iter().find(|v| v.name == "z").unwrap();
    assert!(z.complex && z.is_numeric());
    assert_eq!(z.to_string(), "z (complex double 1x2)");
}

/// A copy of a fixture, altered by `edit`, in a temporary folder.
fn altered(dir: &Path, file: &str, edit: impl FnOnce(&mut Vec<u8>)) -> PathBuf {
    let mut bytes = std::fs::read(data(&format!("arrays/{file}"))).unwrap();
    edit(&mut bytes);
    let p = dir.join(file);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn mat_err(path: &Path, key: Option<&str>) -> String {
    let spec = InputSpec::new(path, key);
    match read_array(&spec) {
        Ok(_) => panic!("{} read without error", path.display()),
        Err(e) => e.to_string(),
    }
}

#[test]
fn truncated_files_name_the_byte_offset() {
    let dir = tempfile::tempdir().unwrap();
    for file in ["numeric_v5.mat", "numeric_v5_compressed.mat", "handmade_be.mat"] {
        let vars = list_variables(&data(&format!("arrays/{file}"))).unwrap();
        // Cut 20 bytes into the third variable's data element.
        let at = vars[2].offset;
        let p = altered(dir.path(), file, |b| b.truncate(at + 20));
        let kind = if vars[2].compressed { "miCOMPRESSED" } else { "miMATRIX" };
        let want = format!("corrupt or truncated level-5 MAT-file at byte {}: {kind} element needs", at + 8);
        let e = mat_err(&p, Some(&vars[0].name));
        assert!(e.contains(&want) && e.ends_with("but only 12 remain"), "{e}");
        assert!(e.starts_with(&p.display().to_string()), "{e}");
    }
    let p = altered(dir.path(), "mixed.mat", |b| b.truncate(100));
    let e = mat_err(&p, None);
    assert!(
        e.ends_with("is not a level-5 MAT-file: it has 100 bytes, fewer than the 128-byte header"),
        "{e}"
    );
}

#[test]
fn corrupt_compressed_data_name_the_variable_offset() {
    let dir = tempfile::tempdir().unwrap();
    let vars = list_variables(&data("arrays/numeric_v5_compressed.mat")).unwrap();
    let at = vars[1].offset;
    // Flip bytes inside the second variable's zlib stream (after its 2-byte zlib header).
    let p = altered(dir.path(), "numeric_v5_compressed.mat", |b| {
        for x in &mut b[at + 12..at + 40] {
            *x ^= 0x5a;
        }
    });
    let e = mat_err(&p, Some("counts"));
    assert!(e.contains(&format!("compressed variable at byte {at}")), "{e}");
}

#[test]
fn bad_header_and_wrong_version_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = altered(dir.path(), "numeric_v5.mat", |b| b[126..128].copy_from_slice(b"XY"));
    let e = mat_err(&p, Some("dbl"));
    assert!(e.contains("is not a level-5 MAT-file: bad header at byte 126: endian indicator \"XY\""), "{e}");
    let p = altered(dir.path(), "numeric_v5.mat", |b| b[124..126].copy_from_slice(&0x0300u16.to_le_bytes()));
    let e = mat_err(&p, Some("dbl"));
    assert!(e.ends_with("unsupported MAT-file version 0x0300 at byte 124; expected 0x0100 (level 5)"), "{e}");
    // Version 0x0200 marks MATLAB v7.3; without the HDF5 signature the
    // dispatcher hands it to the level-5 reader, which says what it is.
    let p = altered(dir.path(), "numeric_v5.mat", |b| b[124..126].copy_from_slice(&0x0200u16.to_le_bytes()));
    let e = mat_err(&p, Some("dbl"));
    assert!(e.contains("is a MATLAB v7.3 (HDF5) file"), "{e}");
    let e = hierax::io::mat::read(&InputSpec::new(&p, Some("dbl"))).unwrap_err().to_string();
    assert!(e.contains("is a MATLAB v7.3 (HDF5) file"), "{e}");
}

#[test]
fn inspect_shows_a_mat_connectome() {
    let out = run(hierax().arg("inspect").arg(data("arrays/connectome_84.mat")));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("connectome_84.mat:SC"), "{text}");
    assert!(text.contains("stored as   int32, shape [84, 84]"), "{text}");
    assert!(text.contains("a symmetric connectome of 84 regions"), "{text}");
}
