//! The crate's one home for dense kernels: thin wrappers over `faer` 0.24
//! with the parallelism passed in (never the global setting), the symmetric
//! eigendecomposition every module uses, the symmetry scan, and the matrix
//! exponential, which faer does not provide.
//!
//! Conversions between `ndarray` and `faer` happen only here and at the
//! public boundary of the module.

use faer::diag::Diag;
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::llt;
use faer::linalg::evd;
use faer::linalg::lu::partial_pivoting as lu;
use faer::linalg::matmul::matmul;
use faer::linalg::qr::no_pivoting as qr;
use faer::linalg::svd;
use faer::{Accum, Mat, MatRef, Par};
use ndarray::{Array2, ArrayView2};

/// Copy an ndarray matrix into a faer matrix (column-major).
pub(crate) fn to_faer(a: ArrayView2<'_, f64>) -> Mat<f64> {
    Mat::from_fn(a.nrows(), a.ncols(), |i, j| a[[i, j]])
}

/// Copy a faer matrix into an ndarray matrix.
pub(crate) fn to_nd(a: MatRef<'_, f64>) -> Array2<f64> {
    Array2::from_shape_fn((a.nrows(), a.ncols()), |(i, j)| a[(i, j)])
}

/// `a * b`.
pub(crate) fn mul(a: MatRef<'_, f64>, b: MatRef<'_, f64>, par: Par) -> Mat<f64> {
    let mut out = Mat::zeros(a.nrows(), b.ncols());
    matmul(out.as_mut(), Accum::Replace, a, b, 1.0, par);
    out
}

/// A symmetric eigendecomposition `A = V diag(values) Vᵀ`, values ascending.
#[derive(Clone, Debug)]
pub(crate) struct SymEig {
    pub values: Vec<f64>,
    pub vectors: Mat<f64>,
}

/// Eigendecomposition of a symmetric matrix (lower triangle read).
pub(crate) fn sym_eig(a: MatRef<'_, f64>, par: Par) -> Result<SymEig, faer::linalg::evd::EvdError> {
    let n = a.nrows();
    let mut s = Diag::<f64>::zeros(n);
    let mut u = Mat::<f64>::zeros(n, n);
    let req = evd::self_adjoint_evd_scratch::<f64>(n, evd::ComputeEigenvectors::Yes, par, Default::default());
    let mut buf = MemBuffer::new(req);
    evd::self_adjoint_evd(a, s.as_mut(), Some(u.as_mut()), par, MemStack::new(&mut buf), Default::default())?;
    let values = (0..n).map(|i| s.column_vector()[i]).collect();
    Ok(SymEig { values, vectors: u })
}

/// Eigendecomposition of a symmetric ndarray matrix `A = V diag(w) Vᵀ`
/// (lower triangle read), eigenvalues ascending, eigenvectors as the columns
/// of `V`: [`sym_eig`] with the conversions.
pub(crate) fn eigh(a: ArrayView2<'_, f64>, par: Par) -> Result<(Vec<f64>, Array2<f64>), evd::EvdError> {
    let e = sym_eig(to_faer(a).as_ref(), par)?;
    Ok((e.values, to_nd(e.vectors.as_ref())))
}

/// Largest asymmetry `max|a_ij − a_ji|` over `i < j`, where it is, and the
/// scale `max|a|` it is to be compared with (the one symmetry scan of the
/// crate: connectomes, distances, spatial weights).
pub(crate) fn asymmetry(a: ArrayView2<'_, f64>) -> Asymmetry {
    let n = a.nrows();
    let scale = a.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
    let mut worst = Asymmetry { largest: 0.0, at: (0, 0), scale };
    for i in 0..n {
        for j in (i + 1)..n {
            let d = (a[[i, j]] - a[[j, i]]).abs();
            if d > worst.largest {
                worst.largest = d;
                worst.at = (i, j);
            }
        }
    }
    worst
}

/// The result of [`asymmetry`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Asymmetry {
    /// `max|a_ij − a_ji|`.
    pub largest: f64,
    /// Where (0-based, `i < j`).
    pub at: (usize, usize),
    /// `max|a|`.
    pub scale: f64,
}

impl Asymmetry {
    /// `largest / scale` (0 for a zero matrix).
    pub fn relative(&self) -> f64 {
        if self.scale > 0.0 {
            self.largest / self.scale
        } else {
            0.0
        }
    }
}

