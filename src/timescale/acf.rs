//! Sample autocorrelation by FFT, plain and masked.
//!
//! Both use the Wiener–Khinchin route: zero-pad the (demeaned) series to a
//! length `nfft >= n + max_lag`, take a real FFT, square its modulus and
//! transform back. Padding to `n + max_lag` (rather than `2n - 1`) is enough
//! to keep every lag up to `max_lag` free of circular wrap-around, because a
//! wrapped product at lag `k` needs `nfft - k < n`.

use super::TimescaleError;
use crate::param::ParamError;
use realfft::num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// Smallest `m >= n` whose only prime factors are 2, 3 and 5 (fast FFT sizes).
pub fn fast_fft_len(n: usize) -> usize {
    let mut m = n.max(1);
    loop {
        let mut r = m;
        for p in [2, 3, 5] {
            while r % p == 0 {
                r /= p;
            }
        }
        if r == 1 {
            return m;
        }
        m += 1;
    }
}

/// Reusable FFT plans and buffers for one series length and lag bound.
///
/// One plan per worker thread: the buffers are the per-thread scratch, so a
/// batch over regions never allocates per region and never holds a complex
/// copy of the whole matrix.
pub struct AcfPlan {
    n: usize,
    max_lag: usize,
    r2c: Arc<dyn RealToComplex<f64>>,
    c2r: Arc<dyn ComplexToReal<f64>>,
    real: Vec<f64>,
    spec: Vec<Complex<f64>>,
    scratch_fwd: Vec<Complex<f64>>,
    scratch_inv: Vec<Complex<f64>>,
}

impl Clone for AcfPlan {
    fn clone(&self) -> Self {
        AcfPlan {
            n: self.n,
            max_lag: self.max_lag,
            r2c: Arc::clone(&self.r2c),
            c2r: Arc::clone(&self.c2r),
            real: self.real.clone(),
            spec: self.spec.clone(),
            scratch_fwd: self.scratch_fwd.clone(),
            scratch_inv: self.scratch_inv.clone(),
        }
    }
}

impl AcfPlan {
    /// Plans for series of `n` frames and lags `0..=max_lag`.
    ///
    /// # Errors
    /// [`TimescaleError::SeriesTooShort`] unless `1 <= max_lag < n`.
    pub fn new(n: usize, max_lag: usize) -> Result<Self, TimescaleError> {
        if n < 2 || max_lag >= n {
            return Err(TimescaleError::SeriesTooShort {
                n_frames: n,
                n_valid: n,
                need: format!("more frames than the lag bound max_lag = {max_lag}"),
            });
        }
        if max_lag == 0 {
            return Err(ParamError::new("max_lag", 0, "a lag bound of at least 1").into());
        }
        let nfft = fast_fft_len(n + max_lag);
        let mut planner = RealFftPlanner::<f64>::new();
        let r2c = planner.plan_fft_forward(nfft);
        let c2r = planner.plan_fft_inverse(nfft);
        let real = r2c.make_input_vec();
        let spec = r2c.make_output_vec();
        let scratch_fwd = r2c.make_scratch_vec();
        let scratch_inv = c2r.make_scratch_vec();
        Ok(AcfPlan { n, max_lag, r2c, c2r, real, spec, scratch_fwd, scratch_inv })
    }

    /// Frames per series.
    pub fn n(&self) -> usize {
        self.n
    }

    /// The lag bound.
    pub fn max_lag(&self) -> usize {
        self.max_lag
    }

    /// Lagged sums of products `s_k = sum_{t < n-k} y_t y_{t+k}`, `k = 0..=max_lag`,
    /// of the series already in `self.real[..n]` (rest zero), written to `out`.
    fn lagged_sums(&mut self, out: &mut [f64]) {
        // The FFT helpers only fail on wrong buffer lengths, which the plan fixes.
        self.r2c
            .process_with_scratch(&mut self.real, &mut self.spec, &mut self.scratch_fwd)
            .expect("buffer lengths fixed by the plan");
        for c in self.spec.iter_mut() {
            *c = Complex::new(c.norm_sqr(), 0.0);
        }
        self.c2r
            .process_with_scratch(&mut self.spec, &mut self.real, &mut self.scratch_inv)
            .expect("buffer lengths fixed by the plan");
        let scale = 1.0 / self.real.len() as f64;
        for (o, v) in out.iter_mut().zip(&self.real[..=self.max_lag]) {
            *o = v * scale;
        }
    }

