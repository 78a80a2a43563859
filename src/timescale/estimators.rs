//! Timescale estimators read from one autocorrelation function (or, for the
//! spectral knee, from the Welch spectrum). All results are in seconds.

use super::lm::{levenberg_marquardt, LmOptions};
use super::registry::{col, EstimatorDef};
use serde::Serialize;

/// Outcome of one estimator for one region.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum EstimateStatus {
    /// A finite value was obtained.
    Ok,
    /// The ACF never reached the threshold within the lag bound.
    NoCrossing,
    /// The least-squares fit hit its iteration limit.
    NotConverged,
    /// The fit converged to a point outside the model's domain (τ ≤ 0, knee ≤ 0, ...).
    InvalidFit,
    /// The fit converged inside the model's domain but to a value the series
    /// cannot support: amplitude ≤ 0, τ outside [`TauBounds`], or a knee
    /// outside the fitted band. The raw fit is kept in the estimates for
    /// inspection; its timescale is not reported (NaN in tables).
    ImplausibleFit,
    /// The ACF or spectrum holds non-finite values where the estimator needs them.
    NonFiniteInput,
    /// Not enough lags, frequencies or segments for the estimator.
    TooFewPoints,
    /// The region failed before any estimator ran (see the region status).
    NotComputed,
}

impl EstimateStatus {
    /// The name written to tables.
    pub fn as_str(self) -> &'static str {
        match self {
            EstimateStatus::Ok => "ok",
            EstimateStatus::NoCrossing => "no_crossing",
            EstimateStatus::NotConverged => "not_converged",
            EstimateStatus::InvalidFit => "invalid_fit",
            EstimateStatus::ImplausibleFit => "implausible_fit",
            EstimateStatus::NonFiniteInput => "non_finite_input",
            EstimateStatus::TooFewPoints => "too_few_points",
            EstimateStatus::NotComputed => "not_computed",
        }
    }
}

/// The timescales a series of `n_valid_frames` frames sampled every `tr_s`
/// seconds can support:
///
/// $$\tfrac{1}{10}\,\mathrm{TR}\;\le\;\tau\;\le\;N_{\mathrm{valid}}\,\mathrm{TR}.$$
///
/// Both ends are our choice (no published source). Below TR/10 the lag-1
/// autocorrelation of an exponential decay is $e^{-10}\approx4.5\times10^{-5}$,
/// far below the sampling error of any ACF ($\approx1/\sqrt{N}$, 0.01 even
/// at $10^4$ frames), so such a τ is not identified by the data. Above the
/// record length the decay never reaches $e^{-1}$ within the series, so τ is
/// an extrapolation (a drift or a random walk fits as "infinitely slow").
/// A fitted estimator whose τ falls outside is reported as
/// [`EstimateStatus::ImplausibleFit`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct TauBounds {
    /// Smallest supported τ, s (TR/10).
    pub min_s: f64,
    /// Largest supported τ, s (valid frames × TR).
    pub max_s: f64,
}

impl TauBounds {
    /// `[tr_s / 10, n_valid_frames × tr_s]`.
    pub fn new(tr_s: f64, n_valid_frames: usize) -> Self {
        TauBounds { min_s: tr_s / 10.0, max_s: n_valid_frames as f64 * tr_s }
    }

    /// Whether `tau_s` lies within the bounds (false for NaN).
    pub fn contains(&self, tau_s: f64) -> bool {
        tau_s >= self.min_s && tau_s <= self.max_s
    }
}

/// First lag `k >= 1` with `acf[k] <= threshold`.
///
/// `Err(NonFiniteInput)` when a NaN lag (no valid pairs) comes before the
/// crossing; `Err(NoCrossing)` when it never happens within `acf`.
pub fn first_crossing(acf: &[f64], threshold: f64) -> Result<usize, EstimateStatus> {
    for (k, &r) in acf.iter().enumerate().skip(1) {
        if !r.is_finite() {
            return Err(EstimateStatus::NonFiniteInput);
        }
        if r <= threshold {
            return Ok(k);
        }
    }
    Err(EstimateStatus::NoCrossing)
}

