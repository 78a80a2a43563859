//! Ranking regions along a hierarchy map, brain states, derived gradients
//! and spatial surrogates of a map.
//!
//! # States ([`states`])
//! Regions with a value are ordered by a stable sort of the map (ascending by
//! default: by convention the map increases towards association cortex;
//! ties keep region order), then split into `k` consecutive bins whose sizes
//! differ by at most one, the larger bins first (numpy `array_split`). State
//! `j` is the indicator vector of bin `j`, optionally scaled to unit norm.
//! The hierarchical distance of a transition `i → j` is `j − i`. Regions
//! whose value is NaN are excluded and listed, never binned.
//!
//! # Derived gradients ([`gradient`])
//! Diffusion map embedding (Coifman & Lafon 2006) of an affinity source
//! `X` (regions × features, e.g. functional connectivity), with the settings
//! of Margulies et al. 2016: each row keeps its top 10 % of entries, cosine
//! affinity between the thresholded rows, anisotropic normalisation
//! `α = 0.5`, and the diffusion time marginalised by scaling each
//! eigenvector by `λ/(1 − λ)`.
//!
//! # Surrogates
//! * [`spin`]: rotations of parcel centroids on the sphere
//!   (Alexander-Bloch et al. 2018) with one-to-one reassignment of parcels
//!   (Váša et al. 2018); the right hemisphere's rotation is the left's
//!   mirrored across the midline.
//! * [`variogram`]: surrogates whose variogram matches the map's (Burt et al.
//!   2020): permute, smooth over nearest neighbours, rescale by regression on
//!   the variogram, rank-match to the original values.
//! * [`moran`]: Moran spectral randomisation (Wagner & Dray 2015): random
//!   signs (or pairwise rotations) of the map's coefficients on the
//!   eigenvectors of the doubly centred weight matrix.
//!
//! Every surrogate generator takes a seed; surrogate `r` draws from its own
//! ChaCha stream (seed, stream `r`), so results do not depend on the number
//! of threads. Surrogate matrices are regions × surrogates.
//!
//! Research software: results are not for clinical decisions.

mod error;
pub mod gradient;
mod linalg;
pub mod moran;
mod rng;
pub mod spin;
pub mod states;
pub mod surrogates;
pub mod variogram;

pub use error::HierarchyError;
pub use gradient::{diffusion_embedding, GradientParams, Gradients};
pub use moran::{
    moran_pairs, moran_surrogates, morans_i, MoranBasis, MoranMethod, MoranParams, MoranSurrogates,
};
pub use spin::{spin_surrogates, SphereLayout, SpinParams, SpinSurrogates};
pub use states::{build_states, Order, States, StatesParams};
pub use surrogates::{
    inverse_distance_weights, surrogate_maps, SpatialInputs, SpatialNeed, SurrogateDef, SurrogateMethod,
};
pub use variogram::{variogram_surrogates, VariogramModel, VariogramParams, VariogramSurrogates};

/// Refuse a map whose values (ignoring NaN) are all equal: no ranking or
/// surrogate is meaningful.
fn check_not_constant(map: &[f64]) -> Result<(), HierarchyError> {
    let finite: Vec<f64> = map.iter().copied().filter(|v| v.is_finite()).collect();
    match finite.first() {
        Some(&first) if finite.iter().all(|&v| v == first) => {
            Err(HierarchyError::ConstantMap { n: finite.len(), value: first })
        }
        None => Err(HierarchyError::invalid("map", "expected at least one finite value, found none")),
        _ => Ok(()),
    }
}

/// Refuse a map with NaN or infinite values for a method that needs a value
/// in every region.
fn check_finite_map(map: &[f64], method: &str) -> Result<(), HierarchyError> {
    match map.iter().position(|v| !v.is_finite()) {
        Some(i) => Err(HierarchyError::invalid(
            "map",
            format!("{method} need a finite value in every region, found {} at region {}", map[i], i + 1),
        )),
        None => Ok(()),
    }
}
