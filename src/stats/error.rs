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
    /// A null model cannot randomise the network it was given.
    #[error("{model} nulls cannot randomise this network: {reason}")]
    CannotRandomise {
        /// The null model.
        model: &'static str,
        /// Why, and what to use instead.
        reason: String,
    },
    /// A method needs an input it was not given.
    #[error("{model} needs {needs}")]
    MissingInput {
        /// The method.
        model: &'static str,
        /// What it needs.
        needs: &'static str,
    },
}
