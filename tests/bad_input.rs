//! The catalogue of bad inputs: each case asserts the one-line message, the
//! exit code 2 and that nothing was written beside the inputs.

use crate::util::{files_below, hierax, run};
use std::path::Path;

/// An npy file with a hand-written header (NumPy format 1.0, NEP 1).
fn raw_npy(descr: &str, shape: &str, payload: &[u8]) -> Vec<u8> {
    let mut header = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape}, }}");
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut out = b"\x93NUMPY\x01\x00".to_vec();
    out.extend_from_slice(&(header.len() as u16).to_le_bytes());
    out.extend_from_slice(header.as_bytes());
    out.extend_from_slice(payload);
    out
}

fn npz_with(dir: &Path, name: &str, arrays: &[&str]) {
    let f = std::fs::File::create(dir.join(name)).unwrap();
    let mut npz = ndarray_npy::NpzWriter::new(f);
    for a in arrays {
        npz.add_array(*a, &ndarray::Array2::<f64>::zeros((2, 2))).unwrap();
    }
    npz.finish().unwrap();
}

/// Run `args` in a temp dir holding `files`; check exit 2, one line, the
/// expected fragments, and that no file appeared.
fn case(files: &[(&str, &[u8])], args: &[&str], expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    for (name, body) in files {
        std::fs::write(dir.path().join(name), body).unwrap();
    }
    case_in(dir.path(), args, expect);
}

fn case_in(dir: &Path, args: &[&str], expect: &[&str]) {
    let before = files_below(dir);
    let out = run(hierax().current_dir(dir).args(args));
    assert_eq!(out.status.code(), Some(2), "args {args:?}");
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "expected one line, got: {err}");
    assert!(err.starts_with("hierax: error: "), "{err}");
    for e in expect {
        assert!(err.contains(e), "message {err:?} lacks {e:?}");
    }
    assert_eq!(files_below(dir), before, "files appeared for {args:?}");
}

const SQUARE3: &[u8] = b"0,1,2\n1,0,3\n2,3,0\n";

#[test]
fn b01_unknown_extension() {
    case(&[], &["inspect", "sc.xlsx"], &["sc.xlsx", "unknown file type `.xlsx`"]);
}

#[test]
fn b02_missing_file() {
    case(&[], &["inspect", "absent.csv"], &["absent.csv: cannot read"]);
}

#[test]
fn b03_ragged_csv_row() {
    case(&[("r.csv", b"1,2,3\n4,5\n")], &["inspect", "r.csv"], &["r.csv: line 2: 2 cells, expected 3"]);
}

#[test]
fn b04_text_cell() {
    case(
        &[("t.csv", b"a,b\n1,2\n3,oops\n")],
        &["inspect", "--as", "connectome", "t.csv"],
        &["t.csv: line 3, column 2: `oops` is not a number"],
    );
}

#[test]
fn b05_empty_file() {
    case(&[("e.tsv", b"# only a comment\n")], &["inspect", "e.tsv"], &["e.tsv: holds no data rows"]);
}

#[test]
fn b06_key_on_npy() {
    let npy = raw_npy("<f8", "(1,)", &1.0f64.to_le_bytes());
    case(
        &[("x.npy", &npy)],
        &["inspect", "x.npy:foo"],
        &["x.npy:foo", "holds one array; drop the key `foo`"],
    );
}

#[test]
fn b07_npz_missing_key_lists_arrays() {
    let dir = tempfile::tempdir().unwrap();
    npz_with(dir.path(), "a.npz", &["sc", "fc"]);
    case_in(dir.path(), &["inspect", "a.npz:dti"], &["a.npz: no array `dti`; found: sc, fc"]);
}

#[test]
fn b08_npz_needs_key() {
    let dir = tempfile::tempdir().unwrap();
    npz_with(dir.path(), "a.npz", &["sc", "fc"]);
    case_in(
        dir.path(),
        &["inspect", "--as", "connectome", "a.npz"],
        &["holds several arrays (sc, fc); name one as a.npz:KEY"],
    );
}

#[test]
fn b09_corrupt_npy() {
    case(&[("c.npy", b"this is not numpy")], &["inspect", "c.npy"], &["c.npy: not a readable .npy array"]);
}

