//! Intrinsic neural timescales from regional time series.
//!
//! # The mathematics
//!
//! **Autocorrelation** ([`acf`]). For a series $x_0..x_{n-1}$ with sample
//! mean $\bar x$, the sample ACF at lag $k$ is
//! $$\hat\rho_k=\frac{\sum_{t=0}^{n-k-1}(x_t-\bar x)(x_{t+k}-\bar x)}{\sum_{t=0}^{n-1}(x_t-\bar x)^2},$$
//! the biased (denominator $n$ at every lag) estimator of statsmodels
//! `tsa.stattools.acf(adjusted=False)`, computed by FFT with zero padding to
//! at least $n+k_{\max}$ so no lag wraps around (Wiener–Khinchin).
//! With censored frames the **masked ACF** uses only pairs of valid frames:
//! $\hat\rho_k=\frac{C_k/P_k\,(1-k/n)}{C_0/N_v}$ ($C_k$ lagged sums of the
//! demeaned, zero-filled series, $P_k$ valid pairs at lag $k$, $N_v$ valid
//! frames), which reduces to the plain ACF when nothing is censored; the
//! reasons for this normalisation are in [`AcfPlan::masked_acf_into`].
//!
//! **Estimators** ([`estimators`], each defined once in the [`registry`]),
//! all in seconds (TR `tr_s` in seconds):
//! * initial positive sum $\mathrm{TR}\sum_{k=1}^{K-1}\hat\rho_k$, $K$ the
//!   first lag with $\hat\rho_K\le0$ (Watanabe, Rees & Masuda 2019, eLife
//!   8:e42256; journal and article number from memory);
//! * ACW-50 and ACW-0, the first lag where $\hat\rho\le0.5$ or $\le0$,
//!   plain or linearly interpolated (Honey et al. 2012; Golesorkhi et al. 2021);
//! * exponential decay $\hat\rho_k\approx a(e^{-k\mathrm{TR}/\tau}+b)$ fitted
//!   by least squares over a stated lag range (Murray et al. 2014);
//! * spectral knee: Welch spectrum (segment length by one rule shared by
//!   every command, [`welch_segment_default`]), fit of $\log_{10}P(f)=b-\log_{10}(k+f^\chi)$,
//!   $\tau=1/(2\pi k^{1/\chi})$ (Gao et al. 2020);
//! * optionally the AR(1) timescale $-\mathrm{TR}/\ln\hat\rho_1$ with the
//!   Marriott & Pope (1954) bias correction of $\hat\rho_1$.
//!
//! For AR(1), $x_t=\varphi x_{t-1}+\varepsilon_t$, the ACF is $\varphi^k$ and
//! the timescale $\tau=-\mathrm{TR}/\ln\varphi$ (textbook closed form).
//!
//! **What is and is not corrected.** The sample ACF of a short series is
//! biased towards zero, by about $-(1+3\varphi)/n$ at lag 1 for AR(1) with
//! unknown mean (Marriott & Pope 1954); every ACF-based estimator inherits
//! that bias. `BiasCorrection::Ar1` corrects only the AR(1) lag-1 column
//! under the AR(1) model. The bootstrap standard errors ([`algorithm`])
//! measure sampling spread, not bias.
//!
//! **Preprocessing** ([`preprocess`]), each optional and recorded: mean,
//! Legendre polynomial trend and confound columns regressed out on the valid
//! frames; censoring from a 0/1 mask or from framewise displacement above a
//! threshold plus the following frames (Power et al. 2012); a minimum number
//! of valid frames per region.
//!
//! **Quality control.** Each region gets a [`RegionStatus`] and each
//! estimator an [`EstimateStatus`]; a NaN in the output always has a non-ok
//! status beside it, and a timescale is reported only with status ok. A
//! fitted or model-based timescale (exponential fit, spectral knee, AR(1))
//! is ok only when it is plausible: $\mathrm{TR}/10\le\tau\le
//! N_{\rm valid}\mathrm{TR}$ ([`TauBounds`], our choice), a positive
//! amplitude for the exponential fit, and a knee inside the fitted band;
//! otherwise it is `implausible_fit`. A consumer that uses one timescale
//! column reads it with [`TimescaleResult::column_values`] (NaN unless ok)
//! and counts flags with [`TimescaleResult::n_flagged_for`] over the
//! [`ColumnSource`] of that column ([`column_source`]; its [`Estimator`] by
//! [`column_estimator`]).
//!
//! Research software: results are not for clinical decisions.

pub mod acf;
pub mod algorithm;
mod error;
pub mod estimators;
pub mod lm;
pub mod params;
pub mod preprocess;
pub mod registry;
pub mod welch;

pub use acf::{autocorrelation, masked_autocorrelation, AcfPlan};
pub use algorithm::{
    column_estimator, column_source, estimate_timescales, ColumnSource, RegionEstimates, RegionResult,
    RegionStatus, TimescaleResult,
};
pub use error::TimescaleError;
pub use estimators::{EstimateStatus, ExpFit, FitLags, KneeFit, TauBounds};
pub use params::{BiasCorrection, Estimator, TimescaleParams, ValidTimescaleParams};
pub use preprocess::{censor_from_displacement, Confound, NuisanceModel, NuisanceSpec};
pub use registry::{EstimatorColumn, EstimatorDef, EstimatorInput, REGISTRY};
pub use welch::{segment_starts, welch_density, welch_segment_default, WelchPlan};
