//! Errors of the `link` module.

use crate::stats::StatsError;

/// An error building a pair table or its summaries.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LinkError {
    /// The energy matrix is not k × k with k ≥ 2.
    #[error("energy matrix: expected a square matrix of at least 2 states, found {rows} x {cols}")]
    EnergyShape {
        /// Rows.
        rows: usize,
        /// Columns.
        cols: usize,
    },
    /// An energy is negative or not finite.
    #[error("energy matrix: expected finite, non-negative energies, found {value} for state {initial} -> {target}")]
    BadEnergy {
        /// Initial state.
        initial: usize,
        /// Target state.
        target: usize,
        /// The value.
        value: f64,
    },
    /// The per-state timescales do not match the states.
    #[error("timescales: expected one mean timescale for each of {states} states, found {found}")]
    TimescaleCount {
        /// Number of states.
        states: usize,
        /// Number given.
        found: usize,
    },
    /// A state has no valid regional timescale.
    #[error("state {state}: none of its {regions} regions has a valid timescale")]
    StateWithoutTimescale {
        /// The state.
        state: usize,
        /// Its region count.
        regions: usize,
    },
    /// A region index of a bin is outside the value vector.
    #[error("state {state}: region index {index} is outside the {n} regions")]
    RegionIndex {
        /// The state.
        state: usize,
        /// The index.
        index: usize,
        /// Number of regions.
        n: usize,
    },
    /// An asymmetry matrix is not antisymmetric.
    #[error("asymmetry matrix: expected Δ[i, j] = −Δ[j, i], found a sum of {sum} for states {initial} and {target}")]
    NotAntisymmetric {
        /// First state.
        initial: usize,
        /// Second state.
        target: usize,
        /// Δ[i, j] + Δ[j, i].
        sum: f64,
    },
    /// A statistic could not be computed.
    #[error("{what}: {source}")]
    Stats {
        /// Which summary.
        what: &'static str,
        /// The cause.
        #[source]
        source: StatsError,
    },
}
