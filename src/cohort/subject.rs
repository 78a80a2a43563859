//! The whole per-subject job: timescales, states, control energies, the
//! pair table and its summaries, null models and their p-values, written as
//! one HDF5 file and tidy CSV tables.
//!
//! Steps, each delegated to its module:
//! 1. read and validate the connectome, series, hierarchy map and confounds
//!    (`io::validate`), checking that region counts and names agree;
//! 2. censor frames by framewise displacement and regress confounds, then
//!    estimate each region's intrinsic timescale (`timescale`);
//! 3. rank regions along the map into k equal-count states (`hierarchy`);
//! 4. compute the k × k minimum-energy matrix and node metrics (`control`);
//! 5. build the pair table and per-subject summaries (`link`);
//! 6. recompute the summaries on rewired networks (`stats::nulls`) and, when
//!    asked, on surrogate hierarchy maps (spins, `hierarchy::spin`, or
//!    variogram-matched maps, `hierarchy::variogram`),
//!    and turn them into permutation p-values with Benjamini–Hochberg FDR
//!    across the family of tests (`stats::inference`).
//!
//! Outputs are assembled in a hidden temporary folder and renamed into place
//! when complete, so a failed subject leaves nothing behind.

use super::CohortError;
use crate::control::{self, energy_matrix, node_metrics, Par, System, SystemParams};
use crate::hierarchy::{
    build_states, spin_surrogates, variogram_surrogates, SphereLayout, SpinParams, States, StatesParams,
    VariogramModel, VariogramParams,
};
use crate::io::hdf5::{self as h5, AttrValue, Group};
use crate::io::provenance::{InputRecord, Provenance};
use crate::io::table::{Column, Table};
use crate::io::validate::{self, ConnectomeRules, Orientation};
use crate::io::{read_array, InputSpec, IoError};
use crate::link::{self, PairTable, SubjectSummary};
use crate::stats::inference::{benjamini_hochberg, permutation_p_value, Alternative};
use crate::stats::nulls::{degree_preserving, geometry_preserving, strength_preserving, RewireInfo};
use crate::timescale::{
    censor_from_displacement, estimate_timescales, Confound, NuisanceSpec, TimescaleParams, TimescaleResult,
};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Which network null model to use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum NullModel {
    /// Maslov–Sneppen degree-preserving swaps (default).
    #[default]
    Degree,
    /// Degree-preserving swaps with strength-matched weights.
    Strength,
    /// Degree- and edge-length-preserving swaps (needs distances).
    Geometry,
}

/// How surrogate hierarchy maps are made for map nulls.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum MapNullMethod {
    /// Spin permutations of parcel centroids on the sphere (default; needs sphere coordinates).
    #[default]
    Spin,
    /// Variogram-matched surrogates (Burt et al. 2020; needs a distance matrix).
    Variogram,
}

impl MapNullMethod {
    /// Short name used in test labels.
    pub fn label(self) -> &'static str {
        match self {
            MapNullMethod::Spin => "spun",
            MapNullMethod::Variogram => "variogram-matched",
        }
    }
}

/// The inputs of one subject.
#[derive(Clone, Debug, Serialize)]
pub struct SubjectInputs {
    /// `sub-<label>` or any name used for output files.
    pub subject: String,
    /// Structural connectome.
    pub connectome: InputSpec,
    /// Resting-state series.
    pub series: InputSpec,
    /// Hierarchy map, one value per region.
    pub map: InputSpec,
    /// Confounds table (TSV) with `framewise_displacement`, if any.
    pub confounds: Option<InputSpec>,
    /// Region-to-region distances for geometry-preserving nulls, if any.
    pub distances: Option<InputSpec>,
    /// Parcel sphere coordinates (n × 3) for spin nulls of the map, if any.
    pub sphere: Option<InputSpec>,
    /// Hemisphere of each parcel (0 = left, 1 = right), with `sphere`.
    pub hemisphere: Option<InputSpec>,
    /// Covariates carried into the outputs (`age`, `sex`, ...).
    pub covariates: BTreeMap<String, String>,
}

