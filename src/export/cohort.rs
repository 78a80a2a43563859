//! Writing a cohort: `cohort.csv`, `run_log.csv`, `group_tests.csv`,
//! `age_models.csv` and `cohort.json`, from compact subject records.

use super::schema::{self, TableBuilder};
use super::{CsvSink, Sink};
use crate::io::atomic::write_atomic;
use crate::io::table::{format_f64, Column, Table};
use crate::io::IoError;
use crate::stats::regression::OlsFit;
use crate::subject::{Outcome, OutcomeRole, SubjectRecord, UnitStatus};
use serde::Serialize;
use serde_json::{json, Value};
use std::path::Path;

/// A cohort-level test of one outcome against 0.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct GroupTest {
    /// The outcome.
    pub outcome: Outcome,
    /// Subjects with a finite value.
    pub n: usize,
    /// Mean across subjects.
    pub mean: f64,
    /// Two-sided sign-flip permutation p-value (Nichols & Holmes 2002).
    pub p_value: f64,
    /// Benjamini–Hochberg adjusted across the outcomes tested.
    pub p_fdr: f64,
    /// Sign flips drawn.
    pub sign_flips: usize,
}

/// One outcome's model, or why it could not be fitted.
#[derive(Clone, Debug)]
pub struct OutcomeModel {
    /// The outcome.
    pub outcome: Outcome,
    /// The fit, or the reason.
    pub fit: Result<OlsFit, String>,
}

/// What the cohort statistics and the report need of every unit that
/// succeeded, kept in memory while the per-unit records stay on disk: each
/// outcome (56 bytes per unit), the covariates the models use as text, and
/// the first [`CohortValues::SAMPLE`] records whole for the report's table.
#[derive(Clone, Debug, Default)]
pub struct CohortValues {
    keep: Vec<String>,
    subjects: usize,
    outcomes: Vec<[f64; Outcome::ALL.len()]>,
    covariates: Vec<Vec<Option<Box<str>>>>,
    /// The first records in name order, whole.
    pub sample: Vec<SubjectRecord>,
}

impl CohortValues {
    /// Records kept whole for the report.
    pub const SAMPLE: usize = 100;

    /// Values keeping the covariates `keep` (duplicates ignored).
    pub fn new(keep: &[&str]) -> Self {
        let mut names: Vec<String> = keep.iter().map(|k| k.to_string()).collect();
        names.sort();
        names.dedup();
        CohortValues { covariates: vec![Vec::new(); names.len()], keep: names, ..Default::default() }
    }

    /// Add one unit's record.
    pub fn push(&mut self, r: &SubjectRecord) {
        let mut row = [f64::NAN; Outcome::ALL.len()];
        for (v, x) in row.iter_mut().zip(&r.outcomes) {
            *v = *x;
        }
        self.outcomes.push(row);
        for (name, col) in self.keep.iter().zip(self.covariates.iter_mut()) {
            col.push(r.covariates.get(name).map(|v| v.as_str().into()));
        }
        if self.sample.len() < Self::SAMPLE {
            self.sample.push(r.clone());
        }
        self.subjects += 1;
    }

    /// Units added.
    pub fn len(&self) -> usize {
        self.subjects
    }

    /// Whether no unit was added.
    pub fn is_empty(&self) -> bool {
        self.subjects == 0
    }

    /// Outcome `o` of every unit (NaN where undefined).
    pub fn outcome(&self, o: Outcome) -> Vec<f64> {
        let j = Outcome::ALL.iter().position(|x| *x == o).unwrap_or(0);
        self.outcomes.iter().map(|row| row[j]).collect()
    }

    /// Covariate `name` of every unit as text (`None` where a unit lacks
    /// it), if it was kept.
    pub fn covariate(&self, name: &str) -> Option<&[Option<Box<str>>]> {
        let j = self.keep.iter().position(|k| k == name)?;
        Some(&self.covariates[j])
    }
}

/// The header of `cohort.csv` for records carrying `covariate_names` and the
/// null tests of `first`.
fn cohort_header(covariate_names: &[String], first: Option<&SubjectRecord>) -> Vec<String> {
    let mut h: Vec<String> = vec!["subject".into()];
    h.extend(covariate_names.iter().cloned());
    h.extend(
        ["n_valid_frames", "n_timescale_flagged", "mean_bottom_up_energy", "mean_top_down_energy"]
            .map(String::from),
    );
    h.extend(Outcome::ALL.iter().map(|o| o.name().to_string()));
    h.extend(["gramian_condition", "terminal_error_max"].map(String::from));
    if let Some(first) = first {
        h.extend(first.tests.iter().map(|(key, _)| format!("p_{key}")));
    }
    schema::check_header(&schema::COHORT, &h);
    h
}

