//! The tables of `hierax energy`, numbered as every other output (from 1).

use super::number;
use super::schema::{self, TableBuilder};
use crate::control::NodeMetrics;
use crate::io::table::{Column, Table};
use crate::io::{read_array, InputSpec, IoError};
use ndarray::{Array2, ArrayView2};

/// `energy.csv`: one row per ordered pair, with the penalised energy when given.
pub fn pairs_table(energy: ArrayView2<'_, f64>, penalised: Option<ArrayView2<'_, f64>>) -> Table {
    let k = energy.nrows();
    let idx: Vec<(usize, usize)> = (0..k).flat_map(|i| (0..k).map(move |j| (i, j))).collect();
    let b = TableBuilder::new(&schema::ENERGY_PAIRS)
        .col("initial_state", Column::I64(idx.iter().map(|&(i, _)| number(i)).collect()))
        .col("target_state", Column::I64(idx.iter().map(|&(_, j)| number(j)).collect()))
        .col("energy", Column::F64(idx.iter().map(|&(i, j)| energy[[i, j]]).collect()))
        .col("asymmetry", Column::F64(idx.iter().map(|&(i, j)| energy[[i, j]] - energy[[j, i]]).collect()));
    match penalised {
        Some(p) => {
            b.col("penalised_energy", Column::F64(idx.iter().map(|&(i, j)| p[[i, j]]).collect())).finish()
        }
        None => b.finish(),
    }
}

/// A k × k state matrix with a leading `state` column (rows: initial state).
pub fn state_matrix_table(m: ArrayView2<'_, f64>) -> Table {
    let mut b = TableBuilder::new(&schema::STATE_MATRIX)
        .col("state", Column::I64((0..m.nrows()).map(number).collect()));
    for j in 0..m.ncols() {
        b = b.col(&format!("state_{}", number(j)), Column::F64(m.column(j).to_vec()));
    }
    b.finish()
}

/// `node_metrics.csv`.
pub fn node_metrics_table(names: &[String], driver_weights: &[f64], metrics: &NodeMetrics) -> Table {
    let n = names.len();
    TableBuilder::new(&schema::NODE_METRICS)
        .col("region_number", Column::I64((0..n).map(number).collect()))
        .col("region", Column::Str(names.to_vec()))
        .col("driver_weight", Column::F64(driver_weights.to_vec()))
        .col("average_controllability", Column::F64(metrics.average.to_vec()))
        .col(
            "modal_controllability",
            Column::F64(metrics.modal.as_ref().map_or_else(|| vec![f64::NAN; n], |m| m.to_vec())),
        )
        .finish()
}

/// `qc.csv`.
pub fn qc_table(measures: &[(&str, f64)]) -> Table {
    TableBuilder::new(&schema::ENERGY_QC)
        .col("measure", Column::Str(measures.iter().map(|m| m.0.to_string()).collect()))
        .col("value", Column::F64(measures.iter().map(|m| m.1).collect()))
        .finish()
}

/// Read a k × k state matrix: a plain matrix of numbers, or the labelled
/// layout [`state_matrix_table`] writes (a leading `state` column numbered
/// 1..k, which is checked and dropped).
///
/// # Errors
/// [`IoError`] when the file cannot be read, is not a matrix, or its `state`
/// column is not 1..k.
pub fn read_state_matrix(spec: &InputSpec) -> Result<Array2<f64>, IoError> {
    let loaded = read_array(spec)?;
    let labelled = loaded.col_names.as_ref().and_then(|c| c.first()).is_some_and(|c| c == "state");
    let m = loaded.matrix()?;
    if !labelled {
        return Ok(m);
    }
    let expected: Vec<f64> = (0..m.nrows()).map(|i| number(i) as f64).collect();
    if m.column(0).to_vec() != expected {
        return Err(IoError::format(
            &spec.path,
            format!("column `state`: expected the states numbered 1 to {} in order", m.nrows()),
        ));
    }
    Ok(m.slice_axis(ndarray::Axis(1), ndarray::Slice::from(1..)).to_owned())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn state_matrix_round_trips_and_plain_matrices_still_read() {
        let dir = tempfile::tempdir().unwrap();
        let m = ndarray::array![[0.0, 1.5, 2.0], [3.0, 0.0, -4.25], [5.0, 6.0, 0.0]];
        let labelled = dir.path().join("m.csv");
        state_matrix_table(m.view()).write_csv(&labelled).unwrap();
        assert_eq!(read_state_matrix(&InputSpec::new(labelled.clone(), None)).unwrap(), m);
        let plain = dir.path().join("p.csv");
        std::fs::write(&plain, "0,1.5,2\n3,0,-4.25\n5,6,0\n").unwrap();
        assert_eq!(read_state_matrix(&InputSpec::new(plain, None)).unwrap(), m);
        let bad = dir.path().join("b.csv");
        std::fs::write(&bad, "state,state_1,state_2\n2,0,1\n1,1,0\n").unwrap();
        let e = read_state_matrix(&InputSpec::new(bad, None)).unwrap_err().to_string();
        assert!(e.contains("column `state`: expected the states numbered 1 to 2"), "{e}");
    }
}
