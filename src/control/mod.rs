//! Linear network control: Gramians, minimum control energy of state
//! transitions, optimal inputs and trajectories, state-penalised control and
//! node controllability metrics.
//!
//! # The model
//! A connectome `A` (n × n, non-negative; `A[i, j]` drives node `i` from
//! node `j`) defines a linear system, normalised by its spectral radius
//! `λ_max(A)` with a stability offset `c` (Karrer et al. 2020, J. Neural Eng.):
//!
//! * continuous time `dx/dt = Ãx + Bu`, `Ã = A/(c + λ_max(A)) − I`;
//! * discrete time `x_{t+1} = Ãx_t + Bu_t`, `Ã = A/(c + λ_max(A))`.
//!
//! `B = diag(w)` selects and weights the driver nodes (all nodes by default).
//!
//! # Controllability Gramian and minimum energy
//! `W_T = ∫_0^T e^{Ãt}BBᵀe^{Ãᵀt}dt` (discrete: `Σ_{t<T} Ã^tBBᵀ(Ãᵀ)^t`).
//! The least input energy `∫‖u‖²dt` that moves `x₀` to `x_f` in time `T` is
//! `E = (x_f − Φx₀)ᵀ W_T⁻¹ (x_f − Φx₀)`, `Φ = e^{ÃT}` (or `Ã^T`), reached
//! by `u*(t) = Bᵀe^{Ãᵀ(T−t)}W_T⁻¹(x_f − Φx₀)` (Kirk 1970, Optimal Control
//! Theory; Gu et al. 2015, Nat. Commun.; Betzel et al. 2016, Sci. Rep.).
//!
//! For an undirected network `Ã = VΛVᵀ` and `W_T = V(G ∘ VᵀBBᵀV)Vᵀ`,
//! `G_ij = (e^{(λ_i+λ_j)T} − 1)/(λ_i+λ_j)` (`= T` where `λ_i+λ_j = 0`).
//! With `B = I` every quantity is diagonal in the eigenbasis and the whole
//! k × k energy matrix costs one eigendecomposition plus O(n²k) work.
//! Directed networks use Van Loan's block matrix exponential (Van Loan 1978)
//! with doubling; the exponential itself is scaling and squaring with a
//! Padé approximant (Higham 2005).
//!
//! # State-penalised control
//! Minimise `∫_0^T[(x_f − x)ᵀS(x_f − x) + ρuᵀu]dt` with both end states fixed
//! (Gu et al. 2017, NeuroImage). Pontryagin's principle gives `u = −Bᵀp/(2ρ)`
//! and a linear Hamiltonian system in `(x, p)`, solved with one matrix
//! exponential (see [`penalised`]).
//!
//! # Node metrics
//! Average controllability (trace of the infinite-horizon discrete-time
//! Gramian with node `i` as the only driver) and modal controllability
//! `φ_i = Σ_j (1 − λ_j²) v_ij²`, both on the discrete-time normalisation
//! (Pasqualetti et al. 2014, IEEE Trans. Control Netw. Syst.; Gu et al. 2015).
//!
//! # Numerical quality
//! Every energy result carries an [`EnergyInfo`]: the route, the Gramian's
//! condition number and the largest terminal-state error `‖x(T) − x_f‖`
//! over all pairs. One rule refuses a result, the same for every caller
//! (see [`energy`]): a discrete-time Gramian whose rank is bounded below `n`
//! by drivers × steps, a condition number above
//! [`energy::CONDITION_LIMIT`] `= 10⁻³/ε`, or a terminal error above
//! [`energy::TERMINAL_TOLERANCE`] of the state scale is an error, never a
//! warning with output. Gramians with partial driver sets are built in
//! square-root form (`W_T = RᵀR` by orthogonal updates, [`Route::GramianFactor`]),
//! which keeps about `√κ·ε` relative accuracy where forming `W_T` keeps `κ·ε`.
//!
//! # Outputs
//! Results are plain arrays (`ndarray`) with their info structs; the
//! `export` module turns them into tables (one row per ordered pair of
//! states, one row per region) and names every file and column.
//!
//! # Threads
//! Every dense kernel runs with the [`Par`] given to [`System::new`]
//! (`Par::Seq` inside a parallel loop over networks); thread count can
//! change the last bits of results.
//!
//! Research software: results are not for clinical decisions.

pub mod energy;
mod error;
mod factor;
pub mod metrics;
mod params;
pub mod penalised;
pub mod states;
mod system;
pub mod trajectory;

pub use energy::{
    asymmetry, energy_matrix, energy_matrix_by, minimum_energy, select_route, state_potentials,
    state_quadratic_forms, EnergyInfo, Route,
};
pub use error::ControlError;

pub use faer::Par;
pub use metrics::{node_metrics, NodeMetrics};
pub use params::{Drivers, SystemParams, TimeModel, ValidSystemParams};
pub use system::System;
