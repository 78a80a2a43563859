//! Ranking regions along a map and splitting them into equal-count states.

use super::HierarchyError;
use ndarray::{Array1, Array2};
use serde::Serialize;

/// Direction of the ranking.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Order {
    /// Smallest map value first (rank 0). By our convention the map increases
    /// towards association cortex, so bin 0 is the most sensory state.
    #[default]
    Ascending,
    /// Largest map value first.
    Descending,
}

/// Parameters of [`build_states`].
#[derive(Clone, Copy, Debug, Serialize)]
pub struct StatesParams {
    /// Number of bins (states), at least 1.
    pub bins: usize,
    /// Ranking direction (default ascending).
    pub order: Order,
    /// Scale each state vector to unit Euclidean norm (default false: 0/1 indicators).
    pub unit_norm: bool,
}

impl StatesParams {
    /// `bins` states, ascending order, indicator (not unit-norm) vectors.
    pub fn new(bins: usize) -> Self {
        StatesParams { bins, order: Order::Ascending, unit_norm: false }
    }
}

/// Regions ranked along a map and split into states.
#[derive(Clone, Debug)]
pub struct States {
    /// Number of regions in the map (including excluded ones).
    pub n_regions: usize,
    /// Region indices (0-based) in rank order; excluded regions are absent.
    pub order: Vec<usize>,
    /// Rank (0-based) of each region, `None` for an excluded region.
    pub rank: Vec<Option<usize>>,
    /// Bin (0-based) of each region, `None` for an excluded region.
    pub bin_of: Vec<Option<usize>>,
    /// The regions of each bin, in rank order.
    pub bins: Vec<Vec<usize>>,
    /// Regions excluded because their map value is NaN (0-based, ascending).
    pub excluded: Vec<usize>,
    /// State vectors, `n_regions × k`: column `j` is the indicator of bin `j`
    /// (or the indicator divided by `sqrt(|bin j|)` when unit-norm).
    /// Excluded regions have a zero row.
    pub matrix: Array2<f64>,
    /// Hierarchical distance between bins, `k × k`: `D[i, j] = j − i`
    /// (positive for a bottom-up transition i → j).
    pub distance: Array2<f64>,
    /// Whether the state vectors were scaled to unit norm.
    pub unit_norm: bool,
    /// Ranking direction.
    pub direction: Order,
    /// Remarks for the user (bin sizes when unequal, exclusions, ties).
    pub notes: Vec<String>,
}

impl States {
    /// Number of states.
    pub fn k(&self) -> usize {
        self.bins.len()
    }

    /// Number of regions in each bin.
    pub fn sizes(&self) -> Vec<usize> {
        self.bins.iter().map(Vec::len).collect()
    }
}

/// Numeric order of two non-NaN values; `-0.0` and `0.0` compare equal, as
/// in numpy (a total order on bits would separate them).
fn cmp_num(a: f64, b: f64) -> std::cmp::Ordering {
    a.partial_cmp(&b).unwrap_or(std::cmp::Ordering::Equal)
}

/// Stable ordering of `values` (all finite): ascending, or descending.
///
/// Ties keep region order in both directions: the ascending order equals
/// numpy `argsort(x, kind="stable")`, and the descending order equals
/// `argsort(-x, kind="stable")` (not the reverse of the ascending order,
/// which would reverse tied regions).
pub fn rank_order(values: &[f64], order: Order) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..values.len()).collect();
    match order {
        // `sort_by` is stable, so equal keys keep their index order.
        Order::Ascending => idx.sort_by(|&a, &b| cmp_num(values[a], values[b])),
        Order::Descending => idx.sort_by(|&a, &b| cmp_num(values[b], values[a])),
    }
    idx
}

/// Sizes of `k` nearly equal bins of `n` items: the first `n mod k` bins have
/// `⌊n/k⌋ + 1` items, the rest `⌊n/k⌋`, exactly as numpy `array_split`.
pub fn split_sizes(n: usize, k: usize) -> Vec<usize> {
    let (q, r) = (n / k, n % k);
    (0..k).map(|j| if j < r { q + 1 } else { q }).collect()
}

