//! Network null models: rewired connectomes that keep chosen properties.
//!
//! All models act on undirected networks given as symmetric, non-negative
//! weight matrices with a zero diagonal, are driven by a caller-supplied
//! seeded RNG (so the parameters and the seed reproduce a null exactly) and
//! return diagnostics ([`RewireInfo`]) that say how well the preserved
//! properties were kept.
//!
//! * [`degree_preserving`]: Maslov & Sneppen (2002) double-edge swaps. Each
//!   edge keeps its weight, so the degree sequence and the weight distribution
//!   are preserved exactly; node strengths drift.
//! * [`strength_preserving`]: degree-preserving swaps followed by a
//!   reassignment of the original weights that keeps node strengths close to
//!   the original (after Rubinov & Sporns 2011, NeuroImage): edges are taken
//!   in random order and each gets the remaining weight whose rank matches the
//!   rank of its expected weight r_i·r_j among the remaining edges, where r are
//!   the residual strengths. The strength error is reported.
//! * [`geometry_preserving`]: swaps accepted only when each new edge falls in
//!   the same edge-length bin as the edge it replaces, so the degree sequence
//!   is exact and the edge-length distribution is kept to the bin resolution
//!   (after Betzel & Bassett 2018, PNAS, who preserve degree and the
//!   length distribution of wiring). Weights travel with length bins: each new
//!   edge takes the weight of the edge it replaces.

use super::StatsError;
use ndarray::Array2;
use rand::Rng;

/// Diagnostics of one rewiring.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct RewireInfo {
    /// Swaps attempted.
    pub attempted: usize,
    /// Swaps accepted.
    pub accepted: usize,
    /// Root-mean-square relative strength error ‖s' − s‖ / ‖s‖.
    pub strength_error: f64,
    /// Two-sample Kolmogorov–Smirnov distance between original and null
    /// edge lengths (only for the geometry-preserving model).
    pub length_ks_distance: Option<f64>,
}

#[derive(Clone, Copy, Debug, PartialEq)]
struct Edge {
    a: usize,
    b: usize,
    w: f64,
}

fn edges_of(w: &Array2<f64>) -> Result<Vec<Edge>, StatsError> {
    let n = w.nrows();
    if w.ncols() != n {
        return Err(StatsError::LengthMismatch { left: n, right: w.ncols() });
    }
    let mut out = Vec::new();
    for a in 0..n {
        for b in (a + 1)..n {
            let v = w[[a, b]];
            if !(v >= 0.0 && v.is_finite()) {
                return Err(StatsError::OutOfRange {
                    name: "connectome weight",
                    expected: "finite and >= 0",
                    value: v,
                });
            }
            if v > 0.0 {
                out.push(Edge { a, b, w: v });
            }
        }
    }
    if out.len() < 2 {
        return Err(StatsError::TooFew { statistic: "edge swapping", needed: 2, found: out.len() });
    }
    Ok(out)
}

fn to_matrix(n: usize, edges: &[Edge]) -> Array2<f64> {
    let mut m = Array2::zeros((n, n));
    for e in edges {
        m[[e.a, e.b]] = e.w;
        m[[e.b, e.a]] = e.w;
    }
    m
}

fn strengths(w: &Array2<f64>) -> Vec<f64> {
    w.rows().into_iter().map(|r| r.sum()).collect()
}

fn strength_error(orig: &[f64], null: &[f64]) -> f64 {
    let num: f64 = orig.iter().zip(null).map(|(a, b)| (a - b) * (a - b)).sum();
    let den: f64 = orig.iter().map(|a| a * a).sum();
    if den > 0.0 {
        (num / den).sqrt()
    } else {
        0.0
    }
}

