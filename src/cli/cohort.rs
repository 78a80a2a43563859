//! `hierax cohort run|merge|sbatch`: the whole job over a cohort of your own,
//! on one machine or as a SLURM array over shards, and the machinery
//! `hierax demo` shares with it.

use super::subject::{with_flag_names, JobOptions, StudyArgs};
use anyhow::{bail, Context};
use clap::{Args, Subcommand};
use hierax::cohort::merge::{gather, shard_log_name, ShardLog};
use hierax::cohort::run::parameters_marker;
use hierax::cohort::{
    finish_cohort, run_cohort, CovariateKind, Manifest, Patterns, RunLock, RunOptions, SharedInputs,
};
use hierax::export::folder::{claim_root, Marker};
use hierax::subject::{SubjectConfig, SubjectStatus, ValidSubjectConfig};
use indicatif::{ProgressBar, ProgressStyle};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

/// The whole job over a cohort: run it (all of it, or one shard), merge
/// shards, or write a SLURM array job.
#[derive(Debug, Args)]
pub struct CohortArgs {
    #[command(subcommand)]
    action: CohortAction,
}

#[derive(Debug, Subcommand)]
enum CohortAction {
    #[command(allow_negative_numbers = true)]
    Run(Box<CohortRunArgs>),
    Merge(MergeArgs),
    #[command(allow_negative_numbers = true)]
    Sbatch(Box<SbatchArgs>),
}

/// Where the cohort is and what to run on it (shared by `run` and `sbatch`).
#[derive(Debug, Clone, Args)]
pub struct CohortSpec {
    /// Cohort folder holding participants.tsv (column participant_id = sub-<label>) and, with
    /// sessions, sub-<label>/sub-<label>_sessions.tsv (column session_id = ses-<label>).
    #[arg(long, value_name = "DIR")]
    data: PathBuf,

    /// Connectome path relative to --data; {subject}, {session} and {run} stand for the labels.
    #[arg(long, default_value = "sub-{subject}/sub-{subject}_connectome.csv", value_name = "PATTERN")]
    connectome_pattern: String,

    /// Series path relative to --data, with {subject} (and {session}, {run}).
    #[arg(long, default_value = "sub-{subject}/sub-{subject}_bold.npy", value_name = "PATTERN")]
    series_pattern: String,

    /// Confounds path relative to --data, with {subject} (and {session}, {run}); `none` for none.
    #[arg(long, default_value = "sub-{subject}/sub-{subject}_confounds.tsv", value_name = "PATTERN")]
    confounds_pattern: String,

    /// The run label {run} stands for in the patterns (e.g. 1 for run-1).
    #[arg(long, value_name = "LABEL")]
    run: Option<String>,

    #[command(flatten)]
    study: StudyArgs,

    /// Numeric covariates of the participants (or sessions) table entering the models.
    #[arg(long, value_delimiter = ',', default_value = "age", value_name = "COLUMNS")]
    covariates: Vec<String>,

    /// Categorical covariates (levels in treatment coding), e.g. sex.
    #[arg(long, value_delimiter = ',', value_name = "COLUMNS")]
    categorical: Vec<String>,

    #[command(flatten)]
    job: JobOptions,

    /// Output folder.
    #[arg(long, default_value = "hierax-cohort")]
    out: PathBuf,

    /// Worker threads for the whole run (default: one per core).
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
}

/// Run the per-subject job for every unit (subject, or subject x session) of a BIDS-style
/// folder, then write the cohort table, run log, cohort tests, covariate models and an HTML
/// report. A failing unit is logged and the others go on (exit code 1). A re-run with the same
/// parameters keeps units whose inputs are unchanged; with --shard only a slice runs and
/// `hierax cohort merge` joins the slices.
#[derive(Debug, Args)]
#[command(after_help = "Example (the bundled invented cohort, spelled out):\n  \
    hierax cohort run --data demo-data --tr 2 --map demo-data/atlas/hierarchy.csv \\\n    \
    --connectome-pattern 'sub-{subject}/sub-{subject}_connectome.csv' \\\n    \
    --series-pattern 'sub-{subject}/sub-{subject}_bold.npy' \\\n    \
    --confounds-pattern 'sub-{subject}/sub-{subject}_confounds.tsv' \\\n    \
    --confound-columns global_signal,trans_x \\\n    \
    --covariates age --categorical sex --out cohort-output\n\n\
    {subject} stands for the participant label without `sub-`.")]
