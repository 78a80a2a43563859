//! Linking control energy to the hierarchy and to timescales.
//!
//! States are numbered along the hierarchy: state 0 is the lowest bin
//! (sensory end), state k − 1 the highest (association end). For an ordered
//! pair i → j:
//!
//! * the transition is **bottom-up** when i < j, **top-down** when i > j;
//! * the signed hierarchical distance is d = j − i (in bins);
//! * the energy asymmetry is ΔE_ij = E_ij − E_ji, so for a bottom-up pair a
//!   negative ΔE means the bottom-up transition is the cheaper one;
//! * the timescale shift is Δτ_ij = τ̄_j − τ̄_i, the mean intrinsic timescale
//!   of the target bin minus that of the initial bin.
//!
//! Per-subject summaries use the k(k − 1)/2 bottom-up pairs (i < j) once each,
//! because ΔE and Δτ are antisymmetric and the top-down pairs repeat them with
//! the sign flipped.
//!
//! The asymmetry matrix is also split into a per-state potential and a
//! circulation ([`decomposition`]; Jiang, Lim, Yao & Ye 2011). Where the
//! asymmetry is a pure potential (a symmetric network with every node driven
//! equally), the slope of ΔE on distance is exactly 3/(k + 1) times the
//! bottom-up minus top-down energy, so the two are one finding.

pub mod decomposition;
mod error;
pub mod pairs;

pub use decomposition::{decompose_asymmetry, slope_per_mean_for_potential, AsymmetryDecomposition};
pub use error::LinkError;
pub use pairs::{bin_means, pair_table, summarise, Direction, PairRow, PairTable, SubjectSummary};
