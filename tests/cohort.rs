//! Cohort runs through the binary: data safety (never delete what hierax did
//! not write), restartable runs, shards and merge, kill-and-resume, preflight.

use crate::util::{files_below, hierax, repo_root, run};
use std::path::{Path, PathBuf};
use std::process::Command;

/// A small cohort of `n` demo subjects copied into `dir/data` (with their
/// confounds), participants.tsv with age and sex.
fn small_cohort(dir: &Path, ids: &[&str]) -> PathBuf {
    let data = dir.join("data");
    std::fs::create_dir_all(&data).unwrap();
    let demo = repo_root().join("demo-data");
    let table = std::fs::read_to_string(demo.join("participants.tsv")).unwrap();
    let mut lines = table.lines();
    let mut out = format!("{}\n", lines.next().unwrap());
    for l in lines {
        if ids.iter().any(|id| l.starts_with(&format!("{id}\t"))) {
            out.push_str(l);
            out.push('\n');
        }
    }
    std::fs::write(data.join("participants.tsv"), out).unwrap();
    for s in ids {
        std::fs::create_dir_all(data.join(s)).unwrap();
        for f in ["connectome.csv", "bold.npy", "confounds.tsv"] {
            let name = format!("{s}_{f}");
            std::fs::copy(demo.join(s).join(&name), data.join(s).join(&name)).unwrap();
        }
    }
    data
}

fn cohort_cmd(data: &Path, out: &Path) -> Command {
    let mut c = hierax();
    c.args(["cohort", "run", "--tr", "2", "--quiet", "--bins", "4", "--data"])
        .arg(data)
        .arg("--map")
        .arg(repo_root().join("demo-data/atlas/hierarchy.csv"))
        .arg("--out")
        .arg(out);
    c
}

/// Contents of every CSV of a run folder, keyed by relative path; JSON and
/// HDF5 carry creation times and are left out.
fn csv_contents(out: &Path) -> Vec<(PathBuf, String)> {
    files_below(out)
        .into_iter()
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .map(|p| (p.clone(), std::fs::read_to_string(out.join(&p)).unwrap()))
        .collect()
}

#[test]
fn out_equal_to_the_data_folder_is_refused_and_nothing_is_deleted() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_cohort(dir.path(), &["sub-01", "sub-02"]);
    let before = files_below(&data);
    let o = run(&mut cohort_cmd(&data, &data));
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert!(err.contains("contains the input folder"), "{err}");
    assert_eq!(files_below(&data), before, "input files changed");
    // The parent of the data folder is refused too.
    let o = run(&mut cohort_cmd(&data, dir.path()));
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(files_below(&data), before);
}

#[test]
fn a_folder_hierax_did_not_make_is_never_replaced() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_cohort(dir.path(), &["sub-01"]);
    let out = dir.path().join("results");
    std::fs::create_dir_all(out.join("sub-01")).unwrap();
    std::fs::write(out.join("sub-01/notes.txt"), "mine").unwrap();
    let o = run(&mut cohort_cmd(&data, &out));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("not written by hierax"));
    assert_eq!(std::fs::read_to_string(out.join("sub-01/notes.txt")).unwrap(), "mine");
}

#[test]
fn subject_labels_cannot_leave_the_output_folder() {
    let dir = tempfile::tempdir().unwrap();
    let victim = dir.path().join("victim");
    std::fs::create_dir_all(&victim).unwrap();
    std::fs::write(victim.join("keep.txt"), "x").unwrap();
    let root = repo_root();
    for label in ["../victim", "..", "", "sub-x/../../victim", "sub-a_b"] {
        let o = run(hierax()
            .args(["subject", "--tr", "2", "--subject", label, "--out"])
            .arg(dir.path().join("out"))
            .arg("--connectome")
            .arg(root.join("demo-data/sub-01/sub-01_connectome.csv"))
            .arg("--series")
            .arg(root.join("demo-data/sub-01/sub-01_bold.npy"))
            .arg("--map")
            .arg(root.join("demo-data/atlas/hierarchy.csv")));
        assert_eq!(o.status.code(), Some(2), "{label}");
        assert!(String::from_utf8(o.stderr).unwrap().contains("letters or digits"), "{label}");
        assert!(victim.join("keep.txt").exists());
        assert!(!dir.path().join("out").exists());
    }
    // Without --subject, the label comes from the inputs' sub- entity.
    let o = run(hierax()
        .args(["subject", "--tr", "2", "--bins", "4", "--out"])
        .arg(dir.path().join("out"))
        .arg("--connectome")
        .arg(root.join("demo-data/sub-01/sub-01_connectome.csv"))
        .arg("--series")
        .arg(root.join("demo-data/sub-01/sub-01_bold.npy"))
        .arg("--map")
        .arg(root.join("demo-data/atlas/hierarchy.csv")));
    assert!(o.status.success());
    assert!(dir.path().join("out/sub-01/sub-01_hierax.h5").is_file());
}