/// Eigenvalues of a symmetric matrix only.
pub(crate) fn sym_eigenvalues(a: MatRef<'_, f64>, par: Par) -> Result<Vec<f64>, faer::linalg::evd::EvdError> {
    let n = a.nrows();
    let mut s = Diag::<f64>::zeros(n);
    let req = evd::self_adjoint_evd_scratch::<f64>(n, evd::ComputeEigenvectors::No, par, Default::default());
    let mut buf = MemBuffer::new(req);
    evd::self_adjoint_evd(a, s.as_mut(), None, par, MemStack::new(&mut buf), Default::default())?;
    Ok((0..n).map(|i| s.column_vector()[i]).collect())
}

/// Spectral radius of a general real matrix, max |λ| over its (complex) eigenvalues.
pub(crate) fn spectral_radius_general(
    a: MatRef<'_, f64>,
    par: Par,
) -> Result<f64, faer::linalg::evd::EvdError> {
    let n = a.nrows();
    let mut re = Diag::<f64>::zeros(n);
    let mut im = Diag::<f64>::zeros(n);
    let req = evd::evd_scratch::<f64>(
        n,
        evd::ComputeEigenvectors::No,
        evd::ComputeEigenvectors::No,
        par,
        Default::default(),
    );
    let mut buf = MemBuffer::new(req);
    evd::evd_real(a, re.as_mut(), im.as_mut(), None, None, par, MemStack::new(&mut buf), Default::default())?;
    Ok((0..n).map(|i| re.column_vector()[i].hypot(im.column_vector()[i])).fold(0.0, f64::max))
}

/// The Cholesky factor `L` of a symmetric positive definite matrix, or
/// `None` when a pivot is not positive (the matrix is numerically singular
/// or indefinite).
pub(crate) fn cholesky(a: MatRef<'_, f64>, par: Par) -> Option<Mat<f64>> {
    let n = a.nrows();
    let mut l = a.to_owned();
    let req = llt::factor::cholesky_in_place_scratch::<f64>(n, par, Default::default());
    let mut buf = MemBuffer::new(req);
    let ok = llt::factor::cholesky_in_place(
        l.as_mut(),
        Default::default(),
        par,
        MemStack::new(&mut buf),
        Default::default(),
    );
    if ok.is_err() {
        return None;
    }
    // Zero the strict upper triangle, which still holds the input.
    for j in 0..n {
        for i in 0..j {
            l[(i, j)] = 0.0;
        }
    }
    Some(l)
}

/// `L⁻¹ B` for a lower-triangular `L`.
pub(crate) fn solve_lower(l: MatRef<'_, f64>, b: MatRef<'_, f64>, par: Par) -> Mat<f64> {
    let mut x = b.to_owned();
    faer::linalg::triangular_solve::solve_lower_triangular_in_place(l, x.as_mut(), par);
    x
}

/// `(L Lᵀ)⁻¹ B` for a Cholesky factor `L` (kept for the tests).
#[cfg(test)]
pub(crate) fn cholesky_solve(l: MatRef<'_, f64>, b: MatRef<'_, f64>, par: Par) -> Mat<f64> {
    let mut x = b.to_owned();
    let req = llt::solve::solve_in_place_scratch::<f64>(l.nrows(), b.ncols(), par);
    let mut buf = MemBuffer::new(req);
    llt::solve::solve_in_place(l, x.as_mut(), par, MemStack::new(&mut buf));
    x
}

/// `A⁻¹ B` by LU with partial pivoting. Returns the solution and the
/// smallest |pivot| relative to the largest (a cheap singularity signal).
pub(crate) fn lu_solve(a: MatRef<'_, f64>, b: MatRef<'_, f64>, par: Par) -> (Mat<f64>, f64) {
    let n = a.nrows();
    let mut f = a.to_owned();
    let mut fwd = vec![0usize; n];
    let mut bwd = vec![0usize; n];
    let mut x = b.to_owned();
    let req = lu::factor::lu_in_place_scratch::<usize, f64>(n, n, par, Default::default())
        .or(lu::solve::solve_in_place_scratch::<usize, f64>(n, b.ncols(), par));
    let mut buf = MemBuffer::new(req);
    let (_, perm) = lu::factor::lu_in_place(
        f.as_mut(),
        &mut fwd,
        &mut bwd,
        par,
        MemStack::new(&mut buf),
        Default::default(),
    );
    let (mut pmin, mut pmax) = (f64::INFINITY, 0.0f64);
    for i in 0..n {
        let p = f[(i, i)].abs();
        pmin = pmin.min(p);
        pmax = pmax.max(p);
    }
    // The packed factor holds L (unit lower, diagonal implied) and U; the
    // triangular solves read only their own triangle.
    lu::solve::solve_in_place(f.as_ref(), f.as_ref(), perm, x.as_mut(), par, MemStack::new(&mut buf));
    (x, if pmax > 0.0 { pmin / pmax } else { 0.0 })
}

