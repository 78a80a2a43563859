//! The stages of the per-subject job, one per home module, each callable and
//! testable alone. None reads or writes a file.

use super::config::ValidSubjectConfig;
use super::outcomes::{NullFamily, Outcome, OutcomeSource};
use super::result::{ControlStage, LinkStage, NullRow, NullRun, NullTest, TimescaleStage};
use super::{LoadedSubject, SubjectError};
use crate::control::{energy_matrix, node_metrics, state_potentials, state_quadratic_forms, Par, System};
use crate::hierarchy::{build_states, surrogate_maps, Order, SpatialInputs, States, StatesParams};
use crate::link::{self, SubjectSummary};
use crate::stats::correlation::{spearman, Correlation};
use crate::stats::inference::{benjamini_hochberg, permutation_p_value, Alternative};
use crate::stats::nulls::{self, NullParams, RewireInfo};
use crate::stats::StatsError;
use crate::timescale::{
    censor_from_displacement, estimate_timescales, ColumnSource, Estimator, NuisanceSpec, TimescaleParams,
};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rayon::prelude::*;

/// The timescale columns the job can link: every estimator's, from the
/// registry (`ips_tau_s`, `acw50_s`, ..., `knee_tau_s`).
pub fn timescale_columns() -> Vec<&'static str> {
    Estimator::ALL.into_iter().flat_map(|e| ColumnSource::Estimator(e).columns()).collect()
}

/// The estimator behind a timescale column name (the timescale module's one mapping).
pub fn timescale_column_estimator(column: &str) -> Option<Estimator> {
    crate::timescale::column_estimator(column)
}

/// Stage 1 (`timescale`): censor, regress confounds and estimate every
/// region's intrinsic timescale; keep the chosen column, NaN where that
/// estimator (or the region) failed QC.
///
/// # Errors
/// [`SubjectError::Timescales`] naming the series or confounds file.
pub fn timescales(s: &LoadedSubject, cfg: &ValidSubjectConfig) -> Result<TimescaleStage, SubjectError> {
    let p = cfg.params();
    let n_frames = s.series.nrows();
    let confounds_label = || s.specs.confounds.as_ref().map(|c| c.to_string()).unwrap_or_default();
    let valid = match (&s.framewise_displacement, p.fd_threshold_mm) {
        (Some(fd), Some(t)) => Some(
            censor_from_displacement(fd, t, p.censor_after)
                .map_err(|source| SubjectError::Timescales { input: confounds_label(), source })?,
        ),
        _ => None,
    };
    let mut tparams = TimescaleParams::new(p.tr_s);
    tparams.nuisance =
        NuisanceSpec { demean: true, detrend_order: p.detrend_order, confounds: p.confound_columns.clone() };
    // Use the caller's thread pool: a pool of our own inside a subject would nest pools.
    tparams.threads = None;
    // None: the timescale module's one segment rule, shared with `hierax timescales`.
    tparams.welch_segment = p.welch_segment;
    let series_label = s.specs.series.to_string();
    let vparams = tparams
        .check(n_frames)
        .map_err(|source| SubjectError::Timescales { input: series_label.clone(), source })?;
    let result = estimate_timescales(s.series.view(), &s.names, valid.as_deref(), &s.confounds, &vparams)
        .map_err(|source| {
            if source.blames_censoring() {
                // Censoring is made from the confounds' framewise displacement.
                let threshold_mm = p.fd_threshold_mm.unwrap_or(f64::NAN);
                return SubjectError::Censoring { input: confounds_label(), threshold_mm, source };
            }
            let input = if source.blames_confounds(&p.confound_columns) {
                confounds_label()
            } else {
                series_label.clone()
            };
            SubjectError::Timescales { input, source }
        })?;
    let estimator = timescale_column_estimator(&p.timescale_column).ok_or_else(|| {
        crate::param::ParamError::new("timescale_column", &p.timescale_column, timescale_columns().join(", "))
    })?;
    let tau = result
        .column_values(&p.timescale_column)
        .map_err(|source| SubjectError::Timescales { input: series_label.clone(), source })?;
    let n_flagged = result.n_flagged_for(&[ColumnSource::Estimator(estimator)]);
    Ok(TimescaleStage { column: p.timescale_column.clone(), estimator, tau, n_flagged, result })
}