pub struct CohortRunArgs {
    #[command(flatten)]
    spec: CohortSpec,

    /// Run only shard I of N (deterministic slice of the units in name order); defaults to
    /// SLURM_ARRAY_TASK_ID/SLURM_ARRAY_TASK_COUNT inside a SLURM array job.
    #[arg(long, value_name = "I/N")]
    shard: Option<String>,

    /// Print the plan (units, files found or missing, parameters) and write nothing.
    #[arg(long)]
    dry_run: bool,

    /// Recompute every unit even when its folder is up to date.
    #[arg(long)]
    no_resume: bool,

    /// Replace the results of a run made with other parameters in --out.
    #[arg(long)]
    overwrite: bool,

    /// Do not show progress.
    #[arg(long)]
    quiet: bool,
}

/// Join the outputs of every shard in --out into the cohort files and report. Refuses outputs
/// made with different parameters or hierax versions, naming the difference.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  hierax cohort merge --out cohort-output")]
pub struct MergeArgs {
    /// The folder the shards wrote into.
    #[arg(long)]
    out: PathBuf,

    /// Numeric covariates entering the models.
    #[arg(long, value_delimiter = ',', default_value = "age", value_name = "COLUMNS")]
    covariates: Vec<String>,

    /// Categorical covariates.
    #[arg(long, value_delimiter = ',', value_name = "COLUMNS")]
    categorical: Vec<String>,
}

/// Write a SLURM array job over shards of the cohort and a merge job that runs after every
/// shard succeeded, and print how to submit them. Nothing is submitted.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  \
    hierax cohort sbatch --shards 40 --time 02:00:00 --mem 4G --data demo-data --tr 2 \\\n    \
    --map demo-data/atlas/hierarchy.csv --out cohort-cluster\n  \
    sh cohort-cluster/slurm/submit.sh")]
pub struct SbatchArgs {
    #[command(flatten)]
    spec: CohortSpec,

    /// Number of shards (array tasks).
    #[arg(long, value_name = "N")]
    shards: usize,

    /// Wall time per shard (SLURM --time).
    #[arg(long, default_value = "01:00:00", value_name = "HH:MM:SS")]
    time: String,

    /// Memory per shard (SLURM --mem).
    #[arg(long, default_value = "4G")]
    mem: String,

    /// SLURM partition, if the cluster needs one.
    #[arg(long)]
    partition: Option<String>,
}

pub fn run(args: CohortArgs) -> anyhow::Result<ExitCode> {
    match args.action {
        CohortAction::Run(a) => run_command(*a),
        CohortAction::Merge(a) => merge_command(a),
        CohortAction::Sbatch(a) => sbatch_command(*a),
    }
}

impl CohortSpec {
    fn patterns(&self) -> Patterns {
        Patterns {
            connectome: self.connectome_pattern.clone(),
            series: self.series_pattern.clone(),
            confounds: (self.confounds_pattern != "none").then(|| self.confounds_pattern.clone()),
            run: self.run.clone(),
        }
    }
}

/// The covariates with their kinds.
fn covariate_kinds<'a>(numeric: &'a [String], categorical: &'a [String]) -> Vec<(&'a str, CovariateKind)> {
    numeric
        .iter()
        .map(|c| (c.as_str(), CovariateKind::Numeric))
        .chain(categorical.iter().map(|c| (c.as_str(), CovariateKind::Categorical)))
        .collect()
}

