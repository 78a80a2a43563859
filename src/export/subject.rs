//! Writing one subject: `sub-XX/` with the HDF5 file, CSV tables and the
//! JSON summary, assembled under a hidden name and renamed when complete.

use super::folder::{Marker, StagedFolder};
use super::schema::{self, TableBuilder};
use super::{number, CsvSink, H5Sink, Sink, Tee};
use crate::io::hdf5::{self as h5, AttrValue, DataValue};
use crate::io::provenance::Provenance;
use crate::io::table::{Column, Table};
use crate::io::IoError;
use crate::link::Direction;
use crate::subject::result::NullRun;
use crate::subject::{SubjectRecord, SubjectResult};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// The parameters of a subject's job as JSON (the provenance record, and the
/// marker's digest).
pub fn parameters_json(r: &SubjectResult) -> Value {
    serde_json::to_value(r.config.params()).unwrap_or(Value::Null)
}

/// The ownership marker of a subject folder made from `r`.
pub fn marker_for(r: &SubjectResult) -> Marker {
    let digests: Vec<&str> = r.inputs.iter().map(|i| i.sha256.as_str()).collect();
    Marker::new("subject", &parameters_json(r), &digests)
}

fn opt_number(v: Option<usize>) -> Option<i64> {
    v.map(number)
}

fn ints(v: impl IntoIterator<Item = i64>) -> Column {
    Column::I64(v.into_iter().collect())
}

/// `sub-XX_regions.csv`.
pub fn regions_table(r: &SubjectResult) -> Table {
    let n = r.names.len();
    let m = &r.control.metrics;
    TableBuilder::new(&schema::REGIONS)
        .col("region_number", ints((0..n).map(number)))
        .col("region", Column::Str(r.names.clone()))
        .col("map_value", Column::F64(r.map.clone()))
        .col("rank", Column::OptI64(r.states.rank.iter().map(|&x| opt_number(x)).collect()))
        .col("state", Column::OptI64(r.states.bin_of.iter().map(|&x| opt_number(x)).collect()))
        .col("timescale_s", Column::F64(r.timescales.tau.clone()))
        .col("average_controllability", Column::F64(m.average.to_vec()))
        .col(
            "modal_controllability",
            Column::F64(m.modal.as_ref().map_or_else(|| vec![f64::NAN; n], |v| v.to_vec())),
        )
        .finish()
}

/// `sub-XX_states.csv`.
pub fn states_table(r: &SubjectResult) -> Table {
    let st = &r.states;
    let k = st.k();
    let range =
        |b: &Vec<usize>, f: fn(f64, f64) -> f64| b.iter().map(|&i| r.map[i]).reduce(f).unwrap_or(f64::NAN);
    let mut first = Vec::with_capacity(k);
    let mut start = 0usize;
    for s in st.sizes() {
        first.push(start);
        start += s;
    }
    TableBuilder::new(&schema::STATES)
        .col("state", ints((0..k).map(number)))
        .col("n_regions", ints(st.sizes().iter().map(|&s| s as i64)))
        .col("first_rank", ints(first.iter().map(|&f| number(f))))
        .col("last_rank", ints(first.iter().zip(st.sizes()).map(|(&f, s)| f as i64 + s as i64)))
        .col("min_map_value", Column::F64(st.bins.iter().map(|b| range(b, f64::min)).collect()))
        .col("max_map_value", Column::F64(st.bins.iter().map(|b| range(b, f64::max)).collect()))
        .col("mean_timescale_s", Column::F64(r.link.state_timescale_s.clone()))
        .col("asymmetry_potential", Column::F64(r.link.summary.asymmetry_decomposition.potential.clone()))
        .col("within_state_quadratic_form", Column::F64(r.control.state_quadratic_form.clone()))
        .finish()
}

/// The label of a transition's direction in tables.
pub fn direction_label(d: Direction) -> &'static str {
    match d {
        Direction::BottomUp => "bottom-up",
        Direction::TopDown => "top-down",
        Direction::Persist => "same-state",
    }
}

/// `sub-XX_pairs.csv` (also written by `hierax link`).
pub fn pairs_table(pairs: &crate::link::PairTable) -> Table {
    let rows = &pairs.rows;
    TableBuilder::new(&schema::PAIRS)
        .col("initial_state", ints(rows.iter().map(|p| number(p.initial))))
        .col("target_state", ints(rows.iter().map(|p| number(p.target))))
        .col("distance", ints(rows.iter().map(|p| p.distance)))
        .col(
            "direction",
            Column::Str(rows.iter().map(|p| direction_label(p.direction).to_string()).collect()),
        )
        .col("energy", Column::F64(rows.iter().map(|p| p.energy).collect()))
        .col("asymmetry", Column::F64(rows.iter().map(|p| p.asymmetry).collect()))
        .col(
            "timescale_shift_s",
            Column::F64(rows.iter().map(|p| p.timescale_shift_s.unwrap_or(f64::NAN)).collect()),
        )
        .finish()
}