/// The upper-triangular factor `R` (n × n) of a Householder QR
/// factorisation `A = QR` of an r × n matrix, so that `AᵀA = RᵀR`. When
/// `r < n` the missing rows of `R` are zero. Backward stable: `R` is the
/// exact factor of `A + δA` with `‖δA‖ ≲ ε‖A‖` (Golub & Van Loan 2013,
/// Matrix Computations, §5.2), which is what keeps a factored Gramian's
/// small eigenvalues accurate.
pub(crate) fn qr_r(a: MatRef<'_, f64>, par: Par) -> Mat<f64> {
    let (r, n) = a.shape();
    let mut f = a.to_owned();
    let size = r.min(n);
    let mut out = Mat::<f64>::zeros(n, n);
    if size == 0 {
        return out;
    }
    let bs = qr::factor::recommended_block_size::<f64>(r, n);
    let mut coeff = Mat::<f64>::zeros(bs, size);
    let req = qr::factor::qr_in_place_scratch::<f64>(r, n, bs, par, Default::default());
    let mut buf = MemBuffer::new(req);
    qr::factor::qr_in_place(f.as_mut(), coeff.as_mut(), par, MemStack::new(&mut buf), Default::default());
    for j in 0..n {
        for i in 0..=j.min(size - 1) {
            out[(i, j)] = f[(i, j)];
        }
    }
    out
}

/// Singular values of a matrix, descending.
pub(crate) fn singular_values(a: MatRef<'_, f64>, par: Par) -> Result<Vec<f64>, faer::linalg::svd::SvdError> {
    let (m, n) = a.shape();
    let size = m.min(n);
    let mut s = Diag::<f64>::zeros(size);
    let req = svd::svd_scratch::<f64>(
        m,
        n,
        svd::ComputeSvdVectors::No,
        svd::ComputeSvdVectors::No,
        par,
        Default::default(),
    );
    let mut buf = MemBuffer::new(req);
    svd::svd(a, s.as_mut(), None, None, par, MemStack::new(&mut buf), Default::default())?;
    let mut v: Vec<f64> = (0..size).map(|i| s.column_vector()[i]).collect();
    v.sort_by(|x, y| y.total_cmp(x));
    Ok(v)
}

/// Largest absolute row sum (the ∞-norm).
pub(crate) fn norm_inf(a: MatRef<'_, f64>) -> f64 {
    (0..a.nrows()).map(|i| (0..a.ncols()).map(|j| a[(i, j)].abs()).sum::<f64>()).fold(0.0, f64::max)
}

/// Matrix 1-norm (max column sum of |a_ij|).
pub(crate) fn norm1(a: MatRef<'_, f64>) -> f64 {
    (0..a.ncols()).map(|j| (0..a.nrows()).map(|i| a[(i, j)].abs()).sum::<f64>()).fold(0.0, f64::max)
}

/// Padé degrees and their bounds θ_m on ‖A‖₁ (Higham 2005, Table 2.3).
const PADE_THETA: [(usize, f64); 5] = [
    (3, 1.495_585_217_958_292e-2),
    (5, 2.539_398_330_063_23e-1),
    (7, 9.504_178_996_162_932e-1),
    (9, 2.097_847_961_257_068e0),
    (13, 5.371_920_351_148_152e0),
];

/// Coefficients b_0..b_m of the [m/m] Padé approximant of e^x (Higham 2005, eq. 2.4 / Table).
fn pade_coefficients(m: usize) -> &'static [f64] {
    match m {
        3 => &[120.0, 60.0, 12.0, 1.0],
        5 => &[30240.0, 15120.0, 3360.0, 420.0, 30.0, 1.0],
        7 => &[17_297_280.0, 8_648_640.0, 1_995_840.0, 277_200.0, 25_200.0, 1512.0, 56.0, 1.0],
        9 => &[
            17_643_225_600.0,
            8_821_612_800.0,
            2_075_673_600.0,
            302_702_400.0,
            30_270_240.0,
            2_162_160.0,
            110_880.0,
            3960.0,
            90.0,
            1.0,
        ],
        _ => &[
            64_764_752_532_480_000.0,
            32_382_376_266_240_000.0,
            7_771_770_303_897_600.0,
            1_187_353_796_428_800.0,
            129_060_195_264_000.0,
            10_559_470_521_600.0,
            670_442_572_800.0,
            33_522_128_640.0,
            1_323_241_920.0,
            40_840_800.0,
            960_960.0,
            16_380.0,
            182.0,
            1.0,
        ],
    }
}

