//! The catalogue of hostile but realistic inputs around data safety and
//! cohort runs (the second half of the bad-input catalogue, b26 onwards):
//! each case asserts exit 2, one line naming the file or flag and what was
//! expected, and that nothing was written.

use crate::util::{files_below, hierax, repo_root, run};
use std::path::Path;

/// A temp dir holding one invented demo subject's files and the map.
fn subject_dir() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let demo = repo_root().join("demo-data");
    for f in ["sub-01_connectome.csv", "sub-01_bold.npy", "sub-01_confounds.tsv"] {
        std::fs::copy(demo.join("sub-01").join(f), dir.path().join(f)).unwrap();
    }
    std::fs::copy(demo.join("atlas/hierarchy.csv"), dir.path().join("map.csv")).unwrap();
    dir
}

/// A temp dir with `data/` (participants.tsv with `participants`, one unit sub-01) and the map.
fn cohort_dir(participants: &str) -> tempfile::TempDir {
    let dir = subject_dir();
    let unit = dir.path().join("data/sub-01");
    std::fs::create_dir_all(&unit).unwrap();
    for f in ["sub-01_connectome.csv", "sub-01_bold.npy"] {
        std::fs::copy(dir.path().join(f), unit.join(f)).unwrap();
    }
    std::fs::write(dir.path().join("data/participants.tsv"), participants).unwrap();
    dir
}

const SUBJECT: &[&str] = &[
    "subject",
    "--connectome",
    "sub-01_connectome.csv",
    "--series",
    "sub-01_bold.npy",
    "--map",
    "map.csv",
    "--tr",
    "2",
];
const COHORT: &[&str] = &[
    "cohort",
    "run",
    "--map",
    "map.csv",
    "--tr",
    "2",
    "--data",
    "data",
    "--confounds-pattern",
    "none",
    "--no-censoring",
];
const TIMESCALES: &[&str] =
    &["timescales", "sub-01_bold.npy", "--tr", "2", "--orientation", "time-by-region"];
const ONE: &str = "participant_id\tage\nsub-01\t10\n";

/// Run `base` + `extra` in `dir`: exit 2, one line holding every fragment (each once), no file added.
fn refused(dir: &Path, base: &[&str], extra: &[&str], expect: &[&str]) {
    let before = files_below(dir);
    let args: Vec<&str> = base.iter().chain(extra).copied().collect();
    let out = run(hierax().current_dir(dir).args(&args));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(out.status.code(), Some(2), "args {args:?}: {err}");
    assert_eq!(err.lines().count(), 1, "expected one line, got: {err}");
    assert!(err.starts_with("hierax: error: "), "{err}");
    for e in expect {
        assert_eq!(err.matches(e).count(), 1, "message {err:?} should hold {e:?} exactly once");
    }
    assert_eq!(files_below(dir), before, "files appeared for {args:?}");
}

fn subject_case(extra: &[&str], expect: &[&str]) {
    refused(subject_dir().path(), SUBJECT, extra, expect);
}

fn cohort_case(participants: &str, extra: &[&str], expect: &[&str]) {
    refused(cohort_dir(participants).path(), COHORT, extra, expect);
}

const LABEL_RULE: &str =
    "expected sub-<label> with a label of ASCII letters or digits only (the BIDS label rule)";

#[test]
fn b26_subject_label_leaving_out() {
    subject_case(&["--subject", "../victim", "--out", "o"], &["`../victim`", LABEL_RULE]);
}

#[test]
fn b27_subject_label_parent() {
    subject_case(&["--subject", "..", "--out", "o"], &["`..`", LABEL_RULE]);
}

#[test]
fn b28_subject_label_empty() {
    subject_case(&["--subject", "", "--out", "o"], &["``", LABEL_RULE]);
}

#[test]
fn b29_subject_label_traversal() {
    subject_case(&["--subject", "sub-x/../../victim", "--out", "o"], &["`sub-x/../../victim`", LABEL_RULE]);
}

#[test]
fn b30_subject_label_space() {
    subject_case(&["--subject", "a b", "--out", "o"], &["`a b`", LABEL_RULE]);
}

#[test]
fn b31_subject_label_underscore() {
    subject_case(&["--subject", "01_x", "--out", "o"], &["`01_x`", LABEL_RULE]);
}

#[test]
fn b32_subject_label_needed_when_names_carry_none() {
    let dir = subject_dir();
    std::fs::copy(dir.path().join("sub-01_connectome.csv"), dir.path().join("conn.csv")).unwrap();
    std::fs::copy(dir.path().join("sub-01_bold.npy"), dir.path().join("bold.npy")).unwrap();
    refused(
        dir.path(),
        &["subject", "--connectome", "conn.csv", "--series", "bold.npy", "--map", "map.csv", "--tr", "2"],
        &["--out", "o"],
        &["the input file names carry no sub-<label> entity; name the subject with --subject sub-<label>"],
    );
}

