//! Diffusion map embedding of an affinity source (Coifman & Lafon 2006) with
//! the settings of Margulies et al. 2016.
//!
//! # Conventions (where tools differ, these are ours)
//! 1. **Thresholding is row-wise.** Row `i` of the source `X` (regions ×
//!    features) keeps its `⌈(1 − sparsity)·p⌉` largest entries (at least 1;
//!    ties broken by lower column index); all other entries become 0. The
//!    diagonal of a connectivity matrix is treated like any other entry.
//! 2. **Negative values** that survive thresholding are set to 0, so the
//!    affinity is non-negative.
//! 3. **Affinity** is the cosine similarity of the thresholded rows,
//!    `K_ij = t_iᵀt_j / (‖t_i‖‖t_j‖)`; a row with no positive retained entry
//!    is an error (its cosine is undefined).
//! 4. **Anisotropic normalisation** with `α` (default 0.5): `d = K1`,
//!    `K⁽α⁾ = D^{−α} K D^{−α}`, `d⁽α⁾ = K⁽α⁾1`, Markov matrix
//!    `P = D⁽α⁾⁻¹K⁽α⁾`. Its eigenpairs come from the symmetric
//!    `S = D⁽α⁾^{−1/2} K⁽α⁾ D⁽α⁾^{−1/2} = V Λ Vᵀ` (one eigendecomposition);
//!    the right eigenvectors of `P` are `ψ_l = v_l / v_0` (elementwise, so
//!    `ψ_0 = 1`).
//! 5. **Diffusion time** is marginalised (Margulies et al. 2016): component
//!    `l ≥ 1` is `g_l = ψ_l · λ_l / (1 − λ_l)`, i.e. `Σ_{t≥1} λ_l^t ψ_l`.
//! 6. **Explained variance** of component `l` is `λ_l / Σ_{j≥1, λ_j>0} λ_j`
//!    (unscaled eigenvalues, trivial `λ_0 = 1` excluded, negative
//!    eigenvalues ignored). Other tools normalise the scaled eigenvalues or
//!    only the first m; we report the raw and scaled eigenvalues too.
//! 7. **Sign**: with a reference map, each component is flipped so that its
//!    Pearson correlation with the map is ≥ 0; without one, so that its entry
//!    of largest magnitude is positive.

use super::linalg::eigh;
use super::HierarchyError;
use crate::stats::correlation::pearson_r_finite;
use ndarray::Array2;
use serde::Serialize;

/// Parameters of [`diffusion_embedding`].
#[derive(Clone, Copy, Debug, Serialize)]
pub struct GradientParams {
    /// Number of components `m` (default 10, capped by the regions − 1).
    pub components: usize,
    /// Fraction of each row set to zero, in [0, 1) (default 0.9: top 10 % kept).
    pub sparsity: f64,
    /// Anisotropic normalisation α in [0, 1] (default 0.5).
    pub alpha: f64,
}

impl Default for GradientParams {
    /// m = 10, sparsity 0.9, α = 0.5 (Margulies et al. 2016).
    fn default() -> Self {
        GradientParams { components: 10, sparsity: 0.9, alpha: 0.5 }
    }
}

