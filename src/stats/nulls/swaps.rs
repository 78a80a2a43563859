//! Double-edge swaps: undirected (Maslov & Sneppen 2002) and directed
//! (ordered edges, keeping every in- and out-degree).

use super::edges::{Edge, LengthBins};
use super::{NullModelDef, RewireOutcome};
use rand::Rng;

/// Run `swaps_per_edge` × |E| double-edge swap attempts in place and return
/// (attempted, accepted).
///
/// Undirected: edges a–b and c–d become a–d and c–b (the second edge's
/// orientation drawn at random, so both rewirings are reachable). Directed:
/// a→b and c→d become a→d and c→b, which keeps the out-degree of a and c and
/// the in-degree of b and d; each weight stays with its source, so
/// out-strengths are kept exactly as well. A swap is rejected when it would
/// create a self-loop or an edge that exists, or when `allowed(old, new)`
/// vetoes it.
pub(super) fn swap_edges<R: Rng + ?Sized>(
    n: usize,
    edges: &mut [Edge],
    directed: bool,
    swaps_per_edge: usize,
    rng: &mut R,
    mut allowed: impl FnMut(&[Edge; 2], &[(usize, usize); 2]) -> bool,
) -> (usize, usize) {
    let mut adj = vec![false; n * n];
    let set = |adj: &mut [bool], x: usize, y: usize, v: bool| {
        adj[x * n + y] = v;
        if !directed {
            adj[y * n + x] = v;
        }
    };
    for e in edges.iter() {
        set(&mut adj, e.a, e.b, true);
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
        let (c, d) = if !directed && rng.random_bool(0.5) { (e2.b, e2.a) } else { (e2.a, e2.b) };
        let (a, b) = (e1.a, e1.b);
        if a == d || c == b || a == c || b == d || adj[a * n + d] || adj[c * n + b] {
            continue;
        }
        if !allowed(&[e1, e2], &[(a, d), (c, b)]) {
            continue;
        }
        set(&mut adj, a, b, false);
        set(&mut adj, c, d, false);
        set(&mut adj, a, d, true);
        set(&mut adj, c, b, true);
        let edge = |x: usize, y: usize, w: f64| {
            if directed {
                Edge { a: x, b: y, w }
            } else {
                Edge { a: x.min(y), b: x.max(y), w }
            }
        };
        edges[i] = edge(a, d, e1.w);
        edges[j] = edge(c, b, e2.w);
        accepted += 1;
    }
    (attempts, accepted)
}

/// Swaps that keep each edge's length bin: a swap is accepted only when each
/// new edge lies in the bin of the edge it replaces (after Betzel & Bassett
/// 2018). Returns (attempted, accepted).
pub(super) fn length_preserving_swaps<R: Rng + ?Sized>(
    n: usize,
    edges: &mut [Edge],
    directed: bool,
    distance: ndarray::ArrayView2<'_, f64>,
    bins: &LengthBins,
    swaps_per_edge: usize,
    rng: &mut R,
) -> (usize, usize) {
    swap_edges(n, edges, directed, swaps_per_edge, rng, |old, new| {
        bins.of(distance[[old[0].a, old[0].b]]) == bins.of(distance[[new[0].0, new[0].1]])
            && bins.of(distance[[old[1].a, old[1].b]]) == bins.of(distance[[new[1].0, new[1].1]])
    })
}

/// Two-sample Kolmogorov–Smirnov statistic sup|F₁ − F₂| of two sorted samples
/// (Smirnov 1939).
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
/// Double-edge swaps keeping every degree (Maslov & Sneppen 2002).
pub(super) const DEGREE_SWAP: NullModelDef = NullModelDef {
    label: "degree-swap",
    summary: "Double-edge swaps that keep every degree; weights travel with their edges (Maslov & Sneppen \
              2002). For sparse networks",
    hypothesis: "the statistic is no more extreme than on networks with the same degrees and weights but \
                 random wiring: it depends on which regions connect, beyond how many connections each has",
    needs_distances: false,
    swaps_edges: true,
    sparse_refusal_advice: None,
    rewire: |x, edges, rng| RewireOutcome {
        swaps: Some(swap_edges(x.n, edges, x.directed, x.params.swaps_per_edge, rng, |_, _| true)),
        length_ks_distance: None,
    },
};

/// Degree swaps, then weights re-matched to the strengths (after Rubinov & Sporns 2011).
pub(super) const STRENGTH_SWAP: NullModelDef = NullModelDef {
    label: "strength-swap",
    summary: "Degree swaps, then weights re-matched to the original strengths (after Rubinov & Sporns \
              2011). For sparse networks",
    hypothesis: "the statistic is no more extreme than on randomly wired networks with the same degrees and \
                 approximately the same strengths: it depends on the wiring beyond each region's total \
                 connection weight",
    needs_distances: false,
    swaps_edges: true,
    sparse_refusal_advice: None,
    rewire: |x, edges, rng| {
        let swaps = swap_edges(x.n, edges, x.directed, x.params.swaps_per_edge, rng, |_, _| true);
        super::permute::strength_matched(edges, x.directed, x.strengths, None, rng);
        RewireOutcome { swaps: Some(swaps), length_ks_distance: None }
    },
};

/// Degree swaps that keep each edge's length bin (after Betzel & Bassett 2018).
pub(super) const GEOMETRY_SWAP: NullModelDef = NullModelDef {
    label: "geometry-swap",
    summary: "Degree swaps kept only when each new edge has the length bin of the one it replaces (after \
              Betzel & Bassett 2018); needs distances. For sparse networks",
    hypothesis: "the statistic is no more extreme than on randomly wired networks with the same degrees and \
                 edge-length distribution: it depends on the wiring beyond what wiring length explains",
    needs_distances: true,
    swaps_edges: true,
    sparse_refusal_advice: Some(
        "swaps that must keep every edge's length bin are too constrained here: use fewer length bins, or the \
         length-bin-shuffle null model",
    ),
    rewire: |x, edges, rng| {
        let d = x.distance.expect("checked by rewire: the model needs distances");
        let swaps = length_preserving_swaps(x.n, edges, x.directed, d, x.bins, x.params.swaps_per_edge, rng);
        let mut after: Vec<f64> = edges.iter().map(|e| d[[e.a, e.b]]).collect();
        after.sort_by(f64::total_cmp);
        RewireOutcome { swaps: Some(swaps), length_ks_distance: Some(ks_distance_sorted(x.sorted_lengths, &after)) }
    },
};