/// Stage 2 (`hierarchy`): rank the regions along the map into k equal-count states.
///
/// # Errors
/// [`SubjectError::Hierarchy`] naming the map.
pub fn states(s: &LoadedSubject, cfg: &ValidSubjectConfig) -> Result<States, SubjectError> {
    build_states(&s.map, &states_params(cfg)).map_err(|source| SubjectError::Hierarchy {
        stage: "states",
        input: s.specs.map.to_string(),
        source,
    })
}

fn states_params(cfg: &ValidSubjectConfig) -> StatesParams {
    let p = cfg.params();
    StatesParams {
        bins: p.bins,
        order: if p.descending { Order::Descending } else { Order::Ascending },
        unit_norm: false,
    }
}

/// Stage 3 (`control`): the network's one decomposition, the k × k energy
/// matrix and node metrics. Returns the system too, so map nulls reuse its
/// decomposition.
///
/// # Errors
/// [`SubjectError::Control`] naming the connectome.
pub fn control(
    s: &LoadedSubject,
    states: &States,
    cfg: &ValidSubjectConfig,
    par: Par,
) -> Result<(ControlStage, System), SubjectError> {
    let err = |source| SubjectError::Control { input: s.specs.connectome.to_string(), source };
    let vsys = cfg.system_for(s.n_regions()).map_err(err)?;
    let sys = System::new(s.weights.view(), cfg.params().directed, &vsys, par).map_err(err)?;
    let (energy, info) = energy_matrix(&sys, states.matrix.view()).map_err(err)?;
    let metrics = node_metrics(&sys).map_err(err)?;
    let state_quadratic_form = state_quadratic_forms(&sys, states.matrix.view()).map_err(err)?;
    let closed_form_potential = if sys.asymmetry_is_potential() {
        Some(state_potentials(&sys, states.matrix.view()).map_err(err)?)
    } else {
        None
    };
    Ok((ControlStage { energy, info, metrics, state_quadratic_form, closed_form_potential }, sys))
}

/// Stage 4 (`link`): per-state timescales, the pair table, its summaries and
/// the asymmetry decomposition; the timescale–map correlation.
///
/// # Errors
/// [`SubjectError::Link`], e.g. a state without any valid timescale.
pub fn link(
    map: &[f64],
    states: &States,
    tau: &[f64],
    energy: &Array2<f64>,
) -> Result<LinkStage, SubjectError> {
    let state_timescale_s = link::bin_means(tau, &states.bins)?;
    let pairs = link::pair_table(energy, Some(&state_timescale_s))?;
    let summary = link::summarise(&pairs)?;
    Ok(LinkStage { timescale_hierarchy: timescale_vs_map(tau, map), state_timescale_s, pairs, summary })
}

/// Spearman of regional timescale with the map over regions where both are finite.
fn timescale_vs_map(tau: &[f64], map: &[f64]) -> Option<Correlation> {
    let (t, m): (Vec<f64>, Vec<f64>) =
        tau.iter().zip(map).filter(|(t, m)| t.is_finite() && m.is_finite()).map(|(t, m)| (*t, *m)).unzip();
    spearman(&m, &t).ok()
}

/// The outcomes of `family` tested under `cfg`.
fn family_outcomes(cfg: &ValidSubjectConfig, family: NullFamily) -> Vec<Outcome> {
    cfg.null_tests().into_iter().filter(|(_, f)| *f == family).map(|(o, _)| o).collect()
}

fn outcome_values(outcomes: &[Outcome], summary: &SubjectSummary, tau_rho: Option<f64>) -> Vec<f64> {
    let src = OutcomeSource { summary, timescale_hierarchy_spearman: tau_rho };
    outcomes.iter().map(|o| o.value(&src)).collect()
}

/// The null-model settings of the job.
fn null_params(cfg: &ValidSubjectConfig) -> NullParams {
    let p = cfg.params();
    NullParams { swaps_per_edge: p.swaps_per_edge, length_bins: p.length_bins }
}