/// `sub-XX_timescales.csv`: the timescale table with the region numbers in front.
pub fn timescales_table(r: &SubjectResult) -> Table {
    // The overall status covers the linked estimator only; the others keep their own status columns.
    timescale_table(
        &r.timescales.result,
        &[crate::timescale::ColumnSource::Estimator(r.timescales.estimator)],
    )
}

/// The timescale table of `result` (also `hierax timescales`' `timescales.csv`), its
/// overall status covering the estimators `in_use`.
pub fn timescale_table(
    result: &crate::timescale::TimescaleResult,
    in_use: &[crate::timescale::ColumnSource],
) -> Table {
    let t = result.to_table_for(in_use);
    let mut b =
        TableBuilder::new(&schema::TIMESCALES).col("region_number", ints((0..t.n_rows()).map(number)));
    for name in t.names() {
        if let Some(c) = t.column(name) {
            b = b.col(name, c.clone());
        }
    }
    b.finish()
}

fn outcome_columns(mut b: TableBuilder, run: &NullRun) -> TableBuilder {
    for (k, o) in run.outcomes.iter().enumerate() {
        b = b.col(o.name(), Column::F64(run.rows.iter().map(|row| row.values[k]).collect()));
    }
    b
}

/// `sub-XX_network_nulls.csv`.
pub fn network_nulls_table(run: &NullRun) -> Table {
    let rows = &run.rows;
    let info = |f: fn(&crate::stats::nulls::RewireInfo) -> f64| {
        Column::F64(rows.iter().map(|r| r.rewire.as_ref().map_or(f64::NAN, f)).collect())
    };
    let b = TableBuilder::new(&schema::NETWORK_NULLS)
        .col("null_number", ints(rows.iter().map(|r| number(r.index))))
        .col("null_model", Column::Str(vec![run.method.clone(); rows.len()]));
    outcome_columns(b, run)
        .col("swaps_attempted", info(|i| i.swaps_attempted.map_or(f64::NAN, |v| v as f64)))
        .col("swaps_accepted", info(|i| i.swaps_accepted.map_or(f64::NAN, |v| v as f64)))
        .col("edges_changed", info(|i| i.edges_changed))
        .col("strength_error", info(|i| i.strength_error))
        .col("length_ks_distance", info(|i| i.length_ks_distance.unwrap_or(f64::NAN)))
        .finish()
}

/// `sub-XX_map_nulls.csv`.
pub fn map_nulls_table(run: &NullRun) -> Table {
    let rows = &run.rows;
    let b = TableBuilder::new(&schema::MAP_NULLS)
        .col("null_number", ints(rows.iter().map(|r| number(r.index))))
        .col("surrogate_method", Column::Str(vec![run.method.clone(); rows.len()]));
    outcome_columns(b, run).finish()
}

/// `sub-XX_tests.csv`.
pub fn tests_table(r: &SubjectResult) -> Table {
    let t = &r.tests;
    let f = |g: fn(&crate::subject::NullTest) -> f64| Column::F64(t.iter().map(g).collect());
    TableBuilder::new(&schema::TESTS)
        .col("outcome", Column::Str(t.iter().map(|x| x.outcome.name().to_string()).collect()))
        .col("null_family", Column::Str(t.iter().map(|x| x.family.label().to_string()).collect()))
        .col("null_model", Column::Str(t.iter().map(|x| x.method.clone()).collect()))
        .col("observed", f(|x| x.observed))
        .col("n_null", ints(t.iter().map(|x| x.n_null as i64)))
        .col("null_mean", f(|x| x.null_mean))
        .col("null_sd", f(|x| x.null_sd))
        .col("p_value", f(|x| x.p_value))
        .col("p_fdr", f(|x| x.p_fdr))
        .col("hypothesis", Column::Str(t.iter().map(|x| x.hypothesis.clone()).collect()))
        .finish()
}

