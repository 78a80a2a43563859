//! The pair table of a subject and its summaries.

use super::decomposition::{decompose_asymmetry, AsymmetryDecomposition};
use super::LinkError;
use crate::io::table::{Column, Table};
use crate::stats::correlation::{pearson, spearman, Correlation};
use crate::stats::regression::{least_squares_line, Line};
use ndarray::Array2;
use serde::Serialize;

/// Direction of a transition along the hierarchy.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Direction {
    /// From a lower to a higher bin.
    BottomUp,
    /// From a higher to a lower bin.
    TopDown,
    /// From a state to itself.
    Persist,
}

impl Direction {
    /// Lower-case name used in tables.
    pub fn as_str(self) -> &'static str {
        match self {
            Direction::BottomUp => "bottom-up",
            Direction::TopDown => "top-down",
            Direction::Persist => "persist",
        }
    }
}

/// One ordered state pair.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PairRow {
    /// Initial state (bin index along the hierarchy).
    pub initial: usize,
    /// Target state.
    pub target: usize,
    /// Signed hierarchical distance, target − initial, in bins.
    pub distance: i64,
    /// Bottom-up, top-down or persist.
    pub direction: Direction,
    /// Minimum control energy E[initial, target].
    pub energy: f64,
    /// E[initial, target] − E[target, initial].
    pub asymmetry: f64,
    /// Mean timescale of the target bin minus that of the initial bin (s), if given.
    pub timescale_shift_s: Option<f64>,
}

/// Every ordered pair of states (diagonal included), row-major in (initial, target).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PairTable {
    /// Number of states.
    pub states: usize,
    /// The k² rows.
    pub rows: Vec<PairRow>,
}

/// Mean of `values` over each bin's regions, ignoring NaN (regions whose
/// timescale failed QC).
///
/// # Errors
/// [`LinkError::StateWithoutTimescale`] when a bin has no finite value,
/// [`LinkError::RegionIndex`] for an index outside `values`.
pub fn bin_means(values: &[f64], bins: &[Vec<usize>]) -> Result<Vec<f64>, LinkError> {
    bins.iter()
        .enumerate()
        .map(|(state, regions)| {
            let mut sum = 0.0;
            let mut n = 0usize;
            for &r in regions {
                let v = *values.get(r).ok_or(LinkError::RegionIndex { state, index: r, n: values.len() })?;
                if v.is_finite() {
                    sum += v;
                    n += 1;
                }
            }
            if n == 0 {
                Err(LinkError::StateWithoutTimescale { state, regions: regions.len() })
            } else {
                Ok(sum / n as f64)
            }
        })
        .collect()
}

/// Build the pair table from a k × k energy matrix (`energy[[i, j]]` = E from
/// state i to state j, states ordered along the hierarchy) and, optionally,
/// each state's mean timescale.
///
/// # Errors
/// [`LinkError::EnergyShape`], [`LinkError::BadEnergy`], [`LinkError::TimescaleCount`],
/// [`LinkError::StateWithoutTimescale`] (a NaN state timescale).
pub fn pair_table(energy: &Array2<f64>, state_timescale_s: Option<&[f64]>) -> Result<PairTable, LinkError> {
    let (rows, cols) = energy.dim();
    if rows != cols || rows < 2 {
        return Err(LinkError::EnergyShape { rows, cols });
    }
    if let Some(((i, j), &v)) = energy.indexed_iter().find(|(_, v)| !(v.is_finite() && **v >= 0.0)) {
        return Err(LinkError::BadEnergy { initial: i, target: j, value: v });
    }
    if let Some(t) = state_timescale_s {
        if t.len() != rows {
            return Err(LinkError::TimescaleCount { states: rows, found: t.len() });
        }
        if let Some(state) = t.iter().position(|v| !v.is_finite()) {
            return Err(LinkError::StateWithoutTimescale { state, regions: 0 });
        }
    }
    let mut out = Vec::with_capacity(rows * rows);
    for i in 0..rows {
        for j in 0..rows {
            let direction = match i.cmp(&j) {
                std::cmp::Ordering::Less => Direction::BottomUp,
                std::cmp::Ordering::Greater => Direction::TopDown,
                std::cmp::Ordering::Equal => Direction::Persist,
            };
            out.push(PairRow {
                initial: i,
                target: j,
                distance: j as i64 - i as i64,
                direction,
                energy: energy[[i, j]],
                asymmetry: energy[[i, j]] - energy[[j, i]],
                timescale_shift_s: state_timescale_s.map(|t| t[j] - t[i]),
            });
        }
    }
    Ok(PairTable { states: rows, rows: out })
}

