//! Pearson and Spearman correlation.

use super::StatsError;
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// A correlation coefficient with its test and interval.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Correlation {
    /// The coefficient r.
    pub r: f64,
    /// Number of pairs.
    pub n: usize,
    /// Two-sided p-value of H0: ρ = 0 from t = r √((n−2)/(1−r²)) with n − 2
    /// degrees of freedom (as scipy `pearsonr` and `spearmanr`, scipy 1.14).
    pub p_value: f64,
    /// 95 % Fisher z interval, see [`fisher_z_interval`].
    pub ci95: (f64, f64),
}

fn check_pairs(x: &[f64], y: &[f64], statistic: &'static str) -> Result<(), StatsError> {
    if x.len() != y.len() {
        return Err(StatsError::LengthMismatch { left: x.len(), right: y.len() });
    }
    let finite = x.iter().zip(y).filter(|(a, b)| a.is_finite() && b.is_finite()).count();
    if finite != x.len() || x.len() < 3 {
        return Err(StatsError::TooFew { statistic, needed: 3.max(x.len()), found: finite });
    }
    Ok(())
}

/// Pearson's product-moment coefficient
/// $$r=\frac{\sum_i (x_i-\bar x)(y_i-\bar y)}{\sqrt{\sum_i (x_i-\bar x)^2\sum_i (y_i-\bar y)^2}}$$
/// (Pearson 1896), computed with centred two-pass sums for accuracy, with its
/// t-test and Fisher interval.
///
/// # Errors
/// [`StatsError::LengthMismatch`], [`StatsError::TooFew`] (fewer than 3 pairs
/// or a non-finite value), [`StatsError::Constant`].
pub fn pearson(x: &[f64], y: &[f64]) -> Result<Correlation, StatsError> {
    check_pairs(x, y, "Pearson correlation")?;
    let r = pearson_r(x, y).ok_or(StatsError::Constant { statistic: "Pearson correlation" })?;
    Ok(with_inference(r, x.len()))
}

/// Spearman's rank correlation: Pearson's r of the mid-ranks (ties get the
/// average of the ranks they span; Spearman 1904), as scipy `spearmanr`.
///
/// # Errors
/// As [`pearson`].
pub fn spearman(x: &[f64], y: &[f64]) -> Result<Correlation, StatsError> {
    check_pairs(x, y, "Spearman correlation")?;
    let r = pearson_r(&mid_ranks(x), &mid_ranks(y))
        .ok_or(StatsError::Constant { statistic: "Spearman correlation" })?;
    Ok(with_inference(r, x.len()))
}

/// Pearson r, or `None` when a sample is constant. Inputs must be finite.
pub fn pearson_r(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        let (dx, dy) = (a - mx, b - my);
        sxy += dx * dy;
        sxx += dx * dx;
        syy += dy * dy;
    }
    if sxx > 0.0 && syy > 0.0 {
        Some((sxy / (sxx.sqrt() * syy.sqrt())).clamp(-1.0, 1.0))
    } else {
        None
    }
}

/// Pearson r over the pairs where both values are finite; `None` when fewer
/// than two such pairs remain or a sample is constant.
pub fn pearson_r_finite(x: &[f64], y: &[f64]) -> Option<f64> {
    let (a, b): (Vec<f64>, Vec<f64>) =
        x.iter().zip(y).filter(|(p, q)| p.is_finite() && q.is_finite()).unzip();
    if a.len() < 2 {
        return None;
    }
    pearson_r(&a, &b)
}

/// Ranks 1..=n with ties given the mean of the ranks they span (scipy
/// `rankdata(method="average")`). Inputs must be finite.
pub fn mid_ranks(x: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut ranks = vec![0.0; x.len()];
    let mut i = 0;
    while i < order.len() {
        let mut j = i;
        while j + 1 < order.len() && x[order[j + 1]] == x[order[i]] {
            j += 1;
        }
        let mean_rank = (i + j) as f64 / 2.0 + 1.0;
        for &k in &order[i..=j] {
            ranks[k] = mean_rank;
        }
        i = j + 1;
    }
    ranks
}

fn with_inference(r: f64, n: usize) -> Correlation {
    Correlation { r, n, p_value: correlation_p_value(r, n), ci95: fisher_z_interval(r, n, 0.95) }
}

/// Two-sided p-value of a correlation r from n pairs:
/// $$t=r\sqrt{\frac{n-2}{1-r^2}},\quad p=2\,P(T_{n-2}>|t|)$$
/// (Student's t test of a correlation; the form scipy 1.14 `spearmanr` uses,
/// and equal to the exact beta-distribution p of `pearsonr`).
pub fn correlation_p_value(r: f64, n: usize) -> f64 {
    if n < 3 {
        return f64::NAN;
    }
    if r.abs() >= 1.0 {
        return 0.0;
    }
    let df = (n - 2) as f64;
    student_t_two_sided(r * (df / ((1.0 - r) * (1.0 + r))).sqrt(), df)
}

/// Two-sided p-value 2 P(T_df > |t|) of Student's t; NaN for a NaN t, 0 for
/// an infinite one (statrs 0.18 panics on a NaN argument, so it never gets one).
pub(crate) fn student_t_two_sided(t: f64, df: f64) -> f64 {
    if t.is_nan() || df.is_nan() || df <= 0.0 {
        return f64::NAN;
    }
    if t.is_infinite() {
        return 0.0;
    }
    let dist = StudentsT::new(0.0, 1.0, df).expect("df > 0");
    (2.0 * dist.sf(t.abs())).min(1.0)
}

/// Fisher z interval for a correlation:
/// $$\tanh\!\left(\operatorname{atanh} r \pm z_{1-\alpha/2}/\sqrt{n-3}\right)$$
/// (Fisher 1921). NaN bounds when n ≤ 3.
pub fn fisher_z_interval(r: f64, n: usize, level: f64) -> (f64, f64) {
    if n <= 3 || !(level > 0.0 && level < 1.0) {
        return (f64::NAN, f64::NAN);
    }
    let z = r.clamp(-1.0, 1.0).atanh();
    let q = Normal::standard().inverse_cdf(0.5 + level / 2.0);
    let half = q / ((n - 3) as f64).sqrt();
    ((z - half).tanh(), (z + half).tanh())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mid_ranks_average_ties() {
        // scipy.stats.rankdata([3, 1, 4, 1, 5]) = [3, 1.5, 4, 1.5, 5] (scipy docs example form).
        assert_eq!(mid_ranks(&[3.0, 1.0, 4.0, 1.0, 5.0]), vec![3.0, 1.5, 4.0, 1.5, 5.0]);
    }

    #[test]
    fn perfect_and_constant() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let c = pearson(&x, &[2.0, 4.0, 6.0, 8.0]).unwrap();
        assert!((c.r - 1.0).abs() < 1e-15 && c.p_value < 1e-12, "{c:?}");
        assert_eq!(
            pearson(&x, &[1.0; 4]).unwrap_err(),
            StatsError::Constant { statistic: "Pearson correlation" }
        );
        assert!(matches!(pearson(&x, &[1.0]), Err(StatsError::LengthMismatch { .. })));
    }
}
