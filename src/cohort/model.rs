//! Cohort-level statistics over the units' values ([`CohortValues`]): each outcome tested against
//! 0 across subjects, and regressed on covariates such as age, sex and head
//! motion by ordinary least squares. Only outcomes that are findings under
//! the run's settings are tested and modelled (see
//! [`crate::subject::outcomes`]).

use crate::export::cohort::{CohortValues, GroupTest, OutcomeModel};
use crate::stats::inference::{benjamini_hochberg, sign_flip_test, Alternative};
use crate::stats::regression::{ols, OlsFit};
use crate::stats::StatsError;
use crate::subject::{Outcome, OutcomeRole};
use ndarray::Array2;
use rand::SeedableRng;

/// Fit `outcome ~ 1 + covariates` over the units of `values`.
///
/// A covariate whose values all parse as numbers enters as one numeric term.
/// Any other covariate (e.g. `sex`) is categorical: its alphabetically first
/// level is the reference and every other level gets a 0/1 term named
/// `covariate[level]` (treatment coding, as R's default contrasts).
/// Units with a missing covariate or a non-finite outcome are left out.
///
/// # Errors
/// [`StatsError`] when too few units remain or the design is rank deficient;
/// [`StatsError::MissingInput`] for a covariate `values` did not keep.
pub fn fit_outcome(
    values: &CohortValues,
    outcome: Outcome,
    covariates: &[&str],
) -> Result<OlsFit, StatsError> {
    let y_all = values.outcome(outcome);
    let mut cols: Vec<&[Option<Box<str>>]> = Vec::new();
    for c in covariates {
        cols.push(values.covariate(c).ok_or(StatsError::MissingInput {
            model: "the cohort model",
            needs: "every covariate kept in the cohort values",
        })?);
    }
    let present =
        |v: &Option<Box<str>>| v.as_deref().is_some_and(|v| !v.trim().is_empty() && v.trim() != "n/a");
    let rows: Vec<usize> =
        (0..y_all.len()).filter(|&i| y_all[i].is_finite() && cols.iter().all(|c| present(&c[i]))).collect();
    let mut names: Vec<String> = vec!["intercept".into()];
    let mut columns: Vec<Vec<f64>> = vec![vec![1.0; rows.len()]];
    for (c, col) in covariates.iter().zip(&cols) {
        let raw: Vec<&str> = rows.iter().map(|&i| col[i].as_deref().unwrap_or("").trim()).collect();
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
    let x = Array2::from_shape_fn((rows.len(), columns.len()), |(i, j)| columns[j][i]);
    let y: Vec<f64> = rows.iter().map(|&i| y_all[i]).collect();
    let terms: Vec<&str> = names.iter().map(String::as_str).collect();
    ols(&x, &y, &terms)
}

/// The outcomes that are findings under `roles`.
pub fn findings(roles: &[(Outcome, OutcomeRole)]) -> Vec<Outcome> {
    roles.iter().filter(|(_, r)| r.is_finding()).map(|(o, _)| *o).collect()
}

/// Fit every finding's model; a failure is kept as its reason.
pub fn fit_models(values: &CohortValues, outcomes: &[Outcome], covariates: &[&str]) -> Vec<OutcomeModel> {
    outcomes
        .iter()
        .map(|&o| OutcomeModel {
            outcome: o,
            fit: fit_outcome(values, o, covariates).map_err(|e| e.to_string()),
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
    values: &CohortValues,
    outcomes: &[Outcome],
    sign_flips: usize,
    seed: u64,
) -> Result<Vec<GroupTest>, StatsError> {
    let mut tests: Vec<GroupTest> = outcomes
        .iter()
        .enumerate()
        .map(|(i, &o)| {
            let v: Vec<f64> = values.outcome(o).into_iter().filter(|x| x.is_finite()).collect();
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::subject::SubjectRecord;
    use std::collections::BTreeMap;

    fn push(v: &mut CohortValues, age: &str, sex: &str, y: f64) {
        let mut outcomes = vec![f64::NAN; Outcome::ALL.len()];
        outcomes[0] = y;
        v.push(&SubjectRecord {
            subject: "sub-x".into(),
            covariates: BTreeMap::from([("age".into(), age.into()), ("sex".into(), sex.into())]),
            n_valid_frames: 1,
            n_timescale_flagged: 0,
            mean_bottom_up_energy: 0.0,
            mean_top_down_energy: 0.0,
            outcomes,
            gramian_condition: 1.0,
            terminal_error_max: 0.0,
            tests: Vec::new(),
            n_notes: 0,
            output: Default::default(),
        });
    }

    #[test]
    fn the_model_drops_missing_rows_and_codes_levels_as_the_explicit_design() {
        // y = 1 + 0.5 age + 2 [sex = M] + a small deterministic residual; one row without age.
        let data =
            [(8.0, "F", 0.01), (9.0, "M", -0.02), (10.0, "F", 0.03), (11.0, "M", 0.0), (12.0, "F", -0.01)];
        let mut v = CohortValues::new(&["age", "sex"]);
        for (age, sex, e) in data {
            let y = 1.0 + 0.5 * age + if sex == "M" { 2.0 } else { 0.0 } + e;
            push(&mut v, &age.to_string(), sex, y);
        }
        push(&mut v, "n/a", "F", 100.0);
        let fit = fit_outcome(&v, Outcome::BottomUpMinusTopDown, &["age", "sex"]).unwrap();
        assert_eq!(fit.terms, ["intercept", "age", "sex[M]"]);
        assert_eq!(fit.n, 5);
        // The same fit from the explicit design matrix (treatment coding, F the reference).
        let x = Array2::from_shape_fn((5, 3), |(i, j)| match j {
            0 => 1.0,
            1 => data[i].0,
            _ => f64::from(u8::from(data[i].1 == "M")),
        });
        let y: Vec<f64> =
            data.iter().map(|(a, s, e)| 1.0 + 0.5 * a + if *s == "M" { 2.0 } else { 0.0 } + e).collect();
        let direct = ols(&x, &y, &["intercept", "age", "sex[M]"]).unwrap();
        for j in 0..3 {
            assert!((fit.coef[j] - direct.coef[j]).abs() < 1e-12, "{j}");
        }
        assert!((fit.coef[1] - 0.5).abs() < 0.05 && (fit.coef[2] - 2.0).abs() < 0.1);
        // A covariate the values did not keep is an error, not a silent drop.
        assert!(fit_outcome(&v, Outcome::BottomUpMinusTopDown, &["iq"]).is_err());
    }
}
