//! The per-subject pipeline: censor, residualise, autocorrelate, estimate,
//! bootstrap, one region at a time, regions in parallel blocks.

use super::acf::AcfPlan;
use super::estimators::{
    ar1_timescale, autocorrelation_window, fit_exp_decay, fit_spectral_knee, initial_positive_sum,
    marriott_pope_lag1, EstimateStatus, ExpFit, KneeFit,
};
use super::params::{BiasCorrection, Estimator, ValidTimescaleParams};
use super::preprocess::{Confound, NuisanceModel};
use super::welch::WelchPlan;
use super::TimescaleError;
use crate::io::table::{Column, Table};
use ndarray::ArrayView2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

/// Region-level quality control.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum RegionStatus {
    /// The region was analysed (individual estimators may still fail; see
    /// their own status).
    Ok,
    /// Constant on the valid frames, or entirely explained by the nuisance
    /// regressors: no autocorrelation exists.
    ConstantSignal,
    /// NaN or infinity on a valid (uncensored) frame.
    NonFinite,
    /// Fewer valid frames than the minimum.
    TooFewFrames,
}

impl RegionStatus {
    /// The name written to tables.
    pub fn as_str(self) -> &'static str {
        match self {
            RegionStatus::Ok => "ok",
            RegionStatus::ConstantSignal => "constant_signal",
            RegionStatus::NonFinite => "non_finite_values",
            RegionStatus::TooFewFrames => "too_few_frames",
        }
    }
}

/// Every estimate for one region (NaN where not selected or failed; the
/// matching status says which).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RegionEstimates {
    /// Lag-1 autocorrelation.
    pub lag1: f64,
    /// Initial-positive-sum timescale, s.
    pub ips_s: f64,
    /// ACW-50 at the first lag at or below 0.5, s.
    pub acw50_s: f64,
    /// ACW-50 interpolated between lags, s.
    pub acw50_interp_s: f64,
    /// ACW-0 at the first lag at or below 0, s.
    pub acw0_s: f64,
    /// ACW-0 interpolated, s.
    pub acw0_interp_s: f64,
    /// Exponential fit, when it succeeded.
    pub exp: Option<ExpFit>,
    /// Spectral knee fit, when it succeeded.
    pub knee: Option<KneeFit>,
    /// AR(1) timescale from the lag-1 ACF, s (with `--bias-correction ar1`).
    pub ar1_tau_s: f64,
    /// The same after the Marriott–Pope correction, s.
    pub ar1_tau_corrected_s: f64,
    /// Status per estimator, in [`Estimator::ALL`] order.
    pub status: [EstimateStatus; 5],
    /// Status of the AR(1) columns.
    pub ar1_status: EstimateStatus,
}

impl RegionEstimates {
    fn empty(status: EstimateStatus) -> Self {
        RegionEstimates {
            lag1: f64::NAN,
            ips_s: f64::NAN,
            acw50_s: f64::NAN,
            acw50_interp_s: f64::NAN,
            acw0_s: f64::NAN,
            acw0_interp_s: f64::NAN,
            exp: None,
            knee: None,
            ar1_tau_s: f64::NAN,
            ar1_tau_corrected_s: f64::NAN,
            status: [status; 5],
            ar1_status: status,
        }
    }

    /// Status of estimator `e`.
    pub fn status_of(&self, e: Estimator) -> EstimateStatus {
        self.status[Estimator::ALL.iter().position(|x| *x == e).unwrap_or(0)]
    }

    /// The timescale-valued quantities of the selected estimators, in table
    /// order, as `(column, value)`. These are the quantities bootstrapped.
    pub fn primary(&self, p: &ValidTimescaleParams) -> Vec<(&'static str, f64)> {
        let mut out = Vec::new();
        for &e in &p.estimators {
            match e {
                Estimator::InitialPositiveSum => out.push(("ips_tau_s", self.ips_s)),
                Estimator::Acw50 => {
                    out.push(("acw50_s", self.acw50_s));
                    out.push(("acw50_interp_s", self.acw50_interp_s));
                }
                Estimator::Acw0 => {
                    out.push(("acw0_s", self.acw0_s));
                    out.push(("acw0_interp_s", self.acw0_interp_s));
                }
                Estimator::ExpFit => out.push(("exp_tau_s", self.exp.map_or(f64::NAN, |f| f.tau_s))),
                Estimator::SpectralKnee => out.push(("knee_tau_s", self.knee.map_or(f64::NAN, |f| f.tau_s))),
            }
        }
        if p.bias_correction == BiasCorrection::Ar1 {
            out.push(("ar1_tau_s", self.ar1_tau_s));
            out.push(("ar1_tau_corrected_s", self.ar1_tau_corrected_s));
        }
        out
    }
}