    /// Sample autocorrelation of `x` into `out[0..=max_lag]`.
    ///
    /// $$\hat\rho_k=\frac{\sum_{t=0}^{n-k-1}(x_t-\bar x)(x_{t+k}-\bar x)}{\sum_{t=0}^{n-1}(x_t-\bar x)^2}$$
    ///
    /// Demeaned by the sample mean; denominator of every lag the same (the
    /// "biased", N-not-N−k estimator), as statsmodels `tsa.stattools.acf`
    /// with `adjusted=False`. Returns the lag-0 sum of squares
    /// $\sum_t (x_t-\bar x)^2$; when it is zero (constant series) `out` is NaN.
    ///
    /// # Complexity
    /// O(n log n).
    ///
    /// # References
    /// Box, Jenkins & Reinsel, *Time Series Analysis* (the estimator);
    /// Wiener–Khinchin theorem (the FFT route).
    ///
    /// # Panics
    /// If `x.len() != n` or `out.len() != max_lag + 1` (caller bug).
    pub fn acf_into(&mut self, x: &[f64], out: &mut [f64]) -> f64 {
        assert_eq!(x.len(), self.n);
        assert_eq!(out.len(), self.max_lag + 1);
        if x.iter().all(|v| *v == x[0]) {
            // Exactly constant: the demeaned series may still hold round-off,
            // which must not pass for a signal.
            out.fill(f64::NAN);
            return 0.0;
        }
        let mean = x.iter().sum::<f64>() / self.n as f64;
        for (r, v) in self.real.iter_mut().zip(x) {
            *r = v - mean;
        }
        self.real[self.n..].fill(0.0);
        self.lagged_sums(out);
        normalise(out)
    }

    /// Masked autocorrelation of `x` with frame mask `valid` into `out`.
    ///
    /// With $m_t\in\{0,1\}$, $\bar x$ the mean over valid frames,
    /// $y_t=m_t(x_t-\bar x)$, $C_k=\sum_t y_t y_{t+k}$, $P_k=\sum_t m_t m_{t+k}$
    /// (valid pairs at lag $k$) and $N_v=P_0$:
    ///
    /// $$\hat\rho_k=\frac{C_k/P_k\cdot(1-k/n)}{C_0/N_v}$$
    ///
    /// The numerator is the mean product over the valid pairs at lag $k$,
    /// tapered by the same Bartlett factor $(1-k/n)$ that the unmasked
    /// (biased) estimator carries implicitly; the denominator is the mean
    /// square over valid frames. Why this choice: (i) with no frame censored,
    /// $P_k=n-k$ and $\hat\rho_k$ is exactly the unmasked estimator above (and
    /// statsmodels `acf(adjusted=False)`); (ii) filling censored frames with
    /// zero instead ($C_k/C_0$) would shrink every lag by the fraction of lost
    /// pairs, so a heavily censored subject would look faster; (iii) the taper
    /// depends only on the lag, never on how many frames were censored, so
    /// subjects with different censoring share one convention. Not guaranteed:
    /// $|\hat\rho_k|\le 1$ and positive semi-definiteness may fail when few
    /// pairs remain. A lag with no valid pair is NaN. `pairs` is $P_k$ from
    /// [`AcfPlan::pair_counts`] (shared by all regions of a subject). Returns $C_0$.
    ///
    /// # Panics
    /// On wrong buffer lengths (caller bug).
    pub fn masked_acf_into(&mut self, x: &[f64], valid: &[bool], pairs: &[f64], out: &mut [f64]) -> f64 {
        assert_eq!(x.len(), self.n);
        assert_eq!(valid.len(), self.n);
        assert_eq!(pairs.len(), self.max_lag + 1);
        assert_eq!(out.len(), self.max_lag + 1);
        let nv = pairs[0];
        let first = x.iter().zip(valid).find(|(_, &m)| m).map(|(v, _)| *v);
        if first.is_none_or(|f| x.iter().zip(valid).all(|(v, &m)| !m || *v == f)) {
            out.fill(f64::NAN);
            return 0.0;
        }
        let mut sum = 0.0;
        for (v, &m) in x.iter().zip(valid) {
            if m {
                sum += v;
            }
        }
        let mean = sum / nv;
        for ((r, v), &m) in self.real.iter_mut().zip(x).zip(valid) {
            *r = if m { v - mean } else { 0.0 };
        }
        self.real[self.n..].fill(0.0);
        self.lagged_sums(out);
        let c0 = out[0];
        let n = self.n as f64;
        let denom = c0 / nv;
        for (k, (o, &p)) in out.iter_mut().zip(pairs).enumerate() {
            *o = if p > 0.0 && denom > 0.0 { (*o / p) * (1.0 - k as f64 / n) / denom } else { f64::NAN };
        }
        if c0 > 0.0 {
            out[0] = 1.0;
        }
        c0
    }

