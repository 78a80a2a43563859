//! Preprocessing before the autocorrelation: frame censoring and nuisance
//! regression (mean, Legendre polynomial trend, confound columns).
//!
//! Every regression is fitted on the valid (uncensored) frames only, so a
//! censored high-motion frame never pulls the fit; censored frames are then
//! ignored by the masked ACF.

use super::TimescaleError;
use crate::param::ParamError;
use serde::Serialize;

/// Frames to keep: framewise displacement at most `threshold_mm`, and the
/// `after` frames following each frame above it are censored too (Power et
/// al. 2012, NeuroImage, who censor the frames around a displacement spike
/// because its effect outlasts the frame).
///
/// Convention: the first frame has no predecessor, so its displacement may be
/// non-finite (BIDS writes `n/a`); it is then treated as 0 mm. A frame is
/// censored when `fd > threshold_mm` (strictly above).
///
/// # Errors
/// [`TimescaleError::Param`] when the threshold is not positive
/// and finite; [`TimescaleError::NonFiniteDisplacement`] for a non-finite
/// value after the first frame.
pub fn censor_from_displacement(
    fd_mm: &[f64],
    threshold_mm: f64,
    after: usize,
) -> Result<Vec<bool>, TimescaleError> {
    if !(threshold_mm > 0.0 && threshold_mm.is_finite()) {
        return Err(ParamError::new("fd_threshold_mm", threshold_mm, "a positive displacement in mm").into());
    }
    let mut valid = vec![true; fd_mm.len()];
    for (t, &d) in fd_mm.iter().enumerate() {
        let d = if t == 0 && !d.is_finite() { 0.0 } else { d };
        if !d.is_finite() {
            return Err(TimescaleError::NonFiniteDisplacement { frame: t + 1 });
        }
        if d > threshold_mm {
            let end = (t + after + 1).min(fd_mm.len());
            valid[t..end].fill(false);
        }
    }
    Ok(valid)
}

/// A nuisance regressor supplied by the user (one value per frame).
#[derive(Clone, Debug)]
pub struct Confound {
    /// Column name, for messages and provenance.
    pub name: String,
    /// One value per frame.
    pub values: Vec<f64>,
}

/// Which nuisance terms are removed.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize)]
pub struct NuisanceSpec {
    /// Subtract the mean over valid frames.
    pub demean: bool,
    /// Remove Legendre polynomials of degree `1..=order` in time.
    pub detrend_order: Option<usize>,
    /// Names of the confound columns regressed out.
    pub confounds: Vec<String>,
}

/// An orthonormal basis $Q$ (valid frames only) of the nuisance design; the
/// residual of a series is $x-QQ^\top x$ on the valid frames.
///
/// Regressors, in order: constant (when demeaning, and always when any other
/// term is present, so no trend or confound is fitted through the origin),
/// Legendre polynomials $P_1..P_p$ of $s=2t/(n-1)-1$ (better conditioned than
/// raw powers), then the confounds. The basis is built by modified
/// Gram–Schmidt with one re-orthogonalisation pass ("twice is enough",
/// Giraud et al. 2005), which equals the thin QR of the design.
#[derive(Clone, Debug)]
pub struct NuisanceModel {
    n: usize,
    basis: Vec<Vec<f64>>,
}

