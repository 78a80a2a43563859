//! `hierax cohort`: the whole job over a cohort of your own, and the
//! machinery `hierax demo` shares with it.

use super::subject::{JobOptions, StudyArgs};
use clap::Args;
use hierax::cohort::model::{fit_outcome, group_tests, OUTCOMES};
use hierax::cohort::run::{run_cohort, SharedInputs};
use hierax::cohort::subject::SubjectConfig;
use hierax::cohort::{Manifest, Patterns};
use hierax::io::table::write_json;
use indicatif::{ProgressBar, ProgressStyle};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Run the per-subject job for every participant of a BIDS-style folder
/// (participants.tsv + per-subject files found by filename patterns), then
/// write the cohort table, run log, cohort tests, age models and an HTML
/// report. A failing subject is logged and the others go on (exit code 1).
#[derive(Debug, Args)]
#[command(after_help = "Example (the bundled invented cohort, spelled out):\n  \
    hierax cohort --data demo-data --tr 2 --map demo-data/atlas/hierarchy.csv \\\n    \
    --connectome-pattern 'sub-{id}/sub-{id}_connectome.csv' --series-pattern 'sub-{id}/sub-{id}_bold.npy' \\\n    \
    --confounds-pattern 'sub-{id}/sub-{id}_confounds.tsv' --confound-columns global_signal,trans_x \\\n    \
    --covariates age,sex --out cohort-output\n\n\
    {id} stands for the participant label without `sub-`.")]
pub struct CohortArgs {
    /// Cohort folder holding participants.tsv (column participant_id = sub-<label>).
    #[arg(long, value_name = "DIR")]
    data: PathBuf,

    /// Connectome path relative to --data, with {id} for the label.
    #[arg(long, default_value = "sub-{id}/sub-{id}_connectome.csv", value_name = "PATTERN")]
    connectome_pattern: String,

    /// Series path relative to --data, with {id} for the label.
    #[arg(long, default_value = "sub-{id}/sub-{id}_bold.npy", value_name = "PATTERN")]
    series_pattern: String,

    /// Confounds path relative to --data, with {id}; `none` for no confounds.
    #[arg(long, default_value = "sub-{id}/sub-{id}_confounds.tsv", value_name = "PATTERN")]
    confounds_pattern: String,

    #[command(flatten)]
    study: StudyArgs,

    /// Covariates of participants.tsv entering the age models, comma separated.
    #[arg(long, value_delimiter = ',', default_value = "age", value_name = "COLUMNS")]
    covariates: Vec<String>,

    #[command(flatten)]
    job: JobOptions,

    /// Output folder.
    #[arg(long, default_value = "hierax-cohort")]
    out: PathBuf,

    /// Do not show a progress bar.
    #[arg(long)]
    quiet: bool,
}

pub fn run(args: CohortArgs) -> anyhow::Result<ExitCode> {
    let patterns = Patterns {
        connectome: args.connectome_pattern.clone(),
        series: args.series_pattern.clone(),
        confounds: (args.confounds_pattern != "none").then(|| args.confounds_pattern.clone()),
    };
    let manifest = Manifest::discover(&args.data, &patterns)?;
    let shared = args.study.shared()?;
    let cfg = args.study.config(&args.job);
    println!("hierax cohort: {} participants from {}", manifest.participants.len(), args.data.display());
    let covariates: Vec<&str> = args.covariates.iter().map(String::as_str).collect();
    let title = format!("hierax cohort report: {}", args.data.display());
    run_and_report(
        &manifest,
        &shared,
        &cfg,
        &args.out,
        &covariates,
        &Reporting {
            title: &title,
            intro: "Results of hierax over the participants listed below.",
            quiet: args.quiet,
        },
    )
}

/// How a cohort run is reported.
pub struct Reporting<'a> {
    /// Report title.
    pub title: &'a str,
    /// First paragraph of the report.
    pub intro: &'a str,
    /// Hide the progress bar.
    pub quiet: bool,
}

