//! The binary end to end: what a user types and sees.

use crate::util::{hierax, run, write};

#[test]
fn inspect_reports_a_csv_connectome() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "c.csv", "a,b,c\n0,1,2\n1,0,3\n2,3,0\n");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("a symmetric connectome of 3 regions"), "{text}");
    assert!(text.contains("columns     a, b, c"), "{text}");
}

#[test]
fn inspect_unknown_extension_is_one_line_and_exit_2() {
    let out = run(hierax().args(["inspect", "conn.xlsx"]));
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("unknown file type `.xlsx`"), "{err}");
}

#[test]
fn inspect_lists_the_variables_of_a_mat_file_without_a_key() {
    let p = crate::util::data("arrays/mixed.mat");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("entries; name one as"), "{text}");
    assert!(text.contains("(cell)"), "{text}");
}

#[test]
fn inspect_lists_the_datasets_of_an_h5_file_without_a_key() {
    let p = crate::util::data("h5/default.h5");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("entries; name one as") && text.contains("float64"), "{text}");
}

#[test]
fn inspect_reads_every_fixture_and_demo_file() {
    // Every committed fixture and demo input must be understood by `inspect`
    // (containers are listed, tables with text columns described).
    let root = crate::util::repo_root();
    let mut paths = Vec::new();
    for dir in ["tests/data/arrays", "tests/data/h5", "demo-data/atlas", "demo-data/sub-01"] {
        for e in std::fs::read_dir(root.join(dir)).unwrap().flatten() {
            let p = e.path();
            let ext = p.extension().and_then(|x| x.to_str()).unwrap_or("");
            if ["npy", "npz", "mat", "h5", "csv", "tsv"].contains(&ext) {
                paths.push(p);
            }
        }
    }
    assert!(paths.len() >= 40, "found only {} files", paths.len());
    let out = run(hierax().arg("inspect").args(&paths));
    assert!(out.status.success(), "inspect failed on a fixture");
}