/// The summary JSON: every outcome with its role and meaning, the numerics,
/// the tests and the notes. Keys are snake_case names, never Rust enum names.
pub fn summary_json(r: &SubjectResult, prov: &Provenance, record: &SubjectRecord) -> Value {
    let s = &r.link.summary;
    let roles = r.config.outcome_roles();
    let outcomes: serde_json::Map<String, Value> = roles
        .iter()
        .map(|(o, role)| {
            (
                o.name().to_string(),
                json!({ "value": finite(r.outcome(*o)), "role": role.describe(), "description": o.description() }),
            )
        })
        .collect();
    let info = &r.control.info;
    json!({
        "subject": r.subject,
        "n_regions": r.names.len(),
        "n_frames": r.n_frames,
        "n_valid_frames": r.n_valid_frames(),
        "timescale_column": r.timescales.column,
        "n_timescale_flagged": r.timescales.n_flagged,
        "timescale_notes": [
            format!("n_timescale_flagged counts regions whose {} is not ok; other estimators' statuses are in their own _status columns", r.timescales.column),
            format!("the spectral knee uses Welch segments of {} frames, set by the timescale module's one rule: min(256, frames), shortened under censoring until fully valid segments cover half the valid frames (our choice)", r.timescales.result.welch_segment_frames.map_or("no".into(), |w| w.to_string())),
            "a fitted timescale (exponential, spectral knee, AR(1)) outside [TR/10, valid frames x TR], with a non-positive amplitude, or with its knee outside the fitted band is implausible_fit and left NaN (bounds are our choice)".to_string(),
        ],
        "welch_segment_frames": r.timescales.result.welch_segment_frames,
        "tau_bounds_s": { "min": r.config.params().tr_s / 10.0, "max": r.n_valid_frames() as f64 * r.config.params().tr_s },
        "state_timescale_s": r.link.state_timescale_s,
        "mean_bottom_up_energy": s.mean_bottom_up_energy,
        "mean_top_down_energy": s.mean_top_down_energy,
        "outcomes": outcomes,
        "asymmetry_vs_distance_line": s.asymmetry_vs_distance_line,
        "asymmetry_vs_distance_spearman": s.asymmetry_vs_distance_spearman,
        "asymmetry_vs_distance_pearson": s.asymmetry_vs_distance_pearson,
        "asymmetry_vs_timescale_shift_spearman": s.asymmetry_vs_timescale_shift_spearman,
        "asymmetry_vs_timescale_shift_pearson": s.asymmetry_vs_timescale_shift_pearson,
        "asymmetry_decomposition": s.asymmetry_decomposition,
        "timescale_vs_hierarchy_spearman": r.link.timescale_hierarchy,
        "numerics": {
            "energy_route": info.route.name().to_string(),
            "gramian_condition": info.gramian_condition,
            "gramian_condition_limit": info.condition_limit,
            "terminal_error_max": info.terminal_error_max,
            "terminal_error_relative": info.terminal_error_relative,
            "refusal_rule": "energies are refused, never written, when the Gramian condition exceeds the limit or a \
                             transition misses its target by more than 1e-3 of the largest state norm",
            "warnings": info.warnings,
        },
        "tests": r.tests.iter().map(|t| json!({
            "test": t.key(),
            "outcome": t.outcome.name(),
            "null_family": t.family.label(),
            "null_model": t.method,
            "hypothesis": t.hypothesis,
            "observed": t.observed,
            "n_null": t.n_null,
            "null_mean": t.null_mean,
            "null_sd": t.null_sd,
            "p_value": t.p_value,
            "p_fdr": t.p_fdr,
        })).collect::<Vec<_>>(),
        "null_models": null_models_json(r),
        "notes": r.notes,
        "covariates": r.covariates,
        "record": record,
        "provenance": prov,
    })
}

/// What each null family did: the model, its hypothesis and, for network
/// nulls, how far it moved the network.
fn null_models_json(r: &SubjectResult) -> Vec<Value> {
    let runs = r.network_nulls.iter().chain(r.map_nulls.iter());
    runs.map(|run| {
        json!({
            "null_family": run.family.label(),
            "null_model": run.method,
            "hypothesis": run.hypothesis,
            "requested": run.requested,
            "usable": run.rows.len(),
            "effect": run.effect.as_ref().map(|e| json!({
                "density": e.density,
                "swaps_accepted_share": e.accepted_share,
                "edges_changed_mean": e.edges_changed,
                "strength_error_mean": e.strength_error,
                "refusal_rule": format!(
                    "refused when fewer than {:.0} % of edges change per null, or (swap models) fewer than \
                     {:.0} % of swaps are accepted", 100.0 * crate::stats::nulls::MIN_EDGES_CHANGED,
                    100.0 * crate::stats::nulls::MIN_ACCEPTED_SHARE),
            })),
        })
    })
    .collect()
}

fn finite(v: f64) -> Value {
    if v.is_finite() {
        json!(v)
    } else {
        Value::Null
    }
}

/// Every table of a subject, through `sink`.
///
/// # Errors
/// [`IoError`] from the sink.
pub fn write_tables(r: &SubjectResult, sink: &mut dyn Sink) -> Result<(), IoError> {
    sink.table(&schema::TIMESCALES, &timescales_table(r))?;
    sink.table(&schema::REGIONS, &regions_table(r))?;
    sink.table(&schema::STATES, &states_table(r))?;
    sink.table(&schema::PAIRS, &pairs_table(&r.link.pairs))?;
    if let Some(run) = &r.network_nulls {
        sink.table(&schema::NETWORK_NULLS, &network_nulls_table(run))?;
    }
    if let Some(run) = &r.map_nulls {
        sink.table(&schema::MAP_NULLS, &map_nulls_table(run))?;
    }
    if !r.tests.is_empty() {
        sink.table(&schema::TESTS, &tests_table(r))?;
    }
    Ok(())
}

