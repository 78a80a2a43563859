//! Network null models: connectomes randomised so that chosen properties
//! are kept and the one under test is destroyed.
//!
//! | model | randomises | keeps | reference |
//! |---|---|---|---|
//! | `degree-swap` | which regions are connected | every degree (in- and out-degree when directed), the weight distribution | Maslov & Sneppen 2002 |
//! | `strength-swap` | which regions are connected | degrees; strengths approximately | after Rubinov & Sporns 2011 |
//! | `geometry-swap` | which regions are connected | degrees; edge-length distribution to the bin resolution | after Betzel & Bassett 2018 |
//! | `weight-permutation` | which connection carries which weight | the topology; strengths approximately | after Rubinov & Sporns 2011 |
//! | `length-bin-shuffle` | which connection carries which weight | the topology; the weight–length relation to the bin resolution; strengths approximately | after Betzel & Bassett 2018; Rubinov & Sporns 2011 |
//!
//! Swap models cannot rewire a dense network (in a complete graph every swap
//! would duplicate an edge); the weight models are for dense weighted
//! connectomes such as streamline counts. A directed network gets directed
//! nulls: swaps act on ordered edges and never symmetrise.
//!
//! Every rewiring reports what it did ([`RewireInfo`]: swaps accepted, share
//! of edges changed, strength error) and [`assess`] refuses a null model that
//! cannot move the network ([`MIN_EDGES_CHANGED`], [`MIN_ACCEPTED_SHARE`]),
//! saying why, rather than letting a p-value of 1 from copies of the data
//! pass as a test. Rewirings draw from a caller-supplied seeded RNG, so the
//! parameters and the seed reproduce a null exactly.

mod edges;
mod permute;
mod swaps;
#[cfg(test)]
mod tests;

use super::StatsError;
use edges::{edges_changed, edges_of, strength_error, strengths, to_matrix, Edge, LengthBins};
use ndarray::{Array2, ArrayView2};
use rand::{Rng, RngCore};
use serde::Serialize;
pub use swaps::ks_distance_sorted;

/// A null model is refused when its rewirings change, on average, fewer than
/// this share of the original edges (moved or given another weight). Half is
/// our choice, common practice has no fixed value.
pub const MIN_EDGES_CHANGED: f64 = 0.5;

/// A swap model is refused when fewer than this share of its swap attempts
/// are accepted (our choice; at 10 attempts per edge, 1 % still moves about
/// 18 % of edges, so [`MIN_EDGES_CHANGED`] usually decides first).
pub const MIN_ACCEPTED_SHARE: f64 = 0.01;

/// What a null model's rewiring reads: the network's fixed properties,
/// computed once per network.
struct RewireInput<'a> {
    n: usize,
    directed: bool,
    params: &'a NullParams,
    /// The distance matrix (present whenever the model needs one).
    distance: Option<ArrayView2<'a, f64>>,
    /// Equal-count bins of the edge lengths.
    bins: &'a LengthBins,
    /// Each edge's length in edge order, and sorted.
    lengths: &'a [f64],
    sorted_lengths: &'a [f64],
    /// Out- and in-strengths to match.
    strengths: &'a (Vec<f64>, Vec<f64>),
}

/// What a rewiring reports beyond the edges it moved.
#[derive(Clone, Copy, Debug, Default)]
struct RewireOutcome {
    /// (attempted, accepted) swaps, for swap models.
    swaps: Option<(usize, usize)>,
    /// KS distance between original and null edge lengths, when lengths were matched by swaps.
    length_ks_distance: Option<f64>,
}

