//! The cohort report: what was run, per-subject results, the relations
//! users ask about, and age models, as one self-contained HTML page.

use super::html::Report;
use super::svg;
use crate::export::cohort::{CohortValues, GroupTest, OutcomeModel};
use crate::stats::regression::least_squares_line;
use crate::subject::{Outcome, OutcomeRole, UnitStatus};
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
    /// Every unit's status.
    pub units: &'a [UnitStatus],
    /// The values of the units that succeeded.
    pub values: &'a CohortValues,
    /// Each outcome's role under the run's settings.
    pub roles: &'a [(Outcome, OutcomeRole)],
    /// Cohort tests against 0.
    pub tests: &'a [GroupTest],
    /// Covariate models.
    pub models: &'a [OutcomeModel],
    /// One subject's asymmetry matrix (states counted from 1), to show.
    pub example: Option<(String, Array2<f64>)>,
}

/// Rows of a per-unit table shown in the report; cohort.csv and run_log.csv
/// have every unit (our choice, to keep the page readable at any size).
pub const TABLE_ROWS: usize = CohortValues::SAMPLE;

/// Points drawn per scatter plot; a larger cohort is drawn as an evenly
/// spaced subsample in name order, and the line is fitted on every unit (our
/// choice: the page stays a few megabytes at any cohort size).
pub const SCATTER_POINTS: usize = 2_000;

/// Every `step`-th element, with `step` chosen so at most `max` remain.
fn thin(v: &[f64], max: usize) -> Vec<f64> {
    let step = v.len().div_ceil(max.max(1)).max(1);
    v.iter().step_by(step).copied().collect()
}

/// Build the cohort report.
pub fn cohort_report(x: &CohortReportInput<'_>) -> String {
    let n_ok = x.values.len();
    let mut r = Report::new(x.title);
    r.paragraph(x.intro);
    r.heading("Run");
    r.paragraph(&format!(
        "{} units: {} succeeded, {} failed. Failures are listed in run_log.csv; every unit that succeeded has its own folder with an HDF5 file, CSV tables and a JSON summary. docs/outputs.md in the hierax sources defines every column.",
        x.units.len(),
        n_ok,
        x.units.len() - n_ok
    ));
    let failures: Vec<Vec<String>> = x
        .units
        .iter()
        .filter_map(|s| {
            s.failure
                .as_ref()
                .map(|f| vec![s.subject.clone(), f.stage.label().to_string(), f.message.clone()])
        })
        .take(TABLE_ROWS)
        .collect();
    if !failures.is_empty() {
        let n_failed = x.units.len() - n_ok;
        if n_failed > failures.len() {
            r.paragraph(&format!(
                "The first {} of {n_failed} failures; run_log.csv lists them all.",
                failures.len()
            ));
        }
        r.table(&["unit", "stage", "error"], &failures);
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
    let age: Vec<f64> = x.values.covariate("age").map_or_else(
        || vec![f64::NAN; n_ok],
        |c| c.iter().map(|a| a.as_deref().and_then(|a| a.trim().parse().ok()).unwrap_or(f64::NAN)).collect(),
    );
    let thinned = n_ok > SCATTER_POINTS;
    for (o, role) in x.roles {
        if !role.is_finding() {
            continue;
        }
        let y = x.values.outcome(*o);
        let line = least_squares_line(&age, &y).ok().map(|l| (l.intercept, l.slope));
        let shown = if thinned {
            format!(
                "An evenly spaced {} of the {n_ok} units (in name order) are drawn; the least-squares line on age is fitted on all of them.",
                thin(&y, SCATTER_POINTS).len()
            )
        } else {
            "One point per unit, with the least-squares line on age.".to_string()
        };
        r.figure(
            &svg::scatter(
                o.name(),
                "age (years)",
                o.name(),
                &thin(&age, SCATTER_POINTS),
                &thin(&y, SCATTER_POINTS),
                line,
            ),
            &format!("{}: {}. {shown}", o.name(), o.description()),
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
    let reps = &x.values.sample;
    if n_ok > reps.len() {
        r.paragraph(&format!(
            "The first {} of {n_ok} units in name order; cohort.csv has them all.",
            reps.len()
        ));
    }
    let test_keys: Vec<String> =
        reps.first().map(|x| x.tests.iter().map(|t| t.0.clone()).collect()).unwrap_or_default();
    let mut header: Vec<String> =
        vec!["subject".into(), "age".into(), "frames kept".into(), "BU − TD energy".into()];
    header.extend(test_keys.iter().map(|k| format!("p {k}")));
    header.push("max terminal error".into());
    let mut rows = Vec::new();
    for x in reps {
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