/// Run double-edge swaps in place. `allowed(old, new)` may veto a swap that
/// is otherwise valid (no self-loop, no duplicate edge).
fn swap_edges<R: Rng + ?Sized>(
    n: usize,
    edges: &mut [Edge],
    swaps_per_edge: usize,
    rng: &mut R,
    mut allowed: impl FnMut(&[Edge; 2], &[(usize, usize); 2]) -> bool,
) -> (usize, usize) {
    let mut adj = vec![false; n * n];
    for e in edges.iter() {
        adj[e.a * n + e.b] = true;
        adj[e.b * n + e.a] = true;
    }
    let m = edges.len();
    let attempts = swaps_per_edge * m;
    let mut accepted = 0;
    for _ in 0..attempts {
        let i = rng.random_range(0..m);
        let j = rng.random_range(0..m);
        if i == j {
            continue;
        }
        let (e1, e2) = (edges[i], edges[j]);
        // Orientation of the second edge is random, so both rewirings are reachable.
        let (c, d) = if rng.random_bool(0.5) { (e2.a, e2.b) } else { (e2.b, e2.a) };
        let (a, b) = (e1.a, e1.b);
        // New edges a–d and c–b.
        if a == d || c == b || a == c || b == d || adj[a * n + d] || adj[c * n + b] {
            continue;
        }
        if !allowed(&[e1, e2], &[(a, d), (c, b)]) {
            continue;
        }
        for (x, y) in [(a, b), (c, d)] {
            adj[x * n + y] = false;
            adj[y * n + x] = false;
        }
        for (x, y) in [(a, d), (c, b)] {
            adj[x * n + y] = true;
            adj[y * n + x] = true;
        }
        edges[i] = Edge { a: a.min(d), b: a.max(d), w: e1.w };
        edges[j] = Edge { a: c.min(b), b: c.max(b), w: e2.w };
        accepted += 1;
    }
    (attempts, accepted)
}

/// Degree-preserving rewiring by double-edge swaps (Maslov & Sneppen 2002,
/// Science): pick edges a–b and c–d, replace them by a–d and c–b unless that
/// creates a self-loop or a duplicate. `swaps_per_edge` × |E| swaps are
/// attempted (10 is common practice, no source). Weights stay with edges.
///
/// # Errors
/// [`StatsError`] when the matrix is not square, has a negative or
/// non-finite weight, or fewer than 2 edges.
pub fn degree_preserving<R: Rng + ?Sized>(
    w: &Array2<f64>,
    swaps_per_edge: usize,
    rng: &mut R,
) -> Result<(Array2<f64>, RewireInfo), StatsError> {
    let (edges, attempted, accepted) = unconstrained_swaps(w, swaps_per_edge, rng)?;
    Ok(finish(w, &edges, attempted, accepted, None))
}

/// Edges of `w` after unconstrained double-edge swaps, with the swap counts.
fn unconstrained_swaps<R: Rng + ?Sized>(
    w: &Array2<f64>,
    swaps_per_edge: usize,
    rng: &mut R,
) -> Result<(Vec<Edge>, usize, usize), StatsError> {
    let mut edges = edges_of(w)?;
    let (attempted, accepted) = swap_edges(w.nrows(), &mut edges, swaps_per_edge, rng, |_, _| true);
    Ok((edges, attempted, accepted))
}

/// The null matrix of `edges` and its diagnostics against the original `w`.
fn finish(
    w: &Array2<f64>,
    edges: &[Edge],
    attempted: usize,
    accepted: usize,
    ks: Option<f64>,
) -> (Array2<f64>, RewireInfo) {
    let null = to_matrix(w.nrows(), edges);
    let info = RewireInfo {
        attempted,
        accepted,
        strength_error: strength_error(&strengths(w), &strengths(&null)),
        length_ks_distance: ks,
    };
    (null, info)
}