/// `Σ c_i P_i + c_I I` for matrices of one size.
fn lincomb(terms: &[(f64, MatRef<'_, f64>)], identity: f64, n: usize) -> Mat<f64> {
    Mat::from_fn(n, n, |i, j| {
        let mut s = if i == j { identity } else { 0.0 };
        for (c, p) in terms {
            s += c * p[(i, j)];
        }
        s
    })
}

/// Matrix exponential e^A by scaling and squaring with a Padé approximant
/// of degree 3, 5, 7, 9 or 13 chosen from ‖A‖₁.
///
/// # References
/// Higham, N. J. (2005). The scaling and squaring method for the matrix
/// exponential revisited. SIAM J. Matrix Anal. Appl. 26(4), 1179–1193
/// (Algorithm 2.3; the same method as scipy `linalg.expm` before its 2009
/// refinement of the scaling choice).
pub(crate) fn expm(a: MatRef<'_, f64>, par: Par) -> Mat<f64> {
    let n = a.nrows();
    if n == 0 {
        return Mat::zeros(0, 0);
    }
    let norm = norm1(a);
    let a2 = mul(a, a, par);
    for &(m, theta) in &PADE_THETA[..4] {
        if norm <= theta {
            let b = pade_coefficients(m);
            // Odd part U = A Σ b_{2i+1} A^{2i}, even part V = Σ b_{2i} A^{2i}.
            let mut powers = vec![a2.clone()];
            for _ in 1..m / 2 {
                let next = mul(powers.last().map(|p| p.as_ref()).unwrap_or(a2.as_ref()), a2.as_ref(), par);
                powers.push(next);
            }
            let odd: Vec<(f64, MatRef<'_, f64>)> =
                powers.iter().enumerate().map(|(i, p)| (b[2 * i + 3], p.as_ref())).collect();
            let even: Vec<(f64, MatRef<'_, f64>)> =
                powers.iter().enumerate().map(|(i, p)| (b[2 * i + 2], p.as_ref())).collect();
            let u_inner = lincomb(&odd, b[1], n);
            let u = mul(a, u_inner.as_ref(), par);
            let v = lincomb(&even, b[0], n);
            return pade_solve(u, v, par);
        }
    }
    // Degree 13 with scaling A / 2^s.
    let theta13 = PADE_THETA[4].1;
    let s = if norm > theta13 { (norm / theta13).log2().ceil().max(0.0) as i32 } else { 0 };
    let scale = 0.5f64.powi(s);
    let a1 = Mat::from_fn(n, n, |i, j| a[(i, j)] * scale);
    let a2 = Mat::from_fn(n, n, |i, j| a2[(i, j)] * scale * scale);
    let a4 = mul(a2.as_ref(), a2.as_ref(), par);
    let a6 = mul(a4.as_ref(), a2.as_ref(), par);
    let b = pade_coefficients(13);
    let u_hi = lincomb(&[(b[13], a6.as_ref()), (b[11], a4.as_ref()), (b[9], a2.as_ref())], 0.0, n);
    let u_lo = lincomb(&[(b[7], a6.as_ref()), (b[5], a4.as_ref()), (b[3], a2.as_ref())], b[1], n);
    let mut inner = mul(a6.as_ref(), u_hi.as_ref(), par);
    inner += &u_lo;
    let u = mul(a1.as_ref(), inner.as_ref(), par);
    let v_hi = lincomb(&[(b[12], a6.as_ref()), (b[10], a4.as_ref()), (b[8], a2.as_ref())], 0.0, n);
    let v_lo = lincomb(&[(b[6], a6.as_ref()), (b[4], a4.as_ref()), (b[2], a2.as_ref())], b[0], n);
    let mut v = mul(a6.as_ref(), v_hi.as_ref(), par);
    v += &v_lo;
    let mut r = pade_solve(u, v, par);
    for _ in 0..s {
        r = mul(r.as_ref(), r.as_ref(), par);
    }
    r
}

/// r_m(A) = (V − U)⁻¹ (V + U).
fn pade_solve(u: Mat<f64>, v: Mat<f64>, par: Par) -> Mat<f64> {
    let p = &v + &u;
    let q = &v - &u;
    lu_solve(q.as_ref(), p.as_ref(), par).0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn eigh_and_the_symmetry_scan_on_closed_forms() {
        // [[2,1],[1,2]] has eigenvalues 1 and 3 with eigenvectors (1,∓1)/√2 (textbook 2 × 2 case).
        let (w, v) = eigh(ndarray::array![[2.0, 1.0], [1.0, 2.0]].view(), Par::Seq).unwrap();
        assert!((w[0] - 1.0).abs() < 1e-14 && (w[1] - 3.0).abs() < 1e-14);
        assert!((v[[0, 1]].abs() - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-14);
        let a = ndarray::array![[0.0, 4.0, 1.0], [4.0, 0.0, 2.0], [1.5, 2.0, 0.0]];
        let s = asymmetry(a.view());
        assert_eq!((s.largest, s.at, s.scale), (0.5, (0, 2), 4.0));
        assert_eq!(s.relative(), 0.125);
        assert_eq!(asymmetry(Array2::<f64>::zeros((2, 2)).view()).relative(), 0.0);
    }

    #[test]
    fn expm_of_diagonal_and_nilpotent_matrices_is_exact() {
        // e^{diag(d)} = diag(e^d) for every Padé branch (norms from 1e-3 to 40).
        for &d in &[1e-3, 0.2, 0.9, 2.0, 5.0, 40.0] {
            let a = Mat::from_fn(2, 2, |i, j| if i == j { d * (i as f64 + 1.0) } else { 0.0 });
            let e = expm(a.as_ref(), Par::Seq);
            for i in 0..2 {
                let want = (d * (i as f64 + 1.0)).exp();
                assert!((e[(i, i)] - want).abs() <= 1e-13 * want, "d={d}: {} vs {want}", e[(i, i)]);
            }
            assert_eq!(e[(0, 1)], 0.0);
        }
        // e^{[[0, t],[0, 0]]} = [[1, t],[0, 1]] (textbook: nilpotent series stops).
        let a = Mat::from_fn(2, 2, |i, j| if i == 0 && j == 1 { 3.0 } else { 0.0 });
        let e = expm(a.as_ref(), Par::Seq);
        assert!((e[(0, 1)] - 3.0).abs() < 1e-13 && (e[(0, 0)] - 1.0).abs() < 1e-14);
    }

    #[test]
    fn expm_of_rotation_generator_matches_cos_sin() {
        // e^{[[0, -t],[t, 0]]} = [[cos t, -sin t],[sin t, cos t]] (textbook identity).
        for &t in &[0.1, 1.0, 7.5] {
            let a = Mat::from_fn(2, 2, |i, j| match (i, j) {
                (0, 1) => -t,
                (1, 0) => t,
                _ => 0.0,
            });
            let e = expm(a.as_ref(), Par::Seq);
            assert!((e[(0, 0)] - t.cos()).abs() < 1e-13, "t={t}");
            assert!((e[(1, 0)] - t.sin()).abs() < 1e-13, "t={t}");
        }
    }

    #[test]
    fn cholesky_and_lu_solve_small_systems() {
        let a = Mat::from_fn(3, 3, |i, j| if i == j { 4.0 } else { 1.0 });
        let b = Mat::from_fn(3, 1, |i, _| i as f64 + 1.0);
        let l = cholesky(a.as_ref(), Par::Seq).unwrap();
        let x = cholesky_solve(l.as_ref(), b.as_ref(), Par::Seq);
        let (y, _) = lu_solve(a.as_ref(), b.as_ref(), Par::Seq);
        let r = mul(a.as_ref(), x.as_ref(), Par::Seq);
        for i in 0..3 {
            assert!((r[(i, 0)] - b[(i, 0)]).abs() < 1e-14);
            assert!((x[(i, 0)] - y[(i, 0)]).abs() < 1e-14);
        }
        let neg = Mat::from_fn(2, 2, |i, j| if i == j { -1.0 } else { 0.0 });
        assert!(cholesky(neg.as_ref(), Par::Seq).is_none());
    }
}
