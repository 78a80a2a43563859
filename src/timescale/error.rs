//! Errors of the `timescale` module. Each variant carries the value that was
//! rejected and what was expected, so the message is one line a user can act on.

/// An error that stops a whole subject (a per-region problem is a
/// [`RegionStatus`](super::RegionStatus) instead).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TimescaleError {
    /// A parameter is outside its allowed range (named as the library spells it).
    #[error("{0}")]
    Param(#[from] crate::param::ParamError),
    /// The series has fewer frames than the analysis needs.
    #[error("series has {n_frames} frames ({n_valid} valid); it needs {need}")]
    SeriesTooShort {
        /// Frames in the series.
        n_frames: usize,
        /// Frames left after censoring.
        n_valid: usize,
        /// What the frames were needed for.
        need: String,
    },
    /// Censoring left too few valid frames (the series alone was long enough).
    #[error(
        "censoring leaves {n_valid} of {n_frames} frames valid; the timescales need more valid frames than the \
         lag bound max_lag = {max_lag}"
    )]
    CensoredTooShort {
        /// Frames in the series.
        n_frames: usize,
        /// Frames left after censoring.
        n_valid: usize,
        /// The lag bound.
        max_lag: usize,
    },
    /// A per-frame input (mask, confounds) does not have one entry per frame.
    #[error("{what} has {found} frames, but the series has {expected}")]
    FrameCountMismatch {
        /// "censoring mask", "confounds", ...
        what: String,
        /// Frames in the series.
        expected: usize,
        /// Frames in the per-frame input.
        found: usize,
    },
    /// A frame that is not censored holds non-finite values in every region.
    #[error("frame {frame} (1-based) is non-finite in every region; censor it (--censor-mask) or remove it")]
    NonFiniteFrame {
        /// The frame, 1-based.
        frame: usize,
    },
    /// A confound column is non-finite on a valid frame.
    #[error("confound `{column}` is non-finite at frame {frame} (1-based), which is not censored")]
    NonFiniteConfound {
        /// The column.
        column: String,
        /// The frame, 1-based.
        frame: usize,
    },
    /// The nuisance design (polynomial trend + confounds) is rank deficient.
    #[error(
        "nuisance regressor `{column}` is (nearly) a linear combination of the earlier ones on the valid \
         frames; drop it"
    )]
    RankDeficientDesign {
        /// The regressor that added nothing new.
        column: String,
    },
    /// Framewise displacement is non-finite where it must be defined.
    #[error(
        "framewise displacement is non-finite at frame {frame} (1-based); only the first frame may be n/a"
    )]
    NonFiniteDisplacement {
        /// The frame, 1-based.
        frame: usize,
    },
    /// A timescale column was asked for that the result does not hold.
    #[error("no timescale column `{column}`; expected one of: {expected}")]
    UnknownColumn {
        /// The column asked for.
        column: String,
        /// The timescale columns of the result, comma separated.
        expected: String,
    },
}

impl TimescaleError {
    /// Whether the censoring (its mask, or the confounds it was made from),
    /// not the series, is at fault.
    pub fn blames_censoring(&self) -> bool {
        matches!(self, TimescaleError::CensoredTooShort { .. })
    }

    /// Whether the confounds table, not the series, is at fault: a confound
    /// non-finite on a valid frame, or one of `confound_columns` that adds
    /// nothing to the nuisance design (e.g. a constant column).
    pub fn blames_confounds(&self, confound_columns: &[String]) -> bool {
        match self {
            TimescaleError::NonFiniteConfound { .. } => true,
            TimescaleError::RankDeficientDesign { column } => confound_columns.contains(column),
            _ => false,
        }
    }
}
