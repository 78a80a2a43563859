//! Results as tidy [`Table`]s, shared by the `energy` command and any caller
//! that writes them elsewhere (CSV now; an HDF5 group can take the same
//! arrays). Conventions: states and regions numbered from 1; `E[i, j]` is
//! the energy from state `i` (initial) to state `j` (target).

use super::metrics::NodeMetrics;
use crate::io::table::{Column, Table};
use ndarray::ArrayView2;

/// Labels `state_1 … state_k`.
pub fn state_labels(k: usize) -> Vec<String> {
    (1..=k).map(|i| format!("state_{i}")).collect()
}

/// One row per ordered pair: `initial_state, target_state, energy,
/// asymmetry` (`E[i, j] − E[j, i]`), plus `penalised_energy` when given.
pub fn pair_table(energy: ArrayView2<'_, f64>, penalised: Option<ArrayView2<'_, f64>>) -> Table {
    let k = energy.nrows();
    let (mut src, mut dst, mut e, mut a, mut ep) = (vec![], vec![], vec![], vec![], vec![]);
    for i in 0..k {
        for j in 0..k {
            src.push(i as i64 + 1);
            dst.push(j as i64 + 1);
            e.push(energy[[i, j]]);
            a.push(energy[[i, j]] - energy[[j, i]]);
            if let Some(p) = &penalised {
                ep.push(p[[i, j]]);
            }
        }
    }
    let t = Table::new()
        .with("initial_state", Column::I64(src))
        .with("target_state", Column::I64(dst))
        .with("energy", Column::F64(e))
        .with("asymmetry", Column::F64(a));
    if penalised.is_some() {
        t.with("penalised_energy", Column::F64(ep))
    } else {
        t
    }
}

/// A k × k matrix with a leading `state` column (rows: initial state,
/// columns: target state).
pub fn matrix_table(m: ArrayView2<'_, f64>) -> Table {
    let labels = state_labels(m.ncols());
    let mut t = Table::new().with("state", Column::Str(labels.clone()));
    for (j, l) in labels.iter().enumerate() {
        t = t.with(l, Column::F64(m.column(j).to_vec()));
    }
    t
}

/// One row per region: `region, name, driver_weight,
/// average_controllability, modal_controllability` (NaN when not defined,
/// i.e. directed networks; the metrics' notes say so).
pub fn node_table(names: &[String], driver_weights: &[f64], metrics: &NodeMetrics) -> Table {
    let n = names.len();
    Table::new()
        .with("region", Column::I64((1..=n as i64).collect()))
        .with("name", Column::Str(names.to_vec()))
        .with("driver_weight", Column::F64(driver_weights.to_vec()))
        .with("average_controllability", Column::F64(metrics.average.to_vec()))
        .with(
            "modal_controllability",
            Column::F64(metrics.modal.as_ref().map_or_else(|| vec![f64::NAN; n], |m| m.to_vec())),
        )
}