/// Every parameter of the per-subject job. [`SubjectConfig::new`] lists the defaults.
#[derive(Clone, Debug, Serialize)]
pub struct SubjectConfig {
    /// Repetition time in seconds.
    pub tr_s: f64,
    /// Series layout.
    pub orientation: Orientation,
    /// Whether the connectome is directed.
    pub directed: bool,
    /// Number of states along the hierarchy.
    pub bins: usize,
    /// Rank regions by descending map value instead of ascending.
    pub descending: bool,
    /// The timescale column that enters the link (see the timescales table).
    pub timescale_column: String,
    /// Censor frames with framewise displacement above this (mm).
    pub fd_threshold_mm: Option<f64>,
    /// Also censor this many frames after each one above the threshold.
    pub censor_after: usize,
    /// Confound columns regressed out of the series.
    pub confound_columns: Vec<String>,
    /// Polynomial detrending order.
    pub detrend_order: Option<usize>,
    /// Welch segment length (frames) of the spectral-knee estimator.
    pub welch_segment: Option<usize>,
    /// The linear system.
    pub system: SystemParams,
    /// Number of rewired networks (0 = none).
    pub network_nulls: usize,
    /// Which rewiring.
    pub null_model: NullModel,
    /// Swaps attempted per edge.
    pub swaps_per_edge: usize,
    /// Edge-length bins of the geometry-preserving model.
    pub length_bins: usize,
    /// Number of surrogate hierarchy maps (0 = none).
    pub map_nulls: usize,
    /// How the surrogate maps are made.
    pub map_null_method: MapNullMethod,
    /// False discovery rate at which the family of null tests is read.
    pub fdr_alpha: f64,
    /// Seed of every random draw of the job.
    pub seed: u64,
}

impl SubjectConfig {
    /// Defaults for repetition time `tr_s`: BIDS orientation (settled by the
    /// region count), undirected, 10 states, ascending, the
    /// initial-positive-sum timescale (`ips_tau_s`, Watanabe et al. 2019),
    /// censoring at FD > 0.5 mm with no extra frames (Power et al. 2012 used
    /// 0.5 mm), no confound regression, no detrending, Welch segments of 32
    /// frames for the spectral knee (our choice: short enough that several
    /// fully valid segments survive censoring of a few hundred frames, which
    /// the default of the timescale module, min(256, n), would not), the default control
    /// system (continuous, T = 1, c = 1, B = I), no nulls, 10 swaps per edge,
    /// 10 length bins, FDR α = 0.05, seed 0.
    pub fn new(tr_s: f64) -> Self {
        SubjectConfig {
            tr_s,
            orientation: Orientation::Auto,
            directed: false,
            bins: 10,
            descending: false,
            timescale_column: "ips_tau_s".into(),
            fd_threshold_mm: Some(0.5),
            censor_after: 0,
            confound_columns: Vec::new(),
            detrend_order: None,
            welch_segment: Some(32),
            system: SystemParams::new(),
            network_nulls: 0,
            null_model: NullModel::Degree,
            swaps_per_edge: 10,
            length_bins: 10,
            map_nulls: 0,
            map_null_method: MapNullMethod::Spin,
            fdr_alpha: 0.05,
            seed: 0,
        }
    }
}

/// One null-model test of a subject.
#[derive(Clone, Debug, Serialize)]
pub struct NullTest {
    /// What is tested, e.g. `bottom_up_minus_top_down vs network nulls`.
    pub name: String,
    /// The observed statistic.
    pub observed: f64,
    /// Null statistics used (finite ones).
    pub n_null: usize,
    /// Mean of the null statistics.
    pub null_mean: f64,
    /// Two-sided permutation p-value (Phipson & Smyth 2010).
    pub p_value: f64,
    /// Benjamini–Hochberg adjusted p-value across this subject's tests.
    pub p_fdr: f64,
}

/// What the job produced for one subject.
#[derive(Clone, Debug, Serialize)]
pub struct SubjectReport {
    /// Subject name.
    pub subject: String,
    /// Regions and frames.
    pub n_regions: usize,
    /// Frames in the series.
    pub n_frames: usize,
    /// Frames left after censoring.
    pub n_valid_frames: usize,
    /// Regions whose timescale QC flagged a problem.
    pub n_timescale_flagged: usize,
    /// Per-state mean timescale (s) of the chosen column.
    pub state_timescale_s: Vec<f64>,
    /// Spearman correlation of regional timescale with the hierarchy map.
    pub timescale_vs_hierarchy_spearman: Option<f64>,
    /// The link summaries.
    pub summary: SubjectSummary,
    /// Minimum-energy matrix, `energy[i][j]` from state i to state j.
    pub energy: Vec<Vec<f64>>,
    /// Numerical quality of the energies.
    pub gramian_condition: f64,
    /// Largest terminal-state error over pairs.
    pub terminal_error_max: f64,
    /// Null-model tests.
    pub tests: Vec<NullTest>,
    /// Warnings and notes a user should read.
    pub notes: Vec<String>,
    /// Covariates from the inputs.
    pub covariates: BTreeMap<String, String>,
    /// The folder written.
    pub output: PathBuf,
}

