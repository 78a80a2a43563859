//! A compact record of one subject's result: what the cohort layer keeps in
//! memory (a few hundred bytes per subject, so memory stays flat however
//! large the cohort), built from a [`SubjectResult`] or read back from a
//! written summary.

use super::{Outcome, SubjectResult};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::PathBuf;

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
