//! Errors of the per-subject job: each names the stage that failed and the
//! input at fault, and keeps its cause (`source`).

use crate::control::ControlError;
use crate::hierarchy::HierarchyError;
use crate::io::IoError;
use crate::link::LinkError;
use crate::param::ParamError;
use crate::stats::StatsError;
use crate::timescale::TimescaleError;

/// An error of the per-subject job.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SubjectError {
    /// A file could not be read or failed validation (the message names it).
    #[error(transparent)]
    Io(#[from] IoError),
    /// A parameter is out of range.
    #[error(transparent)]
    Param(#[from] ParamError),
    /// An input the settings need was not given.
    #[error("{needed_by} need {input}; none was given")]
    MissingInput {
        /// The input, as the library names it (`sphere`, `distances`, `confounds`).
        input: &'static str,
        /// What needs it.
        needed_by: String,
    },
    /// Timescale estimation failed.
    #[error("{input}: timescales: {source}")]
    Timescales {
        /// The file at fault (the series, or the confounds table).
        input: String,
        /// The cause.
        #[source]
        source: TimescaleError,
    },
    /// Censoring by framewise displacement left too few frames.
    #[error(
        "{input}: timescales: {source} (framewise displacement above {threshold_mm} mm censored the rest)"
    )]
    Censoring {
        /// The confounds table the displacement came from.
        input: String,
        /// The displacement threshold, mm.
        threshold_mm: f64,
        /// The cause.
        #[source]
        source: TimescaleError,
    },
    /// Ranking the map into states failed, or surrogate maps could not be made.
    #[error("{input}: {stage}: {source}")]
    Hierarchy {
        /// `states` or `map nulls`.
        stage: &'static str,
        /// The file at fault.
        input: String,
        /// The cause.
        #[source]
        source: HierarchyError,
    },
    /// The control model failed (e.g. a singular Gramian).
    #[error("{input}: control: {source}")]
    Control {
        /// The connectome (or drivers file).
        input: String,
        /// The cause.
        #[source]
        source: ControlError,
    },
    /// The pair table or its summaries failed.
    #[error("link: {0}")]
    Link(#[from] LinkError),
    /// A null model did not move the statistic it was to test.
    #[error("{family} nulls ({method}): {outcome}: {reason}")]
    NullsDidNotMove {
        /// `network` or `map`.
        family: &'static str,
        /// The null model.
        method: String,
        /// The outcome.
        outcome: &'static str,
        /// What was found and what to do.
        reason: String,
    },
    /// A null model or its test failed, or refused because it cannot move the statistic.
    #[error("{family} nulls: {source}")]
    Nulls {
        /// `network` or `map`.
        family: &'static str,
        /// The cause.
        #[source]
        source: StatsError,
    },
}
