//! Parameters of a timescale analysis: the unchecked [`TimescaleParams`]
//! and the checked [`ValidTimescaleParams`] that the algorithm accepts.

use super::estimators::FitLags;
use super::preprocess::NuisanceSpec;
use super::registry::{EstimatorDef, REGISTRY};
use super::TimescaleError;
use crate::param::ParamError;
use serde::Serialize;

crate::registry::method_handle!(
    /// A timescale estimator: a handle on its definition in
    /// [`REGISTRY`], ordered as the tables are. Named by
    /// [`Estimator::named`] (`Estimator::named("acw50")`) or looked up by
    /// [`Estimator::from_name`].
    Estimator,
    EstimatorDef,
    REGISTRY,
    name,
    "timescale estimator"
);

impl Estimator {
    /// The short name used in tables and on the command line.
    pub fn as_str(self) -> &'static str {
        self.def().name
    }

    /// Column prefix in tables.
    pub fn prefix(self) -> &'static str {
        self.def().prefix
    }
}

/// Finite-sample bias correction.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
#[non_exhaustive]
pub enum BiasCorrection {
    /// No correction.
    #[default]
    None,
    /// Marriott & Pope (1954) lag-1 correction under an AR(1) model, reported as extra AR(1)
    /// columns; the other estimators are left uncorrected.
    ///
    /// See [`marriott_pope_lag1`](super::estimators::marriott_pope_lag1).
    Ar1,
}

/// Parameters as a user gives them; see [`TimescaleParams::new`] for defaults.
#[derive(Clone, Debug, Serialize)]
pub struct TimescaleParams {
    /// Repetition time in seconds (no default: it must come from the data).
    pub tr_s: f64,
    /// Estimators to compute.
    pub estimators: Vec<Estimator>,
    /// Largest ACF lag; `None` = ⌊n/4⌋.
    pub max_lag: Option<usize>,
    /// Nuisance regression.
    pub nuisance: NuisanceSpec,
    /// Minimum valid frames per region; `None` = 2 × max_lag.
    pub min_frames: Option<usize>,
    /// Lags of the exponential fit.
    pub fit_lags: FitLags,
    /// Welch segment length in frames; `None` = the shared rule
    /// [`welch_segment_default`](super::welch::welch_segment_default),
    /// resolved against the censoring mask when the timescales are estimated.
    pub welch_segment: Option<usize>,
    /// Frequency band of the knee fit in Hz; `None` = all positive frequencies.
    pub knee_band_hz: Option<(f64, f64)>,
    /// Block-bootstrap replicates (0 = no uncertainty).
    pub bootstrap: usize,
    /// Bootstrap block length in frames; `None` = ⌈n/10⌉.
    pub block_frames: Option<usize>,
    /// Seed of the bootstrap RNG (ChaCha8).
    pub seed: u64,
    /// Bias correction.
    pub bias_correction: BiasCorrection,
    /// Worker threads; `None` = rayon's default (one per core). The thread
    /// count does not change results: each region is computed by one thread.
    pub threads: Option<usize>,
}

impl TimescaleParams {
    /// Defaults for repetition time `tr_s`: all estimators; max lag ⌊n/4⌋
    /// (Box & Jenkins' advice to read the ACF up to about n/4 lags, from
    /// memory); demeaning only; min frames 2 × max lag (our choice: at least
    /// half the frames must survive censoring at the default lag bound);
    /// exponential fit from lag 1 to the first zero; Welch segments by the
    /// rule of [`welch_segment_default`](super::welch::welch_segment_default)
    /// (min(256, n) without censoring, scipy's default `nperseg`; shorter when
    /// censoring would leave too few fully valid segments); all positive
    /// frequencies; no bootstrap; block ⌈n/10⌉ (our choice: pairs straddling
    /// a block join are decorrelated, which biases the SE low; measured on
    /// AR(1), φ = 0.8, n = 1200, the SE was 0.75–0.83 of the true spread with
    /// ⌈√n⌉-frame blocks and 0.83–0.90 with n/10); seed 0; no bias correction.
    pub fn new(tr_s: f64) -> Self {
        TimescaleParams {
            tr_s,
            estimators: Estimator::ALL.to_vec(),
            max_lag: None,
            nuisance: NuisanceSpec { demean: true, detrend_order: None, confounds: Vec::new() },
            min_frames: None,
            fit_lags: FitLags::default(),
            welch_segment: None,
            knee_band_hz: None,
            bootstrap: 0,
            block_frames: None,
            seed: 0,
            bias_correction: BiasCorrection::None,
            threads: None,
        }
    }

