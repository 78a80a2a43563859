//! Running the per-subject job over a cohort: in parallel on one rayon pool,
//! fault-tolerant (a failing subject is recorded and the others go on), each
//! subject written as soon as it is done, and only a compact record kept in
//! memory.

use super::{CohortError, Manifest};
use crate::control::Par;
use crate::io::InputSpec;
use crate::subject::{
    analyse_subject, LoadedSubject, SubjectInputs, SubjectRecord, SubjectStatus, ValidSubjectConfig,
};
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

/// The outcome of a cohort run, in manifest order.
#[derive(Clone, Debug, Serialize)]
pub struct CohortRun {
    /// One status per participant.
    pub subjects: Vec<SubjectStatus>,
}

impl CohortRun {
    /// Records of the subjects that succeeded.
    pub fn records(&self) -> Vec<&SubjectRecord> {
        self.subjects.iter().filter_map(|s| s.record.as_ref()).collect()
    }

    /// Number of failed subjects.
    pub fn n_failed(&self) -> usize {
        self.subjects.iter().filter(|s| s.record.is_none()).count()
    }
}

/// Load, analyse and write one subject; a failure becomes its status.
pub fn run_one(inputs: &SubjectInputs, cfg: &ValidSubjectConfig, out: &Path, command: &str) -> SubjectStatus {
    let result = LoadedSubject::load(inputs, cfg)
        .and_then(|s| analyse_subject(&s, cfg, Par::Seq))
        .map_err(|e| e.to_string())
        .and_then(|r| {
            let dir = crate::export::subject::write_subject(&r, out, command).map_err(|e| e.to_string())?;
            Ok(SubjectRecord::of(&r, dir))
        });
    match result {
        Ok(record) => SubjectStatus { subject: inputs.subject.clone(), record: Some(record), error: None },
        Err(e) => SubjectStatus {
            subject: inputs.subject.clone(),
            record: None,
            error: Some(format!("{}: {e}", inputs.subject)),
        },
    }
}

/// Run the per-subject job for every participant of `manifest` on the
/// current rayon pool, writing `out/<subject>/`. `progress` is called once
/// per finished subject.
///
/// # Errors
/// None today beyond what each subject records; the `Result` is kept for
/// run-level failures.
pub fn run_cohort(
    manifest: &Manifest,
    shared: &SharedInputs,
    cfg: &ValidSubjectConfig,
    out: &Path,
    command: &str,
    progress: &(dyn Fn(&SubjectStatus) + Sync),
) -> Result<CohortRun, CohortError> {
    let subjects: Vec<SubjectStatus> = manifest
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
            let status = run_one(&inputs, cfg, out, command);
            progress(&status);
            status
        })
        .collect();
    Ok(CohortRun { subjects })
}