fn invalid(what: &str, msg: impl Into<String>) -> CohortError {
    CohortError::Step { step: what.to_string(), message: msg.into() }
}

/// Read a confounds table: the displacement column (if censoring) and the
/// named confound columns. Finiteness is checked by the timescale module on
/// the frames it keeps.
fn read_confounds(
    spec: &InputSpec,
    n_frames: usize,
    columns: &[String],
    want_fd: bool,
) -> Result<(Option<Vec<f64>>, Vec<Confound>), CohortError> {
    let la = read_array(spec)?;
    let mut names: Vec<&str> = columns.iter().map(String::as_str).collect();
    if want_fd {
        names.push("framewise_displacement");
    }
    let mut values = validate::frame_columns(&la, n_frames, &names)?;
    let fd = if want_fd { values.pop() } else { None };
    let confounds =
        columns.iter().zip(values).map(|(c, v)| Confound { name: c.clone(), values: v }).collect();
    Ok((fd, confounds))
}

/// Statistics recomputed on every null.
fn null_statistics(s: &SubjectSummary) -> [f64; 2] {
    [s.bottom_up_minus_top_down, s.asymmetry_vs_distance_line.slope]
}

/// Energies and summary on a given network and states; `None` when the null
/// network is unusable (e.g. a rewiring left a node without edges).
fn summarise_network(
    w: &Array2<f64>,
    directed: bool,
    system: &control::ValidSystemParams,
    states: &Array2<f64>,
    state_tau: Option<&[f64]>,
) -> Option<SubjectSummary> {
    let sys = System::new(w.view(), directed, system, Par::Seq).ok()?;
    let (e, _) = energy_matrix(&sys, states.view()).ok()?;
    let table = link::pair_table(&e, state_tau).ok()?;
    link::summarise(&table).ok()
}

fn rewire(
    w: &Array2<f64>,
    dist: Option<&Array2<f64>>,
    cfg: &SubjectConfig,
    rng: &mut ChaCha20Rng,
) -> Result<(Array2<f64>, RewireInfo), crate::stats::StatsError> {
    match (cfg.null_model, dist) {
        (NullModel::Degree, _) => degree_preserving(w, cfg.swaps_per_edge, rng),
        (NullModel::Strength, _) => strength_preserving(w, cfg.swaps_per_edge, rng),
        (NullModel::Geometry, Some(d)) => geometry_preserving(w, d, cfg.length_bins, cfg.swaps_per_edge, rng),
        (NullModel::Geometry, None) => unreachable!("checked before"),
    }
}

fn mean_finite(v: &[f64]) -> f64 {
    let f: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    f.iter().sum::<f64>() / f.len().max(1) as f64
}