/// The embedding and its diagnostics.
#[derive(Clone, Debug)]
pub struct Gradients {
    /// Components, regions × m (column `l` is gradient `l + 1`).
    pub components: Array2<f64>,
    /// Eigenvalues `λ_1 … λ_m` of `P` (trivial `λ_0 = 1` excluded).
    pub eigenvalues: Vec<f64>,
    /// `λ_l / (1 − λ_l)`, the scale applied to each component.
    pub scaled_eigenvalues: Vec<f64>,
    /// Explained variance per component (convention 6 above).
    pub explained_variance: Vec<f64>,
    /// Whether each component was flipped to align with the reference map.
    pub flipped: Vec<bool>,
    /// Correlation of each (signed) component with the reference map, if given.
    pub alignment: Option<Vec<f64>>,
    /// Entries kept per row after thresholding.
    pub kept_per_row: usize,
    /// Largest `|S v − λ v|` over the returned eigenpairs (numerical quality).
    pub max_residual: f64,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

fn check(params: &GradientParams, n: usize) -> Result<(), HierarchyError> {
    if !(params.sparsity >= 0.0 && params.sparsity < 1.0) {
        return Err(HierarchyError::parameter("sparsity", "a fraction in [0, 1)", params.sparsity));
    }
    if !(params.alpha >= 0.0 && params.alpha <= 1.0) {
        return Err(HierarchyError::parameter("alpha", "a value in [0, 1]", params.alpha));
    }
    if params.components == 0 || params.components >= n {
        return Err(HierarchyError::parameter(
            "components",
            format!("between 1 and {} (regions − 1)", n.saturating_sub(1)),
            params.components,
        ));
    }
    Ok(())
}

/// The symmetric normalised matrix `S` of conventions 1–4, with the degree
/// vector `d⁽α⁾` and the entries kept per row.
///
/// # Errors
/// [`HierarchyError::Invalid`] for a non-finite entry or a row with no
/// positive retained entry; [`HierarchyError::Parameter`] for sparsity/α.
pub fn normalised_affinity(
    x: &Array2<f64>,
    sparsity: f64,
    alpha: f64,
) -> Result<(Array2<f64>, Vec<f64>, usize), HierarchyError> {
    let (n, p) = x.dim();
    if let Some(((i, j), v)) = x.indexed_iter().find(|(_, v)| !v.is_finite()) {
        return Err(HierarchyError::invalid(
            "affinity source",
            format!("expected finite values, found {v} at row {}, column {}", i + 1, j + 1),
        ));
    }
    let keep = (((1.0 - sparsity) * p as f64 - 1e-9).ceil() as usize).clamp(1, p);
    let mut t = Array2::<f64>::zeros((n, p));
    let mut idx: Vec<usize> = Vec::with_capacity(p);
    for i in 0..n {
        idx.clear();
        idx.extend(0..p);
        let row = x.row(i);
        // Stable sort of −x: ties keep the lower column first (numpy argsort(-x, kind="stable")).
        idx.sort_by(|&a, &b| row[b].total_cmp(&row[a]));
        for &j in &idx[..keep] {
            t[[i, j]] = row[j].max(0.0);
        }
    }
    for i in 0..n {
        let norm = t.row(i).dot(&t.row(i)).sqrt();
        if norm <= 0.0 {
            return Err(HierarchyError::invalid(
                "affinity source",
                format!(
                    "row {} keeps no positive value after thresholding to its top {keep} entries; \
                     expected every region to have a positive affinity",
                    i + 1
                ),
            ));
        }
        t.row_mut(i).mapv_inplace(|v| v / norm);
    }
    let k = t.dot(&t.t());
    let d: Vec<f64> = k.rows().into_iter().map(|r| r.sum()).collect();
    let da_pow: Vec<f64> = d.iter().map(|v| v.powf(-alpha)).collect();
    let mut ka = k;
    for ((i, j), v) in ka.indexed_iter_mut() {
        *v *= da_pow[i] * da_pow[j];
    }
    let dalpha: Vec<f64> = ka.rows().into_iter().map(|r| r.sum()).collect();
    let inv_sqrt: Vec<f64> = dalpha.iter().map(|v| 1.0 / v.sqrt()).collect();
    let mut s = ka;
    for ((i, j), v) in s.indexed_iter_mut() {
        *v *= inv_sqrt[i] * inv_sqrt[j];
    }
    // Exact symmetry for the symmetric solver.
    let st = s.t().to_owned();
    let s = (&s + &st) * 0.5;
    Ok((s, dalpha, keep))
}

/// Diffusion map embedding of `x` (regions × features), first `m`
/// non-trivial components, signs aligned to `reference` when given.
///
/// See the module documentation for every convention.
///
/// # Errors
/// Parameter errors; [`HierarchyError::Invalid`] for non-finite input, a
/// row without affinity, a disconnected affinity graph (`λ_1 = 1`), or a
/// reference map of the wrong length; [`HierarchyError::NoConvergence`].
///
/// # References
/// Coifman & Lafon 2006, Appl Comput Harmon Anal 21:5–30; Margulies et al.
/// 2016, PNAS 113:12574.
pub fn diffusion_embedding(
    x: &Array2<f64>,
    params: &GradientParams,
    reference: Option<&[f64]>,
) -> Result<Gradients, HierarchyError> {
    let n = x.nrows();
    if n < 3 {
        return Err(HierarchyError::invalid(
            "affinity source",
            format!("expected at least 3 regions, found {n}"),
        ));
    }
    check(params, n)?;
    if let Some(r) = reference {
        if r.len() != n {
            return Err(HierarchyError::RegionCount {
                what: "--align-to map".into(),
                expected: n,
                source_of_count: "the rows of the affinity source".into(),
                found: r.len(),
            });
        }
    }
    let (s, _dalpha, keep) = normalised_affinity(x, params.sparsity, params.alpha)?;
    let (w, v) = eigh(&s, "normalised affinity")?;
    // Descending order.
    let order: Vec<usize> = (0..n).rev().collect();
    let lam: Vec<f64> = order.iter().map(|&i| w[i]).collect();
    let m = params.components;
    let gap_tol = 1e-10;
    if lam[1] > 1.0 - gap_tol {
        return Err(HierarchyError::invalid(
            "affinity source",
            format!(
                "the affinity graph is disconnected (second eigenvalue {} ≈ 1); \
                 expected one connected component (lower --sparsity)",
                lam[1]
            ),
        ));
    }
    let mut v0: Vec<f64> = v.column(order[0]).to_vec();
    if v0.iter().sum::<f64>() < 0.0 {
        v0.iter_mut().for_each(|e| *e = -*e);
    }
    let mut comps = Array2::<f64>::zeros((n, m));
    let mut max_residual = 0.0f64;
    for l in 0..m {
        let col = order[l + 1];
        let vl = v.column(col);
        let r = s.dot(&vl) - &vl * lam[l + 1];
        max_residual = max_residual.max(r.iter().fold(0.0f64, |a, b| a.max(b.abs())));
        let scale = lam[l + 1] / (1.0 - lam[l + 1]);
        for i in 0..n {
            comps[[i, l]] = vl[i] / v0[i] * scale;
        }
    }
    let positive_sum: f64 = lam[1..].iter().filter(|&&l| l > 0.0).sum();
    let eigenvalues = lam[1..=m].to_vec();
    let explained_variance = eigenvalues.iter().map(|l| l.max(0.0) / positive_sum).collect();
    let scaled_eigenvalues = eigenvalues.iter().map(|l| l / (1.0 - l)).collect();
    let mut flipped = vec![false; m];
    let mut alignment = reference.map(|_| vec![0.0; m]);
    for l in 0..m {
        let col: Vec<f64> = comps.column(l).to_vec();
        let flip = match reference {
            Some(r) => pearson_r_finite(&col, r).unwrap_or(f64::NAN) < 0.0,
            None => {
                let big = col.iter().copied().fold(0.0f64, |a, b| if b.abs() > a.abs() { b } else { a });
                big < 0.0
            }
        };
        if flip {
            comps.column_mut(l).mapv_inplace(|e| -e);
            flipped[l] = true;
        }
        if let (Some(a), Some(r)) = (alignment.as_mut(), reference) {
            a[l] = pearson_r_finite(&comps.column(l).to_vec(), r).unwrap_or(f64::NAN);
        }
    }
    let mut notes = Vec::new();
    if lam.iter().any(|&l| l < -1e-12) {
        notes.push("negative eigenvalues present; ignored in explained variance".to_string());
    }
    Ok(Gradients {
        components: comps,
        eigenvalues,
        scaled_eigenvalues,
        explained_variance,
        flipped,
        alignment,
        kept_per_row: keep,
        max_residual,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn trivial_eigenvalue_is_one_and_rows_sum() {
        // Markov matrix property (Coifman & Lafon 2006): the largest eigenvalue of S is 1.
        let x = Array2::from_shape_fn((12, 12), |(i, j)| (-((i as f64 - j as f64).powi(2)) / 8.0).exp());
        let (s, _, _) = normalised_affinity(&x, 0.5, 0.5).unwrap();
        let (w, _) = eigh(&s, "t").unwrap();
        assert!((w[11] - 1.0).abs() < 1e-12, "{}", w[11]);
    }

    #[test]
    fn bad_parameters_are_rejected() {
        let x = Array2::from_shape_fn((5, 5), |(i, j)| 1.0 / (1.0 + (i as f64 - j as f64).abs()));
        let p = GradientParams { sparsity: 1.0, ..Default::default() };
        assert!(matches!(diffusion_embedding(&x, &p, None), Err(HierarchyError::Parameter { .. })));
        let p = GradientParams { components: 5, ..Default::default() };
        assert!(diffusion_embedding(&x, &p, None).is_err());
    }
}
