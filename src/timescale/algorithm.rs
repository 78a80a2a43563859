//! The per-subject pipeline: censor, residualise, autocorrelate, estimate,
//! bootstrap, one region at a time, regions in parallel blocks.

use super::acf::AcfPlan;
use super::estimators::{ar1_timescale, marriott_pope_lag1, EstimateStatus, TauBounds};
use super::params::{BiasCorrection, Estimator, ValidTimescaleParams};
use super::preprocess::{Confound, NuisanceModel};
use super::registry::{self, EstimatorInput};
use super::welch::{welch_segment_default, WelchPlan};
use super::TimescaleError;
use crate::io::table::{Column, Table};
use crate::param::ParamError;
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

/// What computes a timescale column, and so whose status governs it: one
/// of the [`Estimator`]s, or the AR(1) columns of
/// [`BiasCorrection::Ar1`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum ColumnSource {
    /// A timescale estimator.
    Estimator(Estimator),
    /// The AR(1) timescale and its Marriott–Pope corrected form.
    Ar1,
}

/// The columns of [`ColumnSource::Ar1`]: the AR(1) timescale and its
/// Marriott–Pope corrected form, s.
const AR1_COLUMNS: [&str; 2] = ["ar1_tau_s", "ar1_tau_corrected_s"];

impl ColumnSource {
    /// The timescale columns (seconds) this source fills, in table order.
    pub fn columns(self) -> Vec<&'static str> {
        match self {
            ColumnSource::Estimator(e) => e.def().timescales.iter().map(|c| c.name).collect(),
            ColumnSource::Ar1 => AR1_COLUMNS.to_vec(),
        }
    }

    /// The prefix of its `_status` column (`ips`, `acw50`, ..., `ar1`).
    pub fn prefix(self) -> &'static str {
        match self {
            ColumnSource::Estimator(e) => e.prefix(),
            ColumnSource::Ar1 => "ar1",
        }
    }

    /// Every source, in table order: the estimators, then AR(1).
    pub const ALL: [ColumnSource; Estimator::COUNT + 1] = {
        let mut all = [ColumnSource::Ar1; Estimator::COUNT + 1];
        let mut i = 0;
        while i < Estimator::COUNT {
            all[i] = ColumnSource::Estimator(Estimator::ALL[i]);
            i += 1;
        }
        all
    };
}

/// The source of timescale column `column` (`ips_tau_s`, `acw50_interp_s`,
/// `exp_tau_s`, `knee_tau_s`, `ar1_tau_corrected_s`, ...), or `None` when it
/// is not a timescale column. Its status is the `_status` column with the
/// source's [`prefix`](ColumnSource::prefix).
pub fn column_source(column: &str) -> Option<ColumnSource> {
    ColumnSource::ALL.into_iter().find(|s| s.columns().contains(&column))
}

/// The [`Estimator`] behind timescale column `column` (`ips_tau_s` →
/// initial positive sum, `acw50_interp_s` → ACW-50, ...; each estimator's
/// columns are in its [`EstimatorDef`](super::registry::EstimatorDef)).
/// `None` for any other name, including the AR(1) columns (their source is
/// [`ColumnSource::Ar1`], see [`column_source`]). A consumer reads the
/// column with [`TimescaleResult::column_values`] (NaN unless the region and
/// this estimator are ok) and counts its flags with
/// [`TimescaleResult::n_flagged_for`]`(&[ColumnSource::Estimator(e)])`.
pub fn column_estimator(column: &str) -> Option<Estimator> {
    match column_source(column)? {
        ColumnSource::Estimator(e) => Some(e),
        ColumnSource::Ar1 => None,
    }
}

/// Every estimate for one region (NaN where not selected or failed; the
/// matching status says which). Fit parameters are kept even when their
/// status is [`EstimateStatus::ImplausibleFit`], for inspection;
/// [`RegionEstimates::value`] and every table report a timescale only when
/// its status is ok.
#[derive(Clone, Debug, PartialEq)]
pub struct RegionEstimates {
    /// Lag-1 autocorrelation.
    pub lag1: f64,
    /// Every estimator's columns (timescales, then details), estimators in
    /// table order, each from [`registry::offset`] of its position.
    values: [f64; registry::SLOTS],
    /// Status per estimator, in [`Estimator::ALL`] order.
    status: [EstimateStatus; Estimator::COUNT],
    /// AR(1) timescale from the lag-1 ACF, s (with `--bias-correction ar1`).
    pub ar1_tau_s: f64,
    /// The same after the Marriott–Pope correction, s.
    pub ar1_tau_corrected_s: f64,
    /// Status of the AR(1) columns.
    pub ar1_status: EstimateStatus,
}

