//! The hierarchy module's view of the crate's dense kernels ([`crate::linalg`]), with its errors.

use super::HierarchyError;
use ndarray::Array2;

/// Eigendecomposition of a symmetric matrix `A = V diag(w) Vᵀ` (lower
/// triangle read), eigenvalues in non-decreasing order, eigenvectors as the
/// columns of `V`. One call to faer's self-adjoint solver.
///
/// # Errors
/// [`HierarchyError::NoConvergence`] naming `what`.
pub fn eigh(a: &Array2<f64>, what: &'static str) -> Result<(Vec<f64>, Array2<f64>), HierarchyError> {
    crate::linalg::eigh(a.view(), faer::get_global_parallelism())
        .map_err(|_| HierarchyError::NoConvergence { what })
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn eigh_reconstructs_a_small_matrix() {
        // 2x2 closed form: [[2,1],[1,2]] has eigenvalues 1 and 3.
        let (w, v) = eigh(&array![[2.0, 1.0], [1.0, 2.0]], "test").unwrap();
        assert!((w[0] - 1.0).abs() < 1e-14 && (w[1] - 3.0).abs() < 1e-14);
        assert!((v[[0, 1]].abs() - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-14);
    }
}
