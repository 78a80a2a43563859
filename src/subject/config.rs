//! Parameters of the per-subject job: the unchecked [`SubjectConfig`] and the
//! checked [`ValidSubjectConfig`], the only form [`super::analyse_subject`]
//! accepts.

use super::outcomes::{NullFamily, Outcome, OutcomeRole};
use super::SubjectError;
use crate::control::{Drivers, SystemParams, ValidSystemParams};
use crate::hierarchy::SurrogateMethod;
use crate::io::validate::Orientation;
use crate::param::{require, ParamError};
pub use crate::stats::nulls::NullModel;
use serde::Serialize;

/// Every parameter of the per-subject job. [`SubjectConfig::new`] lists the
/// defaults. Fields are public so a caller can build one; only
/// [`SubjectConfig::check`] turns it into something the job runs.
#[derive(Clone, Debug, Serialize, serde::Deserialize)]
pub struct SubjectConfig {
    /// Repetition time in seconds.
    pub tr_s: f64,
    /// Series layout.
    pub orientation: Orientation,
    /// Whether the connectome is directed.
    pub directed: bool,
    /// Number of states along the hierarchy.
    pub bins: usize,
    /// Rank regions by descending map value instead of ascending.
    pub descending: bool,
    /// The timescale column that enters the link (see the timescales table).
    pub timescale_column: String,
    /// Censor frames with framewise displacement above this (mm).
    pub fd_threshold_mm: Option<f64>,
    /// Also censor this many frames after each one above the threshold.
    pub censor_after: usize,
    /// Confound columns regressed out of the series.
    pub confound_columns: Vec<String>,
    /// Polynomial detrending order.
    pub detrend_order: Option<usize>,
    /// Welch segment length (frames) of the spectral-knee estimator; `None`
    /// uses the timescale module's one rule.
    pub welch_segment: Option<usize>,
    /// The linear system.
    pub system: SystemParams,
    /// Number of rewired networks (0 = none).
    pub network_nulls: usize,
    /// Which rewiring.
    pub null_model: NullModel,
    /// Swaps attempted per edge.
    pub swaps_per_edge: usize,
    /// Edge-length bins of the geometry-aware models.
    pub length_bins: usize,
    /// Number of surrogate hierarchy maps (0 = none).
    pub map_nulls: usize,
    /// How the surrogate maps are made.
    pub map_null_method: SurrogateMethod,
    /// False discovery rate at which the family of null tests is read.
    pub fdr_alpha: f64,
    /// Seed of every random draw of the job.
    pub seed: u64,
}

impl SubjectConfig {
    /// Defaults for repetition time `tr_s`: BIDS orientation (settled by the
    /// region count), undirected, 10 states, ascending, the
    /// initial-positive-sum timescale (`ips_tau_s`; Watanabe, Rees & Masuda
    /// 2019, eLife), censoring at FD > 0.5 mm with no extra frames (Power et
    /// al. 2012 used 0.5 mm), no confound regression, no detrending, the
    /// timescale module's Welch segment rule, the default control system
    /// (continuous, T = 1, c = 1, B = I), no nulls, the degree-preserving
    /// null model, 10 swaps per edge and 10 length bins (common practice, no
    /// source), spin map nulls, FDR α = 0.05, seed 0.
    pub fn new(tr_s: f64) -> Self {
        SubjectConfig {
            tr_s,
            orientation: Orientation::Auto,
            directed: false,
            bins: 10,
            descending: false,
            timescale_column: "ips_tau_s".into(),
            fd_threshold_mm: Some(0.5),
            censor_after: 0,
            confound_columns: Vec::new(),
            detrend_order: None,
            welch_segment: None,
            system: SystemParams::new(),
            network_nulls: 0,
            null_model: NullModel::default(),
            swaps_per_edge: 10,
            length_bins: 10,
            map_nulls: 0,
            map_null_method: SurrogateMethod::named("spin"),
            fdr_alpha: 0.05,
            seed: 0,
        }
    }

