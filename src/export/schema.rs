//! Every table hierax writes, defined once: file stem, HDF5 location, and
//! each column's name, unit and meaning. Builders check that the columns they
//! fill are the ones declared, in order, and the data dictionary
//! (`docs/outputs.md`) is generated from these definitions.

use crate::io::table::{Column, Table};

/// One column of a table.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ColumnDef {
    /// The column name. A name in braces (`{outcome}`) stands for a family of
    /// columns, one per item, described together.
    pub name: &'static str,
    /// Unit (`s`, `energy`, `1` for dimensionless, `-` for labels).
    pub unit: &'static str,
    /// What the column holds, with its sign convention.
    pub description: &'static str,
}

/// One table.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TableDef {
    /// File stem: `sub-XX_<stem>.csv` per subject, `<stem>.csv` per cohort.
    pub stem: &'static str,
    /// Where it lives in the per-subject HDF5 file (`group/name`), if it does.
    pub h5_path: Option<&'static str>,
    /// What one row is.
    pub row: &'static str,
    /// The columns, in order.
    pub columns: &'static [ColumnDef],
}

const fn c(name: &'static str, unit: &'static str, description: &'static str) -> ColumnDef {
    ColumnDef { name, unit, description }
}

const REGION_NUMBER: ColumnDef =
    c("region_number", "-", "position of the region in the inputs, counted from 1");
const REGION: ColumnDef =
    c("region", "-", "region name from the inputs' headers, else region-001, region-002, ...");

/// `sub-XX_regions.csv`.
pub const REGIONS: TableDef = TableDef {
    stem: "regions",
    h5_path: Some("hierarchy/regions"),
    row: "one region",
    columns: &[
        REGION_NUMBER,
        REGION,
        c("map_value", "map units", "hierarchy map value (NaN: region excluded from the states)"),
        c("rank", "-", "rank along the map, 1 = lowest (ascending) or highest (descending); empty/NaN when excluded"),
        c("state", "-", "state (bin along the hierarchy) holding the region, 1 = lowest; empty/NaN when excluded"),
        c("timescale_s", "s", "the intrinsic timescale linked to the energies (the job's chosen estimator); NaN when it failed QC"),
        c("average_controllability", "1", "trace of the node's controllability Gramian, discrete-time normalisation (Gu et al. 2015)"),
        c("modal_controllability", "1", "sum_j (1 - lambda_j^2) v_ij^2 (Pasqualetti et al. 2014; Gu et al. 2015); NaN for directed networks"),
    ],
};

/// `sub-XX_states.csv`.
pub const STATES: TableDef = TableDef {
    stem: "states",
    h5_path: Some("hierarchy/states_table"),
    row: "one state (equal-count bin of the ranked map)",
    columns: &[
        c("state", "-", "state number along the hierarchy, 1 = lowest"),
        c("n_regions", "1", "regions in the state"),
        c("first_rank", "-", "rank of its first region"),
        c("last_rank", "-", "rank of its last region"),
        c("min_map_value", "map units", "smallest map value in the state"),
        c("max_map_value", "map units", "largest map value in the state"),
        c("mean_timescale_s", "s", "mean of the regions' valid timescales"),
        c("asymmetry_potential", "energy", "least-squares potential phi with E[i,j] - E[j,i] ~ phi[j] - phi[i], mean 0 (Hodge decomposition, Jiang et al. 2011); decreasing along the hierarchy: bottom-up transitions are cheaper"),
        c("within_state_quadratic_form", "1", "x'Ax for the state vector x and the normalised network A: within-state connectivity; with an undirected network and every node driven equally (continuous time) the potential is -2 x'Ax + constant"),
    ],
};

/// `sub-XX_pairs.csv`.
pub const PAIRS: TableDef = TableDef {
    stem: "pairs",
    h5_path: Some("link/pairs"),
    row: "one ordered pair of states (k^2 rows, the diagonal included)",
    columns: &[
        c("initial_state", "-", "state the transition starts from, 1 = lowest"),
        c("target_state", "-", "state the transition reaches"),
        c("distance", "states", "signed hierarchical distance target - initial; positive: bottom-up"),
        c("direction", "-", "bottom-up (initial below target), top-down, or same-state (initial = target)"),
        c("energy", "energy", "minimum control energy of the transition (Gu et al. 2015; Betzel et al. 2016)"),
        c("asymmetry", "energy", "energy of this transition minus that of the reverse one: E[initial,target] - E[target,initial]; negative on a bottom-up row: bottom-up is cheaper"),
        c("timescale_shift_s", "s", "mean timescale of the target state minus that of the initial state"),
    ],
};