#[test]
fn b10_unsupported_npy_dtype() {
    let npy = raw_npy("<c16", "(1,)", &[0u8; 16]);
    case(&[("z.npy", &npy)], &["inspect", "z.npy"], &["z.npy: element type", "is not supported"]);
}

#[test]
fn b11_connectome_not_square() {
    case(
        &[("c.csv", b"0,1,2\n1,0,3\n")],
        &["inspect", "--as", "connectome", "c.csv"],
        &["c.csv: connectome: expected a square matrix, found 2 x 3"],
    );
}

#[test]
fn b12_connectome_asymmetric() {
    case(
        &[("c.csv", b"0,1,2\n1,0,3\n2,9,0\n")],
        &["inspect", "--as", "connectome", "c.csv"],
        &["connectome: expected a symmetric matrix", "(2, 3) and (3, 2)", "declare it directed"],
    );
}

#[test]
fn b13_connectome_negative() {
    case(
        &[("c.csv", b"0,-1\n-1,0\n")],
        &["inspect", "--as", "connectome", "c.csv"],
        &["expected non-negative weights, found -1 at row 1, column 2"],
    );
}

#[test]
fn b14_connectome_nan() {
    case(
        &[("c.csv", b"0,n/a\n1,0\n")],
        &["inspect", "--as", "connectome", "c.csv"],
        &["expected finite weights, found NaN at row 1, column 2"],
    );
}

#[test]
fn b15_series_orientation_unknown() {
    case(
        &[("s.csv", b"1,2,3\n4,5,6\n7,8,9\n1,1,1\n")],
        &["inspect", "--as", "series", "s.csv"],
        &["s.csv: time series", "pass --orientation"],
    );
}

#[test]
fn b16_series_square_is_ambiguous() {
    case(
        &[("s.csv", SQUARE3)],
        &["inspect", "--as", "series", "--count", "3", "s.csv"],
        &["square with 3 regions", "cannot be told"],
    );
}

#[test]
fn b17_series_region_count_mismatch() {
    case(
        &[("s.csv", b"1,2,3\n4,5,6\n")],
        &["inspect", "--as", "series", "--count", "5", "s.csv"],
        &["is 2 x 3, but neither axis has the 5 regions"],
    );
}

#[test]
fn b18_map_wrong_length() {
    case(
        &[("m.csv", b"region,value\nA,1\nB,2\n")],
        &["inspect", "--as", "map", "--count", "3", "m.csv"],
        &["m.csv: map: expected one value for each of 3 regions, found 2"],
    );
}

#[test]
fn b19_map_infinite() {
    case(
        &[("m.csv", b"1\ninf\n")],
        &["inspect", "--as", "map", "m.csv"],
        &["map: expected finite values, found inf at region 2"],
    );
}

#[test]
fn b20_mask_not_binary() {
    case(
        &[("k.tsv", b"1\n0\n0.5\n")],
        &["inspect", "--as", "mask", "k.tsv"],
        &["censoring mask: expected 0 or 1, found 0.5 at frame 3"],
    );
}

#[test]
fn b21_mask_wrong_length() {
    case(
        &[("k.tsv", b"1\n0\n1\n")],
        &["inspect", "--as", "mask", "--count", "4", "k.tsv"],
        &["censoring mask: expected 4 frames, found 3"],
    );
}

#[test]
fn b22_missing_column() {
    case(
        &[("c.tsv", b"trans_x\tframewise_displacement\n0\tn/a\n")],
        &["inspect", "c.tsv:fd"],
        &["c.tsv: no column `fd`; found: trans_x, framewise_displacement"],
    );
}

#[test]
fn b23_empty_key() {
    case(&[], &["inspect", "sc.npz:"], &["input spec `sc.npz:`: has an empty KEY"]);
}

#[test]
fn b24_header_width_mismatch() {
    case(
        &[("h.csv", b"a,b,c,d,e\n1,2,3\n")],
        &["inspect", "h.csv"],
        &["h.csv: line 1: header has 5 names for 3 data columns"],
    );
}

#[test]
fn b25_row_and_column_names_disagree() {
    case(
        &[("c.csv", b",a,b\nx,0,1\ny,1,0\n")],
        &["inspect", "--as", "connectome", "c.csv"],
        &["region names: row names and column names differ"],
    );
}
