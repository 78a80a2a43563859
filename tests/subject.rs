//! The whole per-subject job and the demo, end to end through the binary.

use crate::util::{files_below, hierax, repo_root, run};
use hierax::io::hdf5::{read_tree, DataValue};

/// Header and rows of a CSV file.
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let header = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows = r.records().map(|x| x.unwrap().iter().map(str::to_string).collect()).collect();
    (header, rows)
}
use std::path::Path;

fn matrix(v: &DataValue) -> ndarray::Array2<f64> {
    match v {
        DataValue::F64 { shape, data } => {
            ndarray::Array2::from_shape_vec((shape[0], shape[1]), data.clone()).unwrap()
        }
        other => panic!("expected a float matrix, found {other:?}"),
    }
}

/// Run the demo once (few nulls) into `out`.
fn demo_into(out: &Path) {
    let o = run(hierax().args(["demo", "--nulls", "0", "--quiet", "--out"]).arg(out));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("24 succeeded (0 kept from an earlier run), 0 failed"), "{text}");
    assert!(text.contains("not for clinical decisions"), "{text}");
}

#[test]
fn demo_writes_every_output_and_recovers_the_planted_effects() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    demo_into(&out);
    for f in ["cohort.csv", "run_log.csv", "age_models.csv", "group_tests.csv", "cohort.json", "report.html"]
    {
        assert!(out.join(f).is_file(), "{f} missing");
    }
    assert!(!files_below(&out).iter().any(|p| p.to_string_lossy().contains("partial")));
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains("not for clinical decisions") && html.contains("INVENTED") && html.contains("<svg")
    );

    // Planted in the invented cohort (demo-data/README.md): bottom-up transitions are cheaper,
    // increasingly with distance, and the asymmetry shrinks with age.
    let (header, rows) = read_csv(&out.join("cohort.csv"));
    assert_eq!(rows.len(), 24);
    let col = |name: &str| -> Vec<f64> {
        let j = header.iter().position(|h| h == name).unwrap_or_else(|| panic!("no column {name}"));
        rows.iter().map(|r| r[j].parse::<f64>().unwrap()).collect()
    };
    assert!(col("bottom_up_minus_top_down").iter().all(|v| *v < 0.0));
    assert!(col("asymmetry_distance_slope").iter().all(|v| *v < 0.0));
    let cohort: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("cohort.json")).unwrap()).unwrap();
    // Undirected demo networks with every node driven: the slope is 3/(k+1) x the mean difference
    // (k = 10), documented as derived, and kept out of the cohort tests and models.
    let role = cohort["outcomes"]["asymmetry_distance_slope"]["role"].as_str().unwrap();
    assert!(role.starts_with("equals 0.272727 x bottom_up_minus_top_down"), "{role}");
    for (s, b) in col("asymmetry_distance_slope").iter().zip(col("bottom_up_minus_top_down")) {
        assert!((s - 3.0 / 11.0 * b).abs() <= 1e-9 * b.abs(), "{s} vs {b}");
    }
    // No two outcome columns are perfectly correlated unless cohort.json documents it.
    let outcomes: Vec<String> = cohort["outcomes"].as_object().unwrap().keys().cloned().collect();
    for (a, na) in outcomes.iter().enumerate() {
        for nb in &outcomes[a + 1..] {
            let (x, y) = (col(na), col(nb));
            if let Ok(c) = hierax::stats::correlation::pearson(&x, &y) {
                if c.r.abs() > 1.0 - 1e-9 {
                    let documented = [na, nb].iter().any(|n| {
                        cohort["outcomes"][n.as_str()]["role"].as_str().is_some_and(|r| r != "finding")
                    });
                    assert!(documented, "{na} and {nb} are perfectly correlated but both are findings");
                }
            }
        }
    }
    // Across subjects (sign-flip test): bottom-up cheaper, and cheaper bottom-up transitions go
    // with longer target timescales (negative asymmetry vs timescale-shift correlation).
    let groups = cohort["group_tests"].as_array().unwrap();
    assert!(groups.iter().all(|g| g["outcome"] != "asymmetry_distance_slope"));
    for (name, sign) in [
        ("bottom_up_minus_top_down", -1.0),
        ("asymmetry_timescale_shift_spearman", -1.0),
        ("timescale_hierarchy_spearman", 1.0),
    ] {
        let g = groups.iter().find(|g| g["outcome"] == name).unwrap();
        assert!(g["mean"].as_f64().unwrap() * sign > 0.0, "{g}");
        assert!(g["p_value"].as_f64().unwrap() < 0.01, "{g}");
    }
    let age_models = std::fs::read_to_string(out.join("age_models.csv")).unwrap();
    let row = age_models.lines().find(|l| l.starts_with("bottom_up_minus_top_down,age,")).unwrap();
    let cells: Vec<&str> = row.split(',').collect();
    let (estimate, p) = (cells[2].parse::<f64>().unwrap(), cells[5].parse::<f64>().unwrap());
    assert!(estimate > 0.0 && p < 0.01, "age effect {estimate} p {p}");
}

