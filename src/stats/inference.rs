//! Permutation p-values and false discovery rate.

use super::StatsError;

/// Which tail(s) a permutation test counts.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Alternative {
    /// |null| ≥ |observed| (default).
    #[default]
    TwoSided,
    /// null ≥ observed.
    Greater,
    /// null ≤ observed.
    Less,
}

/// Permutation p-value with the observed statistic counted among the
/// permutations:
/// $$p=\frac{b+1}{m+1}$$
/// where b is the number of the m null statistics at least as extreme as the
/// observed one (Phipson & Smyth 2010, Stat Appl Genet Mol Biol, eq. 2). It is
/// never 0, and exact when the nulls are drawn without replacement from a
/// large permutation set. Non-finite null values are dropped (and so reduce m).
///
/// # Errors
/// [`StatsError::TooFew`] when no finite null value remains or the observed
/// value is not finite.
pub fn permutation_p_value(observed: f64, null: &[f64], alternative: Alternative) -> Result<f64, StatsError> {
    let finite: Vec<f64> = null.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.is_empty() || !observed.is_finite() {
        return Err(StatsError::TooFew { statistic: "permutation p-value", needed: 1, found: finite.len() });
    }
    let b = finite
        .iter()
        .filter(|&&v| match alternative {
            Alternative::TwoSided => v.abs() >= observed.abs(),
            Alternative::Greater => v >= observed,
            Alternative::Less => v <= observed,
        })
        .count();
    Ok((b as f64 + 1.0) / (finite.len() as f64 + 1.0))
}

/// Benjamini–Hochberg adjusted p-values (Benjamini & Hochberg 1995, JRSS B):
/// with p sorted ascending, p̃₍ᵢ₎ = min_{j ≥ i} min(1, m p₍ⱼ₎ / j), returned
/// in the input order. Equals statsmodels 0.14 `multipletests(method="fdr_bh")`.
///
/// # Errors
/// [`StatsError::OutOfRange`] for a p-value outside [0, 1] (NaN included).
pub fn benjamini_hochberg(p: &[f64]) -> Result<Vec<f64>, StatsError> {
    if let Some(&bad) = p.iter().find(|v| !(**v >= 0.0 && **v <= 1.0)) {
        return Err(StatsError::OutOfRange { name: "p-value", expected: "within [0, 1]", value: bad });
    }
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut adjusted = vec![0.0; m];
    let mut running = 1.0f64;
    for (rank, &i) in order.iter().enumerate().rev() {
        running = running.min(p[i] * m as f64 / (rank + 1) as f64).min(1.0);
        adjusted[i] = running;
    }
    Ok(adjusted)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn permutation_p_counts_the_observed_value() {
        let null = [0.1, -0.5, 0.3, 2.0];
        assert_eq!(permutation_p_value(1.0, &null, Alternative::TwoSided).unwrap(), 2.0 / 5.0);
        assert_eq!(permutation_p_value(1.0, &null, Alternative::Less).unwrap(), 4.0 / 5.0);
        assert_eq!(permutation_p_value(9.0, &null, Alternative::Greater).unwrap(), 1.0 / 5.0);
        assert!(permutation_p_value(1.0, &[f64::NAN], Alternative::TwoSided).is_err());
    }

    #[test]
    fn bh_worked_example() {
        // Hand computation from the definition: m = 4, sorted p = 0.01, 0.02, 0.03, 0.5
        // -> 0.04, 0.04, 0.04, 0.5.
        let adj = benjamini_hochberg(&[0.5, 0.01, 0.03, 0.02]).unwrap();
        let want = [0.5, 0.04, 0.04, 0.04];
        for (a, w) in adj.iter().zip(want) {
            assert!((a - w).abs() < 1e-15, "{adj:?}");
        }
        assert!(benjamini_hochberg(&[f64::NAN]).is_err());
    }
}