/// Autocorrelation window at `threshold`: `(lag_s, interpolated_s)`.
///
/// With $K$ the first lag at which $\hat\rho_K\le\theta$:
/// * without interpolation, $K\cdot\mathrm{TR}$;
/// * with linear interpolation between lags $K-1$ and $K$,
///   $\bigl(K-1+\frac{\hat\rho_{K-1}-\theta}{\hat\rho_{K-1}-\hat\rho_K}\bigr)\mathrm{TR}$.
///
/// $\theta=0.5$ gives ACW-50 (Honey et al. 2012, Neuron), $\theta=0$ ACW-0
/// (Golesorkhi et al. 2021, Commun Biol). Convention: the one-sided lag is
/// reported; the "full width" of the symmetric ACF is twice this (from
/// memory of Honey et al.'s wording; tools differ, so compare like with like).
///
/// # Errors
/// As [`first_crossing`].
pub fn autocorrelation_window(acf: &[f64], threshold: f64, tr_s: f64) -> Result<(f64, f64), EstimateStatus> {
    let k = first_crossing(acf, threshold)?;
    let (a, b) = (acf[k - 1], acf[k]);
    let frac = if a > b { (a - threshold) / (a - b) } else { 1.0 };
    Ok((k as f64 * tr_s, ((k - 1) as f64 + frac) * tr_s))
}

/// Sum of the initial positive ACF times TR (Watanabe, Rees & Masuda 2019,
/// eLife 8:e42256; journal and article number from memory):
///
/// $$\tau=\mathrm{TR}\sum_{k=1}^{K-1}\hat\rho_k,\qquad K=\min\{k\ge1:\hat\rho_k\le0\}$$
///
/// Convention: lag 0 (always 1) is left out (from memory of the paper's
/// definition; some tools add it, which shifts every value by one TR).
/// For AR(1) with coefficient φ and no sampling error this is
/// $\mathrm{TR}\,\varphi/(1-\varphi)$.
///
/// # Errors
/// [`EstimateStatus::NoCrossing`] when the ACF stays positive up to the lag bound.
pub fn initial_positive_sum(acf: &[f64], tr_s: f64) -> Result<f64, EstimateStatus> {
    let k = first_crossing(acf, 0.0)?;
    Ok(tr_s * acf[1..k].iter().sum::<f64>())
}

/// Lags entering the exponential fit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FitLags {
    /// Lags `first..=K`, with `K` the first lag where the ACF is ≤ 0 (or the
    /// lag bound if it never is), extended to at least four lags.
    UntilZero {
        /// First lag fitted.
        first: usize,
    },
    /// Lags `first..=last` exactly.
    Range {
        /// First lag fitted.
        first: usize,
        /// Last lag fitted.
        last: usize,
    },
}

impl Default for FitLags {
    /// Lags from 1 until the ACF first reaches 0. Lag 0 is left out because
    /// measurement noise adds to it alone (a white-noise spike); the tail
    /// beyond the first zero is mostly sampling noise.
    fn default() -> Self {
        FitLags::UntilZero { first: 1 }
    }
}

impl FitLags {
    /// The inclusive lag range for this ACF (lags `0..acf.len()`).
    pub fn resolve(&self, acf: &[f64]) -> (usize, usize) {
        let max_lag = acf.len() - 1;
        match *self {
            FitLags::Range { first, last } => (first, last.min(max_lag)),
            FitLags::UntilZero { first } => {
                let k = first_crossing(acf, 0.0).unwrap_or(max_lag);
                (first, k.max(first + 3).min(max_lag))
            }
        }
    }
}

/// An exponential-decay fit.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ExpFit {
    /// Timescale τ in seconds.
    pub tau_s: f64,
    /// Amplitude a.
    pub amplitude: f64,
    /// Offset b.
    pub offset: f64,
    /// First and last lag fitted.
    pub lags: (usize, usize),
    /// LM iterations.
    pub iterations: usize,
    /// Residual sum of squares.
    pub rss: f64,
}