/// One region's result.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RegionResult {
    /// Region name.
    pub name: String,
    /// Region-level QC.
    pub status: RegionStatus,
    /// Valid frames used.
    pub n_valid_frames: usize,
    /// The estimates.
    pub estimates: RegionEstimates,
    /// Bootstrap standard errors of [`RegionEstimates::primary`] (empty
    /// without bootstrap; NaN when fewer than two replicates were finite).
    pub se: Vec<f64>,
    /// Finite bootstrap replicates per primary quantity.
    pub se_replicates: Vec<usize>,
}

/// All regions of one subject.
#[derive(Clone, Debug, Serialize)]
pub struct TimescaleResult {
    /// The parameters used.
    pub params: ValidTimescaleParams,
    /// Frames in the series.
    pub n_frames: usize,
    /// Frames left after censoring.
    pub n_valid_frames: usize,
    /// One entry per region, in input order.
    pub regions: Vec<RegionResult>,
}

impl TimescaleResult {
    /// Number of regions whose region status or any selected estimator is not ok.
    pub fn n_flagged(&self) -> usize {
        self.regions.iter().filter(|r| self.qc_string(r) != "ok").count()
    }

    /// `ok`, or the region status, or `;`-joined `estimator:status` items.
    pub fn qc_string(&self, r: &RegionResult) -> String {
        if r.status != RegionStatus::Ok {
            return r.status.as_str().to_string();
        }
        let mut items: Vec<String> = self
            .params
            .estimators
            .iter()
            .filter(|&&e| r.estimates.status_of(e) != EstimateStatus::Ok)
            .map(|&e| format!("{}:{}", e.prefix(), r.estimates.status_of(e).as_str()))
            .collect();
        if self.params.bias_correction == BiasCorrection::Ar1 && r.estimates.ar1_status != EstimateStatus::Ok
        {
            items.push(format!("ar1:{}", r.estimates.ar1_status.as_str()));
        }
        if r.se.iter().any(|s| !s.is_finite()) {
            items.push("bootstrap:se_undefined".into());
        }
        if items.is_empty() {
            "ok".into()
        } else {
            items.join(";")
        }
    }

