//! Errors of the `control` module. Each variant carries the offending value
//! and says what was expected, so the command line can print it as one line.

/// An error building a control system or computing energies.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ControlError {
    /// A parameter is outside its allowed range (named as the library spells it).
    #[error("{0}")]
    Param(#[from] crate::param::ParamError),
    /// The connectome matrix cannot be used.
    #[error("connectome: {0}")]
    Connectome(String),
    /// A state matrix or vector does not fit the network.
    #[error("states: {0}")]
    States(String),
    /// The driver set cannot be used.
    #[error("drivers: {0}")]
    Drivers(String),
    /// Discrete time with too few drivers for the horizon: the Gramian
    /// `CCᵀ`, `C = [B, ÃB, …, Ã^{T−1}B]`, has rank at most drivers × steps.
    #[error(
        "discrete time with {drivers} driver node(s) over {steps} step(s): the controllability Gramian has \
         rank at most drivers x steps = {rank_bound} < {nodes} nodes, so some states cannot be reached at all. \
         Use at least {drivers_needed} driver nodes, a horizon of at least {steps_needed} steps, or continuous time"
    )]
    RankDeficientGramian {
        /// Driver nodes (non-zero weights).
        drivers: usize,
        /// Horizon in steps.
        steps: u64,
        /// drivers × steps.
        rank_bound: usize,
        /// Nodes of the network.
        nodes: usize,
        /// ⌈nodes / steps⌉.
        drivers_needed: usize,
        /// ⌈nodes / drivers⌉.
        steps_needed: usize,
    },
    /// The controllability Gramian is numerically singular: its condition
    /// number exceeds the limit (see `control::energy::CONDITION_LIMIT`).
    #[error(
        "the controllability Gramian is numerically singular: condition {condition:.3e} exceeds the limit \
         {limit:.2e} (= 1e-3 / f64 epsilon), so the driver set cannot steer every state within the horizon \
         to working precision. Add driver nodes or weight all nodes, lengthen the horizon, or check for \
         regions the drivers cannot reach"
    )]
    SingularGramian {
        /// Largest over smallest eigenvalue (infinite when one is ≤ 0).
        condition: f64,
        /// The limit it was checked against.
        limit: f64,
    },
    /// The optimal input does not reach its target state to the tolerance.
    #[error(
        "the optimal input misses its target state by {terminal_error:.3e} ({relative:.2e} of the largest \
         state norm; tolerance {tolerance:.0e}) at Gramian condition {condition:.3e}: these would not be the \
         energies of the transitions asked for. Add driver nodes or weight all nodes, or lengthen the horizon"
    )]
    TerminalMiss {
        /// Largest `‖x(T) − x_f‖₂` over the pairs.
        terminal_error: f64,
        /// The same over the largest `‖x_f‖₂`.
        relative: f64,
        /// The tolerance on `relative`.
        tolerance: f64,
        /// Condition number of the Gramian.
        condition: f64,
    },
    /// The energies (or the end state reached) are not finite `f64`
    /// numbers although every input was: the states are too large for
    /// energies that grow with their square.
    #[error(
        "the energies overflow f64 (largest state norm {state_norm_max:.3e}, Gramian condition \
         {condition:.3e}): energy grows with the square of the state scale, so rescale the states \
         (for example to unit norm)"
    )]
    EnergyOverflow {
        /// Largest `‖x‖₂` over the states.
        state_norm_max: f64,
        /// Condition number of the Gramian.
        condition: f64,
    },
    /// A computation route was asked for a system it does not apply to.
    #[error("route {}: {reason}", .route.name())]
    RouteUnavailable {
        /// The route asked for.
        route: crate::control::Route,
        /// Why it does not apply.
        reason: &'static str,
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
        ControlError::Param(crate::param::ParamError::new(name, value, expected))
    }
}