/// Degree-preserving swaps, then weights reassigned to keep strengths (see
/// the module docs; after Rubinov & Sporns 2011).
///
/// # Errors
/// As [`degree_preserving`].
pub fn strength_preserving<R: Rng + ?Sized>(
    w: &Array2<f64>,
    swaps_per_edge: usize,
    rng: &mut R,
) -> Result<(Array2<f64>, RewireInfo), StatsError> {
    let (mut edges, attempted, accepted) = unconstrained_swaps(w, swaps_per_edge, rng)?;
    let target = strengths(w);
    let mut residual = target.clone();
    // Remaining weights, ascending.
    let mut weights: Vec<f64> = edges.iter().map(|e| e.w).collect();
    weights.sort_by(f64::total_cmp);
    let mut remaining: Vec<usize> = (0..edges.len()).collect();
    while !remaining.is_empty() {
        let pick = rng.random_range(0..remaining.len());
        let e = remaining[pick];
        let expected = |k: usize| residual[edges[k].a].max(0.0) * residual[edges[k].b].max(0.0);
        let mine = expected(e);
        // Rank of this edge's expected weight among the remaining edges.
        let rank = remaining.iter().filter(|&&k| expected(k) < mine).count();
        let wv = weights.remove(rank.min(weights.len() - 1));
        edges[e].w = wv;
        residual[edges[e].a] -= wv;
        residual[edges[e].b] -= wv;
        remaining.swap_remove(pick);
    }
    Ok(finish(w, &edges, attempted, accepted, None))
}

/// Degree- and edge-length-preserving rewiring from a distance matrix (see
/// the module docs; after Betzel & Bassett 2018). Edge lengths are split into
/// `length_bins` equal-count bins; a swap is kept only when each new edge lies
/// in the length bin of the edge it replaces.
///
/// # Errors
/// As [`degree_preserving`], plus [`StatsError::LengthMismatch`] when the
/// distance matrix has another size and [`StatsError::OutOfRange`] for
/// `length_bins` = 0 or a non-finite distance.
pub fn geometry_preserving<R: Rng + ?Sized>(
    w: &Array2<f64>,
    distance: &Array2<f64>,
    length_bins: usize,
    swaps_per_edge: usize,
    rng: &mut R,
) -> Result<(Array2<f64>, RewireInfo), StatsError> {
    let n = w.nrows();
    if distance.dim() != (n, n) {
        return Err(StatsError::LengthMismatch { left: n, right: distance.nrows() });
    }
    if length_bins == 0 {
        return Err(StatsError::OutOfRange { name: "length_bins", expected: ">= 1", value: 0.0 });
    }
    if let Some(&bad) = distance.iter().find(|v| !v.is_finite()) {
        return Err(StatsError::OutOfRange { name: "distance", expected: "finite", value: bad });
    }
    let mut edges = edges_of(w)?;
    let mut lengths: Vec<f64> = edges.iter().map(|e| distance[[e.a, e.b]]).collect();
    lengths.sort_by(f64::total_cmp);
    // Bin edges at equal-count quantiles of the original edge lengths.
    let cuts: Vec<f64> = (1..length_bins).map(|q| lengths[q * lengths.len() / length_bins]).collect();
    let bin_of = |len: f64| cuts.iter().filter(|&&c| len >= c).count();
    let (attempted, accepted) = swap_edges(n, &mut edges, swaps_per_edge, rng, |old, new| {
        bin_of(distance[[old[0].a, old[0].b]]) == bin_of(distance[[new[0].0, new[0].1]])
            && bin_of(distance[[old[1].a, old[1].b]]) == bin_of(distance[[new[1].0, new[1].1]])
    });
    let mut null_lengths: Vec<f64> = edges.iter().map(|e| distance[[e.a, e.b]]).collect();
    null_lengths.sort_by(f64::total_cmp);
    Ok(finish(w, &edges, attempted, accepted, Some(ks_distance_sorted(&lengths, &null_lengths))))
}

