//! Moran spectral randomisation (Wagner & Dray 2015).
//!
//! # Mathematics
//! With `H = I − 11ᵀ/n`, the doubly centred weight matrix `Ω = H W H` has
//! eigenvectors `V` orthogonal to `1` (the constant vector is itself an
//! eigenvector, with eigenvalue 0, and is left out). We build an orthonormal
//! basis `Q` of `1^⊥` from the Householder reflection that maps `e₁` to
//! `1/√n`, and take one eigendecomposition `QᵀWQ = UMUᵀ`, `V = QU`
//! (n × (n−1)). A map `x` with mean `x̄` has coefficients `a = Vᵀ(x − x̄)`,
//! and Moran's I (Moran 1950) is
//! `I = (n/S₀) (x − x̄)ᵀW(x − x̄) / ‖x − x̄‖² = (n/S₀) Σ μ_k a_k² / Σ a_k²`,
//! `S₀ = Σ_ij w_ij`. A surrogate is `x̄ + V a′` where
//! * `singleton` (default): `a′_k = ±a_k` with independent fair signs, so the
//!   mean, the variance and Moran's I are preserved exactly;
//! * `pair`: consecutive eigenvectors (in eigenvalue order) are paired and
//!   each pair of coefficients is rotated by a uniform random angle (a last
//!   unpaired one gets a random sign); mean and variance are exact and I is
//!   preserved approximately, the more closely the nearer paired eigenvalues
//!   are.
//!
//! Values are not permuted: surrogates keep mean, variance and spatial
//! autocorrelation, not the exact distribution.

use super::linalg::eigh;
use super::rng::stream;
use super::HierarchyError;
use ndarray::{Array1, Array2};
use rand::Rng;
use rayon::prelude::*;
use serde::Serialize;

/// How coefficients are randomised.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum MoranMethod {
    /// Random signs; Moran's I exact.
    #[default]
    Singleton,
    /// Random rotations of consecutive pairs; Moran's I approximate.
    Pair,
}

/// Parameters of [`moran_surrogates`].
#[derive(Clone, Copy, Debug, Serialize)]
pub struct MoranParams {
    /// Number of surrogates, at least 1.
    pub count: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Randomisation method (default singleton).
    pub method: MoranMethod,
}

impl MoranParams {
    /// `count` singleton surrogates from `seed`.
    pub fn new(count: usize, seed: u64) -> Self {
        MoranParams { count, seed, method: MoranMethod::Singleton }
    }
}

/// The eigenbasis of a checked weight matrix.
#[derive(Clone, Debug)]
pub struct MoranBasis {
    /// Eigenvectors of the doubly centred weights, n × (n − 1), ascending eigenvalue.
    pub vectors: Array2<f64>,
    /// Their eigenvalues.
    pub eigenvalues: Vec<f64>,
    /// `S₀ = Σ w_ij`.
    pub s0: f64,
    weights: Array2<f64>,
}

/// Moran's I of `x` under weights `w` (Moran 1950), computed directly:
/// `I = (n/S₀) Σ_ij w_ij z_i z_j / Σ z_i²`, `z = x − x̄`.
pub fn morans_i(x: &[f64], w: &Array2<f64>) -> f64 {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let z = Array1::from_iter(x.iter().map(|v| v - mean));
    let s0 = w.sum();
    n / s0 * z.dot(&w.dot(&z)) / z.dot(&z)
}

impl MoranBasis {
    /// Check `w` (square, finite, symmetric within relative 1e-8, `S₀ ≠ 0`)
    /// and decompose it.
    ///
    /// # Errors
    /// [`HierarchyError::Invalid`]; [`HierarchyError::NoConvergence`].
    pub fn new(w: &Array2<f64>) -> Result<Self, HierarchyError> {
        let what = "weight matrix";
        let (r, c) = w.dim();
        if r != c || r < 3 {
            return Err(HierarchyError::invalid(
                what,
                format!("expected a square matrix of at least 3 regions, found {r} x {c}"),
            ));
        }
        if let Some(((i, j), v)) = w.indexed_iter().find(|(_, v)| !v.is_finite()) {
            return Err(HierarchyError::invalid(
                what,
                format!("expected finite weights, found {v} at row {}, column {}", i + 1, j + 1),
            ));
        }
        let (asym, i, j) = super::linalg::asymmetry(w);
        if asym > 1e-8 {
            return Err(HierarchyError::invalid(
                what,
                format!(
                    "expected a symmetric matrix, but entries ({}, {}) and ({}, {}) differ by {:e} of the largest weight",
                    i + 1,
                    j + 1,
                    j + 1,
                    i + 1,
                    asym
                ),
            ));
        }
        let s0 = w.sum();
        if s0 == 0.0 {
            return Err(HierarchyError::invalid(
                what,
                "the weights sum to 0; expected some positive weights",
            ));
        }
        let n = r;
        let ws = (w + &w.t()) * 0.5;
        // Householder H = I − 2vvᵀ/(vᵀv), v = e₁ − 1/√n: H e₁ = 1/√n, and
        // columns 2..n of H are an orthonormal basis of 1^⊥.
        let u = 1.0 / (n as f64).sqrt();
        let mut v = Array1::from_elem(n, -u);
        v[0] += 1.0;
        let vv = v.dot(&v);
        let q = Array2::from_shape_fn((n, n - 1), |(a, b)| {
            (if a == b + 1 { 1.0 } else { 0.0 }) - 2.0 * v[a] * v[b + 1] / vv
        });
        let m = q.t().dot(&ws).dot(&q);
        let (mu, um) = eigh(&m, "Moran weight matrix")?;
        let vectors = q.dot(&um);
        Ok(MoranBasis { vectors, eigenvalues: mu, s0, weights: ws })
    }