/// The matrices and attributes of the HDF5 file that are not tables.
fn h5_extras(r: &SubjectResult, prov: &Provenance, h5s: &mut H5Sink) {
    let root = h5s.root_mut();
    root.set_provenance(prov);
    root.set_attr("subject", AttrValue::Str(r.subject.clone()));
    root.set_attr("numbering", AttrValue::Str("states, regions, ranks and nulls are counted from 1".into()));
    for (k, v) in &r.covariates {
        root.set_attr(&format!("covariate_{k}"), AttrValue::Str(v.clone()));
    }
    let dims = |d: &mut h5::Dataset, names: &[&str], unit: &str| {
        d.set_attr("dimensions", AttrValue::StrList(names.iter().map(|s| s.to_string()).collect()));
        d.set_attr("units", AttrValue::Str(unit.into()));
    };
    let g = h5s.group("timescales");
    g.set_attr("n_frames", AttrValue::I64(r.n_frames as i64));
    g.set_attr("n_valid_frames", AttrValue::I64(r.n_valid_frames() as i64));
    g.set_attr("linked_column", AttrValue::Str(r.timescales.column.clone()));
    let g = h5s.group("hierarchy");
    dims(g.add_matrix("state_vectors", &r.states.matrix), &["region", "state"], "1");
    dims(g.add_matrix("distance", &r.states.distance), &["initial_state", "target_state"], "states");
    g.add_dataset("region_names", DataValue::Str(r.names.clone()));
    let g = h5s.group("control");
    dims(g.add_matrix("energy", &r.control.energy), &["initial_state", "target_state"], "energy");
    dims(
        g.add_matrix("asymmetry", &crate::control::asymmetry(r.control.energy.view())),
        &["initial_state", "target_state"],
        "energy: E[i,j] - E[j,i]",
    );
    let info = &r.control.info;
    g.set_attr("energy_route", AttrValue::Str(info.route.name().to_string()));
    g.set_attr("gramian_condition", AttrValue::F64(info.gramian_condition));
    g.set_attr("terminal_error_max", AttrValue::F64(info.terminal_error_max));
    g.set_attr("warnings", AttrValue::StrList(info.warnings.clone()));
    let g = h5s.group("link");
    g.set_attr("summary_json", AttrValue::Str(serde_json::to_string(&r.link.summary).unwrap_or_default()));
}

/// Write `r` to `out_root/<subject>/`, all or nothing, replacing only a
/// folder hierax made. `command` names the command in the provenance.
///
/// # Errors
/// [`IoError::NotOurs`] for a folder hierax did not make; [`IoError`] when
/// writing fails (nothing is left behind).
pub fn write_subject(r: &SubjectResult, out_root: &Path, command: &str) -> Result<PathBuf, IoError> {
    let mut prov = Provenance::new(command, parameters_json(r));
    prov.inputs = r.inputs.clone();
    let staged = StagedFolder::begin(out_root, &r.subject, marker_for(r))?;
    let mut csv = CsvSink::new(staged.path(), &r.subject);
    let mut h5s = H5Sink::new();
    write_tables(r, &mut Tee(vec![&mut csv, &mut h5s]))?;
    crate::io::table::write_json(
        &staged.path().join(format!("{}_summary.json", r.subject)),
        &summary_json(r, &prov, &SubjectRecord::of(r, out_root.join(&r.subject))),
    )?;
    h5_extras(r, &prov, &mut h5s);
    h5::write_file(&staged.path().join(format!("{}_hierax.h5", r.subject)), &h5s.finish())?;
    staged.commit()
}

/// Read back the asymmetry matrix (k × k, states in order) from a written
/// subject folder's pairs table.
///
/// # Errors
/// [`IoError`] when the table cannot be read or is not k² rows.
pub fn read_asymmetry(dir: &Path, subject: &str) -> Result<ndarray::Array2<f64>, IoError> {
    let path = dir.join(format!("{subject}_{}.csv", schema::PAIRS.stem));
    let spec = crate::io::InputSpec::new(&path, Some("asymmetry"));
    let v = crate::io::read_array(&spec)?.vector()?.to_vec();
    let k = (v.len() as f64).sqrt().round() as usize;
    if k * k != v.len() || k == 0 {
        return Err(IoError::format(&path, format!("expected k^2 pair rows, found {}", v.len())));
    }
    ndarray::Array2::from_shape_vec((k, k), v).map_err(|e| IoError::format(&path, e.to_string()))
}