/// Run every subject, then write the cohort files and the report; print a summary.
pub fn run_and_report(
    manifest: &Manifest,
    shared: &SharedInputs,
    cfg: &SubjectConfig,
    out: &Path,
    covariates: &[&str],
    rep: &Reporting<'_>,
) -> anyhow::Result<ExitCode> {
    let bar =
        if rep.quiet { ProgressBar::hidden() } else { ProgressBar::new(manifest.participants.len() as u64) };
    bar.set_style(
        ProgressStyle::with_template("  {bar:30} {pos}/{len} subjects {elapsed}")
            .unwrap_or(ProgressStyle::default_bar()),
    );
    let run = run_cohort(manifest, shared, cfg, out, &|o| {
        if let Err(e) = &o.result {
            // A hidden bar drops its lines, so print directly when quiet.
            if rep.quiet {
                eprintln!("hierax: error: {e}");
            } else {
                bar.println(format!("hierax: error: {e}"));
            }
        }
        bar.inc(1);
    })?;
    bar.finish_and_clear();

    let models: Vec<(String, Result<_, String>)> = OUTCOMES
        .iter()
        .map(|(name, f)| (name.to_string(), fit_outcome(&run, *f, covariates).map_err(|e| e.to_string())))
        .collect();
    let groups = group_tests(&run, 9999, cfg.seed).map_err(|e| anyhow::anyhow!("cohort tests: {e}"))?;
    run.cohort_table().write_csv(&out.join("cohort.csv"))?;
    run.log_table().write_csv(&out.join("run_log.csv"))?;
    model_table(&models).write_csv(&out.join("age_models.csv"))?;
    {
        use hierax::io::table::{Column, Table};
        Table::new()
            .with("outcome", Column::Str(groups.iter().map(|g| g.outcome.clone()).collect()))
            .with("n", Column::I64(groups.iter().map(|g| g.n as i64).collect()))
            .with("mean", Column::F64(groups.iter().map(|g| g.mean).collect()))
            .with("p_value", Column::F64(groups.iter().map(|g| g.p_value).collect()))
            .with("sign_flips", Column::I64(groups.iter().map(|g| g.permutations as i64).collect()))
            .write_csv(&out.join("group_tests.csv"))?;
    }
    write_json(
        &out.join("cohort.json"),
        &serde_json::json!({ "config": cfg, "group_tests": groups, "models": models, "run": run }),
    )?;
    let html = hierax::report::cohort::cohort_report(rep.title, rep.intro, &run, &groups, &models);
    hierax::io::atomic::write_bytes_atomic(&out.join("report.html"), html.as_bytes())?;

    println!("  subjects      {} succeeded, {} failed", run.reports().len(), run.n_failed());
    for g in &groups {
        println!(
            "  cohort test   {} = {:+.4} on average (sign-flip p {:.4}, n {})",
            g.outcome, g.mean, g.p_value, g.n
        );
    }
    for (name, fit) in &models {
        if let Ok(f) = fit {
            if let Some(j) = f.terms.iter().position(|t| t == "age") {
                println!(
                    "  age model     {name}: {:+.4} per year (SE {:.4}, p {:.2e}, n {})",
                    f.coef[j], f.se[j], f.p_value[j], f.n
                );
            }
        }
    }
    println!("  written to    {} (open report.html)", out.display());
    println!("Research software: results are not for clinical decisions.");
    Ok(if run.n_failed() == 0 { ExitCode::SUCCESS } else { ExitCode::from(1) })
}

fn model_table(
    models: &[(String, Result<hierax::stats::regression::OlsFit, String>)],
) -> hierax::io::table::Table {
    use hierax::io::table::{Column, Table};
    let mut outcome = Vec::new();
    let mut term = Vec::new();
    let (mut est, mut se, mut t, mut p, mut n) = (Vec::new(), Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for (name, fit) in models {
        if let Ok(f) = fit {
            for j in 0..f.terms.len() {
                outcome.push(name.clone());
                term.push(f.terms[j].clone());
                est.push(f.coef[j]);
                se.push(f.se[j]);
                t.push(f.t[j]);
                p.push(f.p_value[j]);
                n.push(f.n as i64);
            }
        }
    }
    Table::new()
        .with("outcome", Column::Str(outcome))
        .with("term", Column::Str(term))
        .with("estimate", Column::F64(est))
        .with("se", Column::F64(se))
        .with("t", Column::F64(t))
        .with("p_value", Column::F64(p))
        .with("n", Column::I64(n))
}
