//! Welch power spectral density.

use super::TimescaleError;
use crate::param::ParamError;
use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// Welch (1967) power spectral density with a periodic Hann window,
/// segments of `segment` frames overlapping by half (`segment / 2`), each
/// segment demeaned ("constant" detrend), one-sided, density scaling:
///
/// $$P(f_j)=\frac{c_j}{S}\sum_{s=1}^{S}\frac{\lvert\sum_t w_t(x_{s,t}-\bar x_s)e^{-2\pi i jt/L}\rvert^2}{f_s\sum_t w_t^2},\qquad f_j=j f_s/L$$
///
/// with $w_t=\tfrac12-\tfrac12\cos(2\pi t/L)$, $f_s=1/\mathrm{TR}$ in Hz,
/// $c_j=2$ except at DC and (even $L$) the Nyquist bin. These are the
/// defaults of scipy `signal.welch` (window `hann`, `noverlap = nperseg // 2`,
/// `detrend='constant'`, `scaling='density'`, `average='mean'`).
///
/// With a frame mask, only segments whose every frame is valid are averaged
/// (a censored frame inside a segment would break its Fourier transform):
/// the segments are laid along each maximal run of valid frames from its
/// first frame, with the same step, as many as fit ([`segment_starts`]).
/// Without censoring there is one run and the segments are scipy's.
pub struct WelchPlan {
    segment: usize,
    fs_hz: f64,
    window: Vec<f64>,
    win_power: f64,
    r2c: Arc<dyn RealToComplex<f64>>,
    buf: Vec<f64>,
    spec: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
}

impl Clone for WelchPlan {
    fn clone(&self) -> Self {
        WelchPlan {
            segment: self.segment,
            fs_hz: self.fs_hz,
            window: self.window.clone(),
            win_power: self.win_power,
            r2c: Arc::clone(&self.r2c),
            buf: self.buf.clone(),
            spec: self.spec.clone(),
            scratch: self.scratch.clone(),
        }
    }
}

impl WelchPlan {
    /// A plan for segments of `segment` frames at sampling interval `tr_s` seconds.
    ///
    /// # Errors
    /// [`TimescaleError::Param`] when `segment < 8` (too few
    /// frequencies to fit a three-parameter spectrum) or `tr_s` is not positive.
    pub fn new(segment: usize, tr_s: f64) -> Result<Self, TimescaleError> {
        if segment < 8 {
            return Err(ParamError::new("welch_segment", segment, "at least 8 frames").into());
        }
        if !(tr_s > 0.0 && tr_s.is_finite()) {
            return Err(ParamError::new("tr_s", tr_s, "a positive, finite repetition time in seconds").into());
        }
        let window: Vec<f64> = (0..segment)
            .map(|t| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * t as f64 / segment as f64).cos())
            .collect();
        let win_power = window.iter().map(|w| w * w).sum();
        let r2c = RealFftPlanner::<f64>::new().plan_fft_forward(segment);
        let buf = r2c.make_input_vec();
        let spec = r2c.make_output_vec();
        let scratch = r2c.make_scratch_vec();
        Ok(WelchPlan { segment, fs_hz: 1.0 / tr_s, window, win_power, r2c, buf, spec, scratch })
    }

    /// Frequencies in Hz, `j * fs / L` for `j = 0..=L/2`.
    pub fn frequencies_hz(&self) -> Vec<f64> {
        (0..=self.segment / 2).map(|j| j as f64 * self.fs_hz / self.segment as f64).collect()
    }

    /// The density into `out` (length `L/2 + 1`); returns the number of segments
    /// averaged (0 means no segment was usable and `out` is NaN).
    ///
    /// # Panics
    /// On wrong buffer lengths (caller bug).
    pub fn density_into(&mut self, x: &[f64], valid: Option<&[bool]>, out: &mut [f64]) -> usize {
        let l = self.segment;
        assert_eq!(out.len(), l / 2 + 1);
        out.fill(0.0);
        let mut used = 0usize;
        for_each_segment(x.len(), valid, l, |start| {
            let seg = &x[start..start + l];
            let mean = seg.iter().sum::<f64>() / l as f64;
            for ((b, v), w) in self.buf.iter_mut().zip(seg).zip(&self.window) {
                *b = (v - mean) * w;
            }
            self.r2c
                .process_with_scratch(&mut self.buf, &mut self.spec, &mut self.scratch)
                .expect("buffer lengths fixed by the plan");
            for (o, c) in out.iter_mut().zip(&self.spec) {
                *o += c.norm_sqr();
            }
            used += 1;
        });
        if used == 0 {
            out.fill(f64::NAN);
            return 0;
        }
        let scale = 1.0 / (self.fs_hz * self.win_power * used as f64);
        let last = out.len() - 1;
        for (j, o) in out.iter_mut().enumerate() {
            let one_sided = if j == 0 || (l % 2 == 0 && j == last) { 1.0 } else { 2.0 };
            *o *= scale * one_sided;
        }
        used
    }
}