/// `sub-XX_network_nulls.csv`.
pub const NETWORK_NULLS: TableDef = TableDef {
    stem: "network_nulls",
    h5_path: Some("nulls/network"),
    row: "one rewired network",
    columns: &[
        c("null_number", "-", "the null, counted from 1 (null i uses random stream i of the seed)"),
        c("null_model", "-", "the rewiring that made it"),
        c("{outcome}", "as the outcome", "each outcome tested against network nulls, recomputed on this network"),
        c("swaps_attempted", "1", "edge swaps attempted (swap models; NaN for weight-permutation and length-bin-shuffle)"),
        c("swaps_accepted", "1", "edge swaps accepted (swap models; NaN otherwise)"),
        c("edges_changed", "1", "share of the observed edges that this null moved or gave another weight"),
        c("strength_error", "1", "relative error of node strengths, ||s' - s|| / ||s||"),
        c("length_ks_distance", "1", "Kolmogorov-Smirnov distance between original and null edge lengths (geometry-swap; NaN otherwise)"),
    ],
};

/// `sub-XX_map_nulls.csv`.
pub const MAP_NULLS: TableDef = TableDef {
    stem: "map_nulls",
    h5_path: Some("nulls/map"),
    row: "one surrogate hierarchy map",
    columns: &[
        c("null_number", "-", "the surrogate, counted from 1"),
        c("surrogate_method", "-", "how the surrogate map was made"),
        c(
            "{outcome}",
            "as the outcome",
            "each outcome tested against map nulls, recomputed with states re-binned from this surrogate",
        ),
    ],
};

/// `sub-XX_tests.csv`.
pub const TESTS: TableDef = TableDef {
    stem: "tests",
    h5_path: Some("nulls/tests"),
    row: "one null-model test of one outcome",
    columns: &[
        c("outcome", "-", "the outcome tested"),
        c(
            "null_family",
            "-",
            "network (rewired networks, same states) or map (surrogate maps, same network)",
        ),
        c("null_model", "-", "the null model"),
        c("observed", "as the outcome", "the subject's value"),
        c("n_null", "1", "finite null values used"),
        c("null_mean", "as the outcome", "mean of the null values"),
        c(
            "null_sd",
            "as the outcome",
            "standard deviation of the null values: how far the nulls moved the statistic",
        ),
        c("p_value", "1", "two-sided permutation p-value (b + 1)/(m + 1) (Phipson & Smyth 2010)"),
        c("p_fdr", "1", "Benjamini-Hochberg adjusted p-value over this subject's tests"),
        c("hypothesis", "-", "the null hypothesis tested"),
    ],
};

/// `sub-XX_timescales.csv`.
pub const TIMESCALES: TableDef = TableDef {
    stem: "timescales",
    h5_path: Some("timescales/regions"),
    row: "one region",
    columns: &[
        REGION_NUMBER,
        REGION,
        c("status", "-", "ok, or the region's problem, or estimator:status items for the estimators that failed"),
        c("n_valid_frames", "1", "frames used after censoring"),
        c("lag1_acf", "1", "lag-1 sample autocorrelation (statsmodels acf(adjusted=False) convention)"),
        c("{estimator columns}", "as listed", "each selected estimator's columns (see *Timescale estimators* below), with its bootstrap standard error beside each timescale when bootstrapped (`ips_tau_s` -> `ips_tau_se_s`), then its `<prefix>_status`; a timescale is NaN exactly when its status is not ok"),
    ],
};

/// `cohort.csv`.
pub const COHORT: TableDef = TableDef {
    stem: "cohort",
    h5_path: None,
    row: "one subject that succeeded",
    columns: &[
        c("subject", "-", "sub-<label>"),
        c("{covariate}", "-", "each covariate of participants.tsv, as text"),
        c("n_valid_frames", "1", "frames left after censoring"),
        c("n_timescale_flagged", "1", "regions whose chosen timescale failed QC"),
        c("mean_bottom_up_energy", "energy", "mean energy of the bottom-up transitions"),
        c("mean_top_down_energy", "energy", "mean energy of the top-down transitions"),
        c("{outcome}", "as the outcome", "every subject-level outcome (see the outcome list; cohort.json says which are derived from others under the run's settings)"),
        c("gramian_condition", "1", "2-norm condition number of the controllability Gramian"),
        c("terminal_error_max", "1", "largest relative terminal-state error ||x(T) - x_f|| / ||x_f|| over the state pairs"),
        c("p_{outcome}_vs_{family}_nulls", "1", "each null test's permutation p-value"),
    ],
};