impl PairTable {
    /// The bottom-up rows (i < j), each unordered pair once.
    pub fn bottom_up(&self) -> impl Iterator<Item = &PairRow> {
        self.rows.iter().filter(|r| r.direction == Direction::BottomUp)
    }

    /// The k × k asymmetry matrix Δ_ij = E_ij − E_ji.
    pub fn asymmetry_matrix(&self) -> Array2<f64> {
        let k = self.states;
        Array2::from_shape_fn((k, k), |(i, j)| self.rows[i * k + j].asymmetry)
    }

    /// As a tidy table, one row per ordered pair.
    pub fn to_table(&self) -> Table {
        let col_f = |f: &dyn Fn(&PairRow) -> f64| Column::F64(self.rows.iter().map(f).collect());
        let col_i = |f: &dyn Fn(&PairRow) -> i64| Column::I64(self.rows.iter().map(f).collect());
        Table::new()
            .with("initial_state", col_i(&|r| r.initial as i64))
            .with("target_state", col_i(&|r| r.target as i64))
            .with("distance", col_i(&|r| r.distance))
            .with(
                "direction",
                Column::Str(self.rows.iter().map(|r| r.direction.as_str().to_string()).collect()),
            )
            .with("energy", col_f(&|r| r.energy))
            .with("asymmetry", col_f(&|r| r.asymmetry))
            .with("timescale_shift_s", col_f(&|r| r.timescale_shift_s.unwrap_or(f64::NAN)))
    }
}

/// Per-subject summaries of a pair table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SubjectSummary {
    /// Mean energy over the k(k−1)/2 bottom-up pairs.
    pub mean_bottom_up_energy: f64,
    /// Mean energy over the k(k−1)/2 top-down pairs.
    pub mean_top_down_energy: f64,
    /// Mean bottom-up minus mean top-down energy (negative: bottom-up cheaper).
    pub bottom_up_minus_top_down: f64,
    /// Least-squares line of ΔE_ij (i < j) against distance j − i; a negative
    /// slope means bottom-up transitions become relatively cheaper with distance.
    pub asymmetry_vs_distance_line: Line,
    /// Spearman correlation of ΔE_ij (i < j) with j − i.
    pub asymmetry_vs_distance_spearman: Correlation,
    /// Pearson correlation of ΔE_ij (i < j) with j − i.
    pub asymmetry_vs_distance_pearson: Correlation,
    /// Spearman correlation of ΔE_ij with Δτ_ij (i < j), when timescales were given.
    pub asymmetry_vs_timescale_shift_spearman: Option<Correlation>,
    /// Pearson correlation of ΔE_ij with Δτ_ij (i < j), when timescales were given.
    pub asymmetry_vs_timescale_shift_pearson: Option<Correlation>,
    /// The asymmetry matrix split into a per-state potential and a circulation
    /// ([`super::decompose_asymmetry`]).
    pub asymmetry_decomposition: AsymmetryDecomposition,
}