/// Run the whole job for one subject and write `out_root/<subject>/`.
///
/// # Errors
/// [`CohortError`] naming the subject's file and field for any bad input, or
/// the step that failed. Nothing is left in `out_root` on error.
pub fn run_subject(
    inputs: &SubjectInputs,
    cfg: &SubjectConfig,
    out_root: &Path,
) -> Result<SubjectReport, CohortError> {
    let mut notes = Vec::new();
    let mut records = Vec::new();

    // 1. Inputs.
    let conn_la = read_array(&inputs.connectome)?;
    let rules = ConnectomeRules { directed: cfg.directed, ..Default::default() };
    let conn = validate::connectome(&conn_la, &rules)?;
    let n = conn.weights.nrows();
    notes.extend(conn.notes.iter().map(|s| format!("connectome: {s}")));
    records.push(InputRecord::of("connectome", &inputs.connectome)?);

    let series = validate::series(read_array(&inputs.series)?, cfg.orientation, Some(n))?;
    records.push(InputRecord::of("series", &inputs.series)?);
    let map = validate::region_map(&read_array(&inputs.map)?, Some(n))?;
    records.push(InputRecord::of("map", &inputs.map)?);
    notes.extend(map.notes.iter().map(|s| format!("map: {s}")));

    let conn_label = inputs.connectome.to_string();
    let names: Vec<String> = match (&conn.names, &series.names, &map.names) {
        (Some(c), s, m) => {
            if let Some(s) = s {
                validate::names_agree((&conn_label, c), (&inputs.series.to_string(), s))?;
            }
            if let Some(m) = m {
                validate::names_agree((&conn_label, c), (&inputs.map.to_string(), m))?;
            }
            c.clone()
        }
        (None, Some(s), m) => {
            if let Some(m) = m {
                validate::names_agree((&inputs.series.to_string(), s), (&inputs.map.to_string(), m))?;
            }
            s.clone()
        }
        (None, None, Some(m)) => m.clone(),
        (None, None, None) => (1..=n).map(|i| format!("region-{i:03}")).collect(),
    };
    let n_frames = series.data.nrows();

    // 2. Timescales.
    let (fd, confounds) = match &inputs.confounds {
        Some(spec) => {
            records.push(InputRecord::of("confounds", spec)?);
            read_confounds(spec, n_frames, &cfg.confound_columns, cfg.fd_threshold_mm.is_some())?
        }
        None if !cfg.confound_columns.is_empty() => {
            return Err(invalid("confounds", "confound columns were named but no confounds table was given"))
        }
        None => (None, Vec::new()),
    };
    let valid = match (fd, cfg.fd_threshold_mm) {
        (Some(fd), Some(t)) => Some(censor_from_displacement(&fd, t, cfg.censor_after).map_err(|e| {
            invalid(
                "censoring",
                format!("{}: {e}", inputs.confounds.as_ref().map(|c| c.to_string()).unwrap_or_default()),
            )
        })?),
        _ => None,
    };
    let mut tparams = TimescaleParams::new(cfg.tr_s);
    tparams.nuisance = NuisanceSpec {
        demean: true,
        detrend_order: cfg.detrend_order,
        confounds: cfg.confound_columns.clone(),
    };
    tparams.threads = Some(1);
    tparams.welch_segment = cfg.welch_segment.map(|w| w.min(n_frames));
    let vparams =
        tparams.check(n_frames).map_err(|e| invalid("timescales", format!("{}: {e}", inputs.series)))?;
    let ts: TimescaleResult =
        estimate_timescales(series.data.view(), &names, valid.as_deref(), &confounds, &vparams)
            .map_err(|e| invalid("timescales", format!("{}: {e}", inputs.series)))?;
    let ts_table = ts.to_table();
    let tau: Vec<f64> = match ts_table.column(&cfg.timescale_column) {
        Some(Column::F64(v)) => v.clone(),
        _ => {
            return Err(invalid(
                "timescales",
                format!(
                    "no timescale column `{}`; expected one of: {}",
                    cfg.timescale_column,
                    ts_table.names().into_iter().filter(|c| c.ends_with("_s")).collect::<Vec<_>>().join(", ")
                ),
            ))
        }
    };
    let flagged = ts.n_flagged();
    if flagged > 0 {
        notes.push(format!("timescales: {flagged} region(s) flagged by QC (see the status column)"));
    }

    // 3. States.
    let sparams = StatesParams {
        bins: cfg.bins,
        order: if cfg.descending {
            crate::hierarchy::Order::Descending
        } else {
            crate::hierarchy::Order::Ascending
        },
        unit_norm: false,
    };
    let values = map.values.to_vec();
    let states: States =
        build_states(&values, &sparams).map_err(|e| invalid("states", format!("{}: {e}", inputs.map)))?;
    notes.extend(states.notes.iter().map(|s| format!("states: {s}")));
    let state_tau = link::bin_means(&tau, &states.bins)
        .map_err(|e| invalid("link", format!("{}: {e}", inputs.series)))?;

    // 4. Control.
    let vsys = cfg.system.check(n).map_err(|e| invalid("control", e.to_string()))?;
    let sys = System::new(conn.weights.view(), cfg.directed, &vsys, Par::Seq)
        .map_err(|e| invalid("control", format!("{}: {e}", inputs.connectome)))?;
    let (energy, einfo) = energy_matrix(&sys, states.matrix.view())
        .map_err(|e| invalid("control", format!("{}: {e}", inputs.connectome)))?;
    notes.extend(einfo.warnings.iter().map(|w| format!("control: {w}")));
    let metrics = node_metrics(&sys).map_err(|e| invalid("control", e.to_string()))?;

    // 5. Link.
    let pairs: PairTable =
        link::pair_table(&energy, Some(&state_tau)).map_err(|e| invalid("link", e.to_string()))?;
    let summary = link::summarise(&pairs).map_err(|e| invalid("link", e.to_string()))?;
    let finite: Vec<(f64, f64)> = tau
        .iter()
        .zip(&values)
        .filter(|(t, m)| t.is_finite() && m.is_finite())
        .map(|(t, m)| (*t, *m))
        .collect();
    let (tx, mx): (Vec<f64>, Vec<f64>) = finite.into_iter().unzip();
    let tau_vs_map = crate::stats::correlation::spearman(&mx, &tx).ok();

    // 6. Nulls. Refuse a null count that could never reach significance after FDR: the smallest
    // permutation p-value is 1/(m + 1), and Benjamini–Hochberg multiplies the smallest p by the
    // family size F, so m + 1 must be at least F/α.
    let family = 2 * usize::from(cfg.network_nulls > 0) + 3 * usize::from(cfg.map_nulls > 0);
    for (what, m) in [("network nulls", cfg.network_nulls), ("map nulls", cfg.map_nulls)] {
        if m > 0 && (family as f64) / ((m + 1) as f64) > cfg.fdr_alpha {
            let needed = ((family as f64) / cfg.fdr_alpha).ceil() as usize - 1;
            return Err(invalid(
                "nulls",
                format!(
                    "{m} {what} are too few for a family of {family} tests at FDR {}: the smallest possible \
                     adjusted p-value is {:.3}; use at least {needed}",
                    cfg.fdr_alpha,
                    (family as f64) / ((m + 1) as f64)
                ),
            ));
        }
    }
    let dist = match &inputs.distances {
        Some(spec) => {
            records.push(InputRecord::of("distances", spec)?);
            let d = read_array(spec)?.matrix()?;
            if d.dim() != (n, n) {
                return Err(IoError::invalid(
                    spec,
                    "distances",
                    format!("expected {n} x {n}, found {} x {}", d.nrows(), d.ncols()),
                )
                .into());
            }
            Some(d)
        }
        None if cfg.null_model == NullModel::Geometry && cfg.network_nulls > 0 => {
            return Err(invalid("nulls", "geometry-preserving nulls need a distance matrix (--distances)"))
        }
        None => None,
    };
    let observed = null_statistics(&summary);
    let mut tests = Vec::new();
    let mut null_rows: Vec<(String, usize, [f64; 2], f64)> = Vec::new();
    if cfg.network_nulls > 0 {
        let results: Vec<Option<([f64; 2], f64)>> = (0..cfg.network_nulls)
            .into_par_iter()
            .map(|i| {
                let mut rng = ChaCha20Rng::seed_from_u64(cfg.seed);
                rng.set_stream(1 + i as u64);
                let (w, info) = rewire(&conn.weights, dist.as_ref(), cfg, &mut rng).ok()?;
                summarise_network(&w, cfg.directed, &vsys, &states.matrix, Some(&state_tau))
                    .map(|s| (null_statistics(&s), info.strength_error))
            })
            .collect();
        let ok: Vec<([f64; 2], f64)> = results.iter().flatten().copied().collect();
        if ok.len() < cfg.network_nulls {
            notes.push(format!(
                "nulls: {} of {} rewired networks were unusable and skipped",
                cfg.network_nulls - ok.len(),
                cfg.network_nulls
            ));
        }
        for (i, r) in results.iter().enumerate() {
            if let Some((s, err)) = r {
                null_rows.push(("network".into(), i, *s, *err));
            }
        }
        for (k, label) in ["bottom_up_minus_top_down", "asymmetry_distance_slope"].iter().enumerate() {
            let null: Vec<f64> = ok.iter().map(|(s, _)| s[k]).collect();
            let p = permutation_p_value(observed[k], &null, Alternative::TwoSided)
                .map_err(|e| invalid("nulls", e.to_string()))?;
            tests.push(NullTest {
                name: format!("{label} vs {:?} network nulls", cfg.null_model).to_lowercase(),
                observed: observed[k],
                n_null: null.len(),
                null_mean: mean_finite(&null),
                p_value: p,
                p_fdr: f64::NAN,
            });
        }
    }
    if cfg.map_nulls > 0 {
        let surrogates: Array2<f64> = match cfg.map_null_method {
            MapNullMethod::Spin => {
                let (sphere, hemi) = match (&inputs.sphere, &inputs.hemisphere) {
                    (Some(s), h) => (s, h),
                    (None, _) => {
                        return Err(invalid(
                            "map nulls",
                            "spin nulls of the map need sphere coordinates (--sphere)",
                        ))
                    }
                };
                records.push(InputRecord::of("sphere", sphere)?);
                let coords = read_array(sphere)?.matrix()?;
                let hemi_values = match hemi {
                    Some(h) => {
                        records.push(InputRecord::of("hemisphere", h)?);
                        Some(hemisphere_codes(h)?)
                    }
                    None => None,
                };
                let layout = SphereLayout::new(&coords, hemi_values.as_deref(), 0.02)
                    .map_err(|e| invalid("map nulls", format!("{sphere}: {e}")))?;
                spin_surrogates(&values, &layout, &SpinParams::new(cfg.map_nulls, cfg.seed))
                    .map_err(|e| invalid("map nulls", format!("{}: {e}", inputs.map)))?
                    .surrogates
            }
            MapNullMethod::Variogram => {
                let d = dist.as_ref().ok_or_else(|| {
                    invalid(
                        "map nulls",
                        "variogram-matched nulls of the map need a distance matrix (--distances)",
                    )
                })?;
                let vp = VariogramParams::new(cfg.map_nulls, cfg.seed);
                let model = VariogramModel::new(d, &vp).map_err(|e| invalid("map nulls", e.to_string()))?;
                variogram_surrogates(&values, &model, &vp)
                    .map_err(|e| invalid("map nulls", format!("{}: {e}", inputs.map)))?
                    .surrogates
            }
        };
        // Spun map -> re-binned states on the real network, and the timescale-hierarchy correlation.
        let results: Vec<Option<([f64; 2], f64)>> = (0..cfg.map_nulls)
            .into_par_iter()
            .map(|m| {
                let spun: Vec<f64> = surrogates.column(m).to_vec();
                let st = build_states(&spun, &sparams).ok()?;
                let st_tau = link::bin_means(&tau, &st.bins).ok()?;
                // Same network, new states: reuse its one decomposition.
                let (e, _) = energy_matrix(&sys, st.matrix.view()).ok()?;
                let s = link::summarise(&link::pair_table(&e, Some(&st_tau)).ok()?).ok()?;
                let fin: Vec<(f64, f64)> = tau
                    .iter()
                    .zip(&spun)
                    .filter(|(t, v)| t.is_finite() && v.is_finite())
                    .map(|(t, v)| (*t, *v))
                    .collect();
                let (a, b): (Vec<f64>, Vec<f64>) = fin.into_iter().unzip();
                let rho = crate::stats::correlation::spearman(&b, &a).map(|c| c.r).unwrap_or(f64::NAN);
                Some((null_statistics(&s), rho))
            })
            .collect();
        let ok: Vec<([f64; 2], f64)> = results.iter().flatten().copied().collect();
        for (i, r) in results.iter().enumerate() {
            if let Some((s, rho)) = r {
                null_rows.push(("map-spin".into(), i, *s, *rho));
            }
        }
        for (k, label) in ["bottom_up_minus_top_down", "asymmetry_distance_slope"].iter().enumerate() {
            let null: Vec<f64> = ok.iter().map(|(s, _)| s[k]).collect();
            let p = permutation_p_value(observed[k], &null, Alternative::TwoSided)
                .map_err(|e| invalid("map nulls", e.to_string()))?;
            tests.push(NullTest {
                name: format!("{label} vs {} hierarchy maps", cfg.map_null_method.label()),
                observed: observed[k],
                n_null: null.len(),
                null_mean: mean_finite(&null),
                p_value: p,
                p_fdr: f64::NAN,
            });
        }
        if let Some(obs) = tau_vs_map.map(|c| c.r) {
            let null: Vec<f64> = ok.iter().map(|(_, r)| *r).collect();
            let p = permutation_p_value(obs, &null, Alternative::TwoSided)
                .map_err(|e| invalid("map nulls", e.to_string()))?;
            tests.push(NullTest {
                name: format!(
                    "timescale_vs_hierarchy_spearman vs {} hierarchy maps",
                    cfg.map_null_method.label()
                ),
                observed: obs,
                n_null: null.len(),
                null_mean: mean_finite(&null),
                p_value: p,
                p_fdr: f64::NAN,
            });
        }
    }
    if !tests.is_empty() {
        let p: Vec<f64> = tests.iter().map(|t| t.p_value).collect();
        let adj = benjamini_hochberg(&p).map_err(|e| invalid("fdr", e.to_string()))?;
        for (t, a) in tests.iter_mut().zip(adj) {
            t.p_fdr = a;
        }
    }

    let report = SubjectReport {
        subject: inputs.subject.clone(),
        n_regions: n,
        n_frames,
        n_valid_frames: ts.n_valid_frames,
        n_timescale_flagged: flagged,
        state_timescale_s: state_tau.clone(),
        timescale_vs_hierarchy_spearman: tau_vs_map.map(|c| c.r),
        summary: summary.clone(),
        energy: energy.rows().into_iter().map(|r| r.to_vec()).collect(),
        gramian_condition: einfo.gramian_condition,
        terminal_error_max: einfo.terminal_error_max,
        tests,
        notes,
        covariates: inputs.covariates.clone(),
        output: out_root.join(&inputs.subject),
    };

    // 7. Write everything into a temporary folder, then rename it into place.
    let mut prov = Provenance::new("subject", serde_json::to_value(cfg).unwrap_or_default());
    prov.inputs = records;
    let final_dir = out_root.join(&inputs.subject);
    let tmp_dir = out_root.join(format!(".{}.{}.partial", inputs.subject, std::process::id()));
    let _ = std::fs::remove_dir_all(&tmp_dir);
    std::fs::create_dir_all(&tmp_dir).map_err(|e| IoError::os(&tmp_dir, "cannot create directory", e))?;
    let written = write_outputs(
        &tmp_dir, &report, &prov, &names, &values, &states, &ts_table, &energy, &einfo, &metrics, &pairs,
        &null_rows, &tau,
    );
    if let Err(e) = written {
        let _ = std::fs::remove_dir_all(&tmp_dir);
        return Err(e);
    }
    if final_dir.exists() {
        std::fs::remove_dir_all(&final_dir).map_err(|e| IoError::os(&final_dir, "cannot replace", e))?;
    }
    std::fs::rename(&tmp_dir, &final_dir).map_err(|e| {
        let _ = std::fs::remove_dir_all(&tmp_dir);
        IoError::os(&final_dir, "cannot rename into place", e)
    })?;
    Ok(report)
}

