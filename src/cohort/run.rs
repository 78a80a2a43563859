//! Running the per-subject job over a cohort: in parallel, fault-tolerant
//! (a failing subject is recorded and the others go on), with a run log and
//! a long-format cohort table.

use super::subject::{run_subject, SubjectConfig, SubjectInputs, SubjectReport};
use super::{CohortError, Manifest};
use crate::io::table::{Column, Table};
use crate::io::InputSpec;
use rayon::prelude::*;
use serde::Serialize;
use std::path::Path;

/// Inputs shared by every subject of a cohort (one atlas).
#[derive(Clone, Debug, Serialize)]
pub struct SharedInputs {
    /// Hierarchy map.
    pub map: InputSpec,
    /// Region distances, if any.
    pub distances: Option<InputSpec>,
    /// Sphere coordinates for spin nulls, if any.
    pub sphere: Option<InputSpec>,
    /// Hemisphere labels, if any.
    pub hemisphere: Option<InputSpec>,
}

/// The outcome of one subject.
#[derive(Clone, Debug, Serialize)]
pub struct SubjectOutcome {
    /// `sub-<label>`.
    pub subject: String,
    /// The report, or the one-line error.
    pub result: Result<SubjectReport, String>,
}

/// The outcome of a cohort run, in manifest order.
#[derive(Clone, Debug, Serialize)]
pub struct CohortRun {
    /// One outcome per participant.
    pub outcomes: Vec<SubjectOutcome>,
}

impl CohortRun {
    /// Successful reports.
    pub fn reports(&self) -> Vec<&SubjectReport> {
        self.outcomes.iter().filter_map(|o| o.result.as_ref().ok()).collect()
    }

    /// Number of failed subjects.
    pub fn n_failed(&self) -> usize {
        self.outcomes.iter().filter(|o| o.result.is_err()).count()
    }

    /// The run log: subject, status (`ok`/`failed`), message.
    pub fn log_table(&self) -> Table {
        Table::new()
            .with("subject", Column::Str(self.outcomes.iter().map(|o| o.subject.clone()).collect()))
            .with(
                "status",
                Column::Str(
                    self.outcomes
                        .iter()
                        .map(|o| if o.result.is_ok() { "ok" } else { "failed" }.to_string())
                        .collect(),
                ),
            )
            .with(
                "message",
                Column::Str(
                    self.outcomes
                        .iter()
                        .map(|o| match &o.result {
                            Ok(r) => r.notes.join("; "),
                            Err(e) => e.clone(),
                        })
                        .collect(),
                ),
            )
    }

    /// One row per successful subject: covariates (as text) and every summary
    /// statistic, ready for R or pandas.
    pub fn cohort_table(&self) -> Table {
        let reps = self.reports();
        let mut keys: Vec<String> = reps.iter().flat_map(|r| r.covariates.keys().cloned()).collect();
        keys.sort();
        keys.dedup();
        let f = |g: &dyn Fn(&SubjectReport) -> f64| Column::F64(reps.iter().map(|r| g(r)).collect());
        let mut t =
            Table::new().with("subject", Column::Str(reps.iter().map(|r| r.subject.clone()).collect()));
        for k in &keys {
            t = t.with(
                k,
                Column::Str(reps.iter().map(|r| r.covariates.get(k).cloned().unwrap_or_default()).collect()),
            );
        }
        t = t
            .with("n_valid_frames", Column::I64(reps.iter().map(|r| r.n_valid_frames as i64).collect()))
            .with(
                "n_timescale_flagged",
                Column::I64(reps.iter().map(|r| r.n_timescale_flagged as i64).collect()),
            )
            .with("mean_bottom_up_energy", f(&|r| r.summary.mean_bottom_up_energy))
            .with("mean_top_down_energy", f(&|r| r.summary.mean_top_down_energy))
            .with("bottom_up_minus_top_down", f(&|r| r.summary.bottom_up_minus_top_down))
            .with("asymmetry_distance_slope", f(&|r| r.summary.asymmetry_vs_distance_line.slope))
            .with("asymmetry_distance_spearman", f(&|r| r.summary.asymmetry_vs_distance_spearman.r))
            .with(
                "asymmetry_timescale_shift_spearman",
                f(&|r| r.summary.asymmetry_vs_timescale_shift_spearman.map_or(f64::NAN, |c| c.r)),
            )
            .with(
                "timescale_hierarchy_spearman",
                f(&|r| r.timescale_vs_hierarchy_spearman.unwrap_or(f64::NAN)),
            )
            .with("gramian_condition", f(&|r| r.gramian_condition))
            .with("terminal_error_max", f(&|r| r.terminal_error_max));
        // Null-test p-values, one column per test name (the same for every subject of a run).
        if let Some(first) = reps.first() {
            for (i, test) in first.tests.iter().enumerate() {
                let name = test.name.replace(' ', "_");
                t = t.with(&format!("p_{name}"), f(&|r| r.tests.get(i).map_or(f64::NAN, |x| x.p_value)));
            }
        }
        t
    }
}

/// Run the per-subject job for every participant of `manifest`, in parallel,
/// writing `out/<subject>/`. `progress` is called once per finished subject.
///
/// Each subject is independent: an error is recorded as that subject's
/// outcome (`sub-XX: file: what`) and the others continue.
pub fn run_cohort(
    manifest: &Manifest,
    shared: &SharedInputs,
    cfg: &SubjectConfig,
    out: &Path,
    progress: &(dyn Fn(&SubjectOutcome) + Sync),
) -> Result<CohortRun, CohortError> {
    std::fs::create_dir_all(out).map_err(|e| crate::io::IoError::os(out, "cannot create directory", e))?;
    let outcomes: Vec<SubjectOutcome> = manifest
        .participants
        .par_iter()
        .map(|p| {
            let inputs = SubjectInputs {
                subject: p.subject.clone(),
                connectome: p.connectome.clone(),
                series: p.series.clone(),
                map: shared.map.clone(),
                confounds: p.confounds.clone(),
                distances: shared.distances.clone(),
                sphere: shared.sphere.clone(),
                hemisphere: shared.hemisphere.clone(),
                covariates: p.covariates.clone(),
            };
            let result = run_subject(&inputs, cfg, out).map_err(|e| format!("{}: {e}", p.subject));
            let o = SubjectOutcome { subject: p.subject.clone(), result };
            progress(&o);
            o
        })
        .collect();
    Ok(CohortRun { outcomes })
}