    /// One row per region: `region`, `status`, `n_valid_frames`, `lag1_acf`,
    /// then for each selected estimator its values, its `_status`, and (with
    /// bootstrap) `_se_s` beside every timescale. A NaN cell always comes
    /// with a non-`ok` status in the same row.
    pub fn to_table(&self) -> Table {
        let rs = &self.regions;
        let f = |g: &dyn Fn(&RegionResult) -> f64| Column::F64(rs.iter().map(g).collect());
        let s = |g: &dyn Fn(&RegionResult) -> String| Column::Str(rs.iter().map(g).collect());
        let mut t = Table::new()
            .with("region", s(&|r| r.name.clone()))
            .with("status", s(&|r| self.qc_string(r)))
            .with("n_valid_frames", Column::I64(rs.iter().map(|r| r.n_valid_frames as i64).collect()))
            .with("lag1_acf", f(&|r| r.estimates.lag1));
        let names: Vec<&'static str> = RegionEstimates::empty(EstimateStatus::Ok)
            .primary(&self.params)
            .into_iter()
            .map(|(n, _)| n)
            .collect();
        let se_col = |t: Table, name: &str| -> Table {
            if self.params.bootstrap == 0 {
                return t;
            }
            let i = names.iter().position(|n| *n == name).unwrap_or(0);
            let col = name.strip_suffix("_s").unwrap_or(name);
            t.with(
                &format!("{col}_se_s"),
                Column::F64(rs.iter().map(|r| r.se.get(i).copied().unwrap_or(f64::NAN)).collect()),
            )
        };
        for &e in &self.params.estimators {
            match e {
                Estimator::InitialPositiveSum => {
                    t = t.with("ips_tau_s", f(&|r| r.estimates.ips_s));
                    t = se_col(t, "ips_tau_s");
                }
                Estimator::Acw50 => {
                    t = t.with("acw50_s", f(&|r| r.estimates.acw50_s));
                    t = se_col(t, "acw50_s");
                    t = t.with("acw50_interp_s", f(&|r| r.estimates.acw50_interp_s));
                    t = se_col(t, "acw50_interp_s");
                }
                Estimator::Acw0 => {
                    t = t.with("acw0_s", f(&|r| r.estimates.acw0_s));
                    t = se_col(t, "acw0_s");
                    t = t.with("acw0_interp_s", f(&|r| r.estimates.acw0_interp_s));
                    t = se_col(t, "acw0_interp_s");
                }
                Estimator::ExpFit => {
                    let x = |g: fn(&ExpFit) -> f64| {
                        f(&move |r: &RegionResult| r.estimates.exp.as_ref().map_or(f64::NAN, g))
                    };
                    t = t.with("exp_tau_s", x(|e| e.tau_s));
                    t = se_col(t, "exp_tau_s");
                    t = t.with("exp_amplitude", x(|e| e.amplitude)).with("exp_offset", x(|e| e.offset));
                    t = t
                        .with("exp_first_lag", x(|e| e.lags.0 as f64))
                        .with("exp_last_lag", x(|e| e.lags.1 as f64));
                }
                Estimator::SpectralKnee => {
                    let x = |g: fn(&KneeFit) -> f64| {
                        f(&move |r: &RegionResult| r.estimates.knee.as_ref().map_or(f64::NAN, g))
                    };
                    t = t.with("knee_tau_s", x(|k| k.tau_s));
                    t = se_col(t, "knee_tau_s");
                    t = t.with("knee_hz", x(|k| k.knee_hz)).with("knee_exponent", x(|k| k.exponent));
                }
            }
            t = t.with(
                &format!("{}_status", e.prefix()),
                s(&move |r| r.estimates.status_of(e).as_str().to_string()),
            );
        }
        if self.params.bias_correction == BiasCorrection::Ar1 {
            t = t.with("ar1_tau_s", f(&|r| r.estimates.ar1_tau_s));
            t = se_col(t, "ar1_tau_s");
            t = t.with("ar1_tau_corrected_s", f(&|r| r.estimates.ar1_tau_corrected_s));
            t = se_col(t, "ar1_tau_corrected_s");
            t = t.with("ar1_status", s(&|r| r.estimates.ar1_status.as_str().to_string()));
        }
        t
    }
}

/// Per-thread workspace: FFT plans and buffers sized once.
#[derive(Clone)]
struct Workspace {
    acf_plan: AcfPlan,
    welch: Option<WelchPlan>,
    x: Vec<f64>,
    xb: Vec<f64>,
    vb: Vec<bool>,
    acf: Vec<f64>,
    psd: Vec<f64>,
    freqs: Vec<f64>,
}