/// A network null model, defined once.
#[derive(Clone, Copy)]
pub struct NullModelDef {
    /// The name used in outputs and on the command line.
    pub label: &'static str,
    /// One line with its source, for `--help`.
    pub summary: &'static str,
    /// The null hypothesis a test against this model examines.
    pub hypothesis: &'static str,
    /// Whether it needs a region-to-region distance matrix.
    pub needs_distances: bool,
    /// Whether it moves edges by swaps (and so cannot rewire a dense network).
    pub swaps_edges: bool,
    /// Advice when it is refused on a network that is not dense (`None`:
    /// the advice for dense networks applies).
    pub sparse_refusal_advice: Option<&'static str>,
    /// Randomise `edges` in place.
    rewire: fn(&RewireInput<'_>, &mut Vec<Edge>, &mut dyn RngCore) -> RewireOutcome,
}

/// Every null model, in documentation order. Adding one: its
/// [`NullModelDef`] in a file of this module and one line here.
pub const REGISTRY: &[&NullModelDef] = &[
    &swaps::DEGREE_SWAP,
    &swaps::STRENGTH_SWAP,
    &swaps::GEOMETRY_SWAP,
    &permute::WEIGHT_PERMUTATION,
    &permute::LENGTH_BIN_SHUFFLE,
];

crate::registry::method_handle!(
    /// A network null model: a handle on its definition in [`REGISTRY`].
    /// Named by [`NullModel::named`] (`NullModel::named("degree-swap")`);
    /// the default is the first, `degree-swap`.
    NullModel,
    NullModelDef,
    REGISTRY,
    label,
    "network null model"
);

impl NullModel {
    /// The name used in outputs and on the command line.
    pub fn label(self) -> &'static str {
        self.def().label
    }

    /// The null hypothesis a test against this model examines.
    pub fn hypothesis(self) -> &'static str {
        self.def().hypothesis
    }

    /// Whether the model needs a region-to-region distance matrix.
    pub fn needs_distances(self) -> bool {
        self.def().needs_distances
    }

    /// Whether the model moves edges by swaps (and so cannot rewire a dense network).
    pub fn swaps_edges(self) -> bool {
        self.def().swaps_edges
    }
}

/// Settings shared by the null models.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct NullParams {
    /// Swap attempts per edge (10 is common practice, no source).
    pub swaps_per_edge: usize,
    /// Equal-count edge-length bins (geometry-swap, length-bin-shuffle).
    pub length_bins: usize,
}

impl Default for NullParams {
    fn default() -> Self {
        NullParams { swaps_per_edge: 10, length_bins: 10 }
    }
}

/// A connectome checked for randomisation: square, finite, non-negative,
/// at least two edges. An undirected network must be symmetric (as
/// `io::validate::connectome` leaves it); only its upper triangle is read.
/// The diagonal is never rewired.
#[derive(Clone, Debug)]
pub struct Network<'a> {
    weights: ArrayView2<'a, f64>,
    distances: Option<ArrayView2<'a, f64>>,
    directed: bool,
    edges: Vec<Edge>,
    /// Out- and in-strengths, the target of strength matching (computed once, not per null).
    strengths: (Vec<f64>, Vec<f64>),
    /// Each edge's length, in edge order, and the same sorted (empty without distances).
    lengths: Vec<f64>,
    sorted_lengths: Vec<f64>,
}

impl<'a> Network<'a> {
    /// Check `weights` (and `distances`, when given) and list the edges.
    ///
    /// # Errors
    /// [`StatsError`] for a non-square or negative/non-finite matrix, fewer than
    /// 2 edges, or distances of another size or with a non-finite entry.
    pub fn new(
        weights: ArrayView2<'a, f64>,
        distances: Option<ArrayView2<'a, f64>>,
        directed: bool,
    ) -> Result<Self, StatsError> {
        let n = weights.nrows();
        if weights.ncols() != n {
            return Err(StatsError::LengthMismatch { left: n, right: weights.ncols() });
        }
        if let Some(&v) = weights.iter().find(|v| !(**v >= 0.0 && v.is_finite())) {
            return Err(StatsError::OutOfRange {
                name: "connectome weight",
                expected: "finite and >= 0",
                value: v,
            });
        }
        if let Some(d) = distances {
            if d.dim() != (n, n) {
                return Err(StatsError::LengthMismatch { left: n, right: d.nrows() });
            }
            if let Some(&v) = d.iter().find(|v| !v.is_finite()) {
                return Err(StatsError::OutOfRange { name: "distance", expected: "finite", value: v });
            }
        }
        let edges = edges_of(weights, directed);
        if edges.len() < 2 {
            return Err(StatsError::TooFew {
                statistic: "network randomisation (edges)",
                needed: 2,
                found: edges.len(),
            });
        }
        let lengths: Vec<f64> =
            distances.map_or_else(Vec::new, |d| edges.iter().map(|e| d[[e.a, e.b]]).collect());
        let mut sorted_lengths = lengths.clone();
        sorted_lengths.sort_by(f64::total_cmp);
        Ok(Network {
            weights,
            distances,
            directed,
            edges,
            strengths: strengths(weights),
            lengths,
            sorted_lengths,
        })
    }

