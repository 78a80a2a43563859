//! Cohort-level models: a subject-level outcome regressed on covariates such
//! as age, sex and head motion, by ordinary least squares.

use super::run::CohortRun;
use super::subject::SubjectReport;
use crate::stats::regression::{ols, OlsFit};
use crate::stats::StatsError;
use ndarray::Array2;

/// A subject-level outcome picked from a [`SubjectReport`].
pub type Outcome = fn(&SubjectReport) -> f64;

/// The outcomes modelled by default, with their names.
pub const OUTCOMES: [(&str, Outcome); 4] = [
    ("bottom_up_minus_top_down", |r| r.summary.bottom_up_minus_top_down),
    ("asymmetry_distance_slope", |r| r.summary.asymmetry_vs_distance_line.slope),
    ("asymmetry_timescale_shift_spearman", |r| {
        r.summary.asymmetry_vs_timescale_shift_spearman.map_or(f64::NAN, |c| c.r)
    }),
    ("timescale_hierarchy_spearman", |r| r.timescale_vs_hierarchy_spearman.unwrap_or(f64::NAN)),
];

/// Fit `outcome ~ 1 + covariates` over the successful subjects of `run`.
///
/// A covariate whose values all parse as numbers enters as one numeric term.
/// Any other covariate (e.g. `sex`) is categorical: its alphabetically first
/// level is the reference and every other level gets a 0/1 term named
/// `covariate[level]` (treatment coding, as R's default contrasts).
/// Subjects with a missing covariate or a non-finite outcome are left out.
///
/// # Errors
/// [`StatsError`] when too few subjects remain or the design is rank deficient.
pub fn fit_outcome(run: &CohortRun, outcome: Outcome, covariates: &[&str]) -> Result<OlsFit, StatsError> {
    let reps: Vec<&SubjectReport> = run
        .reports()
        .into_iter()
        .filter(|r| outcome(r).is_finite())
        .filter(|r| {
            covariates
                .iter()
                .all(|c| r.covariates.get(*c).is_some_and(|v| !v.trim().is_empty() && v != "n/a"))
        })
        .collect();
    let mut names: Vec<String> = vec!["intercept".into()];
    let mut columns: Vec<Vec<f64>> = vec![vec![1.0; reps.len()]];
    for c in covariates {
        let raw: Vec<&str> = reps.iter().map(|r| r.covariates[*c].trim()).collect();
        let parsed: Option<Vec<f64>> = raw.iter().map(|v| v.parse::<f64>().ok()).collect();
        match parsed {
            Some(v) => {
                names.push(c.to_string());
                columns.push(v);
            }
            None => {
                let mut levels: Vec<&str> = raw.clone();
                levels.sort_unstable();
                levels.dedup();
                for level in levels.iter().skip(1) {
                    names.push(format!("{c}[{level}]"));
                    columns.push(raw.iter().map(|v| if v == level { 1.0 } else { 0.0 }).collect());
                }
            }
        }
    }
    let x = Array2::from_shape_fn((reps.len(), columns.len()), |(i, j)| columns[j][i]);
    let y: Vec<f64> = reps.iter().map(|r| outcome(r)).collect();
    let terms: Vec<&str> = names.iter().map(String::as_str).collect();
    ols(&x, &y, &terms)
}

/// A cohort-level test of one subject-level outcome against 0.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct GroupTest {
    /// The outcome.
    pub outcome: String,
    /// Subjects with a finite value.
    pub n: usize,
    /// Mean across subjects.
    pub mean: f64,
    /// Two-sided sign-flip permutation p-value.
    pub p_value: f64,
    /// Sign flips drawn.
    pub permutations: usize,
}

/// Test each of [`OUTCOMES`] against 0 across the cohort with a sign-flip
/// permutation test ([`crate::stats::inference::sign_flip_test`]); for
/// example, whether bottom-up transitions are cheaper than top-down ones
/// across subjects. Seeded: the same seed gives the same p-values.
///
/// # Errors
/// [`StatsError::TooFew`] when fewer than 2 subjects have a finite value.
pub fn group_tests(run: &CohortRun, permutations: usize, seed: u64) -> Result<Vec<GroupTest>, StatsError> {
    use rand::SeedableRng;
    let reps = run.reports();
    OUTCOMES
        .iter()
        .enumerate()
        .map(|(i, (name, f))| {
            let v: Vec<f64> = reps.iter().map(|r| f(r)).filter(|x| x.is_finite()).collect();
            let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
            rng.set_stream(i as u64);
            let (mean, p) = crate::stats::inference::sign_flip_test(
                &v,
                permutations,
                crate::stats::inference::Alternative::TwoSided,
                &mut rng,
            )?;
            Ok(GroupTest { outcome: name.to_string(), n: v.len(), mean, p_value: p, permutations })
        })
        .collect()
}