/// One `cohort.csv` row.
fn cohort_row(r: &SubjectRecord, covariate_names: &[String], n_tests: usize) -> Vec<String> {
    let mut row: Vec<String> = vec![r.subject.clone()];
    row.extend(covariate_names.iter().map(|k| r.covariates.get(k).cloned().unwrap_or_default()));
    row.push(r.n_valid_frames.to_string());
    row.push(r.n_timescale_flagged.to_string());
    row.push(format_f64(r.mean_bottom_up_energy));
    row.push(format_f64(r.mean_top_down_energy));
    row.extend(Outcome::ALL.iter().map(|o| format_f64(r.outcome(*o))));
    row.push(format_f64(r.gramian_condition));
    row.push(format_f64(r.terminal_error_max));
    row.extend((0..n_tests).map(|i| format_f64(r.tests.get(i).map_or(f64::NAN, |t| t.1))));
    row
}

/// Write `cohort.csv` (one row per unit that succeeded, with its
/// `covariate_names` and null-test p-values) and `run_log.csv` (one row per
/// unit) row by row: each record is read once with `read`, written, handed
/// to `values` and dropped, so memory does not grow with the cohort.
///
/// # Errors
/// [`IoError`] when a record cannot be read or a file cannot be written;
/// neither file is left half-written.
pub fn write_unit_tables(
    out: &Path,
    units: &[UnitStatus],
    covariate_names: &[String],
    read: &dyn Fn(&str) -> Result<SubjectRecord, IoError>,
    values: &mut CohortValues,
) -> Result<(), IoError> {
    let ok: Vec<&UnitStatus> = units.iter().filter(|u| u.succeeded()).collect();
    // The first record gives the header (its tests name the p-value columns) and is the first row.
    let mut first = ok.first().map(|u| read(&u.subject)).transpose()?;
    let header = cohort_header(covariate_names, first.as_ref());
    let n_tests = first.as_ref().map_or(0, |r| r.tests.len());
    let mut failure: Option<IoError> = None;
    let mut notes: Vec<u32> = Vec::with_capacity(ok.len());
    let written = write_atomic(&out.join(format!("{}.csv", schema::COHORT.stem)), |w| {
        let mut csv = csv::Writer::from_writer(w);
        csv.write_record(&header)?;
        for u in &ok {
            let r = match first.take().map_or_else(|| read(&u.subject), Ok) {
                Ok(r) => r,
                Err(e) => {
                    failure = Some(e);
                    return Err(std::io::Error::other("a unit record could not be read"));
                }
            };
            csv.write_record(cohort_row(&r, covariate_names, n_tests))?;
            notes.push(u32::try_from(r.n_notes).unwrap_or(u32::MAX));
            values.push(&r);
        }
        csv.flush()
    });
    if let Some(e) = failure {
        return Err(e);
    }
    written?;
    let header: Vec<&str> = schema::RUN_LOG.columns.iter().map(|c| c.name).collect();
    write_atomic(&out.join(format!("{}.csv", schema::RUN_LOG.stem)), |w| {
        let mut csv = csv::Writer::from_writer(w);
        csv.write_record(&header)?;
        let mut notes = notes.iter();
        for u in units {
            match &u.failure {
                None => {
                    let n = notes.next().copied().unwrap_or(0);
                    csv.write_record([
                        u.subject.as_str(),
                        "ok",
                        "",
                        &format!("{n} note(s) in {}_summary.json", u.subject),
                    ])?
                }
                Some(f) => {
                    csv.write_record([u.subject.as_str(), "failed", f.stage.label(), f.message.as_str()])?
                }
            }
        }
        csv.flush()
    })
}

/// `group_tests.csv`.
pub fn group_tests_table(tests: &[GroupTest]) -> Table {
    TableBuilder::new(&schema::GROUP_TESTS)
        .col("outcome", Column::Str(tests.iter().map(|g| g.outcome.name().to_string()).collect()))
        .col("n", Column::I64(tests.iter().map(|g| g.n as i64).collect()))
        .col("mean", Column::F64(tests.iter().map(|g| g.mean).collect()))
        .col("p_value", Column::F64(tests.iter().map(|g| g.p_value).collect()))
        .col("p_fdr", Column::F64(tests.iter().map(|g| g.p_fdr).collect()))
        .col("sign_flips", Column::I64(tests.iter().map(|g| g.sign_flips as i64).collect()))
        .finish()
}

