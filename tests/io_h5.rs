//! HDF5 reading and writing against h5py.
//!
//! Reference: h5py 3.12.1 on HDF5 1.14.4 with numpy 2.1.3, through
//! `tests/reference/make_h5_fixtures.py` (see `tests/data/h5/README.md`).
//! Every comparison is bit for bit (floats as their `f64` bit patterns): an
//! HDF5 reader or writer only moves bytes, so any tolerance would hide a bug.

use crate::util::data;
use hierax::io::hdf5::{list_datasets, read_tree, write_file, write_file_with, AttrValue, DataValue, Group};
use hierax::io::provenance::Provenance;
use hierax::io::{read_array, InputSpec, IoError, StoredType};
use serde_json::{json, Value};

#[allow(dead_code)]
#[path = "../examples/write_h5_sample.rs"]
mod sample;

fn expected() -> Value {
    let text = std::fs::read_to_string(data("h5/expected.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn spec(rel: &str) -> InputSpec {
    InputSpec::parse(&data(&format!("h5/{rel}")).to_string_lossy()).unwrap()
}

fn bits(v: f64) -> String {
    format!("{:016x}", v.to_bits())
}

fn hex_list(v: &Value) -> Vec<String> {
    v.as_array().unwrap().iter().map(|s| s.as_str().unwrap().to_string()).collect()
}

#[test]
fn every_fixture_dataset_reads_bit_exactly() {
    let exp = expected();
    let list = exp["datasets"].as_array().unwrap();
    assert!(list.len() >= 30, "expected.json lists {} datasets", list.len());
    for d in list {
        let s = d["spec"].as_str().unwrap();
        let got = read_array(&spec(s)).unwrap_or_else(|e| panic!("{s}: {e}"));
        let shape: Vec<usize> =
            d["shape"].as_array().unwrap().iter().map(|x| x.as_u64().unwrap() as usize).collect();
        assert_eq!(got.data.shape(), shape.as_slice(), "{s}: shape");
        assert_eq!(got.stored.to_string(), d["stored"].as_str().unwrap(), "{s}: stored type");
        assert_eq!(got.sparse, d["sparse"].as_bool().unwrap(), "{s}: sparse flag");
        let got_bits: Vec<String> = got.data.iter().map(|&v| bits(v)).collect();
        assert_eq!(got_bits, hex_list(&d["bits"]), "{s}: values");
    }
}

#[test]
fn matlab_file_is_listed_in_matlab_shapes() {
    let items = list_datasets(&data("h5/matlab_v73.mat")).unwrap();
    let text: Vec<String> = items.iter().map(ToString::to_string).collect();
    assert_eq!(
        text,
        [
            "SC (3×4 float64)",
            "W (4×3 sparse double)",
            "counts (2×5 int32)",
            "e (0×0 empty)",
            "mask (1×4 logical)",
            "name (1×3 char)",
            "s/x (2×2 float64)",
            "tau (6×1 float64)"
        ],
        "{text:?}"
    );
    let e = read_array(&spec("matlab_v73.mat:name")).unwrap_err().to_string();
    assert!(e.contains("variable `name` holds char values; expected numbers"), "{e}");
    let e = read_array(&spec("matlab_v73.mat:e")).unwrap_err().to_string();
    assert!(e.contains("variable `e` holds empty values"), "{e}");
    let e = read_array(&spec("matlab_v73.mat:nope")).unwrap_err().to_string();
    assert!(e.contains("no variable `nope`; found: SC (3×4 float64), W (4×3 sparse double)"), "{e}");
    // A leading slash is accepted for MATLAB variables too.
    assert_eq!(read_array(&spec("matlab_v73.mat:/SC")).unwrap().data.shape(), &[3, 4]);
    // Without a key the file is ambiguous, and the message lists the variables.
    let e = read_array(&spec("matlab_v73.mat")).unwrap_err();
    assert!(matches!(e, IoError::KeyNeeded { kind: "variable", .. }), "{e}");
    assert!(e.to_string().contains("W (4×3 sparse double)"), "{e}");
}

#[test]
fn libver_latest_two_unlimited_dims_gives_one_line_advice() {
    let exp = expected();
    let s = exp["latest_chunked"]["spec"].as_str().unwrap();
    let e = read_array(&spec(s)).unwrap_err().to_string();
    assert!(!e.contains('\n'), "{e}");
    assert!(e.contains("latest_chunked.h5: dataset `/x`"), "{e}");
    assert!(e.contains("version-2 B-tree"), "{e}");
    assert!(e.contains("libver=(\"earliest\", \"v114\")"), "{e}");
    assert!(e.contains("new.create_dataset(name, data=old[name][()])"), "{e}");
    // The same file's other chunked layouts do read (checked bit-exactly in
    // every_fixture_dataset_reads_bit_exactly): the advice is specific.
}

#[test]
fn missing_key_lists_datasets_with_shape_and_type() {
    let e = read_array(&spec("default.h5:/nope")).unwrap_err();
    assert!(matches!(e, IoError::MissingKey { kind: "dataset", .. }), "{e}");
    let msg = e.to_string();
    for part in [
        "no dataset `/nope`",
        "/matrix_f64 (5×7 float64)",
        "/types/i32 (4×3 int32)",
        "/types/u8 (2×2×3 uint8)",
        "/scalar (scalar float64)",
        "/labels (2 string)",
        "/a/b/c/deep (2×3 float64)",
    ] {
        assert!(msg.contains(part), "missing {part:?} in {msg}");
    }
    let e = read_array(&spec("default.h5")).unwrap_err();
    assert!(matches!(e, IoError::KeyNeeded { .. }), "{e}");
    assert!(!e.to_string().contains("/labels"), "non-numeric datasets are not candidates: {e}");
}

#[test]
fn groups_and_text_are_refused_by_name() {
    let e = read_array(&spec("default.h5:/a/b")).unwrap_err().to_string();
    assert!(e.contains("`/a/b` is a group, not a dataset; it holds: /a/b/c/deep (2×3 float64)"), "{e}");
    let e = read_array(&spec("default.h5:labels")).unwrap_err().to_string();
    assert!(e.contains("dataset `/labels` holds string values; expected numbers"), "{e}");
    let e = read_array(&spec("single.h5:/maps")).unwrap_err().to_string();
    assert!(
        e.contains(
            "`/maps` is a group, not a dataset; it holds: /maps/myelin (11 float64), /maps/names (11 string)"
        ),
        "{e}"
    );
}

#[test]
fn h5py_attributes_of_every_kind_read_back() {
    let exp = &expected()["attributes"];
    let tree = read_tree(&data("h5/default.h5")).unwrap();
    let scalar = tree.dataset("scalar").unwrap().attrs().to_vec();
    let ab = tree.group("a").unwrap().group("b").unwrap().attrs().to_vec();
    for (what, attrs) in [("/", tree.attrs().to_vec()), ("/scalar", scalar), ("/a/b", ab)] {
        let get = |n: &str| attrs.iter().find(|(k, _)| k == n).map(|(_, v)| v.clone());
        assert_eq!(get("int"), Some(AttrValue::I64(exp["int"].as_i64().unwrap())), "{what}");
        match get("float") {
            Some(AttrValue::F64(x)) => assert_eq!(bits(x), exp["float_bits"].as_str().unwrap(), "{what}"),
            other => panic!("{what}: float is {other:?}"),
        }
        assert_eq!(get("vlen_str"), Some(AttrValue::Str("text é".into())), "{what}");
        assert_eq!(get("fixed_str"), Some(AttrValue::Str("fixed".into())), "{what}");
        match get("f64_array") {
            Some(AttrValue::F64List(x)) => {
                assert_eq!(x.iter().map(|&v| bits(v)).collect::<Vec<_>>(), hex_list(&exp["f64_array_bits"]))
            }
            other => panic!("{what}: f64_array is {other:?}"),
        }
        assert_eq!(get("i32_array"), Some(AttrValue::I64List(vec![1, -2, 3])), "{what}");
        assert_eq!(get("str_array"), Some(AttrValue::StrList(vec!["x".into(), "yz".into()])), "{what}");
    }
}

// --- Writing ---------------------------------------------------------------

/// A tree as the list h5py_readback.json holds: one object per group and
/// dataset, sorted by path, with attribute and value descriptions in h5py's
/// terms (what h5py returns for each of our encodings).
fn describe(root: &Group) -> Vec<Value> {
    fn attr(v: &AttrValue) -> Value {
        let hex = |x: &[f64]| x.iter().map(|&v| bits(v)).collect::<Vec<_>>();
        match v {
            AttrValue::F64(x) => json!({"py": "float64", "bits": bits(*x)}),
            AttrValue::I64(x) => json!({"py": "int64", "value": x}),
            AttrValue::Str(s) => json!({"py": "str", "value": s}),
            AttrValue::F64List(x) => json!({"py": "ndarray[float64]", "bits": hex(x)}),
            AttrValue::I64List(x) => json!({"py": "ndarray[int64]", "value": x}),
            AttrValue::StrList(x) => json!({"py": "ndarray[object]", "value": x}),
            other => panic!("no description for {other:?}"),
        }
    }
    fn attrs(list: &[(String, AttrValue)]) -> Value {
        Value::Object(list.iter().map(|(k, v)| (k.clone(), attr(v))).collect())
    }
    fn walk(g: &Group, path: &str, out: &mut Vec<Value>) {
        out.push(json!({"path": if path.is_empty() { "/" } else { path }, "attrs": attrs(g.attrs()), "kind": "group"}));
        for d in g.datasets() {
            let p = format!("{path}/{}", d.name());
            let compressed = |n: usize| if n * 8 >= 64 * 1024 { json!("gzip") } else { Value::Null };
            let mut o =
                json!({"path": p, "attrs": attrs(d.attrs()), "kind": "dataset", "shape": d.value().shape()});
            match d.value() {
                DataValue::F64 { data, .. } => {
                    o["dtype"] = json!("float64");
                    o["compression"] = compressed(data.len());
                    o["bits"] = json!(data.iter().map(|&v| bits(v)).collect::<Vec<_>>());
                }
                DataValue::I64 { data, .. } => {
                    o["dtype"] = json!("int64");
                    o["compression"] = compressed(data.len());
                    o["values"] = json!(data);
                }
                DataValue::Str(v) => {
                    o["dtype"] = json!("object");
                    o["compression"] = Value::Null;
                    o["string_encoding"] = json!("utf-8");
                    o["string_length"] = Value::Null;
                    o["values"] = json!(v);
                }
                other => panic!("no description for {other:?}"),
            }
            out.push(o);
        }
        for s in g.groups() {
            walk(s, &format!("{path}/{}", s.name()), out);
        }
    }
    let mut out = Vec::new();
    walk(root, "", &mut out);
    out.sort_by(|a, b| a["path"].as_str().cmp(&b["path"].as_str()));
    out
}

/// `meant` with the compression h5py must see in the 1.8-format file: none.
fn uncompressed(meant: Vec<Value>) -> Vec<Value> {
    meant
        .into_iter()
        .map(|mut o| {
            if o["compression"].is_string() {
                o["compression"] = Value::Null;
            }
            o
        })
        .collect()
}

#[test]
fn h5py_reads_exactly_what_hierax_meant_to_write() {
    let meant = describe(&sample::sample_tree());
    assert!(meant.iter().any(|o| o["compression"] == "gzip"), "the sample must exercise compression");
    for (json_file, superblock, meant) in
        [("h5/h5py_readback.json", 3, meant.clone()), ("h5/h5py_readback_v18.json", 2, uncompressed(meant))]
    {
        let readback: Value =
            serde_json::from_str(&std::fs::read_to_string(data(json_file)).unwrap()).unwrap();
        assert_eq!(readback["superblock_version"], superblock, "{json_file}");
        let seen = readback["objects"].as_array().unwrap();
        assert_eq!(seen.len(), meant.len(), "{json_file}");
        for (s, m) in seen.iter().zip(&meant) {
            assert_eq!(s, m, "{json_file}: h5py saw (left) vs hierax meant (right)");
        }
    }
}

#[test]
fn committed_samples_are_what_the_writer_produces_today() {
    // The h5py check above is only about today's writer if the committed
    // files are byte-identical to what it writes now (hdf5-pure output
    // carries no timestamps and is host-independent).
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("s.h5");
    write_file(&p, &sample::sample_tree()).unwrap();
    assert!(std::fs::read(&p).unwrap() == std::fs::read(data("h5/written_by_hierax.h5")).unwrap());
    write_file_with(&p, &sample::sample_tree(), &sample::v18_options()).unwrap();
    assert!(std::fs::read(&p).unwrap() == std::fs::read(data("h5/written_by_hierax_v18.h5")).unwrap());
}

#[test]
fn our_reader_reads_our_files_back_exactly() {
    let meant = describe(&sample::sample_tree());
    for file in ["h5/written_by_hierax.h5", "h5/written_by_hierax_v18.h5"] {
        assert_eq!(describe(&read_tree(&data(file)).unwrap()), meant, "{file}");
    }
    // Layouts as documented: 1.10 format with shuffle + deflate above 64 KiB
    // by default; 1.8 format, all contiguous, on request.
    let new = hdf5_pure::File::open(data("h5/written_by_hierax.h5")).unwrap();
    assert_eq!(new.libver_bound(), hdf5_pure::LibVer::V110);
    assert_eq!(new.dataset("control/gramian").unwrap().filters(), vec![2, 1]);
    assert!(!new.dataset("control/energy").unwrap().is_chunked());
    let old = hdf5_pure::File::open(data("h5/written_by_hierax_v18.h5")).unwrap();
    assert_eq!(old.libver_bound(), hdf5_pure::LibVer::V18);
    assert!(!old.dataset("control/gramian").unwrap().is_chunked());
    // And through the input reader: a matrix and the compressed dataset.
    let m =
        read_array(&InputSpec::new(data("h5/written_by_hierax_v18.h5"), Some("/control/energy"))).unwrap();
    assert_eq!(m.data.shape(), &[3, 4]);
    assert_eq!(m.stored, StoredType::Float64);
    assert_eq!(m.data[[2, 3]].to_bits(), (11.0f64 / 7.0).to_bits());
    let g = read_array(&InputSpec::new(data("h5/written_by_hierax.h5"), Some("control/gramian"))).unwrap();
    assert_eq!(g.data[[99, 98]].to_bits(), (((99 * 37 + 98 * 11) % 101) as f64 / 3.0).to_bits());
}

#[test]
fn provenance_without_inputs_round_trips() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("prov.h5");
    let mut root = Group::new("/");
    let mut prov = Provenance::new("demo", json!({}));
    prov.created_utc = "1970-01-01T00:00:00Z".into();
    root.set_provenance(&prov);
    write_file(&p, &root).unwrap();
    let back = read_tree(&p).unwrap();
    assert_eq!(back.attr("input_sha256"), Some(&AttrValue::StrList(vec![])));
    assert_eq!(back.attr("parameters_json"), Some(&AttrValue::Str("{}".into())));
    assert_eq!(back.attr("hierax_version"), Some(&AttrValue::Str(hierax::VERSION.into())));
    assert_eq!(describe(&back), describe(&root));
}

#[test]
fn failed_write_leaves_no_file_and_keeps_the_old_one() {
    let dir = tempfile::tempdir().unwrap();
    // Invalid content: refused before anything is written; an existing file stays.
    let p = dir.path().join("out.h5");
    std::fs::write(&p, b"previous").unwrap();
    let mut bad = Group::new("/");
    bad.add_dataset("x", DataValue::I64 { shape: vec![3], data: vec![1, 2] });
    let e = write_file(&p, &bad).unwrap_err().to_string();
    assert!(e.contains("out.h5") && e.contains("dataset `x` has shape [3] but 2 values"), "{e}");
    assert_eq!(std::fs::read(&p).unwrap(), b"previous");
    // A failure at the final rename (the target is a directory): no temporary left.
    let target = dir.path().join("taken.h5");
    std::fs::create_dir(&target).unwrap();
    let e = write_file(&target, &sample::sample_tree()).unwrap_err();
    assert!(matches!(e, IoError::Os { .. }), "{e}");
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into())
        .collect();
    names.sort();
    assert_eq!(names, ["out.h5", "taken.h5"]);
}

#[test]
fn missing_and_foreign_files_are_named_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("none.h5");
    let e = read_array(&InputSpec::new(&missing, Some("/x"))).unwrap_err();
    assert!(matches!(e, IoError::Os { .. }), "{e}");
    assert!(e.to_string().contains("none.h5: cannot read"), "{e}");
    let text = dir.path().join("text.h5");
    std::fs::write(&text, "a,b\n1,2\n").unwrap();
    let e = read_array(&InputSpec::new(&text, None)).unwrap_err().to_string();
    assert!(e.contains("text.h5: not a readable HDF5 file"), "{e}");
    assert!(!e.contains('\n'), "{e}");
}