/// Where a column's value lives: its slot among all estimators' values.
fn slot_of(column: &str) -> Option<usize> {
    Estimator::ALL.into_iter().find_map(|e| {
        let d = e.def();
        let k = d.timescales.iter().chain(d.details).position(|c| c.name == column)?;
        Some(registry::offset(e.index()) + k)
    })
}

impl RegionEstimates {
    fn empty(status: EstimateStatus) -> Self {
        RegionEstimates {
            lag1: f64::NAN,
            values: [f64::NAN; registry::SLOTS],
            status: [status; Estimator::COUNT],
            ar1_tau_s: f64::NAN,
            ar1_tau_corrected_s: f64::NAN,
            ar1_status: status,
        }
    }

    /// Status of estimator `e`.
    pub fn status_of(&self, e: Estimator) -> EstimateStatus {
        self.status[e.index()]
    }

    /// Status of a column source.
    pub fn status_of_source(&self, s: ColumnSource) -> EstimateStatus {
        match s {
            ColumnSource::Estimator(e) => self.status_of(e),
            ColumnSource::Ar1 => self.ar1_status,
        }
    }

    /// The computed value of column `column` (a timescale, or a fit
    /// parameter such as `exp_amplitude`), whatever its status (NaN for an
    /// unknown column or a fit that did not converge).
    pub fn raw_value(&self, column: &str) -> f64 {
        match column {
            "ar1_tau_s" => self.ar1_tau_s,
            "ar1_tau_corrected_s" => self.ar1_tau_corrected_s,
            _ => slot_of(column).map_or(f64::NAN, |i| self.values[i]),
        }
    }

    /// The value of timescale column `column` when its source's status is
    /// ok, NaN otherwise (so an implausible fit never enters a mean).
    pub fn value(&self, column: &str) -> f64 {
        match column_source(column) {
            Some(s) if self.status_of_source(s) == EstimateStatus::Ok => self.raw_value(column),
            _ => f64::NAN,
        }
    }

    /// The timescale-valued quantities of the selected estimators, in table
    /// order, as `(column, value)`, each NaN unless its status is ok. These
    /// are the quantities bootstrapped.
    pub fn primary(&self, p: &ValidTimescaleParams) -> Vec<(&'static str, f64)> {
        // Read by slot, not by column name: this runs for every bootstrap replicate of every region.
        let mut out = Vec::new();
        for &e in &p.estimators {
            let ok = self.status_of(e) == EstimateStatus::Ok;
            let at = registry::offset(e.index());
            for (k, c) in e.def().timescales.iter().enumerate() {
                out.push((c.name, if ok { self.values[at + k] } else { f64::NAN }));
            }
        }
        if p.bias_correction == BiasCorrection::Ar1 {
            let ok = self.ar1_status == EstimateStatus::Ok;
            for (c, v) in AR1_COLUMNS.into_iter().zip([self.ar1_tau_s, self.ar1_tau_corrected_s]) {
                out.push((c, if ok { v } else { f64::NAN }));
            }
        }
        out
    }
}

/// Serialised under the tables' names: `lag1`, every column, and each
/// `<prefix>_status`.
impl Serialize for RegionEstimates {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = s.serialize_map(None)?;
        m.serialize_entry("lag1", &self.lag1)?;
        for e in Estimator::ALL {
            let d = e.def();
            for c in d.timescales.iter().chain(d.details) {
                m.serialize_entry(c.name, &self.raw_value(c.name))?;
            }
            m.serialize_entry(&format!("{}_status", d.prefix), &self.status_of(e))?;
        }
        m.serialize_entry("ar1_tau_s", &self.ar1_tau_s)?;
        m.serialize_entry("ar1_tau_corrected_s", &self.ar1_tau_corrected_s)?;
        m.serialize_entry("ar1_status", &self.ar1_status)?;
        m.end()
    }
}

/// The column sources selected by `p`, in table order.
fn selected_sources(p: &ValidTimescaleParams) -> Vec<ColumnSource> {
    let mut out: Vec<ColumnSource> = p.estimators.iter().map(|&e| ColumnSource::Estimator(e)).collect();
    if p.bias_correction == BiasCorrection::Ar1 {
        out.push(ColumnSource::Ar1);
    }
    out
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
    /// Welch segment length used by the spectral knee, frames (`None` when
    /// the knee was not selected): the given one, or the shared rule
    /// [`welch_segment_default`] applied
    /// to this series' censoring mask.
    pub welch_segment_frames: Option<usize>,
}

impl TimescaleResult {
    /// The column sources selected by the parameters, in table order.
    pub fn selected_sources(&self) -> Vec<ColumnSource> {
        selected_sources(&self.params)
    }