/// `run_log.csv`.
pub const RUN_LOG: TableDef = TableDef {
    stem: "run_log",
    h5_path: None,
    row: "one subject",
    columns: &[
        c("subject", "-", "sub-<label>"),
        c("status", "-", "ok or failed"),
        c("stage", "-", "where a failed unit failed: inputs (a file the patterns name is missing), load (reading or validating its inputs), analyse or write; empty when ok"),
        c(
            "message",
            "-",
            "how many notes a unit that succeeded has in its summary JSON, or the reason it failed",
        ),
    ],
};

/// `group_tests.csv`.
pub const GROUP_TESTS: TableDef = TableDef {
    stem: "group_tests",
    h5_path: None,
    row: "one outcome tested against 0 across subjects",
    columns: &[
        c("outcome", "-", "the outcome (findings only; derived and constant outcomes are not tested)"),
        c("n", "1", "subjects with a finite value"),
        c("mean", "as the outcome", "mean across subjects"),
        c("p_value", "1", "two-sided sign-flip permutation p-value (Nichols & Holmes 2002)"),
        c("p_fdr", "1", "Benjamini-Hochberg adjusted over the outcomes tested"),
        c("sign_flips", "1", "random sign flips drawn"),
    ],
};

/// `age_models.csv`.
pub const AGE_MODELS: TableDef = TableDef {
    stem: "age_models",
    h5_path: None,
    row: "one term of one outcome's ordinary least-squares model",
    columns: &[
        c("outcome", "-", "the outcome modelled (findings only)"),
        c("term", "-", "intercept, a numeric covariate, or covariate[level] (treatment coding)"),
        c("estimate", "outcome per covariate unit", "the coefficient"),
        c("se", "as estimate", "classical standard error"),
        c("t", "1", "estimate / se"),
        c("p_value", "1", "two-sided t-test p-value"),
        c("n", "1", "subjects in the fit"),
    ],
};

/// `regions.csv` of `hierax states`.
pub const MAP_RANKS: TableDef = TableDef {
    stem: "regions",
    h5_path: None,
    row: "one region (hierax states)",
    columns: &[
        REGION_NUMBER,
        REGION,
        c("map_value", "map units", "hierarchy map value (NaN: region excluded from the states)"),
        c(
            "rank",
            "-",
            "rank along the map, 1 = lowest (ascending) or highest (descending); NaN when excluded",
        ),
        c("state", "-", "state holding the region, 1 = lowest; NaN when excluded"),
    ],
};

/// `bins.csv` of `hierax states`.
pub const STATE_BINS: TableDef = TableDef {
    stem: "bins",
    h5_path: None,
    row: "one state (hierax states)",
    columns: &[
        c("state", "-", "state number along the hierarchy, 1 = lowest"),
        c("n_regions", "1", "regions in the state"),
        c("first_rank", "-", "rank of its first region"),
        c("last_rank", "-", "rank of its last region"),
        c("min_map_value", "map units", "smallest map value in the state"),
        c("max_map_value", "map units", "largest map value in the state"),
    ],
};

/// `state_vectors.csv` of `hierax states`.
pub const STATE_VECTORS: TableDef = TableDef {
    stem: "state_vectors",
    h5_path: None,
    row: "one region (hierax states)",
    columns: &[
        REGION,
        c(
            "state_{j}",
            "1",
            "entry of state j's vector: 1 (or 1/sqrt(size) with unit norm) for the state's regions, else 0",
        ),
    ],
};

/// `distance.csv` of `hierax states`.
pub const STATE_DISTANCE: TableDef = TableDef {
    stem: "distance",
    h5_path: None,
    row: "one ordered pair of states (hierax states)",
    columns: &[
        c("initial_state", "-", "state the transition starts from, 1 = lowest"),
        c("target_state", "-", "state the transition reaches"),
        c("distance", "states", "signed hierarchical distance target - initial; positive: bottom-up"),
    ],
};

/// `energy.csv` of `hierax energy`.
pub const ENERGY_PAIRS: TableDef = TableDef {
    stem: "energy",
    h5_path: None,
    row: "one ordered pair of states (hierax energy)",
    columns: &[
        c("initial_state", "-", "state the transition starts from, counted from 1"),
        c("target_state", "-", "state the transition reaches"),
        c("energy", "energy", "minimum control energy E[initial,target]"),
        c("asymmetry", "energy", "E[initial,target] - E[target,initial]"),
        c(
            "{penalised_energy}",
            "energy",
            "state-penalised control energy (Gu et al. 2017), with --state-penalty",
        ),
    ],
};