/// Estimate the timescales of every region of one subject.
///
/// `series` is frames × regions; `valid` the frame mask (true = keep;
/// `None` = keep all); `confounds` the nuisance columns named in
/// `params.nuisance`. For each region: values on censored frames are ignored
/// (they may be NaN); the nuisance terms are regressed out on the valid
/// frames; the ACF (masked when any frame is censored, see
/// [`AcfPlan::masked_acf_into`]) feeds the ACF estimators; the Welch spectrum
/// of the residual (fully valid segments only) feeds the knee fit.
///
/// Uncertainty (`bootstrap > 0`): a moving-block bootstrap over frames
/// (Künsch 1989, Ann Stat): each replicate concatenates ⌈n/ℓ⌉ blocks of ℓ
/// consecutive frames of the residual series and its mask, from uniformly
/// drawn starts, cut to n frames; the same block draws serve every region, so
/// the seed alone fixes them. The standard error is the sample standard
/// deviation (n−1) of the finite replicate values. It reflects sampling
/// variability of a stationary series whose dependence is shorter than ℓ;
/// it does not include the bias of the estimator (the bootstrap distribution
/// is centred on the biased estimate), and pairs that straddle a block join
/// are decorrelated, so it is biased low: on AR(1) (φ = 0.8, 1200 frames) the
/// mean SE was about 0.83–0.90 of the true spread with the default ⌈n/10⌉
/// blocks (see the integration test). Treat it as a lower-side approximation.
///
/// # Errors
/// [`TimescaleError`] for anything that stops the whole subject: a mask or
/// confound of the wrong length, a valid frame that is non-finite in every
/// region, a rank-deficient nuisance design, a lag bound not below the
/// series length. Per-region problems are [`RegionStatus`] values instead.
pub fn estimate_timescales(
    series: ArrayView2<'_, f64>,
    names: &[String],
    valid: Option<&[bool]>,
    confounds: &[Confound],
    params: &ValidTimescaleParams,
) -> Result<TimescaleResult, TimescaleError> {
    let (n, n_regions) = series.dim();
    if n != params.n_frames {
        return Err(TimescaleError::FrameCountMismatch {
            what: "parameters (checked for another series)".into(),
            expected: n,
            found: params.n_frames,
        });
    }
    if names.len() != n_regions {
        return Err(TimescaleError::InvalidParameter {
            name: "region names",
            value: names.len().to_string(),
            expected: format!("one name per region ({n_regions})"),
        });
    }
    let all_valid = vec![true; n];
    let valid: &[bool] = match valid {
        Some(v) if v.len() != n => {
            return Err(TimescaleError::FrameCountMismatch {
                what: "censoring mask".into(),
                expected: n,
                found: v.len(),
            })
        }
        Some(v) => v,
        None => &all_valid,
    };
    let n_valid = valid.iter().filter(|&&v| v).count();
    if n_valid <= params.max_lag {
        return Err(TimescaleError::SeriesTooShort {
            n_frames: n,
            n_valid,
            need: format!("more valid frames than the lag bound --max-lag {}", params.max_lag),
        });
    }
    if n_regions > 0 {
        for t in (0..n).filter(|&t| valid[t]) {
            if series.row(t).iter().all(|v| !v.is_finite()) {
                return Err(TimescaleError::NonFiniteFrame { frame: t + 1 });
            }
        }
    }
    let wanted: Vec<&Confound> = params
        .nuisance
        .confounds
        .iter()
        .map(|name| {
            confounds.iter().find(|c| &c.name == name).ok_or_else(|| TimescaleError::InvalidParameter {
                name: "confound-columns",
                value: name.clone(),
                expected: "a column of the confounds table".into(),
            })
        })
        .collect::<Result<_, _>>()?;
    let wanted: Vec<Confound> = wanted.into_iter().cloned().collect();
    let model = NuisanceModel::new(valid, &params.nuisance, &wanted)?;
    let censored = n_valid < n;

    let mut plan = AcfPlan::new(n, params.max_lag)?;
    let pairs = plan.pair_counts(valid);
    let knee = params.has(Estimator::SpectralKnee);
    let welch = if knee { Some(WelchPlan::new(params.welch_segment, params.tr_s)?) } else { None };
    let freqs = welch.as_ref().map(|w| w.frequencies_hz()).unwrap_or_default();
    let ws0 = Workspace {
        acf_plan: plan.clone(),
        xb: vec![0.0; n],
        vb: vec![false; n],
        x: vec![0.0; n],
        acf: vec![0.0; params.max_lag + 1],
        psd: vec![0.0; freqs.len()],
        freqs,
        welch,
    };

    // Bootstrap frame indices and their pair counts, shared by all regions.
    let boot: Vec<(Vec<usize>, Vec<bool>, Vec<f64>)> = if params.bootstrap > 0 {
        let mut rng = ChaCha8Rng::seed_from_u64(params.seed);
        let l = params.block_frames;
        (0..params.bootstrap)
            .map(|_| {
                let mut idx = Vec::with_capacity(n + l);
                while idx.len() < n {
                    let s = rng.random_range(0..=n - l);
                    idx.extend(s..s + l);
                }
                idx.truncate(n);
                let vb: Vec<bool> = idx.iter().map(|&i| valid[i]).collect();
                let pb = plan.pair_counts(&vb);
                (idx, vb, pb)
            })
            .collect()
    } else {
        Vec::new()
    };

    // Regions are processed in blocks of adjacent columns: gathering a block
    // row by row reads contiguous memory of a frames x regions (row-major)
    // matrix, where a single column would touch one cache line per frame.
    let block = 64usize;
    let run = || -> Vec<RegionResult> {
        (0..n_regions.div_ceil(block))
            .into_par_iter()
            .map_init(
                || (ws0.clone(), vec![0.0; block * n]),
                |(ws, buf), b| {
                    let lo = b * block;
                    let hi = (lo + block).min(n_regions);
                    let sub = series.slice_axis(ndarray::Axis(1), ndarray::Slice::from(lo..hi));
                    for (t, row) in sub.rows().into_iter().enumerate() {
                        for (c, v) in row.iter().enumerate() {
                            buf[c * n + t] = *v;
                        }
                    }
                    (lo..hi)
                        .map(|j| {
                            let c = j - lo;
                            let col = &buf[c * n..(c + 1) * n];
                            region(
                                ws, col, &names[j], valid, n_valid, censored, &pairs, &model, &boot, params,
                            )
                        })
                        .collect::<Vec<_>>()
                },
            )
            .flatten()
            .collect()
    };
    let regions = match params.threads {
        Some(t) => match rayon::ThreadPoolBuilder::new().num_threads(t).build() {
            Ok(pool) => pool.install(run),
            Err(_) => run(),
        },
        None => run(),
    };
    Ok(TimescaleResult { params: params.clone(), n_frames: n, n_valid_frames: n_valid, regions })
}