#[test]
fn a_missing_file_fails_its_unit_only_and_a_rerun_keeps_the_others() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_cohort(dir.path(), &["sub-01", "sub-02", "sub-03"]);
    std::fs::remove_file(data.join("sub-02/sub-02_bold.npy")).unwrap();
    let out = dir.path().join("out");
    let o = run(&mut cohort_cmd(&data, &out));
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8(o.stderr).unwrap();
    assert!(err.contains("sub-02: series: ") && err.contains("no such file"), "{err}");
    let log = std::fs::read_to_string(out.join("run_log.csv")).unwrap();
    assert!(
        log.contains("sub-01,ok,,") && log.contains("sub-02,failed,inputs,") && log.contains("sub-03,ok,,"),
        "{log}"
    );
    let first = csv_contents(&out);
    // Re-run: the two complete units are kept, not recomputed, and every table is unchanged.
    let o = run(&mut cohort_cmd(&data, &out));
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("2 succeeded (2 kept from an earlier run), 1 failed"), "{text}");
    assert_eq!(csv_contents(&out), first);
    // A changed input is recomputed.
    let c = data.join("sub-03/sub-03_connectome.csv");
    let body = std::fs::read_to_string(&c).unwrap();
    std::fs::write(&c, body.replacen(",", " ,", 1)).unwrap();
    let o = run(&mut cohort_cmd(&data, &out));
    assert!(String::from_utf8(o.stdout).unwrap().contains("2 succeeded (1 kept"));
    // Other parameters are refused on the same folder, and a second run cannot take a held lock.
    let o = run(cohort_cmd(&data, &out).args(["--seed", "7"]));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("other parameters"));
    let lock = out.join(".hierax-lock");
    std::fs::write(
        &lock,
        format!("1 {}\n", std::fs::read_to_string("/proc/sys/kernel/hostname").unwrap().trim()),
    )
    .unwrap();
    let o = run(&mut cohort_cmd(&data, &out));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("another hierax run (process 1"));
    std::fs::remove_file(lock).unwrap();
}

#[test]
fn shards_merged_equal_a_single_run_for_several_shard_counts() {
    let dir = tempfile::tempdir().unwrap();
    let ids = ["sub-01", "sub-02", "sub-03", "sub-04", "sub-05"];
    let data = small_cohort(dir.path(), &ids);
    let single = dir.path().join("single");
    assert!(run(&mut cohort_cmd(&data, &single)).status.success());
    let want = std::fs::read_to_string(single.join("cohort.csv")).unwrap();
    for n in [1usize, 2, 3, 5] {
        let out = dir.path().join(format!("shards-{n}"));
        for i in 1..=n {
            // Shard index from the SLURM array environment, as on a cluster.
            let o = run(cohort_cmd(&data, &out)
                .env("SLURM_ARRAY_TASK_ID", i.to_string())
                .env("SLURM_ARRAY_TASK_COUNT", n.to_string()));
            assert!(o.status.success());
        }
        let o = run(hierax().args(["cohort", "merge", "--out"]).arg(&out));
        assert!(o.status.success());
        assert_eq!(std::fs::read_to_string(out.join("cohort.csv")).unwrap(), want, "{n} shards");
        for id in ids {
            assert_eq!(
                std::fs::read_to_string(out.join(id).join(format!("{id}_pairs.csv"))).unwrap(),
                std::fs::read_to_string(single.join(id).join(format!("{id}_pairs.csv"))).unwrap()
            );
        }
    }
    // Shards made with different parameters are not merged; the message names the difference.
    let out = dir.path().join("mixed");
    assert!(run(cohort_cmd(&data, &out).args(["--shard", "1/2"])).status.success());
    let o = run(cohort_cmd(&data, &out).args(["--shard", "2/2", "--seed", "3", "--overwrite"]));
    assert!(o.status.success());
    let o = run(hierax().args(["cohort", "merge", "--out"]).arg(&out));
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert!(err.contains("different parameters (seed = "), "{err}");
}

