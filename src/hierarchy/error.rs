//! Errors of the `hierarchy` module. Each variant carries the values that
//! explain it, so the message printed to a user is one line saying what was
//! expected and what was found.

/// An error ranking a map, building states, embedding or making surrogates.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum HierarchyError {
    /// A parameter is outside its allowed range.
    #[error("parameter `{name}`: expected {expected}, got {got}")]
    Parameter {
        /// The parameter.
        name: &'static str,
        /// The allowed range, in words.
        expected: String,
        /// The rejected value.
        got: String,
    },
    /// The map has no variation among the regions that have a value.
    #[error("map: all {n} regions with a value have the same value {value}; expected a map that varies")]
    ConstantMap {
        /// Regions with a value.
        n: usize,
        /// The one value.
        value: f64,
    },
    /// More bins were asked for than there are regions with a value.
    #[error("--bins {k}: expected at most the {n} regions with a value ({excluded} excluded as NaN)")]
    TooManyBins {
        /// Bins asked for.
        k: usize,
        /// Regions with a value.
        n: usize,
        /// Regions without a value.
        excluded: usize,
    },
    /// Two inputs disagree on the number of regions.
    #[error("{what}: expected {expected} regions (from {source_of_count}), found {found}")]
    RegionCount {
        /// The input whose count is wrong.
        what: String,
        /// The count expected.
        expected: usize,
        /// Where that count comes from.
        source_of_count: String,
        /// The count found.
        found: usize,
    },
    /// An input fails a check of its role.
    #[error("{what}: {expected}")]
    Invalid {
        /// The input or field ("sphere coordinates", "distance matrix", ...).
        what: String,
        /// What was expected and what was found.
        expected: String,
    },
    /// An eigendecomposition did not converge.
    #[error("{what}: the symmetric eigendecomposition did not converge")]
    NoConvergence {
        /// The matrix concerned.
        what: &'static str,
    },
}

impl HierarchyError {
    /// A [`HierarchyError::Invalid`].
    pub fn invalid(what: impl Into<String>, expected: impl Into<String>) -> Self {
        HierarchyError::Invalid { what: what.into(), expected: expected.into() }
    }

    /// A [`HierarchyError::Parameter`].
    pub fn parameter(name: &'static str, expected: impl Into<String>, got: impl std::fmt::Display) -> Self {
        HierarchyError::Parameter { name, expected: expected.into(), got: got.to_string() }
    }
}
