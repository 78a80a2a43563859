//! Cohort-level statistics over subject records: each outcome tested against
//! 0 across subjects, and regressed on covariates such as age, sex and head
//! motion by ordinary least squares. Only outcomes that are findings under
//! the run's settings are tested and modelled (see
//! [`crate::subject::outcomes`]).

use crate::export::cohort::{GroupTest, OutcomeModel};
use crate::stats::inference::{benjamini_hochberg, sign_flip_test, Alternative};
use crate::stats::regression::{ols, OlsFit};
use crate::stats::StatsError;
use crate::subject::{Outcome, OutcomeRole, SubjectRecord};
use ndarray::Array2;
use rand::SeedableRng;

/// Fit `outcome ~ 1 + covariates` over `records`.
///
/// A covariate whose values all parse as numbers enters as one numeric term.
/// Any other covariate (e.g. `sex`) is categorical: its alphabetically first
/// level is the reference and every other level gets a 0/1 term named
/// `covariate[level]` (treatment coding, as R's default contrasts).
/// Subjects with a missing covariate or a non-finite outcome are left out.
///
/// # Errors
/// [`StatsError`] when too few subjects remain or the design is rank deficient.
pub fn fit_outcome(
    records: &[&SubjectRecord],
    outcome: Outcome,
    covariates: &[&str],
) -> Result<OlsFit, StatsError> {
    let reps: Vec<&&SubjectRecord> = records
        .iter()
        .filter(|r| r.outcome(outcome).is_finite())
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
    let y: Vec<f64> = reps.iter().map(|r| r.outcome(outcome)).collect();
    let terms: Vec<&str> = names.iter().map(String::as_str).collect();
    ols(&x, &y, &terms)
}

/// The outcomes that are findings under `roles`.
pub fn findings(roles: &[(Outcome, OutcomeRole)]) -> Vec<Outcome> {
    roles.iter().filter(|(_, r)| r.is_finding()).map(|(o, _)| *o).collect()
}

/// Fit every finding's model; a failure is kept as its reason.
pub fn fit_models(
    records: &[&SubjectRecord],
    outcomes: &[Outcome],
    covariates: &[&str],
) -> Vec<OutcomeModel> {
    outcomes
        .iter()
        .map(|&o| OutcomeModel {
            outcome: o,
            fit: fit_outcome(records, o, covariates).map_err(|e| e.to_string()),
        })
        .collect()
}

/// Test each of `outcomes` against 0 across subjects with a sign-flip
/// permutation test ([`sign_flip_test`]; Nichols & Holmes 2002), then
/// Benjamini–Hochberg across the outcomes. Seeded: outcome `i` draws from
/// ChaCha20 stream `i` of `seed`. An outcome with fewer than 2 finite values
/// gets NaN.
///
/// # Errors
/// [`StatsError`] from the FDR step only.
pub fn group_tests(
    records: &[&SubjectRecord],
    outcomes: &[Outcome],
    sign_flips: usize,
    seed: u64,
) -> Result<Vec<GroupTest>, StatsError> {
    let mut tests: Vec<GroupTest> = outcomes
        .iter()
        .enumerate()
        .map(|(i, &o)| {
            let v: Vec<f64> = records.iter().map(|r| r.outcome(o)).filter(|x| x.is_finite()).collect();
            let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
            rng.set_stream(i as u64);
            let (mean, p) = sign_flip_test(&v, sign_flips, Alternative::TwoSided, &mut rng)
                .unwrap_or((f64::NAN, f64::NAN));
            GroupTest { outcome: o, n: v.len(), mean, p_value: p, p_fdr: f64::NAN, sign_flips }
        })
        .collect();
    let finite: Vec<usize> = (0..tests.len()).filter(|&i| tests[i].p_value.is_finite()).collect();
    if !finite.is_empty() {
        let adj = benjamini_hochberg(&finite.iter().map(|&i| tests[i].p_value).collect::<Vec<_>>())?;
        for (&i, a) in finite.iter().zip(adj) {
            tests[i].p_fdr = a;
        }
    }
    Ok(tests)
}