    /// Check against a series of `n_frames` frames and resolve the defaults.
    ///
    /// # Errors
    /// [`TimescaleError::Param`] naming the parameter, or
    /// [`TimescaleError::SeriesTooShort`] when the series is not longer than
    /// the lag bound.
    pub fn check(&self, n_frames: usize) -> Result<ValidTimescaleParams, TimescaleError> {
        let bad = |name: &'static str, value: String, expected: &str| {
            TimescaleError::Param(ParamError::new(name, value, expected))
        };
        if !(self.tr_s > 0.0 && self.tr_s.is_finite()) {
            return Err(bad("tr_s", self.tr_s.to_string(), "a positive, finite repetition time in seconds"));
        }
        if self.estimators.is_empty() {
            return Err(bad("estimators", "(none)".into(), "at least one estimator"));
        }
        let mut estimators = self.estimators.clone();
        estimators.sort();
        estimators.dedup();
        let max_lag = self.max_lag.unwrap_or(n_frames / 4);
        if max_lag == 0 {
            return Err(if self.max_lag.is_some() {
                bad("max_lag", "0".into(), "at least 1")
            } else {
                TimescaleError::SeriesTooShort {
                    n_frames,
                    n_valid: n_frames,
                    need: "at least 4 frames for the default lag bound n/4".into(),
                }
            });
        }
        if max_lag >= n_frames {
            return Err(TimescaleError::SeriesTooShort {
                n_frames,
                n_valid: n_frames,
                need: format!("more frames than the lag bound max_lag = {max_lag}"),
            });
        }
        let min_frames = self.min_frames.unwrap_or(2 * max_lag).max(max_lag + 1);
        if let FitLags::Range { first, last } = self.fit_lags {
            if !(first <= last && last <= max_lag && last >= first + 3) {
                return Err(bad(
                    "fit_lags",
                    format!("{first}:{last}"),
                    &format!("FIRST:LAST with at least four lags and LAST <= max_lag = {max_lag}"),
                ));
            }
        }
        let welch_segment = self.welch_segment;
        let shortest = super::welch::WELCH_SEGMENT_MIN;
        if estimators.iter().any(|e| e.def().needs_spectrum) {
            let given = welch_segment.unwrap_or(shortest);
            if !(shortest..=n_frames).contains(&given) {
                return Err(bad(
                    "welch_segment",
                    welch_segment
                        .map_or_else(|| format!("(default, series of {n_frames} frames)"), |w| w.to_string()),
                    &format!("between {shortest} and the {n_frames} frames of the series"),
                ));
            }
        }
        let nyquist = 0.5 / self.tr_s;
        let knee_band_hz = self.knee_band_hz.unwrap_or((0.0, nyquist));
        if !(knee_band_hz.0 >= 0.0 && knee_band_hz.0 < knee_band_hz.1) {
            return Err(bad(
                "knee_band_hz",
                format!("{}:{}", knee_band_hz.0, knee_band_hz.1),
                "LOW:HIGH in Hz with 0 <= LOW < HIGH",
            ));
        }
        let block_frames = self.block_frames.unwrap_or(n_frames.div_ceil(10).max(1));
        if self.bootstrap > 0 && !(1..=n_frames).contains(&block_frames) {
            return Err(bad("block_frames", block_frames.to_string(), "between 1 and the number of frames"));
        }
        if self.bootstrap == 1 {
            return Err(bad("bootstrap", "1".into(), "0 (off) or at least 2 replicates"));
        }
        if self.threads == Some(0) {
            return Err(bad("threads", "0".into(), "at least 1 thread"));
        }
        Ok(ValidTimescaleParams {
            tr_s: self.tr_s,
            estimators,
            n_frames,
            max_lag,
            nuisance: self.nuisance.clone(),
            min_frames,
            fit_lags: self.fit_lags,
            welch_segment,
            knee_band_hz,
            bootstrap: self.bootstrap,
            block_frames,
            seed: self.seed,
            bias_correction: self.bias_correction,
            threads: self.threads,
        })
    }
}