/// `I/N`, from the flag or from a SLURM array job's environment.
fn shard_of(flag: Option<&str>) -> anyhow::Result<Option<(usize, usize)>> {
    let text = match flag {
        Some(s) => s.to_string(),
        None => match (std::env::var("SLURM_ARRAY_TASK_ID"), std::env::var("SLURM_ARRAY_TASK_COUNT")) {
            (Ok(i), Ok(n)) => format!("{i}/{n}"),
            _ => return Ok(None),
        },
    };
    let parse = |s: &str| s.trim().parse::<usize>().ok();
    match text.split_once('/').map(|(a, b)| (parse(a), parse(b))) {
        Some((Some(i), Some(n))) if i >= 1 && i <= n => Ok(Some((i, n))),
        _ => bail!("--shard {text}: expected I/N with 1 <= I <= N (SLURM arrays: --array=1-N)"),
    }
}

fn run_command(args: CohortRunArgs) -> anyhow::Result<ExitCode> {
    let spec = &args.spec;
    let manifest = Manifest::discover(&spec.data, &spec.patterns())?;
    let kinds = covariate_kinds(&spec.covariates, &spec.categorical);
    manifest.check_covariates(&kinds)?;
    let shard = shard_of(args.shard.as_deref())?;
    let manifest = match shard {
        Some((i, n)) => manifest.shard(i, n)?,
        None => manifest,
    };
    let shared = spec.study.shared()?;
    let cfg = spec.study.config(&spec.job);
    preflight_inputs(&cfg, &shared, spec)?;
    if args.dry_run {
        return dry_run(&manifest, &cfg, shard, &spec.out);
    }
    if let Some(n) = spec.jobs {
        rayon::ThreadPoolBuilder::new().num_threads(n).build_global().context("--jobs")?;
    }
    println!("hierax cohort: {} units from {}", manifest.participants.len(), spec.data.display());
    let title = format!("hierax cohort report: {}", spec.data.display());
    run_and_report(
        manifest,
        &shared,
        &cfg,
        &spec.out,
        &kinds,
        &Reporting {
            title: &title,
            intro: "Results of hierax over the units listed below.",
            quiet: args.quiet,
            command: "cohort run",
            inputs: vec![spec.data.clone()],
            shard,
            resume: !args.no_resume,
            overwrite: args.overwrite,
        },
    )
}

/// Settings that would fail every unit (map nulls without the atlas input
/// they need, confound columns without confounds) fail once, here.
fn preflight_inputs(cfg: &SubjectConfig, shared: &SharedInputs, spec: &CohortSpec) -> anyhow::Result<()> {
    let valid = cfg.check().map_err(with_flag_names)?;
    hierax::subject::check_study_inputs(
        &valid,
        shared.distances.is_some(),
        shared.sphere.is_some(),
        spec.patterns().confounds.is_some(),
    )
    .map_err(with_flag_names)
}

/// Print what a run would do.
fn dry_run(
    manifest: &Manifest,
    cfg: &SubjectConfig,
    shard: Option<(usize, usize)>,
    out: &Path,
) -> anyhow::Result<ExitCode> {
    let valid = cfg.check().map_err(with_flag_names)?;
    if let Some((i, n)) = shard {
        println!("shard {i}/{n}");
    }
    println!("would write {} units into {}", manifest.participants.len(), out.display());
    for p in &manifest.participants {
        let state = match &p.missing {
            Some(m) => format!("MISSING {m}"),
            None if hierax::cohort::run::reusable(&out.join(&p.subject), &p.subject, &valid).is_some() => {
                "up to date (kept)".into()
            }
            None => "to run".into(),
        };
        println!("  {:<24} {state}", p.subject);
    }
    println!("parameters: {}", serde_json::to_string(valid.params())?);
    println!("null tests per unit: {}", valid.family_size());
    Ok(ExitCode::SUCCESS)
}