    /// Regions.
    pub fn n_regions(&self) -> usize {
        self.weights.nrows()
    }

    /// Edges (ordered pairs when directed).
    pub fn n_edges(&self) -> usize {
        self.edges.len()
    }

    /// Edges over possible edges: n(n − 1) when directed, n(n − 1)/2 otherwise.
    pub fn density(&self) -> f64 {
        let n = self.n_regions() as f64;
        let possible = if self.directed { n * (n - 1.0) } else { n * (n - 1.0) / 2.0 };
        self.edges.len() as f64 / possible
    }

    /// Whether edges are ordered.
    pub fn is_directed(&self) -> bool {
        self.directed
    }

    /// Distinct edge weights.
    pub fn n_distinct_weights(&self) -> usize {
        let mut w: Vec<f64> = self.edges.iter().map(|e| e.w).collect();
        w.sort_by(f64::total_cmp);
        w.dedup();
        w.len()
    }
}

/// What one randomisation did.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RewireInfo {
    /// Swaps attempted (swap models only).
    pub swaps_attempted: Option<usize>,
    /// Swaps accepted (swap models only).
    pub swaps_accepted: Option<usize>,
    /// Share of the original edges that moved or changed weight.
    pub edges_changed: f64,
    /// Relative strength error ‖s′ − s‖ / ‖s‖ (out- and in-strengths together).
    pub strength_error: f64,
    /// Two-sample Kolmogorov–Smirnov distance between original and null edge
    /// lengths (geometry-swap only; the other models either keep the
    /// topology or ignore lengths).
    pub length_ks_distance: Option<f64>,
}

/// One randomisation of `net` by `model`.
///
/// # Errors
/// [`StatsError::MissingInput`] when the model needs distances and `net` has
/// none; [`StatsError::OutOfRange`] for `length_bins` = 0 with such a model.
pub fn rewire<R: Rng + ?Sized>(
    model: NullModel,
    net: &Network<'_>,
    params: &NullParams,
    rng: &mut R,
) -> Result<(Array2<f64>, RewireInfo), StatsError> {
    let n = net.n_regions();
    let directed = net.directed;
    let mut edges = net.edges.clone();
    let distance = match (model.needs_distances(), net.distances) {
        (true, None) => {
            return Err(StatsError::MissingInput { model: model.label(), needs: "a distance matrix" })
        }
        (true, Some(d)) => {
            if params.length_bins == 0 {
                return Err(StatsError::OutOfRange { name: "length_bins", expected: ">= 1", value: 0.0 });
            }
            Some(d)
        }
        (false, _) => None,
    };
    let bins = LengthBins::new(&net.sorted_lengths, params.length_bins.max(1));
    let input = RewireInput {
        n,
        directed,
        params,
        distance,
        bins: &bins,
        lengths: &net.lengths,
        sorted_lengths: &net.sorted_lengths,
        strengths: &net.strengths,
    };
    let mut rng: &mut R = rng;
    let outcome = (model.def().rewire)(&input, &mut edges, &mut rng);
    let target = &net.strengths;
    let null = to_matrix(net.weights, &edges, directed);
    let info = RewireInfo {
        swaps_attempted: outcome.swaps.map(|s| s.0),
        swaps_accepted: outcome.swaps.map(|s| s.1),
        edges_changed: edges_changed(&net.edges, &null),
        strength_error: strength_error(target, &strengths(null.view())),
        length_ks_distance: outcome.length_ks_distance,
    };
    Ok((null, info))
}

