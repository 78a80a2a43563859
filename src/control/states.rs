//! Brain states as columns of an n × k matrix: read from a matrix, or built
//! as indicators of equal-count bins of regions ranked by a map.

use super::ControlError;
use ndarray::{Array2, ArrayView1, ArrayView2};

/// Put a state matrix in n × k layout (one state per column).
///
/// A k × n matrix (one state per row) is transposed. A square n × n matrix
/// is read as one state per row, as written by most tools that store
/// states row-wise (a stated convention, no source); the returned flag says
/// whether it was transposed.
///
/// # Errors
/// [`ControlError::States`] when neither dimension equals `n`, or a value
/// is not finite.
pub fn states_from_matrix(m: ArrayView2<'_, f64>, n: usize) -> Result<(Array2<f64>, bool), ControlError> {
    let (r, c) = m.dim();
    let transpose = if c == n {
        true
    } else if r == n {
        false
    } else {
        return Err(ControlError::States(format!(
            "is {r} x {c}, but neither dimension matches the {n} regions of the connectome"
        )));
    };
    let out = if transpose { m.t().to_owned() } else { m.to_owned() };
    if let Some(((i, j), v)) = out.indexed_iter().find(|(_, v)| !v.is_finite()) {
        return Err(ControlError::States(format!(
            "expected finite values, found {v} at region {}, state {}",
            i + 1,
            j + 1
        )));
    }
    Ok((out, transpose))
}

/// Indicator states of `k` equal-count bins of the regions ranked by `map`.
///
/// Regions are sorted by ascending map value, ties broken by region index
/// (a stable sort); the region of rank `r` (0-based) goes to bin
/// `⌊r·k/n⌋`, so bin sizes differ by at most one. State `j` (column `j`)
/// is 1 on bin `j` and 0 elsewhere; bin 0 holds the lowest values.
///
/// # Errors
/// [`ControlError::States`] when `k` is 0 or exceeds `n`, or a map value is
/// not finite.
pub fn indicator_states(map: ArrayView1<'_, f64>, k: usize) -> Result<Array2<f64>, ControlError> {
    let n = map.len();
    if k == 0 || k > n {
        return Err(ControlError::States(format!("--bins {k}: expected between 1 and the {n} regions")));
    }
    if let Some(i) = map.iter().position(|v| !v.is_finite()) {
        return Err(ControlError::States(format!(
            "map value {} at region {} is not finite; every region needs a rank",
            map[i],
            i + 1
        )));
    }
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| map[a].total_cmp(&map[b]));
    let mut x = Array2::zeros((n, k));
    for (rank, &region) in order.iter().enumerate() {
        x[[region, rank * k / n]] = 1.0;
    }
    Ok(x)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn bins_are_equal_count_with_ties_by_index() {
        let map = array![0.5, 0.1, 0.5, 0.9, 0.1];
        let x = indicator_states(map.view(), 2).unwrap();
        // ranks: r1(0.1), r4(0.1), r0(0.5), r2(0.5), r3(0.9) -> bins 0,0,0,1,1
        assert_eq!(x.column(0).to_vec(), vec![1.0, 1.0, 0.0, 0.0, 1.0]);
        assert_eq!(x.column(1).to_vec(), vec![0.0, 0.0, 1.0, 1.0, 0.0]);
        assert!(indicator_states(map.view(), 6).is_err());
    }

    #[test]
    fn state_matrix_orientation() {
        let m = Array2::<f64>::zeros((2, 5));
        let (x, t) = states_from_matrix(m.view(), 5).unwrap();
        assert_eq!((x.dim(), t), ((5, 2), true));
        let e = states_from_matrix(m.view(), 4).unwrap_err().to_string();
        assert!(e.contains("2 x 5"), "{e}");
    }
}