/// Fit $\hat\rho_k\approx a\,(e^{-k\,\mathrm{TR}/\tau}+b)$ over `lags` by
/// least squares (Murray et al. 2014, Nat Neurosci), Levenberg–Marquardt from
/// $a=1$, $b=0$ and $\tau_0$ = `tau0_s` (the caller passes a rough value,
/// e.g. ACW-50 / ln 2, which is exact for a pure exponential).
///
/// # Errors
/// `(status, partial fit)`: [`EstimateStatus::TooFewPoints`] with fewer than
/// four lags or a non-finite ACF value in the range, `NotConverged`, or
/// `InvalidFit` when τ ≤ 0 or is not finite.
pub fn fit_exp_decay(acf: &[f64], tr_s: f64, lags: FitLags, tau0_s: f64) -> Result<ExpFit, EstimateStatus> {
    let (first, last) = lags.resolve(acf);
    if last < first + 3 {
        return Err(EstimateStatus::TooFewPoints);
    }
    let ks: Vec<f64> = (first..=last).map(|k| k as f64 * tr_s).collect();
    let ys = &acf[first..=last];
    if !ys.iter().all(|v| v.is_finite()) {
        return Err(EstimateStatus::NonFiniteInput);
    }
    let tau0 = if tau0_s.is_finite() && tau0_s > 0.0 { tau0_s } else { tr_s };
    let rep = levenberg_marquardt(
        &[1.0, tau0, 0.0],
        ks.len(),
        |p, r, j| {
            let (a, tau, b) = (p[0], p[1], p[2]);
            if tau == 0.0 {
                return false;
            }
            for i in 0..ks.len() {
                let e = (-ks[i] / tau).exp();
                r[i] = a * (e + b) - ys[i];
                j[3 * i] = e + b;
                j[3 * i + 1] = a * e * ks[i] / (tau * tau);
                j[3 * i + 2] = a;
            }
            true
        },
        LmOptions::default(),
    );
    let fit = ExpFit {
        tau_s: rep.params[1],
        amplitude: rep.params[0],
        offset: rep.params[2],
        lags: (first, last),
        iterations: rep.iterations,
        rss: 2.0 * rep.cost,
    };
    if !rep.converged {
        return Err(EstimateStatus::NotConverged);
    }
    if !(fit.tau_s > 0.0 && fit.tau_s.is_finite()) {
        return Err(EstimateStatus::InvalidFit);
    }
    Ok(fit)
}

/// Plausibility of an exponential fit (Murray et al. 2014 model): the
/// amplitude must be positive, $a>0$ (a decaying, not a growing or inverted,
/// autocorrelation), and τ must lie within `bounds`.
///
/// # Errors
/// [`EstimateStatus::ImplausibleFit`] otherwise (also for NaN).
pub fn check_exp_fit(fit: &ExpFit, bounds: TauBounds) -> Result<(), EstimateStatus> {
    if fit.amplitude > 0.0 && bounds.contains(fit.tau_s) {
        Ok(())
    } else {
        Err(EstimateStatus::ImplausibleFit)
    }
}

/// A spectral-knee fit.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct KneeFit {
    /// τ = 1/(2π f_k) in seconds.
    pub tau_s: f64,
    /// Knee frequency $f_k=k^{1/\chi}$ in Hz.
    pub knee_hz: f64,
    /// Offset b (log10 power units).
    pub offset: f64,
    /// Knee parameter k.
    pub knee: f64,
    /// Exponent χ.
    pub exponent: f64,
    /// Lowest and highest frequency fitted, Hz.
    pub band_fitted_hz: (f64, f64),
    /// LM iterations.
    pub iterations: usize,
    /// Residual sum of squares (log10 units).
    pub rss: f64,
}