/// Null `i`'s random stream: ChaCha20 stream `1 + i` of the seed, so results
/// do not depend on the thread count.
fn null_rng(seed: u64, i: usize) -> ChaCha20Rng {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    rng.set_stream(1 + i as u64);
    rng
}

/// Stage 5 (`stats::nulls`): recompute the tested outcomes on randomised
/// networks with the same states. A preflight rewiring (null 1) is assessed
/// first ([`nulls::assess`]), so a model that cannot move this network is
/// refused, with the reason, before the null budget is spent; the full run
/// is assessed again and its effect (accepted swaps, edges changed) kept.
///
/// # Errors
/// [`SubjectError::Nulls`] when the model cannot randomise the network or a
/// rewiring fails.
pub fn network_nulls(
    s: &LoadedSubject,
    states: &States,
    link: &LinkStage,
    cfg: &ValidSubjectConfig,
) -> Result<Option<NullRun>, SubjectError> {
    let p = cfg.params();
    if p.network_nulls == 0 {
        return Ok(None);
    }
    let err = |source| SubjectError::Nulls { family: "network", source };
    let model = p.null_model;
    let np = null_params(cfg);
    let net = nulls::Network::new(s.weights.view(), s.distances.as_ref().map(|d| d.view()), p.directed)
        .map_err(err)?;
    let (w0, info0) = nulls::rewire(model, &net, &np, &mut null_rng(p.seed, 0)).map_err(err)?;
    nulls::assess(model, &net, std::slice::from_ref(&info0)).map_err(err)?;
    let outcomes = family_outcomes(cfg, NullFamily::Network);
    let vsys = cfg
        .system_for(s.n_regions())
        .map_err(|source| SubjectError::Control { input: s.specs.connectome.to_string(), source })?;
    // Null i's outcomes from its rewired weights. A randomised network the model cannot use
    // (e.g. a region left without edges) is skipped and counted.
    let evaluate = |i: usize, w: ndarray::Array2<f64>, info: RewireInfo| -> (RewireInfo, Option<NullRow>) {
        let summary = System::new(w.view(), p.directed, &vsys, Par::Seq).ok().and_then(|sys| {
            let (e, _) = energy_matrix(&sys, states.matrix.view()).ok()?;
            link::summarise(&link::pair_table(&e, Some(&link.state_timescale_s)).ok()?).ok()
        });
        let row = summary.map(|sm| NullRow {
            index: i,
            values: outcome_values(&outcomes, &sm, None),
            rewire: Some(info.clone()),
        });
        (info, row)
    };
    // The preflight rewiring is null 1 (the same random stream), so it is used, not redone.
    let mut rows: Vec<Result<(RewireInfo, Option<NullRow>), StatsError>> = vec![Ok(evaluate(0, w0, info0))];
    rows.par_extend((1..p.network_nulls).into_par_iter().map(|i| {
        let (w, info) = nulls::rewire(model, &net, &np, &mut null_rng(p.seed, i))?;
        Ok(evaluate(i, w, info))
    }));
    let mut infos = Vec::with_capacity(rows.len());
    let mut kept = Vec::new();
    for r in rows {
        let (info, row) = r.map_err(err)?;
        infos.push(info);
        kept.extend(row);
    }
    let effect = nulls::assess(model, &net, &infos).map_err(err)?;
    Ok(Some(NullRun {
        family: NullFamily::Network,
        method: model.label().to_string(),
        hypothesis: model.hypothesis().to_string(),
        requested: p.network_nulls,
        outcomes,
        rows: kept,
        effect: Some(effect),
    }))
}

