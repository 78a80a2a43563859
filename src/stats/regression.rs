//! Least-squares lines.

use super::StatsError;

/// A fitted line y ≈ intercept + slope · x.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Line {
    /// Slope.
    pub slope: f64,
    /// Intercept.
    pub intercept: f64,
    /// Coefficient of determination R².
    pub r_squared: f64,
    /// Number of points.
    pub n: usize,
}

/// Ordinary least-squares line through (x, y):
/// slope = Σ(x−x̄)(y−ȳ)/Σ(x−x̄)², intercept = ȳ − slope·x̄ (Legendre 1805;
/// as scipy `stats.linregress`).
///
/// # Errors
/// [`StatsError::LengthMismatch`], [`StatsError::TooFew`] (fewer than 2
/// points or a non-finite value), [`StatsError::Constant`] when x is constant.
pub fn least_squares_line(x: &[f64], y: &[f64]) -> Result<Line, StatsError> {
    if x.len() != y.len() {
        return Err(StatsError::LengthMismatch { left: x.len(), right: y.len() });
    }
    let finite = x.iter().zip(y).filter(|(a, b)| a.is_finite() && b.is_finite()).count();
    if finite != x.len() || x.len() < 2 {
        return Err(StatsError::TooFew {
            statistic: "least-squares line",
            needed: 2.max(x.len()),
            found: finite,
        });
    }
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx) * (a - mx);
        syy += (b - my) * (b - my);
    }
    if sxx <= 0.0 {
        return Err(StatsError::Constant { statistic: "least-squares line" });
    }
    let slope = sxy / sxx;
    let r_squared = if syy > 0.0 { sxy * sxy / (sxx * syy) } else { 1.0 };
    Ok(Line { slope, intercept: my - slope * mx, r_squared, n: x.len() })
}

/// An ordinary least-squares fit with covariates.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct OlsFit {
    /// Term names, in design-column order.
    pub terms: Vec<String>,
    /// Coefficients β.
    pub coef: Vec<f64>,
    /// Standard errors √(σ̂² [(XᵀX)⁻¹]_jj).
    pub se: Vec<f64>,
    /// t statistics β_j / se_j.
    pub t: Vec<f64>,
    /// Two-sided p-values from Student's t with n − p degrees of freedom.
    pub p_value: Vec<f64>,
    /// Residual degrees of freedom n − p.
    pub df_resid: usize,
    /// R² = 1 − RSS/TSS (TSS about the mean).
    pub r_squared: f64,
    /// Number of observations.
    pub n: usize,
}

/// Ordinary least squares y ≈ Xβ by a Householder QR factorisation of X
/// (faer, of the augmented matrix [X | y]), never forming XᵀX: β solves Rβ = Qᵀy, and
/// (XᵀX)⁻¹ = R⁻¹R⁻ᵀ gives the classical standard errors with
/// σ̂² = RSS/(n − p) (Gauss–Markov; e.g. Seber & Lee 2003, Linear Regression
/// Analysis, ch. 3). Matches statsmodels 0.14 `OLS(y, X).fit()` (non-robust
/// covariance). Include a column of ones in X for an intercept.
///
/// # Errors
/// [`StatsError::LengthMismatch`] when X and y differ in rows;
/// [`StatsError::TooFew`] unless n > p and every value is finite;
/// [`StatsError::Constant`] when X is rank deficient (a term is a linear
/// combination of others), detected from the diagonal of R.
pub fn ols(x: &ndarray::Array2<f64>, y: &[f64], terms: &[&str]) -> Result<OlsFit, StatsError> {
    use faer::linalg::qr::no_pivoting::factor as qr;
    let (n, p) = x.dim();
    if n != y.len() || terms.len() != p {
        return Err(StatsError::LengthMismatch { left: n, right: y.len() });
    }
    let finite = x.iter().all(|v| v.is_finite()) && y.iter().all(|v| v.is_finite());
    if n <= p || p == 0 || !finite {
        return Err(StatsError::TooFew { statistic: "ordinary least squares", needed: p + 1, found: n });
    }
    // QR of the augmented matrix [X | y]: its R holds R_X (p × p) and Qᵀy in
    // the last column (Golub & Van Loan 2013, §5.3), so Q is never formed.
    // Unblocked (block size 1): for a tall, thin design the blocked variant's
    // buffers grow with n (about 300 MB at n = 10,000) for no gain at p ≤ 10.
    let mut a = faer::Mat::from_fn(n, p + 1, |i, j| if j < p { x[[i, j]] } else { y[i] });
    let mut coeff = faer::Mat::<f64>::zeros(1, p + 1);
    let par = faer::Par::Seq;
    let req = qr::qr_in_place_scratch::<f64>(n, p + 1, 1, par, Default::default());
    let mut buf = faer::dyn_stack::MemBuffer::new(req);
    qr::qr_in_place(
        a.as_mut(),
        coeff.as_mut(),
        par,
        faer::dyn_stack::MemStack::new(&mut buf),
        Default::default(),
    );
    let r = a.as_ref();
    let rmax = (0..p).map(|j| r[(j, j)].abs()).fold(0.0f64, f64::max);
    if (0..p).any(|j| r[(j, j)].abs() <= rmax * f64::EPSILON * n as f64) {
        return Err(StatsError::Constant { statistic: "ordinary least squares (rank-deficient design)" });
    }
    // β solves R_X β = Qᵀy by back substitution.
    let mut coef = vec![0.0f64; p];
    for i in (0..p).rev() {
        let s: f64 = ((i + 1)..p).map(|k| r[(i, k)] * coef[k]).sum();
        coef[i] = (r[(i, p)] - s) / r[(i, i)];
    }
    let mut rss = 0.0;
    for i in 0..n {
        let fit: f64 = (0..p).map(|j| x[[i, j]] * coef[j]).sum();
        rss += (y[i] - fit) * (y[i] - fit);
    }
    let ybar = y.iter().sum::<f64>() / n as f64;
    let tss: f64 = y.iter().map(|v| (v - ybar) * (v - ybar)).sum();
    let df = n - p;
    let sigma2 = rss / df as f64;
    // R⁻¹ by back substitution (p is small: a handful of covariates).
    let mut rinv = vec![0.0f64; p * p];
    for j in 0..p {
        rinv[j * p + j] = 1.0 / r[(j, j)];
        for i in (0..j).rev() {
            let s: f64 = ((i + 1)..=j).map(|k| r[(i, k)] * rinv[k * p + j]).sum();
            rinv[i * p + j] = -s / r[(i, i)];
        }
    }
    let se: Vec<f64> =
        (0..p).map(|j| (sigma2 * (0..p).map(|k| rinv[j * p + k].powi(2)).sum::<f64>()).sqrt()).collect();
    let t: Vec<f64> = coef.iter().zip(&se).map(|(b, s)| b / s).collect();
    let p_value = t.iter().map(|v| super::correlation::student_t_two_sided(*v, df as f64)).collect();
    Ok(OlsFit {
        terms: terms.iter().map(|s| s.to_string()).collect(),
        coef,
        se,
        t,
        p_value,
        df_resid: df,
        r_squared: if tss > 0.0 { 1.0 - rss / tss } else { f64::NAN },
        n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_is_recovered() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let y: Vec<f64> = x.iter().map(|v| 2.5 * v - 1.0).collect();
        let l = least_squares_line(&x, &y).unwrap();
        assert!(
            (l.slope - 2.5).abs() < 1e-14
                && (l.intercept + 1.0).abs() < 1e-14
                && (l.r_squared - 1.0).abs() < 1e-14
        );
    }
}
