//! Small dense helpers around `faer` shared by the gradient and Moran code.

use super::HierarchyError;
use faer::{Mat, Side};
use ndarray::Array2;

/// Eigendecomposition of a symmetric matrix `A = V diag(w) Vᵀ` (lower
/// triangle read), eigenvalues in non-decreasing order, eigenvectors as the
/// columns of `V`. One call to faer's self-adjoint solver.
///
/// # Errors
/// [`HierarchyError::NoConvergence`] naming `what`.
pub fn eigh(a: &Array2<f64>, what: &'static str) -> Result<(Vec<f64>, Array2<f64>), HierarchyError> {
    let n = a.nrows();
    let m = Mat::<f64>::from_fn(n, n, |i, j| a[[i, j]]);
    let evd = m.self_adjoint_eigen(Side::Lower).map_err(|_| HierarchyError::NoConvergence { what })?;
    let s = evd.S().column_vector();
    let u = evd.U();
    let w: Vec<f64> = (0..n).map(|i| s[i]).collect();
    let v = Array2::from_shape_fn((n, n), |(i, j)| u[(i, j)]);
    Ok((w, v))
}

/// Largest relative asymmetry `max|a_ij − a_ji| / max|a|` and where it is.
pub fn asymmetry(a: &Array2<f64>) -> (f64, usize, usize) {
    let n = a.nrows();
    let scale = a.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
    let mut worst = (0.0f64, 0, 0);
    for i in 0..n {
        for j in (i + 1)..n {
            let d = (a[[i, j]] - a[[j, i]]).abs();
            if d > worst.0 {
                worst = (d, i, j);
            }
        }
    }
    (if scale > 0.0 { worst.0 / scale } else { 0.0 }, worst.1, worst.2)
}

/// Pearson correlation of two equal-length vectors over the pairs where both
/// are finite; NaN when fewer than two such pairs or no variance.
pub fn pearson(a: &[f64], b: &[f64]) -> f64 {
    let pairs: Vec<(f64, f64)> =
        a.iter().zip(b).filter(|(x, y)| x.is_finite() && y.is_finite()).map(|(&x, &y)| (x, y)).collect();
    let n = pairs.len() as f64;
    if pairs.len() < 2 {
        return f64::NAN;
    }
    let (ma, mb) = (pairs.iter().map(|p| p.0).sum::<f64>() / n, pairs.iter().map(|p| p.1).sum::<f64>() / n);
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in pairs {
        sab += (x - ma) * (y - mb);
        saa += (x - ma) * (x - ma);
        sbb += (y - mb) * (y - mb);
    }
    sab / (saa * sbb).sqrt()
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
