//! Writing a cohort: `cohort.csv`, `run_log.csv`, `group_tests.csv`,
//! `age_models.csv` and `cohort.json`, from compact subject records.

use super::schema::{self, TableBuilder};
use super::{CsvSink, Sink};
use crate::io::table::{Column, Table};
use crate::io::IoError;
use crate::stats::regression::OlsFit;
use crate::subject::{Outcome, OutcomeRole, SubjectRecord, SubjectStatus};
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

fn records(run: &[SubjectStatus]) -> Vec<&SubjectRecord> {
    run.iter().filter_map(|s| s.record.as_ref()).collect()
}

/// `cohort.csv`: one row per subject that succeeded.
pub fn cohort_table(run: &[SubjectStatus]) -> Table {
    let reps = records(run);
    let mut keys: Vec<&String> = reps.iter().flat_map(|r| r.covariates.keys()).collect();
    keys.sort();
    keys.dedup();
    let f = |g: &dyn Fn(&SubjectRecord) -> f64| Column::F64(reps.iter().map(|r| g(r)).collect());
    let mut b = TableBuilder::new(&schema::COHORT)
        .col("subject", Column::Str(reps.iter().map(|r| r.subject.clone()).collect()));
    for k in keys {
        b = b.col(
            k,
            Column::Str(reps.iter().map(|r| r.covariates.get(k).cloned().unwrap_or_default()).collect()),
        );
    }
    b = b
        .col("n_valid_frames", Column::I64(reps.iter().map(|r| r.n_valid_frames as i64).collect()))
        .col("n_timescale_flagged", Column::I64(reps.iter().map(|r| r.n_timescale_flagged as i64).collect()))
        .col("mean_bottom_up_energy", f(&|r| r.mean_bottom_up_energy))
        .col("mean_top_down_energy", f(&|r| r.mean_top_down_energy));
    for o in Outcome::ALL {
        b = b.col(o.name(), f(&|r| r.outcome(o)));
    }
    b = b
        .col("gramian_condition", f(&|r| r.gramian_condition))
        .col("terminal_error_max", f(&|r| r.terminal_error_max));
    // Null-test p-values, one column per test (the same tests for every subject of a run).
    if let Some(first) = reps.first() {
        for (i, (key, _)) in first.tests.iter().enumerate() {
            b = b.col(&format!("p_{key}"), f(&|r| r.tests.get(i).map_or(f64::NAN, |t| t.1)));
        }
    }
    b.finish()
}

/// `run_log.csv`: one row per subject, failures included.
pub fn run_log_table(run: &[SubjectStatus]) -> Table {
    TableBuilder::new(&schema::RUN_LOG)
        .col("subject", Column::Str(run.iter().map(|s| s.subject.clone()).collect()))
        .col(
            "status",
            Column::Str(
                run.iter().map(|s| if s.record.is_some() { "ok" } else { "failed" }.to_string()).collect(),
            ),
        )
        .col(
            "message",
            Column::Str(
                run.iter()
                    .map(|s| match (&s.record, &s.error) {
                        (Some(r), _) => format!("{} note(s) in {}_summary.json", r.n_notes, r.subject),
                        (None, e) => e.clone().unwrap_or_default(),
                    })
                    .collect(),
            ),
        )
        .finish()
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
    run: &[SubjectStatus],
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
            "total": run.len(),
            "succeeded": run.iter().filter(|s| s.record.is_some()).count(),
            "failed": run.iter().filter(|s| s.record.is_none()).map(|s| json!({
                "subject": s.subject, "error": s.error,
            })).collect::<Vec<_>>(),
            "per_unit_tables": ["cohort.csv", "run_log.csv"],
        },
        "notice": crate::io::provenance::RESEARCH_NOTICE,
    })
}

/// Write every cohort file into `out`.
///
/// # Errors
/// [`IoError`] when a file cannot be written.
pub fn write_cohort_files(
    out: &Path,
    parameters: &Value,
    roles: &[(Outcome, OutcomeRole)],
    run: &[SubjectStatus],
    tests: &[GroupTest],
    models: &[OutcomeModel],
) -> Result<(), IoError> {
    let mut csv = CsvSink::new(out, "");
    csv.table(&schema::COHORT, &cohort_table(run))?;
    csv.table(&schema::RUN_LOG, &run_log_table(run))?;
    csv.table(&schema::GROUP_TESTS, &group_tests_table(tests))?;
    csv.table(&schema::AGE_MODELS, &models_table(models))?;
    crate::io::table::write_json(
        &out.join("cohort.json"),
        &cohort_json(parameters, roles, run, tests, models),
    )
}