/// Fit $\log_{10}P(f)=b-\log_{10}(k+f^{\chi})$ to the positive frequencies
/// in `[f_lo, f_hi]` Hz and return $\tau=1/(2\pi k^{1/\chi})$ (Gao et al.
/// 2020, eLife). Starting point: χ = 2 (a Lorentzian, as for AR(1)),
/// $k=f_{\rm mid}^2$ with $f_{\rm mid}$ the geometric mean of the fitted
/// band, and $b$ matching the lowest fitted frequency.
///
/// # Errors
/// `TooFewPoints` with fewer than four frequencies; `NonFiniteInput` when a
/// density is not positive and finite; `NotConverged`; `InvalidFit` when
/// k ≤ 0 or χ ≤ 0 (no knee).
pub fn fit_spectral_knee(
    freq_hz: &[f64],
    density: &[f64],
    band_hz: (f64, f64),
) -> Result<KneeFit, EstimateStatus> {
    let (lo, hi) = band_hz;
    let pts: Vec<(f64, f64)> = freq_hz
        .iter()
        .zip(density)
        .filter(|(f, _)| **f > 0.0 && **f >= lo && **f <= hi)
        .map(|(f, p)| (*f, *p))
        .collect();
    if pts.len() < 4 {
        return Err(EstimateStatus::TooFewPoints);
    }
    if !pts.iter().all(|(_, p)| *p > 0.0 && p.is_finite()) {
        return Err(EstimateStatus::NonFiniteInput);
    }
    let fs: Vec<f64> = pts.iter().map(|p| p.0).collect();
    let ys: Vec<f64> = pts.iter().map(|p| p.1.log10()).collect();
    let fmid = (fs[0].ln() * 0.5 + fs[fs.len() - 1].ln() * 0.5).exp();
    let k0 = fmid * fmid;
    let b0 = ys[0] + (k0 + fs[0] * fs[0]).log10();
    let ln10 = std::f64::consts::LN_10;
    let rep = levenberg_marquardt(
        &[b0, k0, 2.0],
        fs.len(),
        |p, r, j| {
            let (b, k, chi) = (p[0], p[1], p[2]);
            for i in 0..fs.len() {
                let fc = fs[i].powf(chi);
                let d = k + fc;
                if d <= 0.0 {
                    return false;
                }
                r[i] = b - d.log10() - ys[i];
                j[3 * i] = 1.0;
                j[3 * i + 1] = -1.0 / (d * ln10);
                j[3 * i + 2] = -fc * fs[i].ln() / (d * ln10);
            }
            true
        },
        LmOptions::default(),
    );
    let (b, k, chi) = (rep.params[0], rep.params[1], rep.params[2]);
    if !rep.converged {
        return Err(EstimateStatus::NotConverged);
    }
    if !(k > 0.0 && chi > 0.0 && k.is_finite() && chi.is_finite()) {
        return Err(EstimateStatus::InvalidFit);
    }
    let knee_hz = k.powf(1.0 / chi);
    let tau_s = 1.0 / (2.0 * std::f64::consts::PI * knee_hz);
    if !tau_s.is_finite() {
        return Err(EstimateStatus::InvalidFit);
    }
    Ok(KneeFit {
        tau_s,
        knee_hz,
        offset: b,
        knee: k,
        exponent: chi,
        band_fitted_hz: (fs[0], fs[fs.len() - 1]),
        iterations: rep.iterations,
        rss: 2.0 * rep.cost,
    })
}

/// Plausibility of a spectral-knee fit (Gao et al. 2020 model): the knee
/// frequency must lie inside the band that was fitted,
/// $f_{\rm lo}\le f_k\le f_{\rm hi}$ (outside it the "knee" is an
/// extrapolation of a spectrum that shows no bend), and
/// $\tau=1/(2\pi f_k)$ within `bounds`.
///
/// # Errors
/// [`EstimateStatus::ImplausibleFit`] otherwise (also for NaN).
pub fn check_knee_fit(fit: &KneeFit, bounds: TauBounds) -> Result<(), EstimateStatus> {
    let (lo, hi) = fit.band_fitted_hz;
    if fit.knee_hz >= lo && fit.knee_hz <= hi && bounds.contains(fit.tau_s) {
        Ok(())
    } else {
        Err(EstimateStatus::ImplausibleFit)
    }
}

/// AR(1) timescale from the lag-1 autocorrelation, $\tau=-\mathrm{TR}/\ln\hat\rho_1$,
/// the exact timescale of an AR(1) process with coefficient φ = ρ₁ sampled
/// every TR (ρ_k = φ^k = e^{-k TR/τ}). NaN (and `InvalidFit`) unless 0 < ρ₁ < 1.
///
/// # Errors
/// [`EstimateStatus::InvalidFit`] outside 0 < ρ₁ < 1.
pub fn ar1_timescale(rho1: f64, tr_s: f64) -> Result<f64, EstimateStatus> {
    if rho1 > 0.0 && rho1 < 1.0 {
        Ok(-tr_s / rho1.ln())
    } else {
        Err(EstimateStatus::InvalidFit)
    }
}