    /// Valid-pair counts $P_k=\sum_t m_t m_{t+k}$, `k = 0..=max_lag`, by FFT of
    /// the mask (rounded to the exact integers they are).
    ///
    /// # Panics
    /// If `valid.len() != n`.
    pub fn pair_counts(&mut self, valid: &[bool]) -> Vec<f64> {
        assert_eq!(valid.len(), self.n);
        for (r, &m) in self.real.iter_mut().zip(valid) {
            *r = if m { 1.0 } else { 0.0 };
        }
        self.real[self.n..].fill(0.0);
        let mut out = vec![0.0; self.max_lag + 1];
        self.lagged_sums(&mut out);
        for o in &mut out {
            *o = o.round().max(0.0);
        }
        out
    }
}

/// Divide lagged sums by lag 0; NaN when lag 0 is not positive. Returns lag 0.
fn normalise(out: &mut [f64]) -> f64 {
    let c0 = out[0];
    if c0 > 0.0 {
        for o in out.iter_mut() {
            *o /= c0;
        }
        out[0] = 1.0;
    } else {
        out.fill(f64::NAN);
    }
    c0
}

/// Sample autocorrelation of `x`, lags `0..=max_lag` (see [`AcfPlan::acf_into`]
/// for the definition: demeaned, biased, as statsmodels `acf(adjusted=False)`).
///
/// # Errors
/// [`TimescaleError::SeriesTooShort`] unless `1 <= max_lag < x.len()`.
pub fn autocorrelation(x: &[f64], max_lag: usize) -> Result<Vec<f64>, TimescaleError> {
    let mut plan = AcfPlan::new(x.len(), max_lag)?;
    let mut out = vec![0.0; max_lag + 1];
    plan.acf_into(x, &mut out);
    Ok(out)
}

