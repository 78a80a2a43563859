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