/// Call `f(start)` for every Welch segment of `segment` frames: along each
/// maximal run of valid frames (the whole series when `valid` is `None`),
/// starts at the run's first frame and every `segment − ⌊segment/2⌋` frames
/// after it while the segment fits in the run.
fn for_each_segment(n: usize, valid: Option<&[bool]>, segment: usize, mut f: impl FnMut(usize)) {
    let step = segment - segment / 2;
    let mut run_start = 0usize;
    while run_start < n {
        let run_end = match valid {
            None => n,
            Some(m) => {
                if !m[run_start] {
                    run_start += 1;
                    continue;
                }
                (run_start..n).find(|&t| !m[t]).unwrap_or(n)
            }
        };
        let mut s = run_start;
        while s + segment <= run_end {
            f(s);
            s += step;
        }
        run_start = run_end;
    }
}

/// First frames of the Welch segments of `segment` frames over a series of
/// `n` frames with frame mask `valid` (`None` = all valid), as used by
/// [`WelchPlan::density_into`].
pub fn segment_starts(n: usize, valid: Option<&[bool]>, segment: usize) -> Vec<usize> {
    let mut out = Vec::new();
    if segment > 0 {
        for_each_segment(n, valid, segment, |s| out.push(s));
    }
    out
}

/// Longest Welch segment, in frames, that the default rule allows.
pub const WELCH_SEGMENT_MAX: usize = 256;

/// Shortest Welch segment, in frames (fewer than 5 positive frequencies
/// cannot constrain the three-parameter knee model).
pub const WELCH_SEGMENT_MIN: usize = 8;

/// The Welch segment length used when none is given, shared by every
/// command (`hierax timescales`, the per-subject job):
///
/// $$L=\max\bigl\{\,L\le\min(256,n):\ \mathrm{covered}(L)\ge\tfrac12N_{\rm valid}\bigr\},$$
///
/// where covered(L) counts the valid frames inside at least one fully valid
/// segment of [`segment_starts`]; 8 when no length qualifies.
///
/// Reasoning. Without censoring this is $\min(256,n)$, scipy's default
/// `nperseg` together with its fall-back to the series length for shorter
/// series (scipy 1.14 `signal.welch`). Longer segments resolve lower
/// frequencies, $f_1=1/(L\,\mathrm{TR})$, and a knee is accepted only
/// inside the fitted band, so $L$ bounds the longest measurable timescale at
/// $L\,\mathrm{TR}/2\pi$: the rule keeps $L$ as long as it can. With
/// censoring, a segment must hold only valid frames, so a long $L$ may leave
/// few or no segments; the rule shortens $L$ until the segments cover at
/// least half of the valid frames, so that the spectrum describes most of
/// the data (the one-half is our choice, no source). The length therefore
/// depends on the censoring mask, and is reported with every result.
pub fn welch_segment_default(n_frames: usize, valid: Option<&[bool]>) -> usize {
    let cap = WELCH_SEGMENT_MAX.min(n_frames);
    let Some(mask) = valid.filter(|m| m.len() == n_frames && m.iter().any(|v| !v)) else {
        return cap.max(WELCH_SEGMENT_MIN);
    };
    // Maximal runs of valid frames.
    let mut runs = Vec::new();
    let mut len = 0usize;
    for &v in mask.iter().chain(std::iter::once(&false)) {
        if v {
            len += 1;
        } else if len > 0 {
            runs.push(len);
            len = 0;
        }
    }
    let n_valid: usize = runs.iter().sum();
    (WELCH_SEGMENT_MIN..=cap)
        .rev()
        .find(|&l| {
            let step = l - l / 2;
            let covered: usize = runs.iter().filter(|&&r| r >= l).map(|&r| l + (r - l) / step * step).sum();
            2 * covered >= n_valid
        })
        .unwrap_or(WELCH_SEGMENT_MIN)
}

