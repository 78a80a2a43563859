//! Cohorts: which participants there are, where their files live, running
//! the per-subject job over all of them, and the cohort-level tests and
//! models. This module only orchestrates; every computation lives in the
//! science modules it calls, and every file is written by `export`.
//!
//! A cohort is described by a BIDS-style `participants.tsv` (column
//! `participant_id` = `sub-<label>`, plus covariates such as `age` and `sex`)
//! and filename patterns that locate each participant's inputs, e.g.
//! `sub-{subject}/sub-{subject}_connectome.csv` where `{subject}` is the label without the
//! `sub-` prefix.

mod error;
pub mod manifest;
pub mod merge;
pub mod model;
pub mod run;

pub use error::{CohortError, UnitError};
pub use manifest::{CovariateKind, Manifest, Participant, Patterns};
pub use run::{run_cohort, CohortRun, RunLock, RunOptions, SharedInputs};

use crate::export::cohort::{CohortValues, GroupTest, OutcomeModel};
use crate::subject::{Outcome, OutcomeRole, ValidSubjectConfig};

/// Sign flips of the cohort tests against 0: 9,999 gives p-values down to
/// 1e-4 (common practice, no source).
pub const SIGN_FLIPS: usize = 9_999;

/// The cohort-level results of a run.
#[derive(Clone, Debug)]
pub struct CohortAnalysis {
    /// Each outcome's role under the run's settings.
    pub roles: Vec<(Outcome, OutcomeRole)>,
    /// Findings tested against 0 across subjects.
    pub tests: Vec<GroupTest>,
    /// Findings regressed on the covariates.
    pub models: Vec<OutcomeModel>,
}

/// Test and model every finding across the units of `values`.
///
/// # Errors
/// [`CohortError::Stats`] when the FDR step fails.
pub fn analyse_cohort(
    values: &CohortValues,
    cfg: &ValidSubjectConfig,
    covariates: &[&str],
) -> Result<CohortAnalysis, CohortError> {
    let roles = cfg.outcome_roles();
    let findings = model::findings(&roles);
    let tests = model::group_tests(values, &findings, SIGN_FLIPS, cfg.params().seed)
        .map_err(|source| CohortError::Stats { what: "cohort tests", source })?;
    let models = model::fit_models(values, &findings, covariates);
    Ok(CohortAnalysis { roles, tests, models })
}

/// Finish a cohort: write `cohort.csv` and `run_log.csv` from the units'
/// folders one record at a time (keeping only [`CohortValues`] in memory),
/// test and model every finding, and write `group_tests.csv`,
/// `age_models.csv`, `cohort.json` and `report.html` into `run.out`.
///
/// # Errors
/// [`CohortError::Io`] when a record cannot be read or a file cannot be
/// written; [`CohortError::Stats`] when the FDR step fails.
pub fn finish_cohort(
    run: &CohortRun,
    cfg: &ValidSubjectConfig,
    covariates: &[&str],
    title: &str,
    intro: &str,
) -> Result<(CohortValues, CohortAnalysis), CohortError> {
    let mut keep: Vec<&str> = covariates.to_vec();
    keep.push("age");
    let mut values = CohortValues::new(&keep);
    let read = |unit: &str| crate::subject::read_record(&run.out.join(unit), unit);
    crate::export::cohort::write_unit_tables(&run.out, &run.units, &run.covariate_names, &read, &mut values)?;
    let analysis = analyse_cohort(&values, cfg, covariates)?;
    let params = serde_json::to_value(cfg.params()).unwrap_or_default();
    crate::export::cohort::write_cohort_files(
        &run.out,
        &params,
        &analysis.roles,
        &run.units,
        &analysis.tests,
        &analysis.models,
    )?;
    let example = values.sample.first().and_then(|r| {
        crate::export::subject::read_asymmetry(&r.output, &r.subject).ok().map(|m| (r.subject.clone(), m))
    });
    let html = crate::report::cohort::cohort_report(&crate::report::cohort::CohortReportInput {
        title,
        intro,
        units: &run.units,
        values: &values,
        roles: &analysis.roles,
        tests: &analysis.tests,
        models: &analysis.models,
        example,
    });
    crate::io::atomic::write_bytes_atomic(&run.out.join("report.html"), html.as_bytes())?;
    Ok((values, analysis))
}