/// Two-sample Kolmogorov–Smirnov statistic sup|F₁ − F₂| of two sorted samples.
pub fn ks_distance_sorted(a: &[f64], b: &[f64]) -> f64 {
    let (mut i, mut j, mut d) = (0usize, 0usize, 0.0f64);
    while i < a.len() && j < b.len() {
        let x = a[i].min(b[j]);
        while i < a.len() && a[i] <= x {
            i += 1;
        }
        while j < b.len() && b[j] <= x {
            j += 1;
        }
        d = d.max((i as f64 / a.len() as f64 - j as f64 / b.len() as f64).abs());
    }
    d
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    fn random_network(n: usize, p: f64, seed: u64) -> Array2<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut w = Array2::zeros((n, n));
        for a in 0..n {
            for b in (a + 1)..n {
                if rng.random_bool(p) {
                    let v: f64 = rng.random_range(0.1..5.0);
                    w[[a, b]] = v;
                    w[[b, a]] = v;
                }
            }
        }
        w
    }

    fn degrees(w: &Array2<f64>) -> Vec<usize> {
        w.rows().into_iter().map(|r| r.iter().filter(|v| **v > 0.0).count()).collect()
    }

    fn sorted_weights(w: &Array2<f64>) -> Vec<f64> {
        let mut v: Vec<f64> = w.iter().copied().filter(|v| *v > 0.0).collect();
        v.sort_by(f64::total_cmp);
        v
    }

    #[test]
    fn swaps_keep_degrees_and_weights_exactly_over_seeds() {
        let w = random_network(40, 0.2, 7);
        for seed in 0..5 {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let (null, info) = degree_preserving(&w, 10, &mut rng).unwrap();
            assert_eq!(degrees(&null), degrees(&w));
            assert_eq!(sorted_weights(&null), sorted_weights(&w));
            assert!(info.accepted > info.attempted / 4, "{info:?}");
            assert_ne!(null, w);
            assert_eq!(null, null.t());
            assert!((0..40).all(|i| null[[i, i]] == 0.0));
        }
    }

    #[test]
    fn strength_preserving_beats_plain_swaps_on_strength_error() {
        let w = random_network(60, 0.3, 11);
        let mut r1 = ChaCha8Rng::seed_from_u64(1);
        let mut r2 = ChaCha8Rng::seed_from_u64(1);
        let (_, plain) = degree_preserving(&w, 10, &mut r1).unwrap();
        let (null, kept) = strength_preserving(&w, 10, &mut r2).unwrap();
        assert_eq!(degrees(&null), degrees(&w));
        assert_eq!(sorted_weights(&null), sorted_weights(&w));
        assert!(kept.strength_error < 0.5 * plain.strength_error, "{kept:?} vs {plain:?}");
    }

    #[test]
    fn geometry_preserving_keeps_length_distribution() {
        let n = 50;
        let pos: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let d = Array2::from_shape_fn((n, n), |(i, j)| (pos[i] - pos[j]).abs());
        // Distance-dependent wiring: nearby nodes connect more.
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let mut w = Array2::zeros((n, n));
        for a in 0..n {
            for b in (a + 1)..n {
                if rng.random_bool((-d[[a, b]] / 8.0).exp()) {
                    w[[a, b]] = 1.0;
                    w[[b, a]] = 1.0;
                }
            }
        }
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let (geo, info) = geometry_preserving(&w, &d, 10, 10, &mut rng).unwrap();
        let (plain, _) = degree_preserving(&w, 10, &mut rng).unwrap();
        assert_eq!(degrees(&geo), degrees(&w));
        let lengths = |m: &Array2<f64>| {
            let mut v = Vec::new();
            for a in 0..n {
                for b in (a + 1)..n {
                    if m[[a, b]] > 0.0 {
                        v.push(d[[a, b]]);
                    }
                }
            }
            v.sort_by(f64::total_cmp);
            v
        };
        let ks_geo = info.length_ks_distance.unwrap();
        let ks_plain = ks_distance_sorted(&lengths(&w), &lengths(&plain));
        // Tolerance: with 10 equal-count bins the CDF can move by at most one bin's share (0.1)
        // plus the share of tied lengths at a cut; plain swaps lose the distance dependence.
        assert!(ks_geo <= 0.15, "KS {ks_geo}");
        assert!(ks_plain > 2.0 * ks_geo, "plain {ks_plain} vs geometry {ks_geo}");
        assert!(info.accepted > 0);
    }

    #[test]
    fn ks_distance_of_shifted_samples() {
        // sup|F1 - F2| for {1,2,3,4} vs {3,4,5,6} is 0.5 (hand computation).
        assert_eq!(ks_distance_sorted(&[1., 2., 3., 4.], &[3., 4., 5., 6.]), 0.5);
        assert_eq!(ks_distance_sorted(&[1., 2.], &[1., 2.]), 0.0);
    }
}