/// Hemisphere of each parcel as 0 (left) or 1 (right), from numbers or from
/// text labels `L`/`R`/`left`/`right` (any case) in a delimited column.
fn hemisphere_codes(spec: &InputSpec) -> Result<Vec<f64>, CohortError> {
    if let Ok(la) = read_array(spec) {
        return Ok(la.vector()?.to_vec());
    }
    let sep = match spec.format()? {
        crate::io::Format::Delimited(sep) => sep,
        _ => return Ok(read_array(spec)?.vector()?.to_vec()),
    };
    let labels = crate::io::delimited::read_labels(spec, sep)?;
    labels
        .iter()
        .enumerate()
        .map(|(i, l)| match l.to_ascii_lowercase().as_str() {
            "l" | "left" | "lh" | "0" => Ok(0.0),
            "r" | "right" | "rh" | "1" => Ok(1.0),
            _ => Err(IoError::invalid(
                spec,
                "hemisphere",
                format!("expected L/R (or 0/1), found `{l}` at region {}", i + 1),
            )
            .into()),
        })
        .collect()
}

fn i64s(v: impl IntoIterator<Item = usize>) -> Vec<i64> {
    v.into_iter().map(|x| x as i64).collect()
}

#[allow(clippy::too_many_arguments)]
fn write_outputs(
    dir: &Path,
    report: &SubjectReport,
    prov: &Provenance,
    names: &[String],
    map: &[f64],
    states: &States,
    ts_table: &Table,
    energy: &Array2<f64>,
    einfo: &control::EnergyInfo,
    metrics: &control::NodeMetrics,
    pairs: &PairTable,
    null_rows: &[(String, usize, [f64; 2], f64)],
    tau: &[f64],
) -> Result<(), CohortError> {
    let s = &report.subject;
    let asym = control::asymmetry(energy.view());
    let bin_col = Column::I64(states.bin_of.iter().map(|b| b.map_or(-1, |v| v as i64)).collect());
    let rank_col = Column::I64(states.rank.iter().map(|b| b.map_or(-1, |v| v as i64)).collect());
    let regions = Table::new()
        .with("region", Column::Str(names.to_vec()))
        .with("map_value", Column::F64(map.to_vec()))
        .with("rank", rank_col)
        .with("state", bin_col)
        .with("timescale_s", Column::F64(tau.to_vec()))
        .with("average_controllability", Column::F64(metrics.average.to_vec()))
        .with(
            "modal_controllability",
            Column::F64(metrics.modal.as_ref().map_or_else(|| vec![f64::NAN; names.len()], |m| m.to_vec())),
        );
    let pair_table = pairs.to_table();
    let nulls = Table::new()
        .with("kind", Column::Str(null_rows.iter().map(|r| r.0.clone()).collect()))
        .with("index", Column::I64(i64s(null_rows.iter().map(|r| r.1))))
        .with("bottom_up_minus_top_down", Column::F64(null_rows.iter().map(|r| r.2[0]).collect()))
        .with("asymmetry_distance_slope", Column::F64(null_rows.iter().map(|r| r.2[1]).collect()))
        .with("extra", Column::F64(null_rows.iter().map(|r| r.3).collect()));

    ts_table.write_csv(&dir.join(format!("{s}_timescales.csv")))?;
    regions.write_csv(&dir.join(format!("{s}_regions.csv")))?;
    pair_table.write_csv(&dir.join(format!("{s}_pairs.csv")))?;
    if !null_rows.is_empty() {
        nulls.write_csv(&dir.join(format!("{s}_nulls.csv")))?;
    }
    crate::io::table::write_json(
        &dir.join(format!("{s}_summary.json")),
        &serde_json::json!({ "report": report, "provenance": prov }),
    )?;

    let mut root = Group::new("/");
    root.set_provenance(prov);
    root.set_attr("subject", AttrValue::Str(s.clone()));
    for (k, v) in &report.covariates {
        root.set_attr(&format!("covariate_{k}"), AttrValue::Str(v.clone()));
    }
    let mut g_ts = Group::new("timescales");
    g_ts.add_table("regions", ts_table);
    g_ts.set_attr("n_frames", AttrValue::I64(report.n_frames as i64));
    g_ts.set_attr("n_valid_frames", AttrValue::I64(report.n_valid_frames as i64));
    root.add_group(g_ts);
    let mut g_h = Group::new("hierarchy");
    g_h.add_vector("map", map);
    g_h.add_matrix("states", &states.matrix);
    g_h.add_matrix("distance", &states.distance);
    g_h.add_dataset(
        "state_of_region",
        h5::DataValue::I64 {
            shape: vec![names.len()],
            data: states.bin_of.iter().map(|b| b.map_or(-1, |v| v as i64)).collect(),
        },
    );
    g_h.add_dataset("region_names", h5::DataValue::Str(names.to_vec()));
    g_h.set_attr("state_sizes", AttrValue::I64List(i64s(states.sizes())));
    g_h.set_attr("excluded_regions", AttrValue::I64List(i64s(states.excluded.iter().copied())));
    root.add_group(g_h);
    let mut g_c = Group::new("control");
    g_c.add_matrix("energy", energy);
    g_c.add_matrix("asymmetry", &asym);
    g_c.add_vector("average_controllability", &metrics.average.to_vec());
    if let Some(m) = &metrics.modal {
        g_c.add_vector("modal_controllability", &m.to_vec());
    }
    g_c.set_attr("route", AttrValue::Str(format!("{:?}", einfo.route).to_lowercase()));
    g_c.set_attr("gramian_condition", AttrValue::F64(einfo.gramian_condition));
    g_c.set_attr("terminal_error_max", AttrValue::F64(einfo.terminal_error_max));
    g_c.set_attr("warnings", AttrValue::StrList(einfo.warnings.clone()));
    root.add_group(g_c);
    let mut g_l = Group::new("link");
    g_l.add_table("pairs", &pair_table);
    g_l.add_vector("state_timescale_s", &report.state_timescale_s);
    g_l.set_attr("summary_json", AttrValue::Str(serde_json::to_string(&report.summary).unwrap_or_default()));
    g_l.set_attr("tests_json", AttrValue::Str(serde_json::to_string(&report.tests).unwrap_or_default()));
    if !null_rows.is_empty() {
        g_l.add_table("nulls", &nulls);
    }
    root.add_group(g_l);
    h5::write_file(&dir.join(format!("{s}_hierax.h5")), &root)?;
    Ok(())
}