/// Stage 6 (`hierarchy` surrogates): recompute the tested outcomes with
/// states re-binned from surrogate maps, on the same network (its one
/// decomposition reused), and the timescale–map correlation of each
/// surrogate.
///
/// # Errors
/// [`SubjectError::Hierarchy`] when the surrogates cannot be made from the map.
pub fn map_nulls(
    s: &LoadedSubject,
    sys: &System,
    tau: &[f64],
    cfg: &ValidSubjectConfig,
) -> Result<Option<NullRun>, SubjectError> {
    let p = cfg.params();
    if p.map_nulls == 0 {
        return Ok(None);
    }
    let outcomes = family_outcomes(cfg, NullFamily::Map);
    let spatial = SpatialInputs { sphere: s.sphere.as_ref(), distances: s.distances.as_ref() };
    let surrogates =
        surrogate_maps(p.map_null_method, &s.map, spatial, p.map_nulls, p.seed).map_err(|source| {
            SubjectError::Hierarchy { stage: "map nulls", input: s.specs.map.to_string(), source }
        })?;
    let sparams = states_params(cfg);
    let rows: Vec<Option<NullRow>> = (0..p.map_nulls)
        .into_par_iter()
        .map(|m| {
            let surrogate: Vec<f64> = surrogates.column(m).to_vec();
            let st = build_states(&surrogate, &sparams).ok()?;
            let st_tau = link::bin_means(tau, &st.bins).ok()?;
            let (e, _) = energy_matrix(sys, st.matrix.view()).ok()?;
            let sm = link::summarise(&link::pair_table(&e, Some(&st_tau)).ok()?).ok()?;
            let rho = timescale_vs_map(tau, &surrogate).map(|c| c.r);
            Some(NullRow { index: m, values: outcome_values(&outcomes, &sm, rho), rewire: None })
        })
        .collect();
    Ok(Some(NullRun {
        family: NullFamily::Map,
        method: p.map_null_method.label().to_string(),
        hypothesis: p.map_null_method.hypothesis().to_string(),
        requested: p.map_nulls,
        outcomes,
        rows: rows.into_iter().flatten().collect(),
        effect: None,
    }))
}

/// Stage 7 (`stats::inference`): two-sided permutation p-values (Phipson &
/// Smyth 2010) of every tested outcome against its nulls, then
/// Benjamini–Hochberg (1995) across the whole family.
///
/// A null run whose statistic never moved (every null equal to the
/// observed value) is refused: its p-value of 1 would test nothing.
///
/// # Errors
/// [`SubjectError::Nulls`] for a refused or empty null distribution.
pub fn null_tests(observed: &[(Outcome, f64)], runs: &[&NullRun]) -> Result<Vec<NullTest>, SubjectError> {
    let mut tests = Vec::new();
    for run in runs {
        let family = run.family.label();
        let err = |source| SubjectError::Nulls { family, source };
        for (k, outcome) in run.outcomes.iter().enumerate() {
            let obs = observed.iter().find(|(o, _)| o == outcome).map_or(f64::NAN, |(_, v)| *v);
            let null: Vec<f64> = run.rows.iter().map(|r| r.values[k]).filter(|v| v.is_finite()).collect();
            let (mean, sd) = mean_sd(&null);
            let tol = 1e-12 * obs.abs().max(1e-300);
            if !null.is_empty() && null.iter().all(|v| (v - obs).abs() <= tol) {
                return Err(SubjectError::NullsDidNotMove {
                    family,
                    method: run.method.clone(),
                    outcome: outcome.name(),
                    reason: format!(
                        "all {} nulls equal the observed value {obs:.6e}, so the test would report p = 1 and \
                         test nothing",
                        null.len()
                    ),
                });
            }
            let p = permutation_p_value(obs, &null, Alternative::TwoSided).map_err(err)?;
            tests.push(NullTest {
                outcome: *outcome,
                family: run.family,
                method: run.method.clone(),
                hypothesis: run.hypothesis.clone(),
                observed: obs,
                n_null: null.len(),
                null_mean: mean,
                null_sd: sd,
                p_value: p,
                p_fdr: f64::NAN,
            });
        }
    }
    if !tests.is_empty() {
        let p: Vec<f64> = tests.iter().map(|t| t.p_value).collect();
        let adj = benjamini_hochberg(&p).map_err(|source| SubjectError::Nulls { family: "all", source })?;
        for (t, a) in tests.iter_mut().zip(adj) {
            t.p_fdr = a;
        }
    }
    Ok(tests)
}

/// Mean and sample standard deviation (n − 1); NaN when undefined.
fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let sd = (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (if v.is_empty() { f64::NAN } else { mean }, if v.len() < 2 { f64::NAN } else { sd })
}