#[test]
fn b33_inputs_naming_two_subjects() {
    let dir = subject_dir();
    std::fs::copy(dir.path().join("sub-01_bold.npy"), dir.path().join("sub-02_bold.npy")).unwrap();
    refused(
        dir.path(),
        &[
            "subject",
            "--connectome",
            "sub-01_connectome.csv",
            "--series",
            "sub-02_bold.npy",
            "--map",
            "map.csv",
        ],
        &["--tr", "2", "--out", "o"],
        &["sub-02_bold.npy: names subject sub-02, but sub-01_connectome.csv names sub-01"],
    );
}

#[test]
fn b34_out_is_the_input_folder() {
    subject_case(&["--out", "."], &["was not written by hierax"]);
}

#[test]
fn b35_out_holds_a_foreign_subject_folder() {
    let dir = subject_dir();
    std::fs::create_dir_all(dir.path().join("foreign/sub-01")).unwrap();
    std::fs::write(dir.path().join("foreign/sub-01/keep.txt"), "mine").unwrap();
    refused(dir.path(), SUBJECT, &["--out", "foreign"], &["foreign: exists and was not written by hierax"]);
    assert_eq!(std::fs::read_to_string(dir.path().join("foreign/sub-01/keep.txt")).unwrap(), "mine");
}

#[test]
fn b36_negative_displacement_threshold() {
    subject_case(
        &["--confounds", "sub-01_confounds.tsv", "--fd-threshold", "-1", "--out", "o"],
        &["--fd-threshold -1: expected"],
    );
}

#[test]
fn b37_zero_states() {
    subject_case(&["--bins", "0", "--out", "o"], &["--bins 0: expected at least 3 states"]);
}

#[test]
fn b38_more_states_than_regions() {
    subject_case(&["--bins", "101", "--out", "o"], &["--bins 101: expected at most the 100 regions"]);
}

#[test]
fn b39_length_bin_nulls_without_distances() {
    subject_case(
        &["--network-nulls", "100", "--null-model", "length-bin-shuffle", "--out", "o"],
        &["length-bin-shuffle network nulls need --distances; none was given"],
    );
}

#[test]
fn b40_zero_horizon() {
    subject_case(&["--horizon", "0", "--out", "o"], &["--horizon 0: expected a finite number > 0"]);
}

#[test]
fn b41_false_discovery_rate_above_one() {
    subject_case(
        &["--fdr-alpha", "1.5", "--out", "o"],
        &["--fdr-alpha 1.5: expected a false discovery rate in (0, 1)"],
    );
}

#[test]
fn b42_spin_nulls_without_sphere() {
    subject_case(&["--map-nulls", "100", "--out", "o"], &["spin map nulls need --sphere; none was given"]);
}