/// Welch density of `x` (see [`WelchPlan`]); returns `(frequencies_hz, density)`.
///
/// # Errors
/// As [`WelchPlan::new`], and [`TimescaleError::SeriesTooShort`] when the
/// series is shorter than one segment.
pub fn welch_density(x: &[f64], tr_s: f64, segment: usize) -> Result<(Vec<f64>, Vec<f64>), TimescaleError> {
    let mut plan = WelchPlan::new(segment, tr_s)?;
    if x.len() < segment {
        return Err(TimescaleError::SeriesTooShort {
            n_frames: x.len(),
            n_valid: x.len(),
            need: format!("at least one Welch segment of {segment} frames"),
        });
    }
    let mut out = vec![0.0; segment / 2 + 1];
    plan.density_into(x, None, &mut out);
    Ok((plan.frequencies_hz(), out))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn segments_follow_valid_runs_and_match_scipy_without_censoring() {
        // Uncensored: scipy's grid 0, L-L/2, ... (signal.welch with noverlap = L//2).
        assert_eq!(segment_starts(100, None, 32), vec![0, 16, 32, 48, 64]);
        assert_eq!(segment_starts(100, Some(&[true; 100]), 32), vec![0, 16, 32, 48, 64]);
        // Frame 40 censored: runs 0..40 and 41..100.
        let mut m = vec![true; 100];
        m[40] = false;
        assert_eq!(segment_starts(100, Some(&m), 32), vec![0, 41, 57]);
        // Every start is fully valid, by construction and by a naive check.
        for s in segment_starts(100, Some(&m), 16) {
            assert!(m[s..s + 16].iter().all(|&v| v));
        }
    }

    #[test]
    fn default_segment_is_scipys_without_censoring_and_shrinks_with_it() {
        assert_eq!(welch_segment_default(1200, None), 256);
        assert_eq!(welch_segment_default(240, None), 240);
        assert_eq!(welch_segment_default(240, Some(&[true; 240])), 240);
        // One censored frame in the middle of 240: runs of 120 and 119. L = 120
        // covers 120 >= 239/2 frames; any L > 120 covers nothing.
        let mut m = vec![true; 240];
        m[120] = false;
        assert_eq!(welch_segment_default(240, Some(&m)), 120);
        // Every 10th frame censored: runs of 9; L = 9 covers everything, L = 10 nothing.
        let m: Vec<bool> = (0..240).map(|t| t % 10 != 9).collect();
        assert_eq!(welch_segment_default(240, Some(&m)), 9);
        // Runs too short for any segment: the minimum, and the estimator will
        // report too few points.
        let m: Vec<bool> = (0..240).map(|t| t % 4 != 3).collect();
        assert_eq!(welch_segment_default(240, Some(&m)), WELCH_SEGMENT_MIN);
    }

    #[test]
    fn white_noise_level_matches_parseval() {
        // Parseval: for one segment the density integrates (sum * df) to the
        // windowed mean square divided by the window's mean square.
        let x: Vec<f64> = (0..64).map(|t| ((t * 7919) % 13) as f64 - 6.0).collect();
        let (f, p) = welch_density(&x, 2.0, 64).unwrap();
        let df = f[1] - f[0];
        let plan = WelchPlan::new(64, 2.0).unwrap();
        let mean = x.iter().sum::<f64>() / 64.0;
        let energy: f64 = x.iter().zip(&plan.window).map(|(v, w)| ((v - mean) * w).powi(2)).sum();
        let integral: f64 = p.iter().sum::<f64>() * df;
        // One-sided sum counts each interior bin twice already; DC is 0 after demeaning.
        assert!((integral - energy / plan.win_power).abs() < 1e-9 * integral.abs());
    }
}