/// `energy_matrix.csv` and `asymmetry_matrix.csv` of `hierax energy`.
pub const STATE_MATRIX: TableDef = TableDef {
    stem: "energy_matrix",
    h5_path: None,
    row: "one initial state (hierax energy); asymmetry_matrix.csv has the same layout",
    columns: &[
        c("state", "-", "initial state, counted from 1"),
        c(
            "state_{j}",
            "energy",
            "value for target state j: E[i,j] (energy_matrix.csv) or E[i,j] - E[j,i] (asymmetry_matrix.csv)",
        ),
    ],
};

/// `node_metrics.csv` of `hierax energy`.
pub const NODE_METRICS: TableDef = TableDef {
    stem: "node_metrics",
    h5_path: None,
    row: "one region (hierax energy)",
    columns: &[
        REGION_NUMBER,
        REGION,
        c("driver_weight", "1", "input weight of the region in B (0: not driven)"),
        c(
            "average_controllability",
            "1",
            "trace of the node's controllability Gramian, discrete-time normalisation (Gu et al. 2015)",
        ),
        c(
            "modal_controllability",
            "1",
            "sum_j (1 - lambda_j^2) v_ij^2 (Pasqualetti et al. 2014); NaN for directed networks",
        ),
    ],
};

/// `qc.csv` of `hierax energy`.
pub const ENERGY_QC: TableDef = TableDef {
    stem: "qc",
    h5_path: None,
    row: "one numerical-quality measure (hierax energy)",
    columns: &[
        c("measure", "-", "gramian_condition (2-norm), gramian_condition_limit (refused above), terminal_error_max, terminal_error_relative (refused above 1e-3), state_norm_max, spectral_radius"),
        c("value", "1", "its value"),
    ],
};

/// Every table, for the data dictionary.
pub const ALL_TABLES: [&TableDef; 19] = [
    &REGIONS,
    &STATES,
    &PAIRS,
    &TIMESCALES,
    &NETWORK_NULLS,
    &MAP_NULLS,
    &TESTS,
    &MAP_RANKS,
    &STATE_BINS,
    &STATE_VECTORS,
    &STATE_DISTANCE,
    &ENERGY_PAIRS,
    &STATE_MATRIX,
    &NODE_METRICS,
    &ENERGY_QC,
    &COHORT,
    &RUN_LOG,
    &GROUP_TESTS,
    &AGE_MODELS,
];

/// Check a header written row by row against `def`, by the same rule as
/// [`TableBuilder`].
///
/// # Panics
/// When a name is not the next declared column (a programming error).
pub fn check_header(def: &'static TableDef, names: &[String]) {
    let mut b = TableBuilder::new(def);
    for n in names {
        b = b.col(n, Column::Str(Vec::new()));
    }
}

/// Builds a [`Table`] column by column, checking each name against a
/// [`TableDef`]. A family column (`{…}` in the definition) accepts any number
/// of columns, including none.
pub struct TableBuilder {
    def: &'static TableDef,
    at: usize,
    table: Table,
}

impl TableBuilder {
    /// Start a table of `def`.
    pub fn new(def: &'static TableDef) -> Self {
        TableBuilder { def, at: 0, table: Table::new() }
    }

    /// Add the next declared column.
    ///
    /// # Panics
    /// When `name` is not the next declared column (a programming error,
    /// caught by the tests that write every table).
    pub fn col(mut self, name: &str, column: Column) -> Self {
        loop {
            let Some(d) = self.def.columns.get(self.at) else {
                panic!("table {}: column `{name}` is not declared", self.def.stem);
            };
            if d.name.contains('{') {
                // A family column: take it unless `name` is the next fixed column.
                let next_fixed = self.def.columns.get(self.at + 1).map(|n| n.name);
                if next_fixed == Some(name) {
                    self.at += 1;
                    continue;
                }
                self.table = self.table.with(name, column);
                return self;
            }
            assert_eq!(d.name, name, "table {}: expected column `{}`, got `{name}`", self.def.stem, d.name);
            self.at += 1;
            self.table = self.table.with(name, column);
            return self;
        }
    }

    /// The finished table.
    pub fn finish(self) -> Table {
        self.table
    }
}