#[test]
fn a_run_killed_at_any_point_resumes_to_the_uninterrupted_result() {
    let dir = tempfile::tempdir().unwrap();
    let ids = ["sub-01", "sub-02", "sub-03", "sub-04"];
    let data = small_cohort(dir.path(), &ids);
    let reference = dir.path().join("reference");
    let started = std::time::Instant::now();
    assert!(run(cohort_cmd(&data, &reference).args([
        "--network-nulls",
        "19",
        "--null-model",
        "weight-permutation"
    ]))
    .status
    .success());
    let full_ms = started.elapsed().as_millis() as u64;
    let want = csv_contents(&reference);
    // Kill points spread over the length of an uninterrupted run, so some kill lands mid-run.
    let mut mid_run = 0;
    for (k, delay_ms) in [full_ms / 10, full_ms / 3, full_ms * 2 / 3].into_iter().enumerate() {
        let out = dir.path().join(format!("killed-{k}"));
        let mut child = cohort_cmd(&data, &out)
            .args(["--network-nulls", "19", "--null-model", "weight-permutation"])
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(delay_ms));
        let _ = child.kill(); // SIGKILL: no clean-up runs
        let _ = child.wait();
        // Every visible unit folder is complete.
        if !out.exists() {
            mid_run += 1;
        } else {
            // The run was interrupted when it had not yet written the cohort table.
            mid_run += usize::from(!out.join("cohort.csv").exists());
            for e in std::fs::read_dir(&out).unwrap().flatten() {
                let name = e.file_name().to_string_lossy().into_owned();
                if name.starts_with("sub-") {
                    for f in ["hierax.h5", "summary.json", "pairs.csv", "regions.csv", "timescales.csv"] {
                        assert!(
                            e.path().join(format!("{name}_{f}")).is_file(),
                            "{name}: {f} missing after kill"
                        );
                    }
                }
            }
        }
        let o = run(cohort_cmd(&data, &out).args([
            "--network-nulls",
            "19",
            "--null-model",
            "weight-permutation",
        ]));
        assert!(o.status.success(), "resume after kill {k}");
        assert_eq!(csv_contents(&out), want, "kill {k}: resumed results differ");
        assert!(!files_below(&out).iter().any(|p| p.to_string_lossy().contains("partial")));
        assert!(!out.join(".hierax-lock").exists());
    }
    assert!(mid_run > 0, "no kill landed before the run finished");
}

#[test]
fn preflight_catches_covariates_and_dry_run_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_cohort(dir.path(), &["sub-01", "sub-02"]);
    let out = dir.path().join("out");
    let o = run(cohort_cmd(&data, &out).args(["--covariates", "age,iq"]));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("covariate `iq`: is not a column"));
    let o = run(cohort_cmd(&data, &out).args(["--covariates", "sex"]));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("declare the column categorical"));
    let t = data.join("participants.tsv");
    let body = std::fs::read_to_string(&t).unwrap().replacen("\t9.4\t", "\t9,4\t", 1);
    std::fs::write(&t, body).unwrap();
    let o = run(&mut cohort_cmd(&data, &out));
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8(o.stderr).unwrap().contains("sub-01: `9,4` is not a plausible number"));
    assert!(!out.exists(), "a refused run writes nothing");
    let body = std::fs::read_to_string(&t).unwrap().replacen("\t9,4\t", "\t9.4\t", 1);
    std::fs::write(&t, body).unwrap();
    let o = run(cohort_cmd(&data, &out).args(["--dry-run", "--categorical", "sex"]));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(
        text.contains("sub-01") && text.contains("to run") && text.contains("null tests per unit: 0"),
        "{text}"
    );
    assert!(!out.exists());
}

#[test]
fn sbatch_writes_an_array_job_and_a_dependent_merge() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_cohort(dir.path(), &["sub-01", "sub-02"]);
    let out = dir.path().join("out");
    let o = run(hierax()
        .args([
            "cohort", "sbatch", "--shards", "2", "--time", "00:10:00", "--tr", "2", "--bins", "4", "--data",
        ])
        .arg(&data)
        .arg("--map")
        .arg(repo_root().join("demo-data/atlas/hierarchy.csv"))
        .arg("--out")
        .arg(&out));
    assert!(o.status.success());
    let script = std::fs::read_to_string(out.join("slurm/run.sbatch")).unwrap();
    assert!(script.contains("#SBATCH --array=1-2") && script.contains("#SBATCH --time=00:10:00"), "{script}");
    assert!(
        script.contains(" cohort run ") && script.contains("--bins 4") && script.contains("--shard"),
        "{script}"
    );
    assert!(!script.contains("--shards"), "{script}");
    let submit = std::fs::read_to_string(out.join("slurm/submit.sh")).unwrap();
    assert!(submit.contains("--dependency=afterok:"), "{submit}");
    let merge = std::fs::read_to_string(out.join("slurm/merge.sbatch")).unwrap();
    assert!(merge.contains("cohort merge --out"), "{merge}");
}