/// Marriott & Pope (1954, Biometrika) bias correction of the lag-1
/// autocorrelation of an AR(1) series of `n` frames with unknown mean:
/// $E[\hat\rho_1]\approx\varphi-(1+3\varphi)/n$, solved for φ:
///
/// $$\hat\varphi_c=\frac{n\hat\rho_1+1}{n-3}$$
///
/// This corrects the O(1/n) downward bias of ρ₁ *under an AR(1) model only*;
/// it does not correct the ACW, initial-positive-sum, exponential or
/// spectral estimators, nor any bias from model misspecification. For a
/// censored series, `n` is the number of valid frames (an approximation).
pub fn marriott_pope_lag1(rho1: f64, n: usize) -> f64 {
    let n = n as f64;
    (n * rho1 + 1.0) / (n - 3.0)
}

// Definitions: each estimator's name, columns and dispatch, read by
// [`REGISTRY`](super::registry::REGISTRY).

/// The initial positive sum ([`initial_positive_sum`]).
pub const INITIAL_POSITIVE_SUM: EstimatorDef = EstimatorDef {
    name: "initial-positive-sum",
    prefix: "ips",
    summary: "Sum of the initial positive ACF x TR (Watanabe, Rees & Masuda 2019, eLife)",
    timescales: &[col(
        "ips_tau_s",
        "s",
        "TR x sum of the ACF from lag 1 to the lag before its first value <= 0",
    )],
    details: &[],
    needs_spectrum: false,
    estimate: |x, out| {
        out[0] = initial_positive_sum(x.acf, x.tr_s)?;
        Ok(())
    },
};

/// ACW-50 ([`autocorrelation_window`] at 0.5).
pub const ACW50: EstimatorDef = EstimatorDef {
    name: "acw50",
    prefix: "acw50",
    summary: "Lag where the ACF first drops to 0.5 (Honey et al. 2012)",
    timescales: &[
        col("acw50_s", "s", "first lag with ACF <= 0.5, x TR"),
        col("acw50_interp_s", "s", "the same, linearly interpolated between lags"),
    ],
    details: &[],
    needs_spectrum: false,
    estimate: |x, out| {
        (out[0], out[1]) = autocorrelation_window(x.acf, 0.5, x.tr_s)?;
        Ok(())
    },
};

/// ACW-0 ([`autocorrelation_window`] at 0).
pub const ACW0: EstimatorDef = EstimatorDef {
    name: "acw0",
    prefix: "acw0",
    summary: "Lag where the ACF first drops to 0 (Golesorkhi et al. 2021)",
    timescales: &[
        col("acw0_s", "s", "first lag with ACF <= 0, x TR"),
        col("acw0_interp_s", "s", "the same, linearly interpolated between lags"),
    ],
    details: &[],
    needs_spectrum: false,
    estimate: |x, out| {
        (out[0], out[1]) = autocorrelation_window(x.acf, 0.0, x.tr_s)?;
        Ok(())
    },
};

/// The exponential-decay fit ([`fit_exp_decay`], checked by [`check_exp_fit`]).
pub const EXP_FIT: EstimatorDef = EstimatorDef {
    name: "exp-fit",
    prefix: "exp",
    summary: "Exponential decay fit a(exp(-k TR/tau) + b) to the ACF (Murray et al. 2014)",
    timescales: &[col("exp_tau_s", "s", "tau of the fitted decay a(exp(-k TR/tau) + b)")],
    details: &[
        col("exp_amplitude", "1", "fitted amplitude a (a plausible fit has a > 0)"),
        col("exp_offset", "1", "fitted offset b"),
        col("exp_first_lag", "lag", "first ACF lag fitted"),
        col("exp_last_lag", "lag", "last ACF lag fitted"),
    ],
    needs_spectrum: false,
    estimate: |x, out| {
        // Start tau from the interpolated half-decay lag (exact for a pure exponential: the ACF
        // is 1/2 at tau ln 2).
        let start = autocorrelation_window(x.acf, 0.5, x.tr_s).map(|v| v.1).unwrap_or(x.tr_s)
            / std::f64::consts::LN_2;
        let f = fit_exp_decay(x.acf, x.tr_s, *x.params.fit_lags(), start)?;
        out.copy_from_slice(&[f.tau_s, f.amplitude, f.offset, f.lags.0 as f64, f.lags.1 as f64]);
        check_exp_fit(&f, x.bounds)
    },
};

