//! Edge lists of a connectome and the measures every null model reports.

use ndarray::{Array2, ArrayView2};

/// One edge: `a → b` (directed) or `a – b` with `a < b` (undirected).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Edge {
    pub a: usize,
    pub b: usize,
    pub w: f64,
}

/// The positive off-diagonal entries of `w`: every ordered pair when
/// directed, the upper triangle otherwise (the caller's matrix is symmetric).
pub(super) fn edges_of(w: ArrayView2<'_, f64>, directed: bool) -> Vec<Edge> {
    let n = w.nrows();
    let mut out = Vec::new();
    for a in 0..n {
        let from = if directed { 0 } else { a + 1 };
        for b in from..n {
            if a != b && w[[a, b]] > 0.0 {
                out.push(Edge { a, b, w: w[[a, b]] });
            }
        }
    }
    out
}

/// The matrix of `edges`, keeping the diagonal of `original` (self-connections
/// are not rewired).
pub(super) fn to_matrix(original: ArrayView2<'_, f64>, edges: &[Edge], directed: bool) -> Array2<f64> {
    let n = original.nrows();
    let mut m = Array2::zeros((n, n));
    for i in 0..n {
        m[[i, i]] = original[[i, i]];
    }
    for e in edges {
        m[[e.a, e.b]] = e.w;
        if !directed {
            m[[e.b, e.a]] = e.w;
        }
    }
    m
}

/// Out-strengths (row sums) and in-strengths (column sums) of the off-diagonal part.
pub(super) fn strengths(w: ArrayView2<'_, f64>) -> (Vec<f64>, Vec<f64>) {
    let n = w.nrows();
    let mut out = vec![0.0; n];
    let mut inn = vec![0.0; n];
    for ((i, j), &v) in w.indexed_iter() {
        if i != j {
            out[i] += v;
            inn[j] += v;
        }
    }
    (out, inn)
}

/// Relative strength error ‖s′ − s‖ / ‖s‖ over out- and in-strengths together
/// (for an undirected network the two halves are equal, so this is the
/// error of the strength sequence).
pub(super) fn strength_error(original: &(Vec<f64>, Vec<f64>), null: &(Vec<f64>, Vec<f64>)) -> f64 {
    let pairs = original.0.iter().zip(&null.0).chain(original.1.iter().zip(&null.1));
    let (num, den) = pairs.fold((0.0, 0.0), |(n, d), (a, b)| (n + (a - b) * (a - b), d + a * a));
    if den > 0.0 {
        (num / den).sqrt()
    } else {
        0.0
    }
}

/// Share of the original edges whose entry in `null` differs from its
/// original weight (moved away, or given another weight).
pub(super) fn edges_changed(original: &[Edge], null: &Array2<f64>) -> f64 {
    let changed = original.iter().filter(|e| null[[e.a, e.b]] != e.w).count();
    changed as f64 / original.len() as f64
}

/// Cut points of `bins` equal-count bins of `lengths` (sorted ascending), and
/// the bin of a length.
pub(super) struct LengthBins {
    cuts: Vec<f64>,
}

impl LengthBins {
    pub fn new(sorted: &[f64], bins: usize) -> Self {
        if sorted.is_empty() {
            return LengthBins { cuts: Vec::new() };
        }
        LengthBins { cuts: (1..bins).map(|q| sorted[q * sorted.len() / bins]).collect() }
    }

    pub fn of(&self, len: f64) -> usize {
        self.cuts.iter().filter(|&&c| len >= c).count()
    }
}