    /// The timescale columns (seconds) of this result, in table order.
    pub fn timescale_columns(&self) -> Vec<&'static str> {
        self.selected_sources().into_iter().flat_map(|s| s.columns()).collect()
    }

    fn source_of(&self, column: &str) -> Result<ColumnSource, TimescaleError> {
        match column_source(column) {
            Some(s) if self.selected_sources().contains(&s) => Ok(s),
            _ => Err(TimescaleError::UnknownColumn {
                column: column.to_string(),
                expected: self.timescale_columns().join(", "),
            }),
        }
    }

    /// Per region, the value of timescale column `column` when the region
    /// and the column's estimator are both ok, NaN otherwise. This is the
    /// vector to average or correlate: a flagged estimate never enters it.
    ///
    /// # Errors
    /// [`TimescaleError::UnknownColumn`] when `column` is not one of
    /// [`timescale_columns`](Self::timescale_columns).
    pub fn column_values(&self, column: &str) -> Result<Vec<f64>, TimescaleError> {
        self.source_of(column)?;
        Ok(self
            .regions
            .iter()
            .map(|r| if r.status == RegionStatus::Ok { r.estimates.value(column) } else { f64::NAN })
            .collect())
    }

    /// Per region, the status governing timescale column `column`: the
    /// region status when it is not ok, else the estimator's status
    /// (`ok`, `implausible_fit`, ...).
    ///
    /// # Errors
    /// As [`column_values`](Self::column_values).
    pub fn column_statuses(&self, column: &str) -> Result<Vec<&'static str>, TimescaleError> {
        let s = self.source_of(column)?;
        Ok(self
            .regions
            .iter()
            .map(|r| {
                if r.status != RegionStatus::Ok {
                    r.status.as_str()
                } else {
                    r.estimates.status_of_source(s).as_str()
                }
            })
            .collect())
    }

    /// Number of regions whose region status or any selected estimator is not ok.
    pub fn n_flagged(&self) -> usize {
        self.n_flagged_for(&self.selected_sources())
    }

    /// Number of regions whose region status, or the status of one of
    /// `in_use`, is not ok (statuses of other estimators are ignored: a
    /// failed knee fit does not flag a region whose initial positive sum is
    /// used). Sources not selected are ignored.
    pub fn n_flagged_for(&self, in_use: &[ColumnSource]) -> usize {
        self.regions.iter().filter(|r| self.qc_string_for(r, in_use) != "ok").count()
    }

    /// `ok`, or the region status, or `;`-joined `estimator:status` items.
    pub fn qc_string(&self, r: &RegionResult) -> String {
        self.qc_string_for(r, &self.selected_sources())
    }

    /// As [`qc_string`](Self::qc_string), over the sources `in_use` only
    /// (and the bootstrap SEs of their columns).
    pub fn qc_string_for(&self, r: &RegionResult, in_use: &[ColumnSource]) -> String {
        if r.status != RegionStatus::Ok {
            return r.status.as_str().to_string();
        }
        let selected = self.selected_sources();
        let mut items: Vec<String> = selected
            .iter()
            .filter(|s| in_use.contains(s))
            .filter(|&&s| r.estimates.status_of_source(s) != EstimateStatus::Ok)
            .map(|&s| format!("{}:{}", s.prefix(), r.estimates.status_of_source(s).as_str()))
            .collect();
        let cols: Vec<&str> = selected.into_iter().flat_map(|s| s.columns()).collect();
        let undefined_se = cols
            .iter()
            .zip(&r.se)
            .any(|(c, se)| !se.is_finite() && column_source(c).is_some_and(|s| in_use.contains(&s)));
        if undefined_se {
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
    /// bootstrap) `_se_s` beside every timescale. A timescale cell is finite
    /// exactly when its status is ok; fit parameters (`exp_amplitude`,
    /// `knee_hz`, ...) of a converged but implausible fit are shown, so the
    /// reason for the flag can be read. The overall `status` covers every
    /// selected estimator.
    pub fn to_table(&self) -> Table {
        self.to_table_for(&self.selected_sources())
    }

    /// As [`to_table`](Self::to_table), with the overall `status` column
    /// covering only the sources `in_use` (every estimator keeps its own
    /// `_status` column).
    pub fn to_table_for(&self, in_use: &[ColumnSource]) -> Table {
        let rs = &self.regions;
        let f = |g: &dyn Fn(&RegionResult) -> f64| Column::F64(rs.iter().map(g).collect());
        let s = |g: &dyn Fn(&RegionResult) -> String| Column::Str(rs.iter().map(g).collect());
        let mut t = Table::new()
            .with("region", s(&|r| r.name.clone()))
            .with("status", s(&|r| self.qc_string_for(r, in_use)))
            .with("n_valid_frames", Column::I64(rs.iter().map(|r| r.n_valid_frames as i64).collect()))
            .with("lag1_acf", f(&|r| r.estimates.lag1));
        let names = self.timescale_columns();
        for src in self.selected_sources() {
            for col in src.columns() {
                t = t.with(col, f(&|r| r.estimates.value(col)));
                if self.params.bootstrap > 0 {
                    let i = names.iter().position(|n| *n == col).unwrap_or(0);
                    let stem = col.strip_suffix("_s").unwrap_or(col);
                    t = t.with(
                        &format!("{stem}_se_s"),
                        Column::F64(rs.iter().map(|r| r.se.get(i).copied().unwrap_or(f64::NAN)).collect()),
                    );
                }
            }
            if let ColumnSource::Estimator(e) = src {
                for c in e.def().details {
                    t = t.with(c.name, f(&|r| r.estimates.raw_value(c.name)));
                }
            }
            t = t.with(
                &format!("{}_status", src.prefix()),
                s(&move |r| r.estimates.status_of_source(src).as_str().to_string()),
            );
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
        return Err(ParamError::new(
            "region_names",
            names.len(),
            format!("one name per region ({n_regions})"),
        )
        .into());
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
    if n_valid <= params.max_lag && n > params.max_lag {
        return Err(TimescaleError::CensoredTooShort { n_frames: n, n_valid, max_lag: params.max_lag });
    }
    if n_valid <= params.max_lag {
        return Err(TimescaleError::SeriesTooShort {
            n_frames: n,
            n_valid,
            need: format!("more valid frames than the lag bound max_lag = {}", params.max_lag),
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
            confounds.iter().find(|c| &c.name == name).ok_or_else(|| {
                TimescaleError::Param(ParamError::new(
                    "confound_columns",
                    name,
                    "a column of the confounds table",
                ))
            })
        })
        .collect::<Result<_, _>>()?;
    let wanted: Vec<Confound> = wanted.into_iter().cloned().collect();
    let model = NuisanceModel::new(valid, &params.nuisance, &wanted)?;
    let censored = n_valid < n;

    let mut plan = AcfPlan::new(n, params.max_lag)?;
    let pairs = plan.pair_counts(valid);
    let knee = params.estimators().iter().any(|e| e.def().needs_spectrum);
    let welch_segment_frames = knee
        .then(|| params.welch_segment.unwrap_or_else(|| welch_segment_default(n, censored.then_some(valid))));
    let welch = match welch_segment_frames {
        Some(l) => Some(WelchPlan::new(l, params.tr_s)?),
        None => None,
    };
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
    Ok(TimescaleResult {
        params: params.clone(),
        n_frames: n,
        n_valid_frames: n_valid,
        regions,
        welch_segment_frames,
    })
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
        e.status = [EstimateStatus::NonFiniteInput; Estimator::COUNT];
        e.ar1_status = EstimateStatus::NonFiniteInput;
        return e;
    }
    e.lag1 = acf[1];
    let tr = p.tr_s;
    // pairs[0] is the number of valid frames of this (possibly resampled) series.
    let n_valid = pairs[0] as usize;
    let bounds = TauBounds::new(tr, n_valid);
    // The Welch spectrum once, for the estimators that read it.
    let spectrum_used = match ws.welch.as_mut() {
        Some(w) if p.estimators.iter().any(|e| e.def().needs_spectrum) => {
            w.density_into(x, if masked { Some(valid) } else { None }, &mut ws.psd)
        }
        _ => 0,
    };
    let input = EstimatorInput {
        acf,
        tr_s: tr,
        bounds,
        params: p,
        spectrum: (spectrum_used > 0).then_some((ws.freqs.as_slice(), ws.psd.as_slice())),
    };
    for &est in &p.estimators {
        let d = est.def();
        let at = registry::offset(est.index());
        let status = (d.estimate)(&input, &mut e.values[at..at + d.slots()]);
        e.status[est.index()] = status.err().unwrap_or(EstimateStatus::Ok);
    }
    if p.bias_correction == BiasCorrection::Ar1 {
        let r = ar1_timescale(e.lag1, tr).and_then(|t| {
            e.ar1_tau_s = t;
            ar1_timescale(marriott_pope_lag1(e.lag1, n_valid), tr)
        });
        e.ar1_status = match r {
            Ok(t) => {
                e.ar1_tau_corrected_s = t;
                // The same bounds as the fits: rho_1 within e^-10 of 0 or
                // 1/n of 1 gives a tau the series cannot support.
                if bounds.contains(e.ar1_tau_s) && bounds.contains(t) {
                    EstimateStatus::Ok
                } else {
                    EstimateStatus::ImplausibleFit
                }
            }
            Err(s) => s,
        };
    }
    e
}
