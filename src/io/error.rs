//! Errors of the `io` module. Every variant names the file it concerns, so a
//! message printed to the user is one line that says where and what.

use std::path::PathBuf;

/// An error reading, validating or writing a file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum IoError {
    /// The file could not be opened, read or written.
    #[error("{path}: {action}: {source}")]
    Os {
        /// The file.
        path: PathBuf,
        /// What was being attempted ("cannot open", "cannot write", ...).
        action: &'static str,
        /// The operating-system error.
        #[source]
        source: std::io::Error,
    },
    /// The input spec `PATH[:KEY]` could not be understood.
    #[error("input spec `{spec}`: {reason}")]
    Spec {
        /// The spec as the user typed it.
        spec: String,
        /// What was wrong.
        reason: String,
    },
    /// The file is not in the format its extension promises.
    #[error("{path}: {reason}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What was wrong, including the record or line where known.
        reason: String,
    },
    /// The key (dataset, variable, array or column) is not in the file.
    #[error("{path}: no {kind} `{key}`; found: {available}")]
    MissingKey {
        /// The file.
        path: PathBuf,
        /// "dataset", "variable", "array" or "column".
        kind: &'static str,
        /// The key asked for.
        key: String,
        /// The keys the file holds, comma separated.
        available: String,
    },
    /// The file holds several candidates and the spec gave no key.
    #[error("{path}: holds several {kind}s ({available}); name one as {path}:KEY")]
    KeyNeeded {
        /// The file.
        path: PathBuf,
        /// "dataset", "variable" or "array".
        kind: &'static str,
        /// The candidates, comma separated.
        available: String,
    },
    /// The data were read but fail a check of the role they are used in.
    #[error("{path}: {field}: {expected}")]
    Invalid {
        /// The file (with key, if any).
        path: String,
        /// The role or field checked ("connectome", "time series", ...).
        field: String,
        /// What was expected and what was found.
        expected: String,
    },
    /// A BIDS entity whose label is not alphanumeric.
    #[error("`{value}`: expected {prefix}-<label> with a label of ASCII letters or digits only (the BIDS label rule)")]
    BadLabel {
        /// The value given.
        value: String,
        /// The entity (`sub`, `ses`).
        prefix: &'static str,
    },
    /// An output folder is not hierax's to replace.
    #[error("{path}: {reason}")]
    NotOurs {
        /// The folder.
        path: PathBuf,
        /// Why it is refused and what to do.
        reason: String,
    },
}

impl IoError {
    /// An [`IoError::Os`] for `path`.
    pub fn os(path: impl Into<PathBuf>, action: &'static str, source: std::io::Error) -> Self {
        IoError::Os { path: path.into(), action, source }
    }

    /// An [`IoError::Format`] for `path`.
    pub fn format(path: impl Into<PathBuf>, reason: impl Into<String>) -> Self {
        IoError::Format { path: path.into(), reason: reason.into() }
    }

    /// An [`IoError::Invalid`] for the input `spec`.
    pub fn invalid(
        spec: impl std::fmt::Display,
        field: impl Into<String>,
        expected: impl Into<String>,
    ) -> Self {
        IoError::Invalid { path: spec.to_string(), field: field.into(), expected: expected.into() }
    }
}
