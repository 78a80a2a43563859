//! Write `tests/data/h5/written_by_hierax.h5` (default layout: HDF5 1.10
//! format, large datasets compressed) and `written_by_hierax_v18.h5` (HDF5
//! 1.8 format, uncompressed), the files the reference script
//! `tests/reference/make_h5_fixtures.py readback` opens with h5py to check
//! that what hierax writes is what h5py reads. All values are invented.
//!
//! Run: `cargo run --example write_h5_sample [OUT_DIR]`
//!
//! The tree is built by [`sample_tree`], which `tests/io_h5.rs` includes too,
//! so the test compares h5py's reading against exactly what was meant.

use hierax::io::hdf5::{write_file, write_file_with, AttrValue, DataValue, Group, WriteOptions};
use hierax::io::provenance::{InputRecord, Provenance};
use hierax::io::table::{Column, Table};
use ndarray::Array2;

/// The sample output tree: every attribute and dataset kind the writer has,
/// awkward floats (NaN, -0.0, ±inf, subnormal), non-ASCII text, a dataset big
/// enough to be compressed, a table and a provenance record. Only `+ - * /`
/// are used to make values, so they are the same bits on every platform.
pub fn sample_tree() -> Group {
    let mut root = Group::new("/");
    let mut p =
        Provenance::new("subject", serde_json::json!({"horizon": 1.0, "bins": 4, "estimator": "acw50"}));
    p.created_utc = "2026-12-01T00:00:00Z".into();
    p.inputs = vec![
        InputRecord {
            role: "connectome".into(),
            spec: "sub-01/conn.h5:/dwi/counts".into(),
            sha256: "0".repeat(64),
            bytes: 1024,
        },
        InputRecord {
            role: "series".into(),
            spec: "sub-01/bold.npy".into(),
            sha256: "ab".repeat(32),
            bytes: 2048,
        },
    ];
    root.set_provenance(&p);
    root.set_attr("subject", AttrValue::Str("sub-01 (invented)".into()));
    root.set_attr("float", AttrValue::F64(0.1 + 0.2));
    root.set_attr("int", AttrValue::I64(i64::MIN + 1));
    root.set_attr("floats", AttrValue::F64List(vec![f64::NAN, -0.0, f64::INFINITY, 5e-324]));
    root.set_attr("ints", AttrValue::I64List(vec![-3, 0, i64::MAX]));
    root.set_attr("texts", AttrValue::StrList(vec!["région α".into(), String::new(), "b".into()]));
    root.set_attr("empty_texts", AttrValue::StrList(Vec::new()));

    let mut ts = Group::new("timescales");
    ts.add_vector("tau_s", &[1.5, f64::NAN, -0.0, f64::NEG_INFINITY, 2.0 / 3.0])
        .set_attr("units", AttrValue::Str("s".into()));
    ts.add_dataset("scalar", DataValue::F64 { shape: vec![], data: vec![42.25] });
    ts.add_dataset("empty", DataValue::F64 { shape: vec![0, 3], data: vec![] });
    root.add_group(ts);

    let mut control = Group::new("control");
    let energy = Array2::from_shape_fn((3, 4), |(i, j)| (i as f64 * 4.0 + j as f64) / 7.0);
    control.add_matrix("energy", &energy).set_attr("rows", AttrValue::Str("from state".into()));
    // 100 × 100 float64 = 80 000 bytes: above the 64 KiB compression threshold.
    let big = Array2::from_shape_fn((100, 100), |(i, j)| ((i * 37 + j * 11) % 101) as f64 / 3.0);
    control.add_matrix("gramian", &big);
    control.add_dataset(
        "counts",
        DataValue::I64 { shape: vec![2, 3], data: vec![1, -2, 3, i64::MAX, i64::MIN, 0] },
    );
    control.add_dataset(
        "labels",
        DataValue::Str(vec!["V1 (invented)".into(), "région α".into(), String::new()]),
    );
    let mut nested = Group::new("nested");
    nested.add_group(Group::new("deeper")).add_vector("x", &[1.0, 2.0]);
    control.add_group(nested);
    root.add_group(control);

    let table = Table::new()
        .with("region", Column::Str(vec!["r1".into(), "r2".into(), "r3".into()]))
        .with("tau_s", Column::F64(vec![0.5, f64::NAN, 1.25]))
        .with("frames", Column::I64(vec![200, 180, 0]));
    root.add_table("regions", &table);
    root
}

#[allow(dead_code)]
fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::path::PathBuf::from(std::env::args().nth(1).unwrap_or_else(|| "tests/data/h5".into()));
    let tree = sample_tree();
    let out = dir.join("written_by_hierax.h5");
    write_file(&out, &tree)?;
    println!("wrote {}", out.display());
    let out = dir.join("written_by_hierax_v18.h5");
    write_file_with(&out, &tree, &v18_options())?;
    println!("wrote {}", out.display());
    Ok(())
}

/// The options of `written_by_hierax_v18.h5`.
pub fn v18_options() -> WriteOptions {
    let mut o = WriteOptions::default();
    o.hdf5_1_8_format = true;
    o
}
