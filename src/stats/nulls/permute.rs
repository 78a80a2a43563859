//! Weight reassignment on a fixed topology: strength matching (after
//! Rubinov & Sporns 2011) and shuffles within edge-length bins.

use super::edges::{Edge, LengthBins};
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
pub(super) fn strength_matched<R: Rng + ?Sized>(
    edges: &mut [Edge],
    directed: bool,
    target: &(Vec<f64>, Vec<f64>),
    rng: &mut R,
) {
    let mut r_out = target.0.clone();
    let mut r_in = if directed { target.1.clone() } else { Vec::new() };
    let mut weights: Vec<f64> = edges.iter().map(|e| e.w).collect();
    weights.sort_by(f64::total_cmp);
    let mut remaining: Vec<usize> = (0..edges.len()).collect();
    let mut expected: Vec<(f64, usize)> = Vec::with_capacity(edges.len());
    let mut taken = vec![false; edges.len()];
    while !remaining.is_empty() {
        expected.clear();
        expected.extend(remaining.iter().map(|&k| {
            let (a, b) = (edges[k].a, edges[k].b);
            let rb = if directed { r_in[b] } else { r_out[b] };
            (r_out[a].max(0.0) * rb.max(0.0), k)
        }));
        // Ties (e.g. residuals at zero) are ranked in random order: the shuffle happens before a
        // stable sort.
        expected.shuffle(rng);
        expected.sort_by(|x, y| x.0.total_cmp(&y.0));
        let batch = ((remaining.len() as f64 * BATCH_SHARE).ceil() as usize).max(1);
        let picks = rand::seq::index::sample(rng, remaining.len(), batch);
        for rank in picks.iter() {
            let k = expected[rank].1;
            let w = weights[rank];
            let (a, b) = (edges[k].a, edges[k].b);
            edges[k].w = w;
            taken[k] = true;
            r_out[a] -= w;
            if directed {
                r_in[b] -= w;
            } else {
                r_out[b] -= w;
            }
        }
        // Drop the assigned weights (by rank) and edges, keeping both in order.
        let mut used = vec![false; weights.len()];
        for rank in picks.iter() {
            used[rank] = true;
        }
        let mut rank = 0;
        weights.retain(|_| {
            rank += 1;
            !used[rank - 1]
        });
        remaining.retain(|&k| !taken[k]);
    }
}

/// Permute weights uniformly among the edges of each length bin: the
/// topology is kept exactly and the weight–length relation to the bin
/// resolution.
pub(super) fn shuffle_within_bins<R: Rng + ?Sized>(
    edges: &mut [Edge],
    lengths: &[f64],
    bins: &LengthBins,
    n_bins: usize,
    rng: &mut R,
) {
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); n_bins];
    for (k, &len) in lengths.iter().enumerate() {
        members[bins.of(len)].push(k);
    }
    for idx in members {
        let mut w: Vec<f64> = idx.iter().map(|&k| edges[k].w).collect();
        w.shuffle(rng);
        for (&k, v) in idx.iter().zip(w) {
            edges[k].w = v;
        }
    }
}