/// Checked parameters with every default resolved (written to provenance).
#[derive(Clone, Debug, Serialize)]
pub struct ValidTimescaleParams {
    /// Repetition time, seconds.
    pub(crate) tr_s: f64,
    /// Estimators, sorted, unique.
    pub(crate) estimators: Vec<Estimator>,
    /// Frames in the series the parameters were checked against.
    pub(crate) n_frames: usize,
    /// Largest lag.
    pub(crate) max_lag: usize,
    /// Nuisance regression.
    pub(crate) nuisance: NuisanceSpec,
    /// Minimum valid frames per region.
    pub(crate) min_frames: usize,
    /// Lags of the exponential fit.
    pub(crate) fit_lags: FitLags,
    /// Welch segment length as given (`None` = the shared rule, resolved per
    /// series; the length used is [`TimescaleResult::welch_segment_frames`](super::TimescaleResult::welch_segment_frames)).
    pub(crate) welch_segment: Option<usize>,
    /// Knee-fit band, Hz.
    pub(crate) knee_band_hz: (f64, f64),
    /// Bootstrap replicates.
    pub(crate) bootstrap: usize,
    /// Bootstrap block length, frames.
    pub(crate) block_frames: usize,
    /// Bootstrap seed.
    pub(crate) seed: u64,
    /// Bias correction.
    pub(crate) bias_correction: BiasCorrection,
    /// Worker threads.
    pub(crate) threads: Option<usize>,
}

impl ValidTimescaleParams {
    /// Repetition time, seconds.
    pub fn tr_s(&self) -> f64 {
        self.tr_s
    }
    /// Estimators, sorted, unique.
    pub fn estimators(&self) -> &[Estimator] {
        &self.estimators
    }
    /// Frames in the series the parameters were checked against.
    pub fn n_frames(&self) -> usize {
        self.n_frames
    }
    /// Largest lag of the autocorrelation.
    pub fn max_lag(&self) -> usize {
        self.max_lag
    }
    /// Nuisance regression.
    pub fn nuisance(&self) -> &NuisanceSpec {
        &self.nuisance
    }
    /// Minimum valid frames per region.
    pub fn min_frames(&self) -> usize {
        self.min_frames
    }
    /// Lags of the exponential fit.
    pub fn fit_lags(&self) -> &FitLags {
        &self.fit_lags
    }
    /// Welch segment length as given (`None`: the shared rule).
    pub fn welch_segment(&self) -> Option<usize> {
        self.welch_segment
    }
    /// Knee-fit band, Hz.
    pub fn knee_band_hz(&self) -> (f64, f64) {
        self.knee_band_hz
    }
    /// Bootstrap replicates and block length (frames).
    pub fn bootstrap(&self) -> (usize, usize) {
        (self.bootstrap, self.block_frames)
    }
    /// Bootstrap seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// Bias correction.
    pub fn bias_correction(&self) -> BiasCorrection {
        self.bias_correction
    }
    /// Worker threads (`None`: the caller's pool).
    pub fn threads(&self) -> Option<usize> {
        self.threads
    }

    /// Whether `e` is selected.
    pub fn has(&self, e: Estimator) -> bool {
        self.estimators.contains(&e)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_resolve_and_bad_values_are_named() {
        let v = TimescaleParams::new(0.72).check(1200).unwrap();
        assert_eq!((v.max_lag, v.min_frames, v.welch_segment, v.block_frames), (300, 600, None, 120));
        let mut w = TimescaleParams::new(2.0);
        w.welch_segment = Some(101);
        assert!(w.check(100).unwrap_err().to_string().contains("welch_segment = 101: expected"));
        assert!(TimescaleParams::new(2.0)
            .check(7)
            .unwrap_err()
            .to_string()
            .contains("welch_segment = (default"));
        for tr in [0.0, -2.0, f64::NAN, f64::INFINITY] {
            let e = TimescaleParams::new(tr).check(100).unwrap_err().to_string();
            assert!(e.starts_with("tr_s = "), "{e}");
        }
        let mut p = TimescaleParams::new(2.0);
        p.max_lag = Some(100);
        assert!(matches!(p.check(100), Err(TimescaleError::SeriesTooShort { .. })));
        p.max_lag = Some(10);
        p.fit_lags = FitLags::Range { first: 1, last: 2 };
        assert!(p.check(100).unwrap_err().to_string().starts_with("fit_lags = 1:2: expected"));
    }
}