/// A confounds table whose `trans_x` column is constant.
fn constant_confound(dir: &Path) {
    let text = std::fs::read_to_string(dir.join("sub-01_confounds.tsv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split('\t').collect();
    let i = header.iter().position(|h| *h == "trans_x").unwrap();
    let mut out = header.join("\t") + "\n";
    for l in lines {
        let mut cells: Vec<&str> = l.split('\t').collect();
        cells[i] = "0.5";
        out += &(cells.join("\t") + "\n");
    }
    std::fs::write(dir.join("const.tsv"), out).unwrap();
}

#[test]
fn b43_constant_confound_blames_the_confounds_table() {
    let dir = subject_dir();
    constant_confound(dir.path());
    refused(
        dir.path(),
        SUBJECT,
        &["--confounds", "const.tsv", "--confound-columns", "trans_x", "--no-censoring", "--out", "o"],
        &["const.tsv: timescales: nuisance regressor `trans_x` is (nearly) a linear combination"],
    );
}

#[test]
fn b44_no_participants_table() {
    let dir = cohort_dir(ONE);
    std::fs::remove_file(dir.path().join("data/participants.tsv")).unwrap();
    refused(dir.path(), COHORT, &["--out", "co"], &["data/participants.tsv: cannot read", "No such file"]);
}

#[test]
fn b45_participants_without_id_column() {
    cohort_case("id\tage\nsub-01\t10\n", &["--out", "co"], &["participants.tsv: no column `participant_id`"]);
}

#[test]
fn b46_participant_id_traversal() {
    cohort_case(
        "participant_id\tage\nsub-x/../../victim\t10\n",
        &["--out", "co"],
        &["participants.tsv: line 2: participant_id: `sub-x/../../victim`", LABEL_RULE],
    );
}

#[test]
fn b47_participant_listed_twice() {
    cohort_case(
        "participant_id\tage\nsub-01\t10\nsub-01\t11\n",
        &["--out", "co"],
        &["participants.tsv: line 3: participant `sub-01` is listed twice"],
    );
}

#[test]
fn b48_missing_covariate() {
    cohort_case(
        ONE,
        &["--covariates", "age,iq", "--out", "co"],
        &["covariate `iq`: is not a column of participants.tsv"],
    );
}

#[test]
fn b49_covariate_text() {
    cohort_case(
        "participant_id\tage\nsub-01\tabc\n",
        &["--covariates", "age", "--out", "co"],
        &["covariate `age`: sub-01: `abc` is not a plausible number"],
    );
}

#[test]
fn b50_covariate_decimal_comma() {
    cohort_case(
        "participant_id\tage\nsub-01\t20,5\n",
        &["--covariates", "age", "--out", "co"],
        &["covariate `age`: sub-01: `20,5` is not a plausible number (decimal point, not comma)"],
    );
}

#[test]
fn b51_covariate_absurd_magnitude() {
    cohort_case(
        "participant_id\tage\nsub-01\t1e308\n",
        &["--covariates", "age", "--out", "co"],
        &["covariate `age`: sub-01: `1e308` is not a plausible number"],
    );
}

#[test]
fn b52_out_is_the_data_folder() {
    cohort_case(ONE, &["--out", "data"], &["--out data: the output folder contains the input folder"]);
}

#[test]
fn b53_out_contains_the_data_folder() {
    cohort_case(ONE, &["--out", "."], &["--out .: the output folder contains the input folder"]);
}

#[test]
fn b54_shard_zero() {
    cohort_case(ONE, &["--shard", "0/2", "--out", "co"], &["--shard 0/2: expected I/N with 1 <= I <= N"]);
}

#[test]
fn b55_shard_beyond_count() {
    cohort_case(ONE, &["--shard", "3/2", "--out", "co"], &["--shard 3/2: expected I/N with 1 <= I <= N"]);
}

#[test]
fn b56_shard_not_a_fraction() {
    cohort_case(ONE, &["--shard", "x", "--out", "co"], &["--shard x: expected I/N with 1 <= I <= N"]);
}

#[test]
fn b57_pattern_without_subject() {
    cohort_case(
        ONE,
        &["--connectome-pattern", "conn.csv", "--out", "co"],
        &["connectome pattern `conn.csv`: expected {subject} for the participant label"],
    );
}

#[test]
fn b58_pattern_with_unknown_placeholder() {
    cohort_case(
        ONE,
        &["--connectome-pattern", "sub-{subject}/{foo}.csv", "--out", "co"],
        &["unknown placeholder {foo}; expected {subject}, {session} or {run}"],
    );
}

#[test]
fn b59_settings_that_fail_every_unit_fail_once() {
    cohort_case(
        ONE,
        &["--map-nulls", "100", "--out", "co"],
        &["spin map nulls need --sphere; none was given"],
    );
}

#[test]
fn b60_bad_session_label() {
    let dir = cohort_dir(ONE);
    std::fs::write(dir.path().join("data/sub-01/sub-01_sessions.tsv"), "session_id\tage\nses-1_x\t10\n")
        .unwrap();
    let pattern = ["--connectome-pattern", "sub-{subject}/ses-{session}/conn.csv", "--series-pattern"];
    refused(
        dir.path(),
        COHORT,
        &[&pattern[..], &["sub-{subject}/ses-{session}/bold.npy", "--out", "co"]].concat(),
        &["sub-01_sessions.tsv", "`ses-1_x`"],
    );
}

#[test]
fn b61_merge_of_a_foreign_folder() {
    let dir = subject_dir();
    std::fs::create_dir_all(dir.path().join("notours")).unwrap();
    std::fs::write(dir.path().join("notours/a.txt"), "x").unwrap();
    refused(
        dir.path(),
        &["cohort", "merge", "--out", "notours"],
        &[],
        &["notours: not a hierax cohort output"],
    );
}

#[test]
fn b62_merge_of_a_missing_folder() {
    refused(
        subject_dir().path(),
        &["cohort", "merge", "--out", "nothere"],
        &[],
        &["nothere: expected a hierax cohort output folder"],
    );
}

#[test]
fn b63_drivers_file_of_the_wrong_length() {
    let dir = subject_dir();
    std::fs::write(dir.path().join("drivers.csv"), "1\n1\n").unwrap();
    refused(
        dir.path(),
        &["energy", "sub-01_connectome.csv", "--map", "map.csv", "--bins", "4"],
        &["--drivers", "drivers.csv", "--out", "e"],
        &["drivers.csv: drivers: expected one weight for each of 100 nodes, found 2"],
    );
}

#[test]
fn b64_negative_horizon() {
    refused(
        subject_dir().path(),
        &["energy", "sub-01_connectome.csv", "--map", "map.csv", "--bins", "4"],
        &["--horizon", "-1", "--out", "e"],
        &["--horizon -1: expected a finite number > 0"],
    );
}

#[test]
fn b65_energy_matrix_not_square() {
    let dir = subject_dir();
    std::fs::write(dir.path().join("e.csv"), "0,1\n1,0\n2,2\n").unwrap();
    refused(
        dir.path(),
        &["link", "--energy", "e.csv", "--out", "l"],
        &[],
        &["e.csv: energy matrix: expected a square matrix"],
    );
}

#[test]
fn b66_welch_segment_too_short() {
    refused(
        subject_dir().path(),
        TIMESCALES,
        &["--welch-segment", "3", "--out", "t"],
        &["sub-01_bold.npy: --welch-segment 3: expected between 8 and the 240 frames"],
    );
}

#[test]
fn b67_fit_lags_reversed() {
    refused(
        subject_dir().path(),
        TIMESCALES,
        &["--fit-lags", "5:3", "--out", "t"],
        &["--fit-lags 5:3: expected FIRST:LAST"],
    );
}

#[test]
fn b68_knee_band_reversed() {
    refused(
        subject_dir().path(),
        TIMESCALES,
        &["--knee-band", "0.3:0.1", "--out", "t"],
        &["--knee-band 0.3:0.1: expected LOW:HIGH"],
    );
}

#[test]
fn b69_one_bootstrap_replicate() {
    refused(
        subject_dir().path(),
        TIMESCALES,
        &["--bootstrap", "1", "--out", "t"],
        &["--bootstrap 1: expected 0 (off) or at least 2"],
    );
}

#[test]
fn b70_zero_threads() {
    refused(
        subject_dir().path(),
        TIMESCALES,
        &["--jobs", "0", "--out", "t"],
        &["--jobs 0: expected at least 1 thread"],
    );
}

#[test]
fn b71_mask_censoring_every_frame_blames_the_mask() {
    let dir = subject_dir();
    std::fs::write(dir.path().join("mask.txt"), "0\n".repeat(240)).unwrap();
    refused(
        dir.path(),
        TIMESCALES,
        &["--censor-mask", "mask.txt", "--out", "t"],
        &["mask.txt: censoring leaves 0 of 240 frames valid"],
    );
}

#[test]
fn b72_constant_confound_in_timescales_blames_the_confounds_table() {
    let dir = subject_dir();
    constant_confound(dir.path());
    refused(
        dir.path(),
        TIMESCALES,
        &["--confounds", "const.tsv", "--confound-columns", "trans_x", "--out", "t"],
        &["const.tsv: nuisance regressor `trans_x` is (nearly) a linear combination"],
    );
}

#[test]
fn b73_displacement_censoring_every_frame_blames_the_confounds() {
    let dir = subject_dir();
    refused(
        dir.path(),
        SUBJECT,
        &["--confounds", "sub-01_confounds.tsv", "--fd-threshold", "0.000001", "--out", "o"],
        &["sub-01_confounds.tsv: timescales:", "framewise displacement above"],
    );
}

#[test]
fn b74_a_run_with_other_parameters_is_refused() {
    let dir = cohort_dir(ONE);
    let first = run(hierax().current_dir(dir.path()).args(COHORT).args(["--bins", "4", "--out", "co"]));
    assert!(first.status.success(), "{}", String::from_utf8_lossy(&first.stderr));
    refused(
        dir.path(),
        COHORT,
        &["--bins", "5", "--out", "co"],
        &["--out co: holds results of a run with other parameters"],
    );
}

#[test]
fn b75_inputs_inside_out_are_refused_for_a_subject() {
    // --out is the parent of the inputs' folder.
    let dir = subject_dir();
    std::fs::create_dir_all(dir.path().join("in")).unwrap();
    for f in ["sub-01_connectome.csv", "sub-01_bold.npy"] {
        std::fs::rename(dir.path().join(f), dir.path().join("in").join(f)).unwrap();
    }
    refused(
        dir.path(),
        &[
            "subject",
            "--connectome",
            "in/sub-01_connectome.csv",
            "--series",
            "in/sub-01_bold.npy",
            "--map",
            "map.csv",
        ],
        &["--tr", "2", "--out", "."],
        &["--out .: the output folder contains the input folder"],
    );
}
