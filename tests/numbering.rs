//! One numbering everywhere: every command that writes regions, ranks,
//! states or state pairs numbers them the same way (from 1), so tables from
//! different commands join without an off-by-one.

use crate::util::{hierax, repo_root, run};
use std::path::Path;

/// A CSV table as (header, rows of cells); the tables compared hold no quoted cells.
fn table(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines().map(|l| l.split(',').map(String::from).collect::<Vec<_>>());
    (lines.next().unwrap(), lines.collect())
}

/// The named columns of a table, row by row.
fn columns(path: &Path, names: &[&str]) -> Vec<Vec<String>> {
    let (header, rows) = table(path);
    let idx: Vec<usize> = names
        .iter()
        .map(|n| {
            header.iter().position(|h| h == n).unwrap_or_else(|| panic!("{}: no column {n}", path.display()))
        })
        .collect();
    rows.iter().map(|r| idx.iter().map(|&i| r[i].clone()).collect()).collect()
}

#[test]
fn states_energy_link_timescales_and_subject_number_regions_states_and_pairs_alike() {
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p);
    let out = |p: &str| dir.path().join(p);
    let ok = |cmd: &mut std::process::Command| {
        let o = run(cmd);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    };
    ok(hierax().arg("states").arg(d("atlas/hierarchy.csv")).args(["--bins", "10", "--out"]).arg(out("s")));
    ok(hierax()
        .arg("energy")
        .arg(d("sub-01/sub-01_connectome.csv"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .args(["--bins", "10", "--out"])
        .arg(out("e")));
    ok(hierax().arg("link").arg("--energy").arg(out("e/energy_matrix.csv")).arg("--out").arg(out("l")));
    ok(hierax()
        .arg("timescales")
        .arg(d("sub-01/sub-01_bold.npy"))
        .args(["--tr", "2", "--orientation", "time-by-region", "--out"])
        .arg(out("t")));
    ok(hierax()
        .arg("subject")
        .arg("--connectome")
        .arg(d("sub-01/sub-01_connectome.csv"))
        .arg("--series")
        .arg(d("sub-01/sub-01_bold.npy"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .args(["--tr", "2", "--bins", "10", "--out"])
        .arg(out("o")));
    let sub = |f: &str| out("o/sub-01").join(format!("sub-01_{f}.csv"));

    // Regions: number, name, rank and state agree between `states` and `subject`.
    let region_cols = ["region_number", "region", "map_value", "rank", "state"];
    let from_states = columns(&out("s/regions.csv"), &region_cols);
    assert_eq!(from_states.len(), 100);
    assert_eq!(columns(&sub("regions"), &region_cols), from_states);
    // The lowest map value has rank 1 and sits in state 1; numbers run from 1.
    assert!(from_states.iter().any(|r| r[3] == "1" && r[4] == "1"));
    assert!(from_states.iter().all(|r| r[3] != "0" && r[4] != "0"));
    assert_eq!(from_states[0][0], "1");
    // `energy` and the subject's timescales name regions as `states` does.
    let names = |rows: Vec<Vec<String>>| rows;
    let number_name: Vec<Vec<String>> = from_states.iter().map(|r| r[..2].to_vec()).collect();
    assert_eq!(names(columns(&out("e/node_metrics.csv"), &["region_number", "region"])), number_name);
    assert_eq!(names(columns(&sub("timescales"), &["region_number", "region"])), number_name);
    // A series without names gets the one default naming, numbered from 1.
    let t = columns(&out("t/timescales.csv"), &["region_number", "region"]);
    assert_eq!(t[0], ["1", "region-001"]);
    assert_eq!(t[99], ["100", "region-100"]);

    // States: the bins of `states` are the subject's states.
    let bin_cols = ["state", "n_regions", "first_rank", "last_rank", "min_map_value", "max_map_value"];
    let bins = columns(&out("s/bins.csv"), &bin_cols);
    assert_eq!(columns(&sub("states"), &bin_cols), bins);
    assert_eq!(bins.first().unwrap()[0], "1");
    assert_eq!(bins.last().unwrap()[0], "10");

    // Pairs: the same ordered pairs, in the same order, in every pair table; energies equal.
    let pair = ["initial_state", "target_state"];
    let pairs = columns(&out("s/distance.csv"), &pair);
    assert_eq!(pairs.len(), 100);
    assert_eq!(pairs[0], ["1", "1"]);
    for t in [out("e/energy.csv"), out("l/pairs.csv"), sub("pairs")] {
        assert_eq!(columns(&t, &pair), pairs, "{}", t.display());
    }
    let with_energy = ["initial_state", "target_state", "energy", "asymmetry"];
    let e = columns(&out("e/energy.csv"), &with_energy);
    assert_eq!(columns(&out("l/pairs.csv"), &with_energy), e);
    assert_eq!(columns(&sub("pairs"), &with_energy), e);
    assert_eq!(
        columns(&out("s/distance.csv"), &["initial_state", "target_state", "distance"]),
        columns(&sub("pairs"), &["initial_state", "target_state", "distance"])
    );
}

#[test]
fn summaries_expose_no_rust_enum_or_debug_spellings() {
    // Values a user reads are labels (`bottom-up`, `degree-swap`), never Rust names (`BottomUp`,
    // `Ok`, `Some(..)`).
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p);
    let o = run(hierax()
        .arg("subject")
        .arg("--connectome")
        .arg(d("sub-02/sub-02_connectome.csv"))
        .arg("--series")
        .arg(d("sub-02/sub-02_bold.npy"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .arg("--distances")
        .arg(d("atlas/distances.npy"))
        .args(["--tr", "2", "--bins", "6", "--network-nulls", "59", "--null-model", "length-bin-shuffle"])
        .args(["--map-nulls", "59", "--map-null-method", "variogram", "--out"])
        .arg(dir.path()));
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let sub = dir.path().join("sub-02");
    let json = std::fs::read_to_string(sub.join("sub-02_summary.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    fn walk(v: &serde_json::Value, path: &str, bad: &mut Vec<String>) {
        let rusty = |s: &str| {
            ["Ok", "Err", "Some", "None"].iter().any(|w| s == *w || s.starts_with(&format!("{w}(")))
                || (s.len() > 1
                    && s.chars().next().unwrap().is_ascii_uppercase()
                    && s.chars().skip(1).any(|c| c.is_ascii_uppercase())
                    && s.chars().all(|c| c.is_ascii_alphanumeric()))
        };
        match v {
            serde_json::Value::Object(m) => {
                for (k, x) in m {
                    if rusty(k) {
                        bad.push(format!("{path}/{k} (key)"));
                    }
                    walk(x, &format!("{path}/{k}"), bad);
                }
            }
            serde_json::Value::Array(a) => {
                a.iter().enumerate().for_each(|(i, x)| walk(x, &format!("{path}/{i}"), bad))
            }
            serde_json::Value::String(s) if rusty(s) => bad.push(format!("{path} = {s}")),
            _ => {}
        }
    }
    let mut bad = Vec::new();
    walk(&v, "", &mut bad);
    assert!(bad.is_empty(), "Rust spellings in the summary: {bad:?}");
    // Each null row names its own method, and the two families are labelled apart.
    let net = columns(&sub.join("sub-02_network_nulls.csv"), &["null_number", "null_model"]);
    assert_eq!(net.len(), 59);
    assert!(net.iter().enumerate().all(|(i, r)| r[0] == (i + 1).to_string() && r[1] == "length-bin-shuffle"));
    let map = columns(&sub.join("sub-02_map_nulls.csv"), &["null_number", "surrogate_method"]);
    assert!(!map.is_empty() && map.iter().all(|r| r[1] == "variogram"), "{map:?}");
    let tests = columns(&sub.join("sub-02_tests.csv"), &["null_family", "null_model"]);
    assert!(tests.iter().any(|r| r == &["network", "length-bin-shuffle"]), "{tests:?}");
    assert!(tests.iter().any(|r| r == &["map", "variogram"]), "{tests:?}");
    // The network-null effect is reported.
    let effect = &v["null_models"][0]["effect"];
    assert!(effect["edges_changed_mean"].as_f64().unwrap() > 0.5, "{effect}");
}