/// How a cohort run is reported.
pub struct Reporting<'a> {
    /// Report title.
    pub title: &'a str,
    /// First paragraph of the report.
    pub intro: &'a str,
    /// Hide progress.
    pub quiet: bool,
    /// The command, for provenance.
    pub command: &'a str,
    /// Input folders the output folder must stay apart from.
    pub inputs: Vec<PathBuf>,
    /// This run's shard, if any.
    pub shard: Option<(usize, usize)>,
    /// Keep up-to-date units.
    pub resume: bool,
    /// Replace results made with other parameters.
    pub overwrite: bool,
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
            bail!(
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

/// [`check_out`], then create `out` with hierax's marker `marker` (a folder
/// of results made with other parameters is refused unless `overwrite`).
pub fn prepare_out(out: &Path, inputs: &[PathBuf], marker: &Marker, overwrite: bool) -> anyhow::Result<()> {
    check_out(out, inputs)?;
    if let Some(old) = Marker::read(out) {
        if old.kind == marker.kind && old.parameters_sha256 != marker.parameters_sha256 && !overwrite {
            bail!(
                "--out {}: holds results of a run with other parameters (or another hierax version); use a new \
                 --out, or --overwrite to replace them",
                out.display()
            );
        }
    }
    claim_root(out, marker)?;
    Ok(())
}

/// Progress: a bar on a terminal; otherwise one line per finished unit (at
/// most one every 10 s, and the last), for cluster logs.
struct Progress {
    bar: ProgressBar,
    terminal: bool,
    quiet: bool,
    total: usize,
    done: AtomicUsize,
    start: Instant,
    last_line: std::sync::Mutex<Instant>,
}

impl Progress {
    fn new(total: usize, quiet: bool) -> Self {
        let terminal = std::io::stderr().is_terminal();
        let bar = if quiet || !terminal { ProgressBar::hidden() } else { ProgressBar::new(total as u64) };
        bar.set_style(
            ProgressStyle::with_template("  {bar:30} {pos}/{len} units {elapsed} (~{eta} left)")
                .unwrap_or(ProgressStyle::default_bar()),
        );
        let start = Instant::now();
        Progress { bar, terminal, quiet, total, done: AtomicUsize::new(0), start, last_line: start.into() }
    }

    fn finished(&self, s: &SubjectStatus) {
        if let Some(e) = s.failure.as_ref().map(|f| &f.message) {
            if self.terminal && !self.quiet {
                self.bar.println(format!("hierax: error: {e}"));
            } else {
                eprintln!("hierax: error: {e}");
            }
        }
        let n = self.done.fetch_add(1, Ordering::SeqCst) + 1;
        self.bar.inc(1);
        if self.quiet || self.terminal {
            return;
        }
        let mut last = self.last_line.lock().unwrap_or_else(|p| p.into_inner());
        if n == self.total || last.elapsed().as_secs() >= 10 {
            *last = Instant::now();
            let secs = self.start.elapsed().as_secs_f64();
            let rate = n as f64 / secs.max(1e-9);
            let left = (self.total - n) as f64 / rate.max(1e-9);
            eprintln!("hierax: {n}/{} units done, {rate:.2} units/s, about {left:.0} s left", self.total);
        }
    }
}

/// Run every unit, then write the cohort files and the report (or, for a
/// shard, its log); print a summary.
pub fn run_and_report(
    manifest: Manifest,
    shared: &SharedInputs,
    cfg: &SubjectConfig,
    out: &Path,
    covariates: &[(&str, CovariateKind)],
    rep: &Reporting<'_>,
) -> anyhow::Result<ExitCode> {
    let cfg = cfg.check().map_err(with_flag_names)?;
    prepare_out(out, &rep.inputs, &parameters_marker(&cfg, "cohort"), rep.overwrite)?;
    let lock_name = rep.shard.map(|(i, n)| format!("shard-{i}-of-{n}"));
    let _lock = RunLock::acquire(out, lock_name.as_deref())?;
    let progress = Progress::new(manifest.participants.len(), rep.quiet);
    let run = run_cohort(
        manifest,
        shared,
        &cfg,
        out,
        RunOptions { resume: rep.resume, command: rep.command },
        &|s| progress.finished(s),
    )?;
    progress.bar.finish_and_clear();
    println!(
        "  units         {} succeeded ({} kept from an earlier run), {} failed",
        run.n_succeeded(),
        run.resumed,
        run.n_failed()
    );
    if let Some((i, n)) = rep.shard {
        let failed = run.n_failed();
        let log = ShardLog {
            shard: format!("{i}/{n}"),
            version: hierax::VERSION.into(),
            parameters: serde_json::to_value(cfg.params())?,
            units: run.units,
        };
        hierax::io::table::write_json(&out.join(shard_log_name(i, n)), &log)?;
        println!(
            "  shard {i}/{n} written to {}; when every shard is done: hierax cohort merge --out {}",
            out.display(),
            out.display()
        );
        return Ok(if failed == 0 { ExitCode::SUCCESS } else { ExitCode::from(1) });
    }
    finish(out, &run, &cfg, covariates, rep.title, rep.intro)
}

/// Cohort tests, models, files and report; the printed summary.
fn finish(
    out: &Path,
    run: &hierax::cohort::CohortRun,
    cfg: &ValidSubjectConfig,
    covariates: &[(&str, CovariateKind)],
    title: &str,
    intro: &str,
) -> anyhow::Result<ExitCode> {
    let names: Vec<&str> = covariates.iter().map(|(c, _)| *c).collect();
    let (_, analysis) = finish_cohort(run, cfg, &names, title, intro)?;
    if run.n_succeeded() == 0 {
        let first =
            run.units.iter().find_map(|s| s.failure.as_ref().map(|f| f.message.clone())).unwrap_or_default();
        eprintln!("hierax: error: every unit failed ({}); the first: {first}", run.units.len());
        println!("  written to    {} (run_log.csv lists every failure)", out.display());
        return Ok(ExitCode::from(1));
    }
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
        match &m.fit {
            Ok(f) => {
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
            Err(e) => println!("  model         {}: not fitted: {e}", m.outcome.name()),
        }
    }
    println!("  written to    {} (open report.html)", out.display());
    println!("Research software: results are not for clinical decisions.");
    Ok(if run.n_failed() == 0 { ExitCode::SUCCESS } else { ExitCode::from(1) })
}

fn merge_command(args: MergeArgs) -> anyhow::Result<ExitCode> {
    let (run, params) = gather(&args.out)?;
    let cfg: SubjectConfig = serde_json::from_value(params)
        .with_context(|| format!("{}: the units' parameters cannot be read back", args.out.display()))?;
    let cfg = cfg.check().map_err(with_flag_names)?;
    let _lock = RunLock::acquire(&args.out, None)?;
    println!("hierax cohort merge: {} units in {}", run.units.len(), args.out.display());
    println!("  units         {} succeeded, {} failed", run.n_succeeded(), run.n_failed());
    let kinds = covariate_kinds(&args.covariates, &args.categorical);
    finish(
        &args.out,
        &run,
        &cfg,
        &kinds,
        &format!("hierax cohort report: {}", args.out.display()),
        "Results of hierax over the units listed below, merged from shards.",
    )
}

/// A shell word, quoted when needed.
fn quote(s: &str) -> String {
    if !s.is_empty() && s.bytes().all(|b| b.is_ascii_alphanumeric() || b"-_./:,=+@%".contains(&b)) {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

fn sbatch_command(args: SbatchArgs) -> anyhow::Result<ExitCode> {
    if args.shards == 0 {
        bail!("--shards 0: expected at least 1");
    }
    let spec = &args.spec;
    // Everything is checked now, not on the cluster.
    let manifest = Manifest::discover(&spec.data, &spec.patterns())?;
    manifest.check_covariates(&covariate_kinds(&spec.covariates, &spec.categorical))?;
    preflight_inputs(&spec.study.config(&spec.job), &spec.study.shared()?, spec)?;
    let cfg = spec.study.config(&spec.job).check().map_err(with_flag_names)?;
    prepare_out(&spec.out, std::slice::from_ref(&spec.data), &parameters_marker(&cfg, "cohort"), false)?;
    // The exact command: this invocation's arguments with `sbatch` and its own flags swapped for
    // `run --shard`, so the shards run with every parameter given here.
    let own = ["--shards", "--time", "--mem", "--partition", "--jobs"];
    let mut words: Vec<String> = Vec::new();
    let mut it = std::env::args().skip(1).peekable();
    while let Some(a) = it.next() {
        if a == "sbatch" && words.last().is_some_and(|w| w == "cohort") {
            words.push("run".into());
            continue;
        }
        let flag = a.split('=').next().unwrap_or("");
        if own.contains(&flag) {
            if !a.contains('=') {
                it.next();
            }
            continue;
        }
        words.push(quote(&a));
    }
    let exe = std::env::current_exe().context("cannot find the hierax executable")?;
    let cwd = std::env::current_dir().context("cannot read the current folder")?;
    let out_abs = absolute(&spec.out);
    let slurm = out_abs.join("slurm");
    std::fs::create_dir_all(&slurm).with_context(|| slurm.display().to_string())?;
    let partition = args.partition.as_ref().map(|p| format!("#SBATCH --partition={p}\n")).unwrap_or_default();
    let cpus = spec.jobs.unwrap_or(1);
    let run_script = format!(
        "#!/bin/sh\n\
         # Written by hierax {version}: shard $SLURM_ARRAY_TASK_ID of {n} of the cohort in {data}.\n\
         #SBATCH --job-name=hierax-cohort\n\
         #SBATCH --array=1-{n}\n\
         #SBATCH --time={time}\n\
         #SBATCH --mem={mem}\n\
         #SBATCH --cpus-per-task={cpus}\n\
         {partition}\
         #SBATCH --chdir={cwd}\n\
         #SBATCH --output={logs}/shard-%a.out\n\
         #SBATCH --error={logs}/shard-%a.err\n\
         exec {exe} {args} --jobs {cpus} --quiet --shard \"$SLURM_ARRAY_TASK_ID/{n}\"\n",
        version = hierax::VERSION,
        n = args.shards,
        data = spec.data.display(),
        time = args.time,
        mem = args.mem,
        cwd = quote(&cwd.to_string_lossy()),
        logs = slurm.display(),
        exe = quote(&exe.to_string_lossy()),
        args = words.join(" "),
    );
    let merge_script = format!(
        "#!/bin/sh\n\
         # Written by hierax {version}: joins the shards into the cohort files; runs after every shard succeeded.\n\
         #SBATCH --job-name=hierax-merge\n\
         #SBATCH --time=00:30:00\n\
         #SBATCH --mem={mem}\n\
         {partition}\
         #SBATCH --chdir={cwd}\n\
         #SBATCH --output={logs}/merge.out\n\
         #SBATCH --error={logs}/merge.err\n\
         exec {exe} cohort merge --out {out} --covariates {cov}{cat}\n",
        version = hierax::VERSION,
        mem = args.mem,
        cwd = quote(&cwd.to_string_lossy()),
        logs = slurm.display(),
        exe = quote(&exe.to_string_lossy()),
        out = quote(&out_abs.to_string_lossy()),
        cov = quote(&spec.covariates.join(",")),
        cat = if spec.categorical.is_empty() {
            String::new()
        } else {
            format!(" --categorical {}", quote(&spec.categorical.join(",")))
        },
    );
    let submit = format!(
        "#!/bin/sh\n# Submit the shards, then the merge once every shard has succeeded.\nset -e\n\
         jid=$(sbatch --parsable {run})\n\
         sbatch --parsable --dependency=afterok:\"${{jid%%;*}}\" {merge}\n",
        run = quote(&slurm.join("run.sbatch").to_string_lossy()),
        merge = quote(&slurm.join("merge.sbatch").to_string_lossy()),
    );
    for (name, text) in [("run.sbatch", &run_script), ("merge.sbatch", &merge_script), ("submit.sh", &submit)]
    {
        hierax::io::atomic::write_bytes_atomic(&slurm.join(name), text.as_bytes())?;
    }
    println!(
        "wrote {}/run.sbatch (array of {} shards), merge.sbatch and submit.sh",
        slurm.display(),
        args.shards
    );
    println!("submit with:\n  sh {}", quote(&slurm.join("submit.sh").to_string_lossy()));
    Ok(ExitCode::SUCCESS)
}
