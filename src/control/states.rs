//! Brain states as columns of an n × k matrix, read from a matrix. States
//! built from a hierarchy map come from [`crate::hierarchy::build_states`].

use super::ControlError;
use ndarray::{Array2, ArrayView2};

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn state_matrix_orientation() {
        let m = Array2::<f64>::zeros((2, 5));
        let (x, t) = states_from_matrix(m.view(), 5).unwrap();
        assert_eq!((x.dim(), t), ((5, 2), true));
        let e = states_from_matrix(m.view(), 4).unwrap_err().to_string();
        assert!(e.contains("2 x 5"), "{e}");
    }
}
