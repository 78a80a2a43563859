//! Errors of the `stats` module.

/// An error computing a statistic.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum StatsError {
    /// Two paired samples differ in length.
    #[error("paired samples differ in length: {left} and {right}")]
    LengthMismatch {
        /// Length of the first sample.
        left: usize,
        /// Length of the second sample.
        right: usize,
    },
    /// Too few observations for the statistic.
    #[error("{statistic} needs at least {needed} finite observations, found {found}")]
    TooFew {
        /// The statistic.
        statistic: &'static str,
        /// The minimum.
        needed: usize,
        /// What was found.
        found: usize,
    },
    /// A sample has no variance, so a correlation is undefined.
    #[error("{statistic} is undefined: a sample is constant")]
    Constant {
        /// The statistic.
        statistic: &'static str,
    },
    /// A value is outside its allowed range.
    #[error("{name} must be {expected}, found {value}")]
    OutOfRange {
        /// Parameter name.
        name: &'static str,
        /// Allowed range.
        expected: &'static str,
        /// The value given.
        value: f64,
    },
}
