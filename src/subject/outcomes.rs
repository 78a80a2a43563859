//! The subject-level outcomes: one number per subject each, defined once and
//! used by the null tests, the cohort table, the cohort tests and models, the
//! report and the data dictionary.
//!
//! Some outcomes are fixed functions of others under some settings. With an
//! undirected network and every node driven equally the asymmetry matrix is a
//! pure potential difference ([`crate::link::decomposition`]), so
//! * the slope of the asymmetry on hierarchical distance is exactly
//!   3/(k + 1) × the bottom-up minus top-down energy, and
//! * the potential share is 1.
//!
//! [`roles`] says so, and the cohort layer keeps such outcomes out of the
//! null-test family, the cohort tests and the models.

use crate::link::SubjectSummary;
use serde::Serialize;

/// A subject-level outcome.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// Mean bottom-up minus mean top-down energy.
    BottomUpMinusTopDown,
    /// Least-squares slope of the asymmetry on hierarchical distance.
    AsymmetryDistanceSlope,
    /// Spearman of the asymmetry with hierarchical distance.
    AsymmetryDistanceSpearman,
    /// Share of the asymmetry explained by a per-state potential.
    AsymmetryPotentialShare,
    /// Spearman of the per-state potential with hierarchy position.
    PotentialHierarchySpearman,
    /// Spearman of the asymmetry with the timescale shift.
    AsymmetryTimescaleShiftSpearman,
    /// Spearman of regional timescale with the hierarchy map.
    TimescaleHierarchySpearman,
}

/// A family of null models.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NullFamily {
    /// Rewired networks, same states.
    Network,
    /// Surrogate hierarchy maps, same network.
    Map,
}

impl NullFamily {
    /// The name used in outputs.
    pub fn label(self) -> &'static str {
        match self {
            NullFamily::Network => "network",
            NullFamily::Map => "map",
        }
    }
}

/// What an outcome is worth under the chosen settings.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "role", rename_all = "snake_case")]
pub enum OutcomeRole {
    /// A quantity of its own: tested and modelled.
    Finding,
    /// A fixed multiple of another outcome: reported, never tested or
    /// modelled as a second finding.
    Derived {
        /// The outcome it is a multiple of.
        of: Outcome,
        /// The factor.
        factor: f64,
        /// Why.
        reason: String,
    },
    /// The same value for every subject under these settings.
    Constant {
        /// The value.
        value: f64,
        /// Why.
        reason: String,
    },
}

impl OutcomeRole {
    /// Whether the outcome is tested and modelled.
    pub fn is_finding(&self) -> bool {
        matches!(self, OutcomeRole::Finding)
    }

    /// One sentence for tables and reports.
    pub fn describe(&self) -> String {
        match self {
            OutcomeRole::Finding => "finding".into(),
            OutcomeRole::Derived { of, factor, reason } => {
                format!("equals {factor:.6} x {} ({reason})", of.name())
            }
            OutcomeRole::Constant { value, reason } => format!("equals {value} for every subject ({reason})"),
        }
    }
}

/// The pieces of a subject's result the outcomes are read from (also
/// available for every null network or map).
#[derive(Clone, Copy, Debug)]
pub struct OutcomeSource<'a> {
    /// The link summaries.
    pub summary: &'a SubjectSummary,
    /// Spearman of regional timescale with the map, when defined.
    pub timescale_hierarchy_spearman: Option<f64>,
}

impl Outcome {
    /// Every outcome, in table order.
    pub const ALL: [Outcome; 7] = [
        Outcome::BottomUpMinusTopDown,
        Outcome::AsymmetryDistanceSlope,
        Outcome::AsymmetryDistanceSpearman,
        Outcome::AsymmetryPotentialShare,
        Outcome::PotentialHierarchySpearman,
        Outcome::AsymmetryTimescaleShiftSpearman,
        Outcome::TimescaleHierarchySpearman,
    ];