    /// Moran's I from the spectral form (equal to [`morans_i`]).
    pub fn morans_i(&self, x: &[f64]) -> f64 {
        morans_i(x, &self.weights)
    }
}

/// Moran surrogates and their diagnostics.
#[derive(Clone, Debug)]
pub struct MoranSurrogates {
    /// Surrogate maps, regions × count.
    pub surrogates: Array2<f64>,
    /// Moran's I of the map.
    pub morans_i: f64,
    /// Moran's I of each surrogate.
    pub surrogate_morans_i: Vec<f64>,
}

/// Moran spectral randomisation of `map` (see the module documentation).
///
/// # Errors
/// [`HierarchyError::RegionCount`], NaN in the map, constant map, `count = 0`.
///
/// # References
/// Wagner & Dray 2015, Methods Ecol Evol 6:1169; Moran 1950, Biometrika 37:17.
pub fn moran_surrogates(
    map: &[f64],
    basis: &MoranBasis,
    params: &MoranParams,
) -> Result<MoranSurrogates, HierarchyError> {
    let n = basis.vectors.nrows();
    if map.len() != n {
        return Err(HierarchyError::RegionCount {
            what: "map".into(),
            expected: n,
            source_of_count: "the weight matrix".into(),
            found: map.len(),
        });
    }
    if params.count == 0 {
        return Err(HierarchyError::parameter("count", "at least 1", 0));
    }
    super::check_finite_map(map, "Moran surrogates")?;
    super::check_not_constant(map)?;
    let mean = map.iter().sum::<f64>() / n as f64;
    let z = Array1::from_iter(map.iter().map(|v| v - mean));
    let a = basis.vectors.t().dot(&z);
    let p = a.len();
    let cols: Vec<Vec<f64>> = (0..params.count)
        .into_par_iter()
        .map(|r| {
            let mut rng = stream(params.seed, r);
            let mut b = a.clone();
            match params.method {
                MoranMethod::Singleton => {
                    for e in b.iter_mut() {
                        if rng.random::<bool>() {
                            *e = -*e;
                        }
                    }
                }
                MoranMethod::Pair => {
                    let mut k = 0;
                    while k + 1 < p {
                        let t = rng.random::<f64>() * std::f64::consts::TAU;
                        let (c, s) = (t.cos(), t.sin());
                        let (x, y) = (a[k], a[k + 1]);
                        b[k] = c * x - s * y;
                        b[k + 1] = s * x + c * y;
                        k += 2;
                    }
                    if k < p && rng.random::<bool>() {
                        b[k] = -b[k];
                    }
                }
            }
            basis.vectors.dot(&b).iter().map(|v| v + mean).collect()
        })
        .collect();
    let mut surrogates = Array2::<f64>::zeros((n, params.count));
    for (r, c) in cols.iter().enumerate() {
        for i in 0..n {
            surrogates[[i, r]] = c[i];
        }
    }
    let surrogate_morans_i = cols.iter().map(|c| basis.morans_i(c)).collect();
    Ok(MoranSurrogates { surrogates, morans_i: basis.morans_i(map), surrogate_morans_i })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn basis_is_orthonormal_and_orthogonal_to_constant() {
        let w =
            Array2::from_shape_fn((9, 9), |(i, j)| if (i as i64 - j as i64).abs() == 1 { 1.0 } else { 0.0 });
        let b = MoranBasis::new(&w).unwrap();
        let g = b.vectors.t().dot(&b.vectors);
        for ((i, j), v) in g.indexed_iter() {
            assert!((v - if i == j { 1.0 } else { 0.0 }).abs() < 1e-12);
        }
        for c in b.vectors.columns() {
            assert!(c.sum().abs() < 1e-12);
        }
    }
}