#[allow(clippy::too_many_arguments)]
fn region(
    ws: &mut Workspace,
    col: &[f64],
    name: &str,
    valid: &[bool],
    n_valid: usize,
    censored: bool,
    pairs: &[f64],
    model: &NuisanceModel,
    boot: &[(Vec<usize>, Vec<bool>, Vec<f64>)],
    p: &ValidTimescaleParams,
) -> RegionResult {
    let fail = |status: RegionStatus| RegionResult {
        name: name.to_string(),
        status,
        n_valid_frames: n_valid,
        estimates: RegionEstimates::empty(EstimateStatus::NotComputed),
        se: vec![
            f64::NAN;
            if p.bootstrap > 0 { RegionEstimates::empty(EstimateStatus::Ok).primary(p).len() } else { 0 }
        ],
        se_replicates: Vec::new(),
    };
    let mut finite = true;
    let mut first: Option<f64> = None;
    let mut constant = true;
    for ((x, &v), &m) in ws.x.iter_mut().zip(col).zip(valid) {
        if m {
            finite &= v.is_finite();
            match first {
                None => first = Some(v),
                Some(f) => constant &= v == f,
            }
            *x = v;
        } else {
            *x = 0.0;
        }
    }
    if !finite {
        return fail(RegionStatus::NonFinite);
    }
    if n_valid < p.min_frames {
        return fail(RegionStatus::TooFewFrames);
    }
    if constant {
        return fail(RegionStatus::ConstantSignal);
    }
    let mean = ws.x.iter().sum::<f64>() / n_valid as f64;
    let raw_ss: f64 = ws.x.iter().zip(valid).filter(|(_, &m)| m).map(|(x, _)| (x - mean).powi(2)).sum();
    model.residualise_in_place(&mut ws.x);
    let res_ss: f64 = ws.x.iter().map(|x| x * x).sum();
    // A residual at round-off level relative to the signal means the nuisance
    // terms explain the region entirely (relative 1e-20 in sums of squares,
    // i.e. 1e-10 in amplitude, far above f64 round-off of a projection).
    if res_ss.is_nan() || res_ss <= 1e-20 * raw_ss {
        return fail(RegionStatus::ConstantSignal);
    }
    let x = std::mem::take(&mut ws.x);
    let estimates = estimate_one(ws, &x, valid, censored, pairs, p);
    let mut se = Vec::new();
    let mut se_replicates = Vec::new();
    if !boot.is_empty() {
        let k = estimates.primary(p).len();
        let mut sums = vec![(0usize, 0.0f64, 0.0f64); k];
        let mut xb = std::mem::take(&mut ws.xb);
        let mut vb = std::mem::take(&mut ws.vb);
        // Welford's running mean and variance per quantity.
        for (idx, vmask, pb) in boot {
            for (t, &i) in idx.iter().enumerate() {
                xb[t] = x[i];
                vb[t] = vmask[t];
            }
            let e = estimate_one(ws, &xb, &vb, true, pb, p);
            for (acc, (_, v)) in sums.iter_mut().zip(e.primary(p)) {
                if v.is_finite() {
                    acc.0 += 1;
                    let d = v - acc.1;
                    acc.1 += d / acc.0 as f64;
                    acc.2 += d * (v - acc.1);
                }
            }
        }
        ws.xb = xb;
        ws.vb = vb;
        for (c, _, m2) in sums {
            se.push(if c >= 2 { (m2 / (c - 1) as f64).sqrt() } else { f64::NAN });
            se_replicates.push(c);
        }
    }
    ws.x = x;
    RegionResult {
        name: name.to_string(),
        status: RegionStatus::Ok,
        n_valid_frames: n_valid,
        estimates,
        se,
        se_replicates,
    }
}

