//! Errors of the `control` module. Each variant carries the offending value
//! and says what was expected, so the command line can print it as one line.

/// An error building a control system or computing energies.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ControlError {
    /// A parameter is outside its allowed range.
    #[error("{name} = {value}: expected {expected}")]
    Param {
        /// The parameter ("horizon", "stability offset", ...).
        name: &'static str,
        /// The rejected value, as text.
        value: String,
        /// What is allowed.
        expected: String,
    },
    /// The connectome matrix cannot be used.
    #[error("connectome: {0}")]
    Connectome(String),
    /// A state matrix or vector does not fit the network.
    #[error("states: {0}")]
    States(String),
    /// The driver set cannot be used.
    #[error("drivers: {0}")]
    Drivers(String),
    /// The controllability Gramian is numerically singular: the driver set
    /// cannot steer the network within the horizon to working precision.
    #[error(
        "the controllability Gramian is numerically singular (condition estimate {condition:e}); \
         the driver set cannot steer every state within the horizon. Add driver nodes or weight all \
         nodes, lengthen --horizon, or check for regions the drivers cannot reach"
    )]
    SingularGramian {
        /// Largest over smallest eigenvalue (infinite when one is ≤ 0).
        condition: f64,
    },
    /// The boundary-value problem of state-penalised control has no unique
    /// solution to working precision.
    #[error(
        "state-penalised control: the costate map is numerically singular (pivot ratio {pivot_ratio:e}); \
         try a shorter horizon or a larger rho"
    )]
    SingularCostate {
        /// Smallest over largest |pivot| of the LU factorisation.
        pivot_ratio: f64,
    },
    /// A dense linear-algebra routine failed to converge.
    #[error("eigendecomposition did not converge ({0})")]
    Eigen(String),
}

impl ControlError {
    pub(crate) fn param(
        name: &'static str,
        value: impl std::fmt::Display,
        expected: impl Into<String>,
    ) -> Self {
        ControlError::Param { name, value: value.to_string(), expected: expected.into() }
    }
}
