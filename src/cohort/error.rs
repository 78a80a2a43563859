//! Errors of the `cohort` module.

use crate::io::IoError;
use crate::stats::StatsError;
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