/// The spectral knee ([`fit_spectral_knee`], checked by [`check_knee_fit`]).
pub const SPECTRAL_KNEE: EstimatorDef = EstimatorDef {
    name: "spectral-knee",
    prefix: "knee",
    summary: "Knee of the Welch power spectrum, tau = 1/(2 pi f_knee) (Gao et al. 2020)",
    timescales: &[col("knee_tau_s", "s", "1/(2 pi f_knee) of the fitted Welch spectrum")],
    details: &[
        col("knee_hz", "Hz", "knee frequency f_knee = k^(1/chi)"),
        col("knee_exponent", "1", "fitted exponent chi"),
        col("knee_band_low_hz", "Hz", "lowest frequency fitted (a plausible knee lies inside the band)"),
        col("knee_band_high_hz", "Hz", "highest frequency fitted"),
    ],
    needs_spectrum: true,
    estimate: |x, out| {
        let (freqs, psd) = x.spectrum.ok_or(EstimateStatus::TooFewPoints)?;
        let f = fit_spectral_knee(freqs, psd, x.params.knee_band_hz())?;
        out.copy_from_slice(&[f.tau_s, f.knee_hz, f.exponent, f.band_fitted_hz.0, f.band_fitted_hz.1]);
        check_knee_fit(&f, x.bounds)
    },
};

#[cfg(test)]
mod tests {
    use super::*;

    fn ar1_acf(phi: f64, l: usize) -> Vec<f64> {
        (0..=l).map(|k| phi.powi(k as i32)).collect()
    }

    #[test]
    fn analytic_ar1_acf_gives_the_closed_forms() {
        // rho_k = phi^k (textbook AR(1) ACF): uninterpolated ACW is the next
        // lag; phi^k is convex, so the chord between lags 3 and 4 crosses 0.5
        // after the exact crossing ln 0.5 / ln phi; IPS never crosses 0.
        let phi: f64 = 0.8;
        let tr = 2.0;
        let acf = ar1_acf(phi, 60);
        let (k50, i50) = autocorrelation_window(&acf, 0.5, tr).unwrap();
        let exact = 0.5f64.ln() / phi.ln(); // 3.106 lags
        assert_eq!(k50, 4.0 * tr);
        assert!(i50 > exact * tr && i50 < 4.0 * tr, "{i50}");
        assert_eq!(initial_positive_sum(&acf, tr), Err(EstimateStatus::NoCrossing));
        let fit = fit_exp_decay(&acf, tr, FitLags::Range { first: 1, last: 30 }, 5.0).unwrap();
        let tau = -tr / phi.ln();
        assert!((fit.tau_s - tau).abs() < 1e-8 * tau, "{fit:?}");
        assert!(fit.offset.abs() < 1e-9 && (fit.amplitude - 1.0).abs() < 1e-9);
        assert!((ar1_timescale(phi, tr).unwrap() - tau).abs() < 1e-12);
    }

    #[test]
    fn interpolation_hits_a_straight_line_exactly() {
        let acf = [1.0, 0.75, 0.25, -0.25];
        let (k, i) = autocorrelation_window(&acf, 0.5, 1.0).unwrap();
        assert_eq!((k, i), (2.0, 1.5));
        let (k0, i0) = autocorrelation_window(&acf, 0.0, 1.0).unwrap();
        assert_eq!((k0, i0), (3.0, 2.5));
        assert_eq!(initial_positive_sum(&acf, 2.0).unwrap(), 2.0);
    }

