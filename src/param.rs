//! One shape for a rejected parameter, shared by every module.
//!
//! Library errors name the parameter as the library spells it (a field of a
//! `*Params` or `*Config` struct, e.g. `network_nulls`); the command line maps
//! those names to its flags (`--network-nulls`). The message template is
//! always `NAME = VALUE: expected EXPECTED`.

use std::fmt;

/// A parameter outside its allowed range or incompatible with another.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub struct ParamError {
    /// The parameter, as the library spells it.
    pub name: &'static str,
    /// The rejected value, as text.
    pub value: String,
    /// What is allowed, phrased positively ("an integer >= 2").
    pub expected: String,
}

impl ParamError {
    /// A rejected `value` of `name`.
    pub fn new(name: &'static str, value: impl fmt::Display, expected: impl Into<String>) -> Self {
        ParamError { name, value: value.to_string(), expected: expected.into() }
    }
}

impl fmt::Display for ParamError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} = {}: expected {}", self.name, self.value, self.expected)
    }
}

/// `Ok(())` when `ok` holds, else the error for `name = value`.
///
/// Checks are written positively (`x > 0.0`) so that NaN fails them.
pub fn require(
    ok: bool,
    name: &'static str,
    value: impl fmt::Display,
    expected: impl Into<String>,
) -> Result<(), ParamError> {
    if ok {
        Ok(())
    } else {
        Err(ParamError::new(name, value, expected))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn message_template_and_nan_fails_a_positive_check() {
        let tr = f64::NAN;
        let e = require(
            tr.partial_cmp(&0.0) == Some(std::cmp::Ordering::Greater),
            "tr_s",
            tr,
            "a number of seconds > 0",
        )
        .unwrap_err();
        assert_eq!(e.to_string(), "tr_s = NaN: expected a number of seconds > 0");
        assert!(require(2.0 > 0.0, "tr_s", 2.0, "> 0").is_ok());
    }
}
