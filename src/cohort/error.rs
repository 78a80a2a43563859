//! Errors of the `cohort` module.

use crate::io::IoError;
use crate::stats::StatsError;
use crate::subject::{SubjectError, UnitFailure, UnitStage};
use std::path::PathBuf;

/// An error building or running a cohort.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CohortError {
    /// A file could not be read or written, or is malformed.
    #[error(transparent)]
    Io(#[from] IoError),
    /// The participants table lacks a required column.
    #[error("{path}: no column `{column}`; expected a BIDS participants table with `participant_id`")]
    MissingColumn {
        /// The participants table.
        path: PathBuf,
        /// The column that is missing.
        column: String,
    },
    /// A participant's input file does not exist.
    #[error("{subject}: {role}: {path}: no such file (pattern `{pattern}`)")]
    MissingInput {
        /// `sub-<label>`.
        subject: String,
        /// Which input ("connectome", "series", ...).
        role: &'static str,
        /// The path the pattern produced.
        path: PathBuf,
        /// The pattern.
        pattern: String,
    },
    /// A value in the participants table is malformed.
    #[error("{path}: line {line}: {reason}")]
    BadRow {
        /// The participants table.
        path: PathBuf,
        /// 1-based line.
        line: usize,
        /// What was wrong.
        reason: String,
    },
    /// A filename pattern is malformed.
    #[error("{role} pattern `{pattern}`: {reason}")]
    Pattern {
        /// Which input.
        role: &'static str,
        /// The pattern.
        pattern: String,
        /// What is wrong.
        reason: String,
    },
    /// A covariate is missing or mistyped.
    #[error("covariate `{column}`: {reason}")]
    Covariate {
        /// The column.
        column: String,
        /// What is wrong, naming the unit.
        reason: String,
    },
    /// A shard outside 1..=count.
    #[error("shard {index}/{count}: expected I/N with 1 <= I <= N")]
    Shard {
        /// The shard asked for.
        index: usize,
        /// The number of shards.
        count: usize,
    },
    /// Another run holds the output folder.
    #[error("{path}: {reason}")]
    Locked {
        /// The lock file.
        path: PathBuf,
        /// Who holds it and what to do.
        reason: String,
    },
    /// Outputs of different runs cannot be combined.
    #[error("{path}: {reason}")]
    Mixed {
        /// The folder or file at fault.
        path: PathBuf,
        /// What differs.
        reason: String,
    },
    /// A cohort-level statistic failed.
    #[error("{what}: {source}")]
    Stats {
        /// Which.
        what: &'static str,
        /// The cause.
        #[source]
        source: StatsError,
    },
}

/// Why one unit of a cohort failed, with its cause kept as the error source.
#[derive(Debug, thiserror::Error)]
pub enum UnitError {
    /// A file the patterns name does not exist.
    #[error("{0}")]
    Inputs(String),
    /// Reading or validating the inputs failed.
    #[error("{0}")]
    Load(#[source] SubjectError),
    /// The analysis failed.
    #[error("{0}")]
    Analyse(#[source] SubjectError),
    /// Writing the unit's folder failed.
    #[error("{0}")]
    Write(#[source] IoError),
}

impl UnitError {
    /// The stage that failed.
    pub fn stage(&self) -> UnitStage {
        match self {
            UnitError::Inputs(_) => UnitStage::Inputs,
            UnitError::Load(_) => UnitStage::Load,
            UnitError::Analyse(_) => UnitStage::Analyse,
            UnitError::Write(_) => UnitStage::Write,
        }
    }

    /// The failure of unit `unit`, as a run records it.
    pub fn failure(&self, unit: &str) -> UnitFailure {
        UnitFailure { stage: self.stage(), message: format!("{unit}: {self}") }
    }
}