/// Summarise a pair table (see the module docs for which pairs enter).
///
/// # Errors
/// [`LinkError::Stats`] when a correlation is undefined (e.g. fewer than 3
/// states, so fewer than 3 bottom-up pairs, or constant timescale shifts).
pub fn summarise(table: &PairTable) -> Result<SubjectSummary, LinkError> {
    let bu: Vec<&PairRow> = table.bottom_up().collect();
    let td: Vec<f64> =
        table.rows.iter().filter(|r| r.direction == Direction::TopDown).map(|r| r.energy).collect();
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let bu_e: Vec<f64> = bu.iter().map(|r| r.energy).collect();
    let dist: Vec<f64> = bu.iter().map(|r| r.distance as f64).collect();
    let asym: Vec<f64> = bu.iter().map(|r| r.asymmetry).collect();
    let stat = |what: &'static str| move |source| LinkError::Stats { what, source };
    let shift: Option<Vec<f64>> = bu.iter().map(|r| r.timescale_shift_s).collect();
    let (ts_s, ts_p) = match &shift {
        Some(s) => (
            Some(spearman(&asym, s).map_err(stat("asymmetry vs timescale shift"))?),
            Some(pearson(&asym, s).map_err(stat("asymmetry vs timescale shift"))?),
        ),
        None => (None, None),
    };
    Ok(SubjectSummary {
        mean_bottom_up_energy: mean(&bu_e),
        mean_top_down_energy: mean(&td),
        bottom_up_minus_top_down: mean(&bu_e) - mean(&td),
        asymmetry_vs_distance_line: least_squares_line(&dist, &asym)
            .map_err(stat("asymmetry vs distance"))?,
        asymmetry_vs_distance_spearman: spearman(&dist, &asym).map_err(stat("asymmetry vs distance"))?,
        asymmetry_vs_distance_pearson: pearson(&dist, &asym).map_err(stat("asymmetry vs distance"))?,
        asymmetry_vs_timescale_shift_spearman: ts_s,
        asymmetry_vs_timescale_shift_pearson: ts_p,
        asymmetry_decomposition: decompose_asymmetry(&table.asymmetry_matrix())?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    /// A planted energy matrix: E_ij = base + (j − i)·(−slope) for i < j, so
    /// bottom-up costs less, more so with distance.
    fn planted(k: usize) -> Array2<f64> {
        Array2::from_shape_fn((k, k), |(i, j)| {
            10.0 + if i < j { -0.5 * (j - i) as f64 } else { 0.5 * (i - j) as f64 }
        })
    }

    #[test]
    fn planted_asymmetry_is_recovered() {
        let t = pair_table(&planted(5), Some(&[1.0, 2.0, 3.0, 4.0, 6.0])).unwrap();
        assert_eq!(t.rows.len(), 25);
        let s = summarise(&t).unwrap();
        // BU mean: 10 − 0.5·mean(d) with d over 10 pairs, mean(d) = 2  → 9; TD → 11.
        assert!((s.mean_bottom_up_energy - 9.0).abs() < 1e-12);
        assert!((s.mean_top_down_energy - 11.0).abs() < 1e-12);
        // ΔE = −d exactly: slope −1, Spearman −1.
        assert!((s.asymmetry_vs_distance_line.slope + 1.0).abs() < 1e-12);
        assert!((s.asymmetry_vs_distance_spearman.r + 1.0).abs() < 1e-12);
        assert!(s.asymmetry_vs_timescale_shift_spearman.unwrap().r < -0.9);
        let table = t.to_table();
        assert_eq!(table.n_rows(), 25);
    }

    #[test]
    fn bad_inputs_are_named() {
        let mut e = planted(3);
        e[[0, 2]] = f64::NAN;
        assert_eq!(
            pair_table(&e, None).unwrap_err().to_string(),
            "energy matrix: expected finite, non-negative energies, found NaN for state 0 -> 2"
        );
        assert!(matches!(pair_table(&planted(3), Some(&[1.0])), Err(LinkError::TimescaleCount { .. })));
        let bins = vec![vec![0, 1], vec![2]];
        assert_eq!(bin_means(&[1.0, f64::NAN, 4.0], &bins).unwrap(), vec![1.0, 4.0]);
        assert_eq!(
            bin_means(&[1.0, 2.0, f64::NAN], &bins).unwrap_err().to_string(),
            "state 1: none of its 1 regions has a valid timescale"
        );
    }
}