/// Masked autocorrelation of `x`: only pairs of valid frames enter each lag
/// (definition and normalisation in [`AcfPlan::masked_acf_into`]).
///
/// # Errors
/// [`TimescaleError::FrameCountMismatch`] when `valid` has a different length;
/// [`TimescaleError::SeriesTooShort`] unless `1 <= max_lag < x.len()`.
pub fn masked_autocorrelation(x: &[f64], valid: &[bool], max_lag: usize) -> Result<Vec<f64>, TimescaleError> {
    if valid.len() != x.len() {
        return Err(TimescaleError::FrameCountMismatch {
            what: "censoring mask".into(),
            expected: x.len(),
            found: valid.len(),
        });
    }
    let mut plan = AcfPlan::new(x.len(), max_lag)?;
    let pairs = plan.pair_counts(valid);
    let mut out = vec![0.0; max_lag + 1];
    plan.masked_acf_into(x, valid, &pairs, &mut out);
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Direct O(n·L) biased ACF, the textbook formula (Box, Jenkins & Reinsel).
    fn naive_acf(x: &[f64], max_lag: usize) -> Vec<f64> {
        let n = x.len();
        let m = x.iter().sum::<f64>() / n as f64;
        let c0: f64 = x.iter().map(|v| (v - m) * (v - m)).sum();
        (0..=max_lag).map(|k| (0..n - k).map(|t| (x[t] - m) * (x[t + k] - m)).sum::<f64>() / c0).collect()
    }

    /// Direct double loop over valid pairs, same normalisation as `masked_acf_into`.
    fn naive_masked(x: &[f64], valid: &[bool], max_lag: usize) -> Vec<f64> {
        let n = x.len();
        let nv = valid.iter().filter(|&&m| m).count() as f64;
        let mean = x.iter().zip(valid).filter(|(_, &m)| m).map(|(v, _)| v).sum::<f64>() / nv;
        let mut c = vec![0.0; max_lag + 1];
        let mut p = vec![0.0; max_lag + 1];
        for k in 0..=max_lag {
            for t in 0..n - k {
                if valid[t] && valid[t + k] {
                    c[k] += (x[t] - mean) * (x[t + k] - mean);
                    p[k] += 1.0;
                }
            }
        }
        (0..=max_lag)
            .map(|k| {
                if p[k] > 0.0 {
                    (c[k] / p[k]) * (1.0 - k as f64 / n as f64) / (c[0] / nv)
                } else {
                    f64::NAN
                }
            })
            .collect()
    }

    fn series(n: usize, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut x = vec![0.0; n];
        for t in 1..n {
            x[t] = 0.7 * x[t - 1] + rng.random::<f64>() - 0.5 + 3.0;
        }
        x
    }

    #[test]
    fn fft_acf_equals_direct_sum_for_every_lag_bound() {
        for (n, l) in [(2, 1), (7, 6), (50, 3), (200, 199), (333, 40)] {
            let x = series(n, n as u64);
            let a = autocorrelation(&x, l).unwrap();
            let b = naive_acf(&x, l);
            assert_eq!(a[0], 1.0);
            for k in 0..=l {
                // Round-off of an FFT of size ~2n: a few eps * log n, relative to lag 0.
                assert!((a[k] - b[k]).abs() < 1e-12, "n={n} k={k}: {} vs {}", a[k], b[k]);
            }
        }
    }

    #[test]
    fn masked_acf_equals_double_loop_over_valid_pairs() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for (n, l) in [(40, 39), (300, 60), (1000, 200)] {
            let x = series(n, 3 + n as u64);
            let valid: Vec<bool> = (0..n).map(|_| rng.random::<f64>() > 0.3).collect();
            let a = masked_autocorrelation(&x, &valid, l).unwrap();
            let b = naive_masked(&x, &valid, l);
            for k in 0..=l {
                if b[k].is_nan() {
                    assert!(a[k].is_nan());
                } else {
                    assert!((a[k] - b[k]).abs() < 1e-11, "n={n} k={k}: {} vs {}", a[k], b[k]);
                }
            }
        }
    }

    #[test]
    fn masked_acf_with_nothing_censored_is_the_plain_acf() {
        let x = series(256, 5);
        let a = masked_autocorrelation(&x, &[true; 256], 100).unwrap();
        let b = autocorrelation(&x, 100).unwrap();
        for k in 0..=100 {
            assert!((a[k] - b[k]).abs() < 1e-12);
        }
    }

    #[test]
    fn constant_series_gives_nan_not_a_panic() {
        let a = autocorrelation(&[0.1; 20], 5).unwrap();
        assert!(a.iter().all(|v| v.is_nan()));
    }

    #[test]
    fn lag_bound_must_be_below_length() {
        assert!(matches!(autocorrelation(&[1.0, 2.0, 3.0], 3), Err(TimescaleError::SeriesTooShort { .. })));
        assert!(autocorrelation(&[1.0, 2.0, 3.0], 0).is_err());
        assert!(masked_autocorrelation(&[1.0, 2.0, 3.0], &[true; 2], 1).is_err());
    }

    #[test]
    fn fast_lengths_are_5_smooth() {
        assert_eq!(fast_fft_len(2399), 2400);
        assert_eq!(fast_fft_len(7), 8);
        assert_eq!(fast_fft_len(1), 1);
    }
}
