//! `hierax cohort`: the whole job over a cohort of your own, and the
//! machinery `hierax demo` shares with it.

use super::subject::{with_flag_names, JobOptions, StudyArgs};
use clap::Args;
use hierax::cohort::{analyse_cohort, run_cohort, write_cohort, Manifest, Patterns, SharedInputs};
use hierax::export::folder::{claim_root, Marker};
use hierax::subject::SubjectConfig;
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
            command: "cohort",
            inputs: vec![args.data.clone()],
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
    /// The command, for provenance.
    pub command: &'a str,
    /// Input folders the output folder must stay apart from.
    pub inputs: Vec<PathBuf>,
}

/// `path` made absolute without requiring it to exist: the longest existing
/// ancestor is canonicalised and the rest appended.
fn absolute(path: &Path) -> PathBuf {
    let mut existing = path.to_path_buf();
    let mut rest = Vec::new();
    while !existing.exists() {
        match (existing.file_name(), existing.parent()) {
            (Some(name), Some(parent)) => {
                rest.push(name.to_os_string());
                existing =
                    if parent.as_os_str().is_empty() { PathBuf::from(".") } else { parent.to_path_buf() };
            }
            _ => break,
        }
    }
    let mut p = std::fs::canonicalize(&existing).unwrap_or(existing);
    for r in rest.iter().rev() {
        p.push(r);
    }
    p
}

/// Check that `out` may receive outputs: it may not be, or contain, the
/// folder of any input, and it must be new, empty, or a folder hierax made.
/// Nothing is written.
pub fn check_out(out: &Path, inputs: &[PathBuf]) -> anyhow::Result<()> {
    let out_abs = absolute(out);
    for input in inputs {
        let folder = if input.is_dir() {
            input.clone()
        } else {
            input.parent().map(Path::to_path_buf).unwrap_or_default()
        };
        let folder = absolute(&folder);
        if folder.starts_with(&out_abs) {
            anyhow::bail!(
                "--out {}: the output folder contains the input folder {}; choose an output folder apart from the inputs",
                out.display(),
                folder.display()
            );
        }
    }
    if out.is_dir() && std::fs::read_dir(out).map(|mut d| d.next().is_some()).unwrap_or(false) {
        hierax::export::folder::check_replaceable(out)?;
    }
    Ok(())
}

/// [`check_out`], then create `out` with hierax's marker.
pub fn prepare_out(out: &Path, inputs: &[PathBuf]) -> anyhow::Result<()> {
    check_out(out, inputs)?;
    claim_root(out, &Marker::new("results", &serde_json::json!({}), &[]))?;
    Ok(())
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
    let cfg = cfg.check().map_err(with_flag_names)?;
    prepare_out(out, &rep.inputs)?;
    let bar =
        if rep.quiet { ProgressBar::hidden() } else { ProgressBar::new(manifest.participants.len() as u64) };
    bar.set_style(
        ProgressStyle::with_template("  {bar:30} {pos}/{len} subjects {elapsed}")
            .unwrap_or(ProgressStyle::default_bar()),
    );
    let run = run_cohort(manifest, shared, &cfg, out, rep.command, &|s| {
        if let Some(e) = &s.error {
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
    let analysis = analyse_cohort(&run, &cfg, covariates)?;
    write_cohort(out, &run, &cfg, &analysis, rep.title, rep.intro)?;

    println!("  subjects      {} succeeded, {} failed", run.records().len(), run.n_failed());
    for (o, role) in &analysis.roles {
        if !role.is_finding() {
            println!("  outcome       {} {} (not tested or modelled)", o.name(), role.describe());
        }
    }
    for g in &analysis.tests {
        println!(
            "  cohort test   {} = {:+.4} on average (sign-flip p {:.4}, FDR {:.4}, n {})",
            g.outcome.name(),
            g.mean,
            g.p_value,
            g.p_fdr,
            g.n
        );
    }
    for m in &analysis.models {
        if let Ok(f) = &m.fit {
            if let Some(j) = f.terms.iter().position(|t| t == "age") {
                println!(
                    "  age model     {}: {:+.4} per year (SE {:.4}, p {:.2e}, n {})",
                    m.outcome.name(),
                    f.coef[j],
                    f.se[j],
                    f.p_value[j],
                    f.n
                );
            }
        }
    }
    println!("  written to    {} (open report.html)", out.display());
    println!("Research software: results are not for clinical decisions.");
    Ok(if run.n_failed() == 0 { ExitCode::SUCCESS } else { ExitCode::from(1) })
}
