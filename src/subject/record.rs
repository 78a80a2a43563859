//! A compact record of one subject's result: what the cohort tables need,
//! built from a [`SubjectResult`], stored in the unit's summary JSON and read
//! back from it one unit at a time when the cohort tables are written (a
//! cohort keeps only each unit's [`UnitStatus`] in memory, so memory stays
//! flat however large the cohort).

use super::{Outcome, SubjectResult};
use crate::io::IoError;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// What the cohort tables need of one subject.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct SubjectRecord {
    /// `sub-<label>`.
    pub subject: String,
    /// Covariates, as text.
    pub covariates: BTreeMap<String, String>,
    /// Frames left after censoring.
    pub n_valid_frames: usize,
    /// Regions whose chosen timescale failed QC.
    pub n_timescale_flagged: usize,
    /// Mean bottom-up energy.
    pub mean_bottom_up_energy: f64,
    /// Mean top-down energy.
    pub mean_top_down_energy: f64,
    /// Every outcome's value, in [`Outcome::ALL`] order.
    pub outcomes: Vec<f64>,
    /// Gramian condition number.
    pub gramian_condition: f64,
    /// Largest terminal-state error.
    pub terminal_error_max: f64,
    /// Each null test's key and p-value, in the job's order.
    pub tests: Vec<(String, f64)>,
    /// Number of notes in the unit's summary (the notes themselves stay on
    /// disk, so memory does not grow with them).
    pub n_notes: usize,
    /// The folder written.
    pub output: PathBuf,
}

impl SubjectRecord {
    /// The record of `r`, written to `output`.
    pub fn of(r: &SubjectResult, output: PathBuf) -> Self {
        let s = &r.link.summary;
        SubjectRecord {
            subject: r.subject.clone(),
            covariates: r.covariates.clone(),
            n_valid_frames: r.n_valid_frames(),
            n_timescale_flagged: r.timescales.n_flagged,
            mean_bottom_up_energy: s.mean_bottom_up_energy,
            mean_top_down_energy: s.mean_top_down_energy,
            outcomes: Outcome::ALL.iter().map(|o| r.outcome(*o)).collect(),
            gramian_condition: r.control.info.gramian_condition,
            terminal_error_max: r.control.info.terminal_error_max,
            tests: r.tests.iter().map(|t| (t.key(), t.p_value)).collect(),
            n_notes: r.notes.len(),
            output,
        }
    }

    /// The value of `o` (NaN when undefined).
    pub fn outcome(&self, o: Outcome) -> f64 {
        Outcome::ALL
            .iter()
            .position(|x| *x == o)
            .and_then(|i| self.outcomes.get(i))
            .copied()
            .unwrap_or(f64::NAN)
    }
}

/// One subject of a cohort run: its record, or why it failed.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct SubjectStatus {
    /// `sub-<label>`.
    pub subject: String,
    /// The record when the subject succeeded.
    pub record: Option<SubjectRecord>,
    /// The one-line reason when it failed.
    pub error: Option<String>,
}

/// One unit of a cohort run as a cohort keeps it in memory: its name and,
/// when it failed, why. A unit that succeeded is read back from its folder
/// when its record is needed, so memory does not grow with its results.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct UnitStatus {
    /// `sub-<label>` (or `sub-<label>_ses-<label>`).
    pub subject: String,
    /// The one-line reason when it failed; `None` when it succeeded.
    pub error: Option<String>,
}

impl UnitStatus {
    /// Whether the unit succeeded.
    pub fn succeeded(&self) -> bool {
        self.error.is_none()
    }
}

impl From<&SubjectStatus> for UnitStatus {
    fn from(s: &SubjectStatus) -> Self {
        UnitStatus {
            subject: s.subject.clone(),
            error: if s.record.is_some() { None } else { Some(s.error.clone().unwrap_or_default()) },
        }
    }
}

#[derive(Deserialize)]
struct SummaryRecord {
    record: SubjectRecord,
}

/// The record in `dir/<unit>_summary.json`, with `output` set to `dir`.
/// Only the `record` key is decoded.
///
/// # Errors
/// [`IoError`] naming the summary when it cannot be read or holds no record.
pub fn read_record(dir: &Path, unit: &str) -> Result<SubjectRecord, IoError> {
    let path = dir.join(format!("{unit}_summary.json"));
    let text = std::fs::read_to_string(&path).map_err(|e| IoError::os(&path, "cannot read", e))?;
    let s: SummaryRecord = serde_json::from_str(&text)
        .map_err(|e| IoError::format(&path, format!("expected a hierax summary with a `record`: {e}")))?;
    let mut record = s.record;
    record.output = dir.to_path_buf();
    Ok(record)
}
