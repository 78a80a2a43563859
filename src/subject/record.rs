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

/// The stage at which a unit of a cohort failed.
#[derive(Clone, Copy, Debug, Serialize, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
pub enum UnitStage {
    /// A file the patterns name does not exist.
    Inputs,
    /// Reading or validating the inputs.
    Load,
    /// The analysis (timescales, states, energies, links, nulls).
    Analyse,
    /// Writing the unit's folder.
    Write,
}

impl UnitStage {
    /// The label in `run_log.csv` and `cohort.json`.
    pub fn label(self) -> &'static str {
        match self {
            UnitStage::Inputs => "inputs",
            UnitStage::Load => "load",
            UnitStage::Analyse => "analyse",
            UnitStage::Write => "write",
        }
    }
}

/// Why a unit failed: the stage and the one-line reason (with its causes).
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct UnitFailure {
    /// Where it failed.
    pub stage: UnitStage,
    /// `sub-XX: ` and the error, causes included.
    pub message: String,
}

/// One subject of a cohort run: its record, or why it failed.
#[derive(Clone, Debug, PartialEq)]
pub struct SubjectStatus {
    /// `sub-<label>`.
    pub subject: String,
    /// The record when the subject succeeded.
    pub record: Option<SubjectRecord>,
    /// Why it failed, when it did.
    pub failure: Option<UnitFailure>,
}

/// One unit of a cohort run as a cohort keeps it in memory: its name and,
/// when it failed, why. A unit that succeeded is read back from its folder
/// when its record is needed, so memory does not grow with its results.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct UnitStatus {
    /// `sub-<label>` (or `sub-<label>_ses-<label>`).
    pub subject: String,
    /// Why it failed; `None` when it succeeded.
    pub failure: Option<UnitFailure>,
}

impl UnitStatus {
    /// Whether the unit succeeded.
    pub fn succeeded(&self) -> bool {
        self.failure.is_none()
    }
}

/// What the cohort layer reads back of a unit's `_summary.json`: the record
/// and the provenance that says how it was made. Other keys are skipped
/// unparsed; one decoder serves the cohort tables, resuming and merging.
#[derive(Clone, Debug, Deserialize)]
pub struct WrittenUnit {
    /// How the unit was made.
    pub provenance: WrittenProvenance,
    /// The unit's record, `output` set to its folder.
    pub record: SubjectRecord,
}

/// The provenance keys of a written unit.
#[derive(Clone, Debug, Deserialize)]
pub struct WrittenProvenance {
    /// hierax version.
    #[serde(default)]
    pub version: String,
    /// Every parameter used.
    #[serde(default)]
    pub parameters: serde_json::Value,
    /// Each input's spec and SHA-256.
    #[serde(default)]
    pub inputs: Vec<WrittenInput>,
}

/// One input of a written unit.
#[derive(Clone, Debug, Deserialize)]
pub struct WrittenInput {
    /// `PATH[:KEY]`.
    pub spec: String,
    /// SHA-256 of the file, hex.
    pub sha256: String,
}

/// Read `dir/<unit>_summary.json`.
///
/// # Errors
/// [`IoError`] naming the summary when it cannot be read or holds no record.
pub fn read_written_unit(dir: &Path, unit: &str) -> Result<WrittenUnit, IoError> {
    let path = dir.join(format!("{unit}_summary.json"));
    let text = std::fs::read_to_string(&path).map_err(|e| IoError::os(&path, "cannot read", e))?;
    let mut w: WrittenUnit = serde_json::from_str(&text).map_err(|e| {
        IoError::format(&path, format!("expected a hierax summary with `provenance` and `record`: {e}"))
    })?;
    w.record.output = dir.to_path_buf();
    Ok(w)
}

/// The record in `dir/<unit>_summary.json` ([`read_written_unit`]).
///
/// # Errors
/// As [`read_written_unit`].
pub fn read_record(dir: &Path, unit: &str) -> Result<SubjectRecord, IoError> {
    Ok(read_written_unit(dir, unit)?.record)
}