    /// Column and key name.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::BottomUpMinusTopDown => "bottom_up_minus_top_down",
            Outcome::AsymmetryDistanceSlope => "asymmetry_distance_slope",
            Outcome::AsymmetryDistanceSpearman => "asymmetry_distance_spearman",
            Outcome::AsymmetryPotentialShare => "asymmetry_potential_share",
            Outcome::PotentialHierarchySpearman => "potential_hierarchy_spearman",
            Outcome::AsymmetryTimescaleShiftSpearman => "asymmetry_timescale_shift_spearman",
            Outcome::TimescaleHierarchySpearman => "timescale_hierarchy_spearman",
        }
    }

    /// What it means, with its sign convention and unit.
    pub fn description(self) -> &'static str {
        match self {
            Outcome::BottomUpMinusTopDown => {
                "mean energy of the k(k-1)/2 bottom-up transitions (initial state below target) minus that of \
                 the top-down ones; negative: bottom-up transitions are cheaper (energy units)"
            }
            Outcome::AsymmetryDistanceSlope => {
                "least-squares slope of the asymmetry E[i,j] - E[j,i] (i < j) on the distance j - i; \
                 negative: bottom-up transitions get relatively cheaper with distance (energy units per state)"
            }
            Outcome::AsymmetryDistanceSpearman => {
                "Spearman correlation of the asymmetry E[i,j] - E[j,i] (i < j) with the distance j - i"
            }
            Outcome::AsymmetryPotentialShare => {
                "share of the squared asymmetry explained by a per-state potential (Hodge decomposition); 1: \
                 the asymmetry is a pure potential difference, no circulation"
            }
            Outcome::PotentialHierarchySpearman => {
                "Spearman correlation of the per-state potential with the state's position along the \
                 hierarchy; negative: transitions towards higher states are cheaper"
            }
            Outcome::AsymmetryTimescaleShiftSpearman => {
                "Spearman correlation of the asymmetry E[i,j] - E[j,i] with the timescale shift tau[j] - \
                 tau[i] (i < j); negative: bottom-up transitions are cheaper where the target's timescale is \
                 longer"
            }
            Outcome::TimescaleHierarchySpearman => {
                "Spearman correlation of regional intrinsic timescale with the hierarchy map"
            }
        }
    }

    /// The value for one subject (or one null); NaN when undefined.
    pub fn value(self, x: &OutcomeSource<'_>) -> f64 {
        let s = x.summary;
        match self {
            Outcome::BottomUpMinusTopDown => s.bottom_up_minus_top_down,
            Outcome::AsymmetryDistanceSlope => s.asymmetry_vs_distance_line.slope,
            Outcome::AsymmetryDistanceSpearman => s.asymmetry_vs_distance_spearman.r,
            Outcome::AsymmetryPotentialShare => s.asymmetry_decomposition.potential_share,
            Outcome::PotentialHierarchySpearman => {
                s.asymmetry_decomposition.potential_vs_position_spearman.as_ref().map_or(f64::NAN, |c| c.r)
            }
            Outcome::AsymmetryTimescaleShiftSpearman => {
                s.asymmetry_vs_timescale_shift_spearman.as_ref().map_or(f64::NAN, |c| c.r)
            }
            Outcome::TimescaleHierarchySpearman => x.timescale_hierarchy_spearman.unwrap_or(f64::NAN),
        }
    }

    /// The null families whose nulls are used to test this outcome. The
    /// family is kept small on purpose: every test added raises the number
    /// of nulls needed for FDR.
    pub fn null_families(self) -> &'static [NullFamily] {
        match self {
            Outcome::BottomUpMinusTopDown | Outcome::AsymmetryDistanceSlope => {
                &[NullFamily::Network, NullFamily::Map]
            }
            Outcome::TimescaleHierarchySpearman => &[NullFamily::Map],
            _ => &[],
        }
    }
}

impl std::fmt::Display for Outcome {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// The role of every outcome for `k` states, given whether the asymmetry
/// is a pure potential under the chosen settings.
pub fn roles(asymmetry_is_potential: bool, k: usize) -> Vec<(Outcome, OutcomeRole)> {
    let why = "undirected network with every node driven equally: the asymmetry is a pure potential \
               difference";
    Outcome::ALL
        .iter()
        .map(|&o| {
            let role = match (o, asymmetry_is_potential) {
                (Outcome::AsymmetryDistanceSlope, true) => OutcomeRole::Derived {
                    of: Outcome::BottomUpMinusTopDown,
                    factor: crate::link::slope_per_mean_for_potential(k).unwrap_or(f64::NAN),
                    reason: format!("3/(k+1) with k = {k}; {why}"),
                },
                (Outcome::AsymmetryPotentialShare, true) => {
                    OutcomeRole::Constant { value: 1.0, reason: why.to_string() }
                }
                _ => OutcomeRole::Finding,
            };
            (o, role)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_and_identities_are_named() {
        let mut names: Vec<&str> = Outcome::ALL.iter().map(|o| o.name()).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), Outcome::ALL.len());
        let r = roles(true, 10);
        let slope = &r.iter().find(|(o, _)| *o == Outcome::AsymmetryDistanceSlope).unwrap().1;
        assert!(matches!(slope, OutcomeRole::Derived { factor, .. } if (factor - 3.0 / 11.0).abs() < 1e-15));
        assert!(roles(false, 10).iter().all(|(_, r)| r.is_finding()));
    }
}