    /// Check every parameter that does not depend on the data.
    ///
    /// # Errors
    /// [`SubjectError::Param`] naming the first parameter out of range, e.g.
    /// a null count too small for the family of tests: the smallest
    /// permutation p-value is 1/(m + 1) (Phipson & Smyth 2010) and
    /// Benjamini–Hochberg multiplies the smallest p by the family size F, so
    /// m + 1 must be at least F/α or no test could ever be significant.
    pub fn check(&self) -> Result<ValidSubjectConfig, SubjectError> {
        require(
            self.tr_s > 0.0 && self.tr_s.is_finite(),
            "tr_s",
            self.tr_s,
            "a repetition time in seconds > 0",
        )?;
        require(
            self.bins >= 3,
            "bins",
            self.bins,
            "at least 3 states (the summaries need 3 bottom-up pairs)",
        )?;
        if let Some(t) = self.fd_threshold_mm {
            require(t > 0.0 && t.is_finite(), "fd_threshold_mm", t, "a displacement in mm > 0")?;
        }
        require(
            self.fdr_alpha > 0.0 && self.fdr_alpha < 1.0,
            "fdr_alpha",
            self.fdr_alpha,
            "a false discovery rate in (0, 1)",
        )?;
        require(self.swaps_per_edge >= 1, "swaps_per_edge", self.swaps_per_edge, "at least 1")?;
        require(self.length_bins >= 1, "length_bins", self.length_bins, "at least 1")?;
        if let Some(w) = self.welch_segment {
            require(w >= 8, "welch_segment", w, "at least 8 frames")?;
        }
        require(
            super::stages::timescale_column_estimator(&self.timescale_column).is_some(),
            "timescale_column",
            &self.timescale_column,
            format!("one of {}", super::stages::timescale_columns().join(", ")),
        )?;
        let asymmetry_is_potential = !self.directed && drivers_are_uniform(&self.system.drivers);
        let valid = ValidSubjectConfig { raw: self.clone(), asymmetry_is_potential };
        let family = valid.family_size();
        for (name, m) in [("network_nulls", self.network_nulls), ("map_nulls", self.map_nulls)] {
            if m > 0 && (family as f64) / ((m + 1) as f64) > self.fdr_alpha {
                let needed = ((family as f64) / self.fdr_alpha).ceil() as usize - 1;
                return Err(ParamError::new(
                    name,
                    m,
                    format!(
                        "at least {needed} for a family of {family} test{} at FDR {} (with {m} the smallest \
                         possible adjusted p-value is {:.3})",
                        if family == 1 { "" } else { "s" },
                        self.fdr_alpha,
                        (family as f64) / ((m + 1) as f64)
                    ),
                )
                .into());
            }
        }
        Ok(valid)
    }
}

/// Every node driven with one and the same weight (B = bI).
fn drivers_are_uniform(d: &Drivers) -> bool {
    match d {
        Drivers::All => true,
        Drivers::Nodes(_) => false,
        Drivers::Weights(w) => w.first().is_some_and(|&a| a > 0.0 && w.iter().all(|&b| b == a)),
    }
}

/// A checked [`SubjectConfig`]; fields are private so only
/// [`SubjectConfig::check`] makes one.
#[derive(Clone, Debug, Serialize)]
pub struct ValidSubjectConfig {
    raw: SubjectConfig,
    asymmetry_is_potential: bool,
}

impl ValidSubjectConfig {
    /// The parameters, as given.
    pub fn params(&self) -> &SubjectConfig {
        &self.raw
    }

    /// Whether, under these settings, the asymmetry matrix is a pure potential
    /// difference for every subject: an undirected network with every node
    /// driven equally (B = bI), so W_T⁻¹ and e^{ÃT} are symmetric and commute
    /// (see [`crate::link::decomposition`]). Then the slope of the asymmetry
    /// on distance is 3/(k + 1) × the bottom-up minus top-down energy.
    pub fn asymmetry_is_potential(&self) -> bool {
        self.asymmetry_is_potential
    }

    /// The role of each subject-level outcome under these settings.
    pub fn outcome_roles(&self) -> Vec<(Outcome, OutcomeRole)> {
        super::outcomes::roles(self.asymmetry_is_potential, self.raw.bins)
    }

    /// The null tests run under these settings, in order: (outcome, family).
    pub fn null_tests(&self) -> Vec<(Outcome, NullFamily)> {
        let mut out = Vec::new();
        for family in [NullFamily::Network, NullFamily::Map] {
            let m = match family {
                NullFamily::Network => self.raw.network_nulls,
                NullFamily::Map => self.raw.map_nulls,
            };
            if m == 0 {
                continue;
            }
            for (o, role) in self.outcome_roles() {
                if role.is_finding() && o.null_families().contains(&family) {
                    out.push((o, family));
                }
            }
        }
        out
    }

    /// Size of the family of null tests read at FDR α.
    pub fn family_size(&self) -> usize {
        self.null_tests().len()
    }

    /// The control parameters checked for `n` regions.
    ///
    /// # Errors
    /// [`crate::control::ControlError`] for drivers outside `n` regions and
    /// other system parameters out of range.
    pub fn system_for(&self, n: usize) -> Result<ValidSystemParams, crate::control::ControlError> {
        self.raw.system.check(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_check_and_identity_is_detected_from_the_settings() {
        let v = SubjectConfig::new(2.0).check().unwrap();
        assert!(v.asymmetry_is_potential());
        let mut c = SubjectConfig::new(2.0);
        c.directed = true;
        assert!(!c.check().unwrap().asymmetry_is_potential());
        let mut c = SubjectConfig::new(2.0);
        c.system.drivers = Drivers::Nodes(vec![0, 1, 2]);
        assert!(!c.check().unwrap().asymmetry_is_potential());
    }

    #[test]
    fn bad_parameters_are_named() {
        let mut c = SubjectConfig::new(f64::NAN);
        assert_eq!(
            c.check().unwrap_err().to_string(),
            "tr_s = NaN: expected a repetition time in seconds > 0"
        );
        c.tr_s = 2.0;
        c.timescale_column = "tau".into();
        assert!(c
            .check()
            .unwrap_err()
            .to_string()
            .starts_with("timescale_column = tau: expected one of ips_tau_s"));
        c.timescale_column = "ips_tau_s".into();
        c.network_nulls = 10;
        let e = c.check().unwrap_err().to_string();
        assert!(e.starts_with("network_nulls = 10: expected at least 19 for a family of 1 test at"), "{e}");
    }
}