/// `age_models.csv`: one row per term of each fitted model.
pub fn models_table(models: &[OutcomeModel]) -> Table {
    let mut rows: Vec<(&'static str, String, f64, f64, f64, f64, i64)> = Vec::new();
    for m in models {
        if let Ok(f) = &m.fit {
            for j in 0..f.terms.len() {
                rows.push((
                    m.outcome.name(),
                    f.terms[j].clone(),
                    f.coef[j],
                    f.se[j],
                    f.t[j],
                    f.p_value[j],
                    f.n as i64,
                ));
            }
        }
    }
    TableBuilder::new(&schema::AGE_MODELS)
        .col("outcome", Column::Str(rows.iter().map(|r| r.0.to_string()).collect()))
        .col("term", Column::Str(rows.iter().map(|r| r.1.clone()).collect()))
        .col("estimate", Column::F64(rows.iter().map(|r| r.2).collect()))
        .col("se", Column::F64(rows.iter().map(|r| r.3).collect()))
        .col("t", Column::F64(rows.iter().map(|r| r.4).collect()))
        .col("p_value", Column::F64(rows.iter().map(|r| r.5).collect()))
        .col("n", Column::I64(rows.iter().map(|r| r.6).collect()))
        .finish()
}

/// `cohort.json`: the parameters, every outcome's role under them, the
/// cohort tests, the models, unit counts and each failed unit's reason. Keys are snake_case
/// names, never Rust enum names.
pub fn cohort_json(
    parameters: &Value,
    roles: &[(Outcome, OutcomeRole)],
    units: &[UnitStatus],
    tests: &[GroupTest],
    models: &[OutcomeModel],
) -> Value {
    let outcomes: serde_json::Map<String, Value> = roles
        .iter()
        .map(|(o, r)| (o.name().to_string(), json!({ "role": r.describe(), "description": o.description() })))
        .collect();
    json!({
        "hierax_version": crate::VERSION,
        "parameters": parameters,
        "outcomes": outcomes,
        "group_tests": tests.iter().map(|g| json!({
            "outcome": g.outcome.name(), "n": g.n, "mean": g.mean, "p_value": g.p_value, "p_fdr": g.p_fdr,
            "sign_flips": g.sign_flips,
        })).collect::<Vec<_>>(),
        "models": models.iter().map(|m| match &m.fit {
            Ok(f) => json!({ "outcome": m.outcome.name(), "fit": f }),
            Err(e) => json!({ "outcome": m.outcome.name(), "error": e }),
        }).collect::<Vec<_>>(),
        // Per-unit values live in cohort.csv and run_log.csv; repeating them here as JSON values
        // cost about 10 KB of memory per unit at write time.
        "units": {
            "total": units.len(),
            "succeeded": units.iter().filter(|s| s.succeeded()).count(),
            "failed": units.iter().filter(|s| !s.succeeded()).map(|s| json!({
                "subject": s.subject,
                "stage": s.failure.as_ref().map(|f| f.stage.label()),
                "error": s.failure.as_ref().map(|f| f.message.as_str()),
            })).collect::<Vec<_>>(),
            "per_unit_tables": ["cohort.csv", "run_log.csv"],
        },
        "notice": crate::io::provenance::RESEARCH_NOTICE,
    })
}

/// Every file a cohort run writes at the top of its output folder. A run
/// killed while writing one leaves its temporary `.<file>.<pid>.partial`,
/// which the next run may remove because the name is ours.
pub const COHORT_LEVEL_FILES: [&str; 6] =
    ["cohort.csv", "run_log.csv", "group_tests.csv", "age_models.csv", "cohort.json", "report.html"];

/// Write the cohort-level files into `out`: `group_tests.csv`,
/// `age_models.csv` and `cohort.json` (the per-unit tables are written by
/// [`write_unit_tables`]).
///
/// # Errors
/// [`IoError`] when a file cannot be written.
pub fn write_cohort_files(
    out: &Path,
    parameters: &Value,
    roles: &[(Outcome, OutcomeRole)],
    units: &[UnitStatus],
    tests: &[GroupTest],
    models: &[OutcomeModel],
) -> Result<(), IoError> {
    let mut csv = CsvSink::new(out, "");
    csv.table(&schema::GROUP_TESTS, &group_tests_table(tests))?;
    csv.table(&schema::AGE_MODELS, &models_table(models))?;
    crate::io::table::write_json(
        &out.join("cohort.json"),
        &cohort_json(parameters, roles, units, tests, models),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    fn record(subject: &str, age: &str, bu_td: f64) -> SubjectRecord {
        let mut outcomes = vec![f64::NAN; Outcome::ALL.len()];
        outcomes[0] = bu_td;
        SubjectRecord {
            subject: subject.into(),
            covariates: BTreeMap::from([("age".to_string(), age.to_string())]),
            n_valid_frames: 100,
            n_timescale_flagged: 0,
            mean_bottom_up_energy: 1.0,
            mean_top_down_energy: 1.0 - bu_td,
            outcomes,
            gramian_condition: 2.0,
            terminal_error_max: 1e-15,
            tests: vec![("bottom_up_minus_top_down_vs_network_nulls".into(), 0.5)],
            n_notes: 3,
            output: PathBuf::new(),
        }
    }

    fn unit(s: &str, error: Option<&str>) -> UnitStatus {
        UnitStatus {
            subject: s.into(),
            failure: error.map(|m| crate::subject::UnitFailure {
                stage: crate::subject::UnitStage::Inputs,
                message: m.into(),
            }),
        }
    }

    use std::path::PathBuf;

    #[test]
    fn unit_tables_are_streamed_in_name_order_and_feed_the_values() {
        let dir = tempfile::tempdir().unwrap();
        let units = [
            unit("sub-01", None),
            unit("sub-02", Some("sub-02: series: no such file")),
            unit("sub-03", None),
        ];
        let reads = std::cell::Cell::new(0);
        let read = |u: &str| -> Result<SubjectRecord, IoError> {
            reads.set(reads.get() + 1);
            Ok(record(u, if u == "sub-01" { "9" } else { "n/a" }, if u == "sub-01" { -1.0 } else { -2.0 }))
        };
        let mut values = CohortValues::new(&["age", "age"]);
        write_unit_tables(dir.path(), &units, &["age".into()], &read, &mut values).unwrap();
        // Each record is read once, the first (which names the header's columns) included.
        assert_eq!(reads.get(), 2);
        let cohort = std::fs::read_to_string(dir.path().join("cohort.csv")).unwrap();
        let lines: Vec<&str> = cohort.lines().collect();
        assert_eq!(lines.len(), 3);
        assert!(lines[0].starts_with("subject,age,n_valid_frames,"), "{}", lines[0]);
        assert!(lines[0].ends_with(",p_bottom_up_minus_top_down_vs_network_nulls"), "{}", lines[0]);
        assert!(lines[1].starts_with("sub-01,9,100,0,") && lines[2].starts_with("sub-03,n/a,"));
        let log = std::fs::read_to_string(dir.path().join("run_log.csv")).unwrap();
        assert_eq!(
            log.lines().collect::<Vec<_>>(),
            [
                "subject,status,stage,message",
                "sub-01,ok,,3 note(s) in sub-01_summary.json",
                "sub-02,failed,inputs,sub-02: series: no such file",
                "sub-03,ok,,3 note(s) in sub-03_summary.json"
            ]
        );
        assert_eq!(values.len(), 2);
        assert_eq!(values.outcome(Outcome::BottomUpMinusTopDown), [-1.0, -2.0]);
        assert_eq!(values.covariate("age").unwrap()[0].as_deref(), Some("9"));
        assert!(values.covariate("sex").is_none());
        assert_eq!(values.sample.len(), 2);
    }

    #[test]
    fn a_record_that_cannot_be_read_leaves_no_table() {
        let dir = tempfile::tempdir().unwrap();
        let units = [unit("sub-01", None), unit("sub-02", None)];
        let read = |u: &str| -> Result<SubjectRecord, IoError> {
            if u == "sub-02" {
                Err(IoError::format(Path::new("sub-02/sub-02_summary.json"), "expected a record"))
            } else {
                Ok(record(u, "9", -1.0))
            }
        };
        let mut values = CohortValues::new(&[]);
        let e = write_unit_tables(dir.path(), &units, &[], &read, &mut values).unwrap_err().to_string();
        assert!(e.contains("sub-02_summary.json") && e.contains("expected a record"), "{e}");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0, "nothing written, no temporary left");
    }
}
