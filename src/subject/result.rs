//! The typed result of the per-subject job: everything the export layer
//! writes, and nothing about how it is written.

use super::config::ValidSubjectConfig;
use super::outcomes::{NullFamily, Outcome, OutcomeSource};
use crate::control::{EnergyInfo, NodeMetrics};
use crate::hierarchy::States;
use crate::io::provenance::InputRecord;
use crate::link::{PairTable, SubjectSummary};
use crate::stats::correlation::Correlation;
use crate::stats::nulls::{NullEffect, RewireInfo};
use crate::timescale::{Estimator, TimescaleResult};
use ndarray::Array2;
use serde::Serialize;
use std::collections::BTreeMap;

/// Stage 1: timescales.
#[derive(Clone, Debug)]
pub struct TimescaleStage {
    /// Every estimator for every region.
    pub result: TimescaleResult,
    /// The column that enters the link.
    pub column: String,
    /// Its estimator.
    pub estimator: Estimator,
    /// That column per region (s); NaN where the region or that estimator failed QC.
    pub tau: Vec<f64>,
    /// Regions whose chosen timescale failed QC (other estimators' statuses are not counted).
    pub n_flagged: usize,
}

/// Stage 3: control.
#[derive(Clone, Debug)]
pub struct ControlStage {
    /// Minimum-energy matrix, `energy[[i, j]]` from state i to state j (0-based inside the library).
    pub energy: Array2<f64>,
    /// Numerical quality.
    pub info: EnergyInfo,
    /// Average and modal controllability per region.
    pub metrics: NodeMetrics,
    /// x_jᵀÃx_j per state: within-state connectivity of the normalised network.
    pub state_quadratic_form: Vec<f64>,
    /// The closed-form potential p_j with E_ij − E_ji = p_j − p_i, when the
    /// system makes the asymmetry a pure potential (symmetric Ã, B = βI).
    pub closed_form_potential: Option<Vec<f64>>,
}

/// Stage 4: link.
#[derive(Clone, Debug)]
pub struct LinkStage {
    /// Mean timescale of each state (s).
    pub state_timescale_s: Vec<f64>,
    /// Every ordered state pair.
    pub pairs: PairTable,
    /// The summaries, with the asymmetry decomposition.
    pub summary: SubjectSummary,
    /// Spearman of regional timescale with the map.
    pub timescale_hierarchy: Option<Correlation>,
}

/// One null network or map.
#[derive(Clone, Debug)]
pub struct NullRow {
    /// 0-based index of the null (its random stream).
    pub index: usize,
    /// One value per outcome of the run, in [`NullRun::outcomes`] order.
    pub values: Vec<f64>,
    /// Rewiring diagnostics (network nulls only).
    pub rewire: Option<RewireInfo>,
}

/// The nulls of one family.
#[derive(Clone, Debug)]
pub struct NullRun {
    /// Network or map.
    pub family: NullFamily,
    /// The null model (`degree-swap`, `spin`, …).
    pub method: String,
    /// The null hypothesis its tests examine.
    pub hypothesis: String,
    /// Nulls asked for.
    pub requested: usize,
    /// The outcomes recomputed on every null.
    pub outcomes: Vec<Outcome>,
    /// The usable nulls (an unusable rewired network is skipped and counted).
    pub rows: Vec<NullRow>,
    /// How far the network nulls moved the network (network family only).
    pub effect: Option<NullEffect>,
}

/// One null-model test.
#[derive(Clone, Debug, Serialize)]
pub struct NullTest {
    /// The outcome tested.
    pub outcome: Outcome,
    /// Network or map nulls.
    pub family: NullFamily,
    /// The null model.
    pub method: String,
    /// The null hypothesis the test examines.
    pub hypothesis: String,
    /// The observed value.
    pub observed: f64,
    /// Finite null values used.
    pub n_null: usize,
    /// Mean of the null values.
    pub null_mean: f64,
    /// Standard deviation of the null values: how far the nulls moved the statistic.
    pub null_sd: f64,
    /// Two-sided permutation p-value (Phipson & Smyth 2010).
    pub p_value: f64,
    /// Benjamini–Hochberg adjusted p-value across this subject's tests.
    pub p_fdr: f64,
}

impl NullTest {
    /// The test's name in cohort columns and JSON: `<outcome>_vs_<family>_nulls`.
    pub fn key(&self) -> String {
        format!("{}_vs_{}_nulls", self.outcome.name(), self.family.label())
    }
}

/// Everything the per-subject job computed.
#[derive(Clone, Debug)]
pub struct SubjectResult {
    /// `sub-<label>`.
    pub subject: String,
    /// Region names, one per region.
    pub names: Vec<String>,
    /// Covariates, as text.
    pub covariates: BTreeMap<String, String>,
    /// The inputs read, with digests.
    pub inputs: Vec<InputRecord>,
    /// The checked parameters.
    pub config: ValidSubjectConfig,
    /// Frames in the series.
    pub n_frames: usize,
    /// Hierarchy map value per region.
    pub map: Vec<f64>,
    /// Stage 1.
    pub timescales: TimescaleStage,
    /// Stage 2.
    pub states: States,
    /// Stage 3.
    pub control: ControlStage,
    /// Stage 4.
    pub link: LinkStage,
    /// Stage 5, when asked.
    pub network_nulls: Option<NullRun>,
    /// Stage 6, when asked.
    pub map_nulls: Option<NullRun>,
    /// Stage 7.
    pub tests: Vec<NullTest>,
    /// Remarks a user should read.
    pub notes: Vec<String>,
}

impl SubjectResult {
    /// Frames left after censoring.
    pub fn n_valid_frames(&self) -> usize {
        self.timescales.result.n_valid_frames
    }

    /// The value of `outcome` for this subject (NaN when undefined).
    pub fn outcome(&self, outcome: Outcome) -> f64 {
        outcome.value(&OutcomeSource {
            summary: &self.link.summary,
            timescale_hierarchy_spearman: self.link.timescale_hierarchy.as_ref().map(|c| c.r),
        })
    }
}
