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

/// One-sample Kolmogorov–Smirnov test of `sample` against U(0, 1), as used
/// to check that p-values are calibrated.
///
/// D = sup_x |F_n(x) − x|, and the two-sided p-value is the exact
/// P(D_n ≥ D) computed by the matrix method of Marsaglia, Tsang & Wang
/// (2003, J Stat Softw 8(18)): with k = ⌊nD⌋ + 1, m = 2k − 1, h = k − nD,
/// P(D_n < D) = n!/nⁿ · (Hⁿ)_{kk} for the m × m matrix H of that paper.
/// The cost is O(m³ log n), small for the D of calibrated p-values.
///
/// # Errors
/// [`StatsError::TooFew`] for an empty sample, [`StatsError::OutOfRange`]
/// for a value outside [0, 1].
pub fn ks_uniform(sample: &[f64]) -> Result<(f64, f64), StatsError> {
    if sample.is_empty() {
        return Err(StatsError::TooFew { statistic: "Kolmogorov-Smirnov test", needed: 1, found: 0 });
    }
    if let Some(&bad) = sample.iter().find(|v| !(**v >= 0.0 && **v <= 1.0)) {
        return Err(StatsError::OutOfRange { name: "sample value", expected: "within [0, 1]", value: bad });
    }
    let mut x = sample.to_vec();
    x.sort_by(f64::total_cmp);
    let n = x.len() as f64;
    let d = x
        .iter()
        .enumerate()
        .map(|(i, &v)| ((i as f64 + 1.0) / n - v).max(v - i as f64 / n))
        .fold(0.0f64, f64::max);
    Ok((d, 1.0 - kolmogorov_cdf_exact(x.len(), d)))
}

/// P(D_n < d), Marsaglia, Tsang & Wang (2003).
fn kolmogorov_cdf_exact(n: usize, d: f64) -> f64 {
    let nf = n as f64;
    if d <= 0.5 / nf {
        return 0.0;
    }
    if d >= 1.0 {
        return 1.0;
    }
    let k = (nf * d).floor() as usize + 1;
    let m = 2 * k - 1;
    let h = k as f64 - nf * d;
    let mut hm = vec![0.0f64; m * m];
    for i in 0..m {
        for j in 0..m {
            hm[i * m + j] = if i + 1 >= j { 1.0 } else { 0.0 };
        }
    }
    for i in 0..m {
        hm[i * m] -= h.powi(i as i32 + 1);
        hm[(m - 1) * m + i] -= h.powi((m - i) as i32);
    }
    if 2.0 * h - 1.0 > 0.0 {
        hm[(m - 1) * m] += (2.0 * h - 1.0).powi(m as i32);
    }
    for i in 0..m {
        for j in 0..m {
            if i + 1 > j {
                let mut fact = 1.0;
                for g in 1..=(i + 1 - j) {
                    fact *= g as f64;
                }
                hm[i * m + j] /= fact;
            }
        }
    }
    // Hⁿ by repeated squaring, renormalising and tracking the log scale.
    let matmul = |a: &[f64], b: &[f64]| {
        let mut c = vec![0.0; m * m];
        for i in 0..m {
            for l in 0..m {
                let ail = a[i * m + l];
                if ail != 0.0 {
                    for j in 0..m {
                        c[i * m + j] += ail * b[l * m + j];
                    }
                }
            }
        }
        c
    };
    let normalise = |a: &mut Vec<f64>, log_scale: &mut f64| {
        let big = a.iter().fold(0.0f64, |s, v| s.max(v.abs()));
        if big > 0.0 {
            for v in a.iter_mut() {
                *v /= big;
            }
            *log_scale += big.ln();
        }
    };
    let mut result: Option<(Vec<f64>, f64)> = None;
    let mut base = (hm, 0.0f64);
    let mut e = n;
    while e > 0 {
        if e & 1 == 1 {
            result = Some(match result {
                None => base.clone(),
                Some((r, ls)) => {
                    let mut p = matmul(&r, &base.0);
                    let mut s = ls + base.1;
                    normalise(&mut p, &mut s);
                    (p, s)
                }
            });
        }
        e >>= 1;
        if e > 0 {
            let mut sq = matmul(&base.0, &base.0);
            let mut s = 2.0 * base.1;
            normalise(&mut sq, &mut s);
            base = (sq, s);
        }
    }
    let (r, log_scale) = result.expect("n >= 1");
    let entry = r[(k - 1) * m + (k - 1)];
    if entry <= 0.0 {
        return 0.0;
    }
    // n!/n^n via the log-gamma function.
    let log_prefactor = statrs::function::gamma::ln_gamma(nf + 1.0) - nf * nf.ln();
    (log_prefactor + entry.ln() + log_scale).exp().clamp(0.0, 1.0)
}

/// One-sample sign-flip permutation test of H0: the values are symmetric
/// about 0 (e.g. per-subject asymmetries across a cohort). The statistic is
/// the mean; each of `m` draws flips the sign of every value independently
/// with probability ½, and the p-value is [`permutation_p_value`] of the
/// observed mean among the flipped means (Nichols & Holmes 2002, Hum Brain
/// Mapp, one-sample case). Returns (mean, p).
///
/// # Errors
/// [`StatsError::TooFew`] for fewer than 2 finite values or `m` = 0.
pub fn sign_flip_test<R: rand::Rng + ?Sized>(
    values: &[f64],
    m: usize,
    alternative: Alternative,
    rng: &mut R,
) -> Result<(f64, f64), StatsError> {
    let v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.len() < 2 || m == 0 {
        return Err(StatsError::TooFew { statistic: "sign-flip test", needed: 2, found: v.len() });
    }
    let n = v.len() as f64;
    let observed = v.iter().sum::<f64>() / n;
    let null: Vec<f64> = (0..m)
        .map(|_| v.iter().map(|x| if rng.random_bool(0.5) { *x } else { -*x }).sum::<f64>() / n)
        .collect();
    Ok((observed, permutation_p_value(observed, &null, alternative)?))
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

    #[test]
    fn sign_flip_detects_a_shift_and_enumerates_small_cases() {
        use rand::SeedableRng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        // All 10 values negative: only the all-negative flip pattern (prob 2^-10) is as extreme
        // on either side, so with 999 draws p is (b + 1)/1000 with b tiny.
        let v: Vec<f64> = (1..=10).map(|i| -(i as f64)).collect();
        let (mean, p) = sign_flip_test(&v, 999, Alternative::TwoSided, &mut rng).unwrap();
        assert_eq!(mean, -5.5);
        assert!(p <= 0.01, "{p}");
        // Symmetric values: the mean is 0 and every flip is at least as extreme, p = 1.
        let (_, p) = sign_flip_test(&[-1.0, 1.0, -2.0, 2.0], 99, Alternative::TwoSided, &mut rng).unwrap();
        assert_eq!(p, 1.0);
        assert!(sign_flip_test(&[1.0], 10, Alternative::TwoSided, &mut rng).is_err());
    }

    #[test]
    fn ks_single_observation_closed_form() {
        // n = 1: D = max(u, 1 - u) and P(D_1 >= d) = 2(1 - d) for d >= 1/2 (direct from the definition).
        let (d, p) = ks_uniform(&[0.3]).unwrap();
        assert!((d - 0.7).abs() < 1e-15);
        assert!((p - 0.6).abs() < 1e-12, "{p}");
    }
}