/// Rank regions along a map and split them into `k` equal-count states.
///
/// With `o` the stable ordering of the finite map values ([`rank_order`]),
/// bins are the consecutive chunks of `o` of sizes [`split_sizes`]; state
/// `j` is `s_j = 1_{bin j}` (or `1_{bin j}/sqrt(|bin j|)` with unit norm),
/// and the hierarchical distance of a transition `i → j` is `j − i`.
/// This is numpy `array_split(argsort(x, kind="stable"), k)` on the finite
/// values. Regions whose value is NaN are excluded (listed in
/// [`States::excluded`] and the notes), never binned.
///
/// # Errors
/// [`HierarchyError::Parameter`] when `k = 0`; [`HierarchyError::Invalid`]
/// for an infinite value; [`HierarchyError::TooManyBins`] when `k` exceeds
/// the regions with a value; [`HierarchyError::ConstantMap`] when every
/// value is equal (the ranking would be region order alone).
///
/// # References
/// Binning a hierarchy map into equal-size states as a common-practice
/// design; bin arithmetic follows numpy (`array_split`, numpy 2.1).
pub fn build_states(values: &[f64], params: &StatesParams) -> Result<States, HierarchyError> {
    let k = params.bins;
    if k == 0 {
        return Err(HierarchyError::parameter("bins", "at least 1", k));
    }
    if let Some(i) = values.iter().position(|v| v.is_infinite()) {
        return Err(HierarchyError::invalid(
            "map",
            format!("expected finite values or NaN, found {} at region {}", values[i], i + 1),
        ));
    }
    let n_regions = values.len();
    let excluded: Vec<usize> = (0..n_regions).filter(|&i| values[i].is_nan()).collect();
    let kept: Vec<usize> = (0..n_regions).filter(|&i| !values[i].is_nan()).collect();
    let n = kept.len();
    if k > n {
        return Err(HierarchyError::TooManyBins { k, n, excluded: excluded.len() });
    }
    let first = values[kept[0]];
    if kept.iter().all(|&i| values[i] == first) {
        return Err(HierarchyError::ConstantMap { n, value: first });
    }
    let kept_values: Vec<f64> = kept.iter().map(|&i| values[i]).collect();
    let order: Vec<usize> = rank_order(&kept_values, params.order).into_iter().map(|p| kept[p]).collect();

    let sizes = split_sizes(n, k);
    let mut bins = Vec::with_capacity(k);
    let mut start = 0;
    for &s in &sizes {
        bins.push(order[start..start + s].to_vec());
        start += s;
    }
    let mut rank = vec![None; n_regions];
    for (r, &i) in order.iter().enumerate() {
        rank[i] = Some(r);
    }
    let mut bin_of = vec![None; n_regions];
    let mut matrix = Array2::<f64>::zeros((n_regions, k));
    for (j, b) in bins.iter().enumerate() {
        let v = if params.unit_norm { 1.0 / (b.len() as f64).sqrt() } else { 1.0 };
        for &i in b {
            bin_of[i] = Some(j);
            matrix[[i, j]] = v;
        }
    }
    let distance = Array2::from_shape_fn((k, k), |(i, j)| j as f64 - i as f64);

    let mut notes = Vec::new();
    if n % k != 0 {
        notes.push(format!(
            "{n} regions do not divide into {k} equal bins; sizes are {} (the first {} bins hold one more)",
            sizes.iter().map(usize::to_string).collect::<Vec<_>>().join(", "),
            n % k
        ));
    }
    if !excluded.is_empty() {
        notes.push(format!(
            "{} region(s) excluded because their map value is NaN: {}",
            excluded.len(),
            excluded.iter().map(|i| (i + 1).to_string()).collect::<Vec<_>>().join(", ")
        ));
    }
    let mut sorted = kept_values.clone();
    sorted.sort_by(|a, b| cmp_num(*a, *b));
    let ties = sorted.windows(2).filter(|w| w[0] == w[1]).count();
    if ties > 0 {
        notes.push(format!("{ties} tied value(s): tied regions are ordered by region index (stable sort)"));
    }
    Ok(States {
        n_regions,
        order,
        rank,
        bin_of,
        bins,
        excluded,
        matrix,
        distance,
        unit_norm: params.unit_norm,
        direction: params.order,
        notes,
    })
}

/// The map values as a plain vector (helper for callers holding an ndarray).
pub fn values_of(map: &Array1<f64>) -> Vec<f64> {
    map.iter().copied().collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn array_split_sizes_match_numpy_docs() {
        // numpy 2.1 docs, `array_split`: np.array_split(np.arange(8.0), 3)
        // gives chunks of 3, 3, 2.
        assert_eq!(split_sizes(8, 3), vec![3, 3, 2]);
        assert_eq!(split_sizes(10, 4), vec![3, 3, 2, 2]);
        assert_eq!(split_sizes(5, 5), vec![1; 5]);
    }

    #[test]
    fn ties_keep_region_order_both_ways() {
        let v = [2.0, 1.0, 2.0, 0.0];
        assert_eq!(rank_order(&v, Order::Ascending), vec![3, 1, 0, 2]);
        assert_eq!(rank_order(&v, Order::Descending), vec![0, 2, 1, 3]);
        // numpy treats -0.0 and 0.0 as equal, so they keep region order.
        assert_eq!(rank_order(&[0.0, -0.0], Order::Ascending), vec![0, 1]);
    }

    #[test]
    fn nan_regions_are_excluded_and_reported() {
        let v = [0.3, f64::NAN, 0.1, 0.2, 0.5];
        let s = build_states(&v, &StatesParams::new(2)).unwrap();
        assert_eq!(s.excluded, vec![1]);
        assert_eq!(s.bins, vec![vec![2, 3], vec![0, 4]]);
        assert_eq!(s.bin_of[1], None);
        assert_eq!(s.matrix.row(1).sum(), 0.0);
        assert!(s.notes.iter().any(|n| n.contains("excluded")));
    }

    #[test]
    fn unit_norm_columns_have_norm_one_and_indicators_partition() {
        let v: Vec<f64> = (0..11).map(|i| ((i * 7) % 11) as f64).collect();
        let s = build_states(&v, &StatesParams { unit_norm: true, ..StatesParams::new(3) }).unwrap();
        for j in 0..3 {
            let c = s.matrix.column(j);
            assert!((c.dot(&c) - 1.0).abs() < 1e-15);
        }
        assert_eq!(s.sizes(), vec![4, 4, 3]);
        let s = build_states(&v, &StatesParams::new(3)).unwrap();
        assert!(s.matrix.rows().into_iter().all(|r| r.sum() == 1.0));
        assert_eq!(s.distance[[0, 2]], 2.0);
        assert_eq!(s.distance[[2, 0]], -2.0);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let e = build_states(&[1.0, 1.0, 1.0], &StatesParams::new(2)).unwrap_err();
        assert!(matches!(e, HierarchyError::ConstantMap { n: 3, .. }));
        let e = build_states(&[1.0, 2.0, f64::NAN], &StatesParams::new(3)).unwrap_err();
        assert!(matches!(e, HierarchyError::TooManyBins { k: 3, n: 2, excluded: 1 }), "{e}");
        assert!(build_states(&[1.0, 2.0], &StatesParams::new(0)).is_err());
        assert!(build_states(&[1.0, f64::INFINITY], &StatesParams::new(1)).is_err());
    }
}
