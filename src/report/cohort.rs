//! The cohort report: what was run, per-subject results, the relations
//! users ask about, and age models, as one self-contained HTML page.

use super::html::Report;
use super::svg;
use crate::export::cohort::{GroupTest, OutcomeModel};
use crate::stats::regression::least_squares_line;
use crate::subject::{Outcome, OutcomeRole, SubjectStatus};
use ndarray::Array2;

fn fmt(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.4}")
    } else {
        "NaN".into()
    }
}

/// What the cohort report shows.
pub struct CohortReportInput<'a> {
    /// Page title.
    pub title: &'a str,
    /// First paragraph.
    pub intro: &'a str,
    /// Every subject's status.
    pub subjects: &'a [SubjectStatus],
    /// Each outcome's role under the run's settings.
    pub roles: &'a [(Outcome, OutcomeRole)],
    /// Cohort tests against 0.
    pub tests: &'a [GroupTest],
    /// Covariate models.
    pub models: &'a [OutcomeModel],
    /// One subject's asymmetry matrix (states counted from 1), to show.
    pub example: Option<(String, Array2<f64>)>,
}

/// Build the cohort report.
pub fn cohort_report(x: &CohortReportInput<'_>) -> String {
    let reps: Vec<_> = x.subjects.iter().filter_map(|s| s.record.as_ref()).collect();
    let mut r = Report::new(x.title);
    r.paragraph(x.intro);
    r.heading("Run");
    r.paragraph(&format!(
        "{} subjects: {} succeeded, {} failed. Failures are listed in run_log.csv; every successful subject has its own folder with an HDF5 file, CSV tables and a JSON summary. docs/outputs.md in the hierax sources defines every column.",
        x.subjects.len(),
        reps.len(),
        x.subjects.len() - reps.len()
    ));
    let failures: Vec<Vec<String>> = x
        .subjects
        .iter()
        .filter_map(|s| s.error.as_ref().map(|e| vec![s.subject.clone(), e.clone()]))
        .collect();
    if !failures.is_empty() {
        r.table(&["subject", "error"], &failures);
    }

    r.heading("Outcomes");
    r.paragraph("Each subject-level outcome and what it is worth under this run's settings. An outcome that is a fixed multiple of another, or the same for every subject, is reported but never tested or modelled as a second finding.");
    let rows: Vec<Vec<String>> = x
        .roles
        .iter()
        .map(|(o, role)| vec![o.name().to_string(), role.describe(), o.description().to_string()])
        .collect();
    r.table(&["outcome", "role", "meaning"], &rows);

    if let Some((subject, m)) = &x.example {
        r.heading("Example subject");
        r.paragraph(&format!(
            "Energy asymmetry E(i→j) − E(j→i) for {subject} (rows: initial state, columns: target state; states counted from 1 along the hierarchy map). Negative entries above the diagonal mean the bottom-up transition is cheaper."
        ));
        r.figure(
            &svg::heatmap("Energy asymmetry", "initial state", "target state", m),
            "Asymmetry matrix of one subject.",
        );
    }

    r.heading("Per-subject relations");
    let age: Vec<f64> = reps
        .iter()
        .map(|x| x.covariates.get("age").and_then(|a| a.parse().ok()).unwrap_or(f64::NAN))
        .collect();
    for (o, role) in x.roles {
        if !role.is_finding() {
            continue;
        }
        let y: Vec<f64> = reps.iter().map(|x| x.outcome(*o)).collect();
        let line = least_squares_line(&age, &y).ok().map(|l| (l.intercept, l.slope));
        r.figure(
            &svg::scatter(o.name(), "age (years)", o.name(), &age, &y, line),
            &format!(
                "{}: {}. One point per subject, with the least-squares line on age.",
                o.name(),
                o.description()
            ),
        );
    }

    r.heading("Cohort tests");
    r.paragraph("Each finding tested against 0 across subjects by a sign-flip permutation test (two-sided; Nichols & Holmes 2002), with Benjamini–Hochberg adjustment across the outcomes. A negative bottom-up minus top-down energy means bottom-up transitions are cheaper.");
    let rows: Vec<Vec<String>> = x
        .tests
        .iter()
        .map(|g| {
            vec![
                g.outcome.name().to_string(),
                g.n.to_string(),
                fmt(g.mean),
                format!("{:.4}", g.p_value),
                format!("{:.4}", g.p_fdr),
                g.sign_flips.to_string(),
            ]
        })
        .collect();
    r.table(&["outcome", "n", "mean", "p", "p (FDR)", "sign flips"], &rows);

    r.heading("Covariate models");
    r.paragraph("Ordinary least squares of each finding on the covariates (classical standard errors; categorical covariates in treatment coding).");
    let mut rows = Vec::new();
    for m in x.models {
        let name = m.outcome.name().to_string();
        match &m.fit {
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
                name,
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
    let test_keys: Vec<String> =
        reps.first().map(|x| x.tests.iter().map(|t| t.0.clone()).collect()).unwrap_or_default();
    let mut header: Vec<String> =
        vec!["subject".into(), "age".into(), "frames kept".into(), "BU − TD energy".into()];
    header.extend(test_keys.iter().map(|k| format!("p {k}")));
    header.push("max terminal error".into());
    let mut rows = Vec::new();
    for x in &reps {
        let mut row = vec![
            x.subject.clone(),
            x.covariates.get("age").cloned().unwrap_or_default(),
            x.n_valid_frames.to_string(),
            fmt(x.outcome(Outcome::BottomUpMinusTopDown)),
        ];
        row.extend(x.tests.iter().map(|t| format!("{:.3}", t.1)));
        row.push(format!("{:.2e}", x.terminal_error_max));
        rows.push(row);
    }
    let header: Vec<&str> = header.iter().map(String::as_str).collect();
    r.table(&header, &rows);
    r.finish()
}