impl NuisanceModel {
    /// Build the basis on the frames where `valid` is true.
    ///
    /// # Errors
    /// [`TimescaleError::FrameCountMismatch`] for a confound of the wrong
    /// length, [`TimescaleError::NonFiniteConfound`] for a non-finite value on
    /// a valid frame, [`TimescaleError::RankDeficientDesign`] when a regressor
    /// is (relative 1e-8) a combination of the earlier ones,
    /// [`TimescaleError::SeriesTooShort`] when there are no more valid frames
    /// than regressors.
    pub fn new(valid: &[bool], spec: &NuisanceSpec, confounds: &[Confound]) -> Result<Self, TimescaleError> {
        let n = valid.len();
        let mut columns: Vec<(String, Vec<f64>)> = Vec::new();
        let any = spec.demean || spec.detrend_order.is_some_and(|p| p > 0) || !confounds.is_empty();
        if any {
            columns.push(("constant".into(), vec![1.0; n]));
        }
        if let Some(p) = spec.detrend_order {
            let s: Vec<f64> =
                (0..n).map(|t| if n > 1 { 2.0 * t as f64 / (n - 1) as f64 - 1.0 } else { 0.0 }).collect();
            let mut prev = vec![1.0; n];
            let mut cur = s.clone();
            for deg in 1..=p {
                if deg > 1 {
                    // Bonnet's recursion: (m+1) P_{m+1} = (2m+1) s P_m - m P_{m-1}, m = deg - 1.
                    let m = (deg - 1) as f64;
                    let next: Vec<f64> =
                        (0..n).map(|t| ((2.0 * m + 1.0) * s[t] * cur[t] - m * prev[t]) / (m + 1.0)).collect();
                    prev = std::mem::replace(&mut cur, next);
                }
                columns.push((format!("legendre_{deg}"), cur.clone()));
            }
        }
        for c in confounds {
            if c.values.len() != n {
                return Err(TimescaleError::FrameCountMismatch {
                    what: format!("confound `{}`", c.name),
                    expected: n,
                    found: c.values.len(),
                });
            }
            if let Some(t) = (0..n).find(|&t| valid[t] && !c.values[t].is_finite()) {
                return Err(TimescaleError::NonFiniteConfound { column: c.name.clone(), frame: t + 1 });
            }
            columns.push((c.name.clone(), c.values.clone()));
        }
        let n_valid = valid.iter().filter(|&&v| v).count();
        if !columns.is_empty() && n_valid <= columns.len() {
            return Err(TimescaleError::SeriesTooShort {
                n_frames: n,
                n_valid,
                need: format!("more valid frames than the {} nuisance regressors", columns.len()),
            });
        }
        let mut basis: Vec<Vec<f64>> = Vec::with_capacity(columns.len());
        for (name, mut v) in columns {
            for (t, x) in v.iter_mut().enumerate() {
                if !valid[t] {
                    *x = 0.0;
                }
            }
            let norm0 = dot(&v, &v).sqrt();
            for _pass in 0..2 {
                for q in &basis {
                    let c = dot(q, &v);
                    for (x, qv) in v.iter_mut().zip(q) {
                        *x -= c * qv;
                    }
                }
            }
            let norm = dot(&v, &v).sqrt();
            if norm.is_nan() || norm <= 1e-8 * norm0 {
                return Err(TimescaleError::RankDeficientDesign { column: name });
            }
            for x in &mut v {
                *x /= norm;
            }
            basis.push(v);
        }
        Ok(NuisanceModel { n, basis })
    }

    /// Number of regressors.
    pub fn n_regressors(&self) -> usize {
        self.basis.len()
    }

    /// Replace `x` by its residual $x-QQ^\top x$ on the valid frames (the
    /// basis is zero on censored frames, whose values must already be zero).
    ///
    /// # Panics
    /// If `x.len()` differs from the frame count (caller bug).
    pub fn residualise_in_place(&self, x: &mut [f64]) {
        assert_eq!(x.len(), self.n);
        for q in &self.basis {
            let c = dot(q, x);
            for (v, qv) in x.iter_mut().zip(q) {
                *v -= c * qv;
            }
        }
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn displacement_censors_spike_and_following_frames() {
        let fd = [f64::NAN, 0.1, 0.9, 0.1, 0.1, 0.6, 0.1];
        let v = censor_from_displacement(&fd, 0.5, 1).unwrap();
        assert_eq!(v, vec![true, true, false, false, true, false, false]);
        assert!(censor_from_displacement(&[0.1, f64::NAN], 0.5, 0).is_err());
        assert!(censor_from_displacement(&fd, f64::NAN, 0).is_err());
    }

    #[test]
    fn quadratic_trend_and_confound_are_removed_exactly() {
        // x = 3 + 2t - 0.01 t^2 + 4 c: every term lies in the design, so the
        // residual is round-off (ordinary least squares, any textbook).
        let n = 100;
        let c: Vec<f64> = (0..n).map(|t| ((t * 37) % 11) as f64).collect();
        let x0: Vec<f64> =
            (0..n).map(|t| 3.0 + 2.0 * t as f64 - 0.01 * (t * t) as f64 + 4.0 * c[t]).collect();
        let spec = NuisanceSpec { demean: true, detrend_order: Some(2), confounds: vec!["c".into()] };
        let conf = [Confound { name: "c".into(), values: c }];
        let m = NuisanceModel::new(&vec![true; n], &spec, &conf).unwrap();
        let mut x = x0.clone();
        m.residualise_in_place(&mut x);
        assert!(x.iter().all(|v| v.abs() < 1e-10), "{x:?}");
    }

    #[test]
    fn duplicate_confound_is_named() {
        let n = 20;
        let c: Vec<f64> = (0..n).map(|t| (t as f64).sin()).collect();
        let conf =
            [Confound { name: "a".into(), values: c.clone() }, Confound { name: "b".into(), values: c }];
        let spec =
            NuisanceSpec { demean: true, detrend_order: None, confounds: vec!["a".into(), "b".into()] };
        let e = NuisanceModel::new(&vec![true; n], &spec, &conf).unwrap_err();
        assert_eq!(e, TimescaleError::RankDeficientDesign { column: "b".into() });
    }
}