/// How much a null model moved the network, over a set of its rewirings.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct NullEffect {
    /// The model.
    pub model: NullModel,
    /// Rewirings summarised.
    pub n_nulls: usize,
    /// Edges over possible edges of the observed network.
    pub density: f64,
    /// Accepted over attempted swaps, pooled (swap models only).
    pub accepted_share: Option<f64>,
    /// Mean share of edges changed per null.
    pub edges_changed: f64,
    /// Mean relative strength error per null.
    pub strength_error: f64,
}

/// Summarise `infos` (rewirings of `net` by `model`) and refuse the model
/// when it did not move the network: mean edges changed below
/// [`MIN_EDGES_CHANGED`], or (swap models) accepted share below
/// [`MIN_ACCEPTED_SHARE`].
///
/// # Errors
/// [`StatsError::CannotRandomise`] with the reason and what to use instead;
/// [`StatsError::TooFew`] for no rewirings.
pub fn assess(model: NullModel, net: &Network<'_>, infos: &[RewireInfo]) -> Result<NullEffect, StatsError> {
    if infos.is_empty() {
        return Err(StatsError::TooFew {
            statistic: "null model assessment (rewirings)",
            needed: 1,
            found: 0,
        });
    }
    let k = infos.len() as f64;
    let attempted: usize = infos.iter().filter_map(|i| i.swaps_attempted).sum();
    let accepted: usize = infos.iter().filter_map(|i| i.swaps_accepted).sum();
    let accepted_share =
        model.swaps_edges().then(|| if attempted > 0 { accepted as f64 / attempted as f64 } else { 0.0 });
    let effect = NullEffect {
        model,
        n_nulls: infos.len(),
        density: net.density(),
        accepted_share,
        edges_changed: infos.iter().map(|i| i.edges_changed).sum::<f64>() / k,
        strength_error: infos.iter().map(|i| i.strength_error).sum::<f64>() / k,
    };
    let too_few_swaps = accepted_share.is_some_and(|s| s < MIN_ACCEPTED_SHARE);
    if effect.edges_changed >= MIN_EDGES_CHANGED && !too_few_swaps {
        return Ok(effect);
    }
    Err(StatsError::CannotRandomise {
        model: model.label(),
        reason: refusal_reason(model, net, &effect, accepted, attempted),
    })
}

fn refusal_reason(
    model: NullModel,
    net: &Network<'_>,
    e: &NullEffect,
    accepted: usize,
    attempted: usize,
) -> String {
    let moved = format!(
        "{:.1} % of edges changed per null, below the {:.0} % needed",
        100.0 * e.edges_changed,
        100.0 * MIN_EDGES_CHANGED
    );
    let density = format!(
        "the connectome is {:.0} % dense ({} edges over {} regions)",
        100.0 * e.density,
        net.n_edges(),
        net.n_regions()
    );
    if let Some(share) = e.accepted_share {
        let accepted_text = format!("{accepted} of {attempted} swaps ({:.2} %) were accepted", 100.0 * share);
        let min_share = 100.0 * MIN_ACCEPTED_SHARE;
        let swaps = match (share < MIN_ACCEPTED_SHARE, e.edges_changed < MIN_EDGES_CHANGED) {
            (true, true) => format!("{accepted_text}, below the {min_share:.0} % needed, and {moved}"),
            (true, false) => format!(
                "{accepted_text}, below the {min_share:.0} % needed ({:.1} % of edges changed weight, but the \
                 wiring barely moved)",
                100.0 * e.edges_changed
            ),
            _ => format!("{accepted_text}, but {moved}"),
        };
        let advice = match model.def().sparse_refusal_advice {
            Some(advice) if e.density < 0.5 => advice,
            _ => {
                "edge swaps cannot rewire a network this dense: use the weight-permutation or length-bin-shuffle \
                 null model"
            }
        };
        return format!("{density}: {swaps}; {advice}");
    }
    let distinct = net.n_distinct_weights();
    if distinct == 1 {
        format!(
            "all {} edge weights are equal, so reassigning them changes nothing ({moved}); a binary network can \
             only be randomised by moving edges: use a swap null model on a sparse network",
            net.n_edges()
        )
    } else {
        format!(
            "{moved} ({distinct} distinct weights over {} edges); reassigning weights barely changes this network",
            net.n_edges()
        )
    }
}