#[test]
fn subject_hdf5_holds_every_group_and_the_asymmetry_closed_form() {
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p);
    let o = run(hierax()
        .args(["subject", "--subject", "sub-03", "--tr", "2", "--bins", "5", "--out"])
        .arg(dir.path())
        .arg("--connectome")
        .arg(d("sub-03/sub-03_connectome.csv"))
        .arg("--series")
        .arg(d("sub-03/sub-03_bold.npy"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .arg("--confounds")
        .arg(d("sub-03/sub-03_confounds.tsv")));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("bottom-up mean") && text.contains("Gramian condition"), "{text}");

    let tree = read_tree(&dir.path().join("sub-03/sub-03_hierax.h5")).unwrap();
    for g in ["timescales", "hierarchy", "control", "link"] {
        assert!(tree.group(g).is_some(), "group {g} missing");
    }
    assert!(tree.attr("hierax_version").is_some() && tree.attr("input_sha256").is_some());
    let energy = matrix(tree.group("control").unwrap().dataset("energy").unwrap().value());
    let states = matrix(tree.group("hierarchy").unwrap().dataset("state_vectors").unwrap().value());

    // Closed form for symmetric Ã = A/(1 + λmax) − I with B = I, any horizon T: with
    // W_T = (Φ² − I)(2Ã)⁻¹ and M = W_T⁻¹ one gets M − ΦMΦ = −2Ã, hence
    // E_ij − E_ji = 2 (x_iᵀÃx_i − x_jᵀÃx_j), and for states of equal norm the −I part cancels:
    // E_ij − E_ji = 2 (x_iᵀA x_i − x_jᵀA x_j) / (1 + λmax). Derived here from the Gramian integral
    // (its scalar case is the textbook closed form of Kirk 1970); independent of hierax's code path.
    let la =
        hierax::io::read_array(&hierax::io::InputSpec::new(d("sub-03/sub-03_connectome.csv"), None)).unwrap();
    let a = la.matrix().unwrap();
    let fa = faer::Mat::from_fn(a.nrows(), a.ncols(), |i, j| a[[i, j]]);
    let lmax = fa.self_adjoint_eigenvalues(faer::Side::Lower).unwrap().into_iter().fold(f64::MIN, f64::max);
    let k = states.ncols();
    let quad: Vec<f64> = (0..k).map(|i| states.column(i).dot(&a.dot(&states.column(i)))).collect();
    let norms: Vec<f64> = (0..k).map(|i| states.column(i).dot(&states.column(i))).collect();
    assert!(norms.iter().all(|n| *n == norms[0]), "equal-size states expected for 100 regions / 5 bins");
    let scale = energy.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for i in 0..k {
        for j in 0..k {
            let want = 2.0 * (quad[i] - quad[j]) / (1.0 + lmax);
            let got = energy[[i, j]] - energy[[j, i]];
            // Relative to the largest energy: the energies themselves are accurate to ~1e-12
            // (tests/control.rs against scipy), so 1e-9 leaves room for the subtraction.
            assert!((got - want).abs() <= 1e-9 * scale, "pair {i}->{j}: {got} vs closed form {want}");
        }
    }
}

