//! Weight reassignment on a fixed topology: strength matching (after
//! Rubinov & Sporns 2011), optionally within groups of edges such as
//! edge-length bins.

use super::edges::Edge;
use super::{NullModelDef, RewireOutcome};
use rand::seq::SliceRandom;
use rand::Rng;

/// Share of the remaining edges assigned per round of [`strength_matched`].
const BATCH_SHARE: f64 = 0.05;

/// Reassign the weights of `edges` among them so that node strengths stay
/// close to `target` (out, in), after Rubinov & Sporns (2011, NeuroImage).
/// Each round ranks the remaining edges by their expected weight
/// r_out(a)·r_in(b), where r are the residual strengths (for an undirected
/// network r_out = r_in = r and both ends are debited), draws a random
/// [`BATCH_SHARE`] of them, gives each the remaining weight of the same rank,
/// and debits the residuals. Their algorithm assigns one edge per round
/// (O(|E|²) per network); assigning a small share per round keeps the rank
/// matching and costs O(|E| log |E| / share).
///
/// With `groups` (one group per edge, e.g. its length bin), weights move
/// only within a group and ranks are taken within the group, so what the
/// groups stand for (the weight–length relation) is kept as well.
pub(super) fn strength_matched<R: Rng + ?Sized>(
    edges: &mut [Edge],
    directed: bool,
    target: &(Vec<f64>, Vec<f64>),
    groups: Option<(&[usize], usize)>,
    rng: &mut R,
) {
    let (group_of, n_groups) = match groups {
        Some((g, n)) => (g.to_vec(), n),
        None => (vec![0; edges.len()], 1),
    };
    let mut r_out = target.0.clone();
    let mut r_in = if directed { target.1.clone() } else { Vec::new() };
    let mut weights: Vec<Vec<f64>> = vec![Vec::new(); n_groups];
    let mut remaining: Vec<Vec<usize>> = vec![Vec::new(); n_groups];
    for (k, e) in edges.iter().enumerate() {
        weights[group_of[k]].push(e.w);
        remaining[group_of[k]].push(k);
    }
    for w in &mut weights {
        w.sort_by(f64::total_cmp);
    }
    let mut taken = vec![false; edges.len()];
    let mut order: Vec<Vec<(f64, usize)>> = vec![Vec::new(); n_groups];
    loop {
        let total: usize = remaining.iter().map(Vec::len).sum();
        if total == 0 {
            break;
        }
        for (g, rem) in remaining.iter().enumerate() {
            let o = &mut order[g];
            o.clear();
            o.extend(rem.iter().map(|&k| {
                let (a, b) = (edges[k].a, edges[k].b);
                let rb = if directed { r_in[b] } else { r_out[b] };
                (r_out[a].max(0.0) * rb.max(0.0), k)
            }));
            // Ties (e.g. residuals at zero) are ranked in random order: shuffle, then a stable sort.
            o.shuffle(rng);
            o.sort_by(|x, y| x.0.total_cmp(&y.0));
        }
        let batch = ((total as f64 * BATCH_SHARE).ceil() as usize).max(1);
        let mut used: Vec<Vec<bool>> = remaining.iter().map(|r| vec![false; r.len()]).collect();
        for pick in rand::seq::index::sample(rng, total, batch).iter() {
            // The pick-th remaining edge over the groups in order: its group and rank there.
            let (mut g, mut rank) = (0, pick);
            while rank >= order[g].len() {
                rank -= order[g].len();
                g += 1;
            }
            let k = order[g][rank].1;
            let w = weights[g][rank];
            let (a, b) = (edges[k].a, edges[k].b);
            edges[k].w = w;
            taken[k] = true;
            used[g][rank] = true;
            r_out[a] -= w;
            if directed {
                r_in[b] -= w;
            } else {
                r_out[b] -= w;
            }
        }
        // Drop the assigned weights (by rank) and edges, keeping both in order.
        for g in 0..n_groups {
            let mut rank = 0;
            weights[g].retain(|_| {
                rank += 1;
                !used[g][rank - 1]
            });
            remaining[g].retain(|&k| !taken[k]);
        }
    }
}
/// Weights reassigned over the same topology (after Rubinov & Sporns 2011).
pub(super) const WEIGHT_PERMUTATION: NullModelDef = NullModelDef {
    label: "weight-permutation",
    summary: "Weights reassigned over the same topology, matched to the original strengths (after Rubinov & \
              Sporns 2011). For dense weighted networks",
    hypothesis: "the statistic is no more extreme than on the same topology with weights reassigned to keep \
                 strengths approximately: it depends on which connection carries which weight, beyond each \
                 region's total connection weight",
    needs_distances: false,
    swaps_edges: false,
    sparse_refusal_advice: None,
    rewire: |x, edges, rng| {
        strength_matched(edges, x.directed, x.strengths, None, rng);
        RewireOutcome::default()
    },
};

/// Weights reassigned among edges of similar length (after Betzel & Bassett
/// 2018; Rubinov & Sporns 2011).
pub(super) const LENGTH_BIN_SHUFFLE: NullModelDef = NullModelDef {
    label: "length-bin-shuffle",
    summary: "Weights reassigned among edges of similar length over the same topology, matched to the \
              original strengths; needs distances. For dense weighted networks",
    hypothesis: "the statistic is no more extreme than on the same topology with weights reassigned among \
                 connections of similar length, keeping strengths approximately: it depends on which \
                 connection carries which weight, beyond what connection length and each region's total \
                 connection weight explain",
    needs_distances: true,
    swaps_edges: false,
    sparse_refusal_advice: None,
    rewire: |x, edges, rng| {
        let group: Vec<usize> = x.lengths.iter().map(|&l| x.bins.of(l)).collect();
        strength_matched(edges, x.directed, x.strengths, Some((&group, x.params.length_bins)), rng);
        RewireOutcome::default()
    },
};