/// All selected estimators from one residual series.
fn estimate_one(
    ws: &mut Workspace,
    x: &[f64],
    valid: &[bool],
    masked: bool,
    pairs: &[f64],
    p: &ValidTimescaleParams,
) -> RegionEstimates {
    let mut e = RegionEstimates::empty(EstimateStatus::NotComputed);
    let c0 = if masked {
        ws.acf_plan.masked_acf_into(x, valid, pairs, &mut ws.acf)
    } else {
        ws.acf_plan.acf_into(x, &mut ws.acf)
    };
    let acf = &ws.acf;
    if c0.is_nan() || c0 <= 0.0 {
        e.status = [EstimateStatus::NonFiniteInput; 5];
        e.ar1_status = EstimateStatus::NonFiniteInput;
        return e;
    }
    e.lag1 = acf[1];
    let tr = p.tr_s;
    let set = |e: &mut RegionEstimates, est: Estimator, s: EstimateStatus| {
        let i = Estimator::ALL.iter().position(|x| *x == est).unwrap_or(0);
        e.status[i] = s;
    };
    let mut acw50_interp = f64::NAN;
    for &est in &p.estimators {
        let status = match est {
            Estimator::InitialPositiveSum => initial_positive_sum(acf, tr).map(|v| e.ips_s = v),
            Estimator::Acw50 => autocorrelation_window(acf, 0.5, tr).map(|(a, b)| {
                e.acw50_s = a;
                e.acw50_interp_s = b;
                acw50_interp = b;
            }),
            Estimator::Acw0 => autocorrelation_window(acf, 0.0, tr).map(|(a, b)| {
                e.acw0_s = a;
                e.acw0_interp_s = b;
            }),
            Estimator::ExpFit => {
                // Start τ from the interpolated half-decay lag (exact for a pure
                // exponential: ρ = 1/2 at τ ln 2).
                let start = if acw50_interp.is_finite() {
                    acw50_interp
                } else {
                    autocorrelation_window(acf, 0.5, tr).map(|v| v.1).unwrap_or(tr)
                } / std::f64::consts::LN_2;
                fit_exp_decay(acf, tr, p.fit_lags, start).map(|f| e.exp = Some(f))
            }
            Estimator::SpectralKnee => {
                let used = match ws.welch.as_mut() {
                    Some(w) => w.density_into(x, if masked { Some(valid) } else { None }, &mut ws.psd),
                    None => 0,
                };
                if used == 0 {
                    Err(EstimateStatus::TooFewPoints)
                } else {
                    fit_spectral_knee(&ws.freqs, &ws.psd, p.knee_band_hz).map(|f| e.knee = Some(f))
                }
            }
        };
        set(&mut e, est, status.err().unwrap_or(EstimateStatus::Ok));
    }
    if p.bias_correction == BiasCorrection::Ar1 {
        let n_valid = pairs[0] as usize;
        let r = ar1_timescale(e.lag1, tr).and_then(|t| {
            e.ar1_tau_s = t;
            ar1_timescale(marriott_pope_lag1(e.lag1, n_valid), tr)
        });
        match r {
            Ok(t) => {
                e.ar1_tau_corrected_s = t;
                e.ar1_status = EstimateStatus::Ok;
            }
            Err(s) => e.ar1_status = s,
        }
    }
    e
}