fn subject_case(extra: &[&str], expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p).to_string_lossy().into_owned();
    let mut cmd = hierax();
    cmd.args(["subject", "--tr", "2", "--out"]).arg(dir.path().join("out"));
    let mut have = |flag: &str, default: String| {
        if !extra.contains(&flag) {
            cmd.arg(flag).arg(default);
        }
    };
    have("--connectome", d("sub-01/sub-01_connectome.csv"));
    have("--series", d("sub-01/sub-01_bold.npy"));
    have("--map", d("atlas/hierarchy.csv"));
    cmd.args(extra.iter().map(|s| s.replace("DEMO/", &format!("{}/", root.join("demo-data").display()))));
    let o = run(&mut cmd);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    for e in expect {
        assert!(err.contains(e), "{err:?} lacks {e:?}");
    }
    assert!(files_below(dir.path()).is_empty(), "output left behind");
}

#[test]
fn subject_rejects_mismatched_region_names() {
    let dir = tempfile::tempdir().unwrap();
    let map = dir.path().join("map.csv");
    let mut body = String::from("region,value\n");
    for i in 0..100 {
        body.push_str(&format!("X{i},{}\n", i as f64 / 100.0));
    }
    std::fs::write(&map, body).unwrap();
    subject_case(&["--map", map.to_str().unwrap()], &["region names", "region 1 is `X0`", "L_P01"]);
}

#[test]
fn subject_rejects_a_map_of_the_wrong_length() {
    let dir = tempfile::tempdir().unwrap();
    let map = dir.path().join("map.csv");
    std::fs::write(&map, "1\n2\n3\n").unwrap();
    subject_case(
        &["--map", map.to_str().unwrap()],
        &["map: expected one value for each of 100 regions, found 3"],
    );
}

#[test]
fn subject_rejects_a_missing_confound_column() {
    subject_case(
        &["--confounds", "DEMO/sub-01/sub-01_confounds.tsv", "--confound-columns", "csf"],
        &["no column `csf`", "global_signal"],
    );
}

#[test]
fn subject_geometry_nulls_need_distances() {
    subject_case(
        &["--network-nulls", "40", "--null-model", "geometry-swap"],
        &["geometry-swap network nulls need --distances"],
    );
}

#[test]
fn subject_unknown_timescale_column_lists_the_choices() {
    subject_case(&["--timescale", "tau"], &["--timescale tau: expected one of", "ips_tau_s"]);
}

#[test]
fn subject_refuses_too_few_nulls_for_the_fdr_family() {
    subject_case(
        &["--network-nulls", "10"],
        &["--network-nulls 10: expected at least 19 for a family of 1 test at FDR 0.05"],
    );
}

#[test]
fn subject_spin_nulls_find_the_planted_hierarchy_effects() {
    // The invented cohort plants a timescale gradient along the hierarchy and an energy
    // asymmetry tied to it (demo-data/README.md); spun maps must not reproduce them.
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p);
    let o = run(hierax()
        .args(["subject", "--subject", "sub-05", "--tr", "2", "--map-nulls", "99", "--out"])
        .arg(dir.path())
        .arg("--connectome")
        .arg(d("sub-05/sub-05_connectome.csv"))
        .arg("--series")
        .arg(d("sub-05/sub-05_bold.npy"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .arg("--confounds")
        .arg(d("sub-05/sub-05_confounds.tsv"))
        .args(["--confound-columns", "global_signal,trans_x,trans_y,trans_z,rot_x,rot_y,rot_z"])
        .arg("--sphere")
        .arg(format!("{}:sphere_x,sphere_y,sphere_z", d("atlas/regions.tsv").display()))
        .arg("--hemisphere")
        .arg(format!("{}:hemisphere", d("atlas/regions.tsv").display())));
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("sub-05/sub-05_summary.json")).unwrap(),
    )
    .unwrap();
    let tests = v["tests"].as_array().unwrap();
    // Map nulls test the energy difference and the timescale-map correlation; the distance slope
    // is derived from the difference under these settings and is not a test of its own.
    assert_eq!(tests.len(), 2);
    for t in tests {
        // 99 spins: the smallest attainable p is 0.01; planted effects should sit at or near it.
        assert!(t["p_value"].as_f64().unwrap() <= 0.05, "{t}");
        assert!(t["p_fdr"].as_f64().unwrap() <= 0.05, "{t}");
    }
}

