//! The cohort report: what was run, per-subject results, the relations
//! users ask about, and age models, as one self-contained HTML page.

use super::html::Report;
use super::svg;
use crate::cohort::model::GroupTest;
use crate::cohort::run::CohortRun;
use crate::cohort::subject::SubjectReport;
use crate::stats::regression::{least_squares_line, OlsFit};

fn fmt(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.4}")
    } else {
        "NaN".into()
    }
}

/// Build the cohort report. `groups` are the cohort-level tests against 0;
/// `models` holds (outcome name, fit or error text).
pub fn cohort_report(
    title: &str,
    intro: &str,
    run: &CohortRun,
    groups: &[GroupTest],
    models: &[(String, Result<OlsFit, String>)],
) -> String {
    let reps = run.reports();
    let mut r = Report::new(title);
    r.paragraph(intro);
    r.heading("Run");
    r.paragraph(&format!(
        "{} subjects: {} succeeded, {} failed. Failures are listed in run_log.csv; every successful subject has its own folder with an HDF5 file, CSV tables and a JSON summary.",
        run.outcomes.len(),
        reps.len(),
        run.n_failed()
    ));
    let failures: Vec<Vec<String>> = run
        .outcomes
        .iter()
        .filter_map(|o| o.result.as_ref().err().map(|e| vec![o.subject.clone(), e.clone()]))
        .collect();
    if !failures.is_empty() {
        r.table(&["subject", "error"], &failures);
    }

    if let Some(first) = reps.first() {
        r.heading("Example subject");
        r.paragraph(&format!(
            "Energy asymmetry E(i→j) − E(j→i) for {} (rows: initial state, columns: target state; states ordered along the hierarchy map). Negative entries above the diagonal mean the bottom-up transition is cheaper.",
            first.subject
        ));
        if let Some(m) = pair_asymmetry_matrix(first) {
            r.figure(
                &svg::heatmap("Energy asymmetry", "initial state", "target state", &m),
                "Asymmetry matrix of the first subject.",
            );
        }
    }

    r.heading("Per-subject relations");
    let age: Vec<f64> = reps
        .iter()
        .map(|x| x.covariates.get("age").and_then(|a| a.parse().ok()).unwrap_or(f64::NAN))
        .collect();
    let plots: [(&str, &str, crate::cohort::model::Outcome); 4] = [
        ("Bottom-up minus top-down energy", "mean energy difference", |x| x.summary.bottom_up_minus_top_down),
        ("Asymmetry slope against hierarchical distance", "slope per bin", |x| {
            x.summary.asymmetry_vs_distance_line.slope
        }),
        ("Asymmetry against timescale shift", "Spearman rho", |x| {
            x.summary.asymmetry_vs_timescale_shift_spearman.map_or(f64::NAN, |c| c.r)
        }),
        ("Timescale against hierarchy map", "Spearman rho", |x| {
            x.timescale_vs_hierarchy_spearman.unwrap_or(f64::NAN)
        }),
    ];
    for (title, ylab, f) in plots {
        let y: Vec<f64> = reps.iter().map(|x| f(x)).collect();
        let line = least_squares_line(&age, &y).ok().map(|l| (l.intercept, l.slope));
        r.figure(
            &svg::scatter(title, "age (years)", ylab, &age, &y, line),
            &format!("{title}, one point per subject, with the least-squares line on age."),
        );
    }

    r.heading("Cohort tests");
    r.paragraph("Each subject-level outcome tested against 0 across subjects by a sign-flip permutation test (two-sided; Nichols & Holmes 2002). A negative bottom-up minus top-down energy means bottom-up transitions are cheaper.");
    let rows: Vec<Vec<String>> = groups
        .iter()
        .map(|g| {
            vec![
                g.outcome.clone(),
                g.n.to_string(),
                fmt(g.mean),
                format!("{:.4}", g.p_value),
                g.permutations.to_string(),
            ]
        })
        .collect();
    r.table(&["outcome", "n", "mean", "p", "sign flips"], &rows);

    r.heading("Age models");
    r.paragraph("Ordinary least squares of each subject-level outcome on the covariates (classical standard errors; categorical covariates in treatment coding).");
    let mut rows = Vec::new();
    for (name, fit) in models {
        match fit {
            Ok(f) => {
                for j in 0..f.terms.len() {
                    rows.push(vec![
                        name.clone(),
                        f.terms[j].clone(),
                        fmt(f.coef[j]),
                        fmt(f.se[j]),
                        fmt(f.t[j]),
                        format!("{:.3e}", f.p_value[j]),
                        f.n.to_string(),
                        fmt(f.r_squared),
                    ]);
                }
            }
            Err(e) => rows.push(vec![
                name.clone(),
                "not fitted".into(),
                e.clone(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
            ]),
        }
    }
    r.table(&["outcome", "term", "estimate", "SE", "t", "p", "n", "R²"], &rows);

    r.heading("Per-subject summary");
    let mut rows = Vec::new();
    for x in &reps {
        let p = |i: usize| x.tests.get(i).map_or("".to_string(), |t| format!("{:.3}", t.p_value));
        rows.push(vec![
            x.subject.clone(),
            x.covariates.get("age").cloned().unwrap_or_default(),
            x.n_valid_frames.to_string(),
            fmt(x.summary.bottom_up_minus_top_down),
            fmt(x.summary.asymmetry_vs_distance_line.slope),
            p(0),
            p(2),
            format!("{:.2e}", x.terminal_error_max),
        ]);
    }
    let first_tests: Vec<String> =
        reps.first().map(|x| x.tests.iter().map(|t| t.name.clone()).collect()).unwrap_or_default();
    r.table(
        &[
            "subject",
            "age",
            "frames kept",
            "BU − TD energy",
            "asymmetry slope",
            "p (network nulls)",
            "p (spun maps)",
            "max terminal error",
        ],
        &rows,
    );
    if !first_tests.is_empty() {
        r.paragraph(&format!("Null tests per subject, in order: {}.", first_tests.join("; ")));
    }
    r.finish()
}

fn pair_asymmetry_matrix(x: &SubjectReport) -> Option<ndarray::Array2<f64>> {
    let k = x.energy.len();
    if k == 0 || x.energy.iter().any(|r| r.len() != k) {
        return None;
    }
    Some(ndarray::Array2::from_shape_fn((k, k), |(i, j)| x.energy[i][j] - x.energy[j][i]))
}