    #[test]
    fn lorentzian_spectrum_gives_its_knee() {
        // P(f) = 10^b / (k + f^2): exactly the model, so the fit returns it.
        let f: Vec<f64> = (0..=128).map(|j| j as f64 / 256.0).collect();
        let p: Vec<f64> = f.iter().map(|f| 3.0 / (0.0004 + f * f)).collect();
        let fit = fit_spectral_knee(&f, &p, (0.0, 1.0)).unwrap();
        assert!((fit.knee - 0.0004).abs() < 1e-10 && (fit.exponent - 2.0).abs() < 1e-8, "{fit:?}");
        assert!((fit.tau_s - 1.0 / (2.0 * std::f64::consts::PI * 0.02)).abs() < 1e-6);
    }

    #[test]
    fn anti_correlated_acf_fits_with_negative_amplitude_and_is_implausible() {
        // rho_k = -0.8 * 0.5^k is exactly a(e^{-k TR/tau} + b) with a = -0.8,
        // tau = TR/ln 2, b = 0: the fit converges to it (a valid point of the
        // model) but an inverted decay is no timescale.
        let tr = 2.0;
        let acf: Vec<f64> = (0..=8).map(|k| if k == 0 { 1.0 } else { -0.8 * 0.5f64.powi(k) }).collect();
        let fit = fit_exp_decay(&acf, tr, FitLags::Range { first: 1, last: 8 }, 3.0).unwrap();
        assert!((fit.amplitude + 0.8).abs() < 1e-8 && (fit.tau_s - tr / 2f64.ln()).abs() < 1e-7, "{fit:?}");
        let bounds = TauBounds::new(tr, 200);
        assert_eq!(check_exp_fit(&fit, bounds), Err(EstimateStatus::ImplausibleFit));
        // The clean AR(1) ACF phi^k stays ok.
        let clean = fit_exp_decay(&ar1_acf(0.8, 30), tr, FitLags::Range { first: 1, last: 30 }, 5.0).unwrap();
        assert_eq!(check_exp_fit(&clean, bounds), Ok(()));
    }

    #[test]
    fn tau_bounds_are_tr_over_ten_to_the_record_length() {
        let b = TauBounds::new(2.0, 240);
        assert_eq!((b.min_s, b.max_s), (0.2, 480.0));
        assert!(b.contains(0.2) && b.contains(480.0) && !b.contains(0.19) && !b.contains(481.0));
        assert!(!b.contains(f64::NAN));
        // A fit with a huge tau (drift read as an infinitely slow decay) or a
        // tiny one is implausible even with a positive amplitude.
        let mut f =
            ExpFit { tau_s: 8.4e103, amplitude: 0.3, offset: 0.0, lags: (1, 4), iterations: 3, rss: 0.0 };
        assert_eq!(check_exp_fit(&f, b), Err(EstimateStatus::ImplausibleFit));
        f.tau_s = 0.01;
        assert_eq!(check_exp_fit(&f, b), Err(EstimateStatus::ImplausibleFit));
        f.tau_s = 5.0;
        assert_eq!(check_exp_fit(&f, b), Ok(()));
    }

    #[test]
    fn knee_outside_the_fitted_band_is_implausible() {
        // Exact Lorentzians P = 3 / (f_k^2 + f^2) on f = j/256 Hz, j = 1..128
        // (band 0.0039..0.5 Hz): the fit recovers f_k, inside or not.
        let f: Vec<f64> = (0..=128).map(|j| j as f64 / 256.0).collect();
        let b = TauBounds::new(1.0, 256);
        for (fk, ok) in [(0.05, true), (2.0, false), (0.0005, false)] {
            let p: Vec<f64> = f.iter().map(|f| 3.0 / (fk * fk + f * f)).collect();
            let fit = fit_spectral_knee(&f, &p, (0.0, 1.0)).unwrap();
            assert!((fit.knee_hz - fk).abs() < 1e-5 * fk, "{fk}: {fit:?}");
            assert_eq!(fit.band_fitted_hz, (1.0 / 256.0, 0.5));
            let want = if ok { Ok(()) } else { Err(EstimateStatus::ImplausibleFit) };
            assert_eq!(check_knee_fit(&fit, b), want, "{fk}: {fit:?}");
        }
    }

    #[test]
    fn marriott_pope_inverts_its_own_bias() {
        let (phi, n) = (0.6, 200);
        let expected_r1 = phi - (1.0 + 3.0 * phi) / n as f64;
        assert!((marriott_pope_lag1(expected_r1, n) - phi).abs() < 1e-12);
    }
}