#[test]
fn subject_variogram_map_nulls_run_from_distances() {
    let dir = tempfile::tempdir().unwrap();
    let root = repo_root();
    let d = |p: &str| root.join("demo-data").join(p);
    let o = run(hierax()
        .args([
            "subject",
            "--subject",
            "sub-07",
            "--tr",
            "2",
            "--map-nulls",
            "99",
            "--map-null-method",
            "variogram",
        ])
        .arg("--out")
        .arg(dir.path())
        .arg("--connectome")
        .arg(d("sub-07/sub-07_connectome.csv"))
        .arg("--series")
        .arg(d("sub-07/sub-07_bold.npy"))
        .arg("--map")
        .arg(d("atlas/hierarchy.csv"))
        .arg("--distances")
        .arg(d("atlas/distances.npy")));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert_eq!(text.matches("_vs_map_nulls (variogram)").count(), 2, "{text}");
}

#[test]
fn cohort_run_logs_a_failing_subject_and_finishes_the_others() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("data");
    let root = repo_root();
    std::fs::create_dir_all(&data).unwrap();
    std::fs::write(
        data.join("participants.tsv"),
        "participant_id\tage\nsub-01\t9.4\nsub-02\t10.4\nsub-03\t16.0\n",
    )
    .unwrap();
    for s in ["sub-01", "sub-02", "sub-03"] {
        std::fs::create_dir_all(data.join(s)).unwrap();
        for f in ["connectome.csv", "bold.npy", "confounds.tsv"] {
            let name = format!("{s}_{f}");
            std::fs::copy(root.join("demo-data").join(s).join(&name), data.join(s).join(&name)).unwrap();
        }
    }
    // sub-02's connectome gets a negative weight.
    let c = data.join("sub-02/sub-02_connectome.csv");
    let text = std::fs::read_to_string(&c).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let mut cells: Vec<String> = lines[2].split(',').map(str::to_string).collect();
    cells[1] = "-3".into();
    lines[2] = cells.join(",");
    std::fs::write(&c, lines.join("\n") + "\n").unwrap();

    let out = dir.path().join("out");
    let o = run(hierax()
        .args(["cohort", "run", "--tr", "2", "--quiet", "--data"])
        .arg(&data)
        .arg("--map")
        .arg(root.join("demo-data/atlas/hierarchy.csv"))
        .arg("--out")
        .arg(&out));
    assert_eq!(o.status.code(), Some(1), "some subjects failed -> exit 1");
    let err = String::from_utf8(o.stderr).unwrap();
    assert!(
        err.contains("sub-02:")
            && err.contains("sub-02_connectome.csv: connectome: expected non-negative weights"),
        "{err}"
    );
    let log = std::fs::read_to_string(out.join("run_log.csv")).unwrap();
    assert!(
        log.contains("sub-01,ok,,") && log.contains("sub-02,failed,load,") && log.contains("sub-03,ok,,"),
        "{log}"
    );
    let cohort: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("cohort.json")).unwrap()).unwrap();
    assert_eq!(cohort["units"]["failed"][0]["stage"], "load");
    assert_eq!(cohort["units"]["failed"][0]["subject"], "sub-02");
    assert!(out.join("sub-01/sub-01_hierax.h5").is_file() && out.join("sub-03/sub-03_hierax.h5").is_file());
    assert!(!out.join("sub-02").exists(), "nothing written for the failed subject");
    assert!(!files_below(&out).iter().any(|p| p.to_string_lossy().contains("partial")));
}
