//! `hierax subject`: the whole per-subject job.

use clap::Args;
use hierax::cohort::SharedInputs;
use hierax::control::{SystemParams, TimeModel};
use hierax::hierarchy::SurrogateMethod;
use hierax::io::InputSpec;
use hierax::subject::{NullModel, SubjectConfig, SubjectError, SubjectInputs, SubjectResult};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Options of the per-subject job shared by `subject` and `demo`.
#[derive(Debug, Clone, Args)]
pub struct JobOptions {
    /// Number of states (equal-count bins along the hierarchy map).
    #[arg(long, default_value_t = 10, value_name = "K")]
    pub bins: usize,

    /// Rank regions by descending map value (default: ascending = towards association).
    #[arg(long)]
    pub descending: bool,

    // The help lists every estimator's timescale columns, from the registry.
    #[arg(
        long,
        default_value = "ips_tau_s",
        value_name = "COLUMN",
        help = format!(
            "Timescale column that enters the link: one of {}",
            hierax::subject::stages::timescale_columns().join(", ")
        )
    )]
    pub timescale: String,

    /// Censor frames whose framewise displacement exceeds this (mm); needs --confounds in `subject`.
    #[arg(long, default_value_t = 0.5, value_name = "MM")]
    pub fd_threshold: f64,

    /// Do not censor frames.
    #[arg(long, conflicts_with = "fd_threshold")]
    pub no_censoring: bool,

    /// Also censor this many frames after each high-motion frame.
    #[arg(long, default_value_t = 0, value_name = "K")]
    pub censor_after: usize,

    /// Confound columns to regress out, comma separated (e.g. global_signal,trans_x).
    #[arg(long, value_delimiter = ',', value_name = "COLUMNS")]
    pub confound_columns: Vec<String>,

    /// Remove Legendre polynomial trends up to this order.
    #[arg(long, value_name = "ORDER")]
    pub detrend: Option<usize>,

    /// Time model of the network.
    #[arg(long, value_enum, default_value = "continuous")]
    pub time_model: TimeModel,

    /// Control horizon T (time units; steps for discrete time).
    #[arg(long, default_value_t = 1.0, value_name = "T")]
    pub horizon: f64,

    /// Stability offset c in A/(c + λmax(A)).
    #[arg(long, default_value_t = 1.0, value_name = "C")]
    pub stability_offset: f64,

    /// Number of rewired networks for network nulls (0 = none).
    #[arg(long, default_value_t = 0, value_name = "M")]
    pub network_nulls: usize,

    /// Network null model. Each test asks whether an outcome depends on what the model randomises,
    /// beyond what it keeps; a model that cannot move this network (e.g. swaps on a dense
    /// connectome) is refused with the reason. Directed connectomes get directed nulls.
    #[arg(long, value_enum, default_value = "degree-swap")]
    pub null_model: NullModel,

    /// Number of surrogate hierarchy maps for map nulls (0 = none).
    #[arg(long, default_value_t = 0, value_name = "M")]
    pub map_nulls: usize,

    /// How surrogate maps are made: spin (needs --sphere), variogram or moran (need --distances).
    #[arg(long, value_enum, default_value = "spin")]
    pub map_null_method: SurrogateMethod,

    /// False discovery rate at which the subject's family of null tests is read.
    #[arg(long, default_value_t = 0.05, value_name = "ALPHA")]
    pub fdr_alpha: f64,

    /// Seed of every random draw.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
}

impl JobOptions {
    /// The library configuration for repetition time `tr_s`.
    pub fn config(&self, tr_s: f64, directed: bool) -> SubjectConfig {
        let mut c = SubjectConfig::new(tr_s);
        c.directed = directed;
        c.bins = self.bins;
        c.descending = self.descending;
        c.timescale_column = self.timescale.clone();
        c.fd_threshold_mm = if self.no_censoring { None } else { Some(self.fd_threshold) };
        c.censor_after = self.censor_after;
        c.confound_columns = self.confound_columns.clone();
        c.detrend_order = self.detrend;
        let mut sys = SystemParams::new();
        sys.time_model = self.time_model;
        sys.horizon = self.horizon;
        sys.stability_offset = self.stability_offset;
        c.system = sys;
        c.network_nulls = self.network_nulls;
        c.null_model = self.null_model;
        c.map_nulls = self.map_nulls;
        c.map_null_method = self.map_null_method;
        c.fdr_alpha = self.fdr_alpha;
        c.seed = self.seed;
        c
    }
}

/// Inputs and settings shared by every subject of a study: the atlas files
/// and the acquisition. Used by `subject` and `cohort`.
#[derive(Debug, Clone, Args)]
pub struct StudyArgs {
    /// Hierarchy map, one value per region, PATH[:KEY].
    #[arg(long, value_name = "SPEC")]
    pub map: String,

    /// Repetition time in seconds.
    #[arg(long, value_name = "SECONDS")]
    pub tr: f64,

    /// Region distances (n x n) for geometry-preserving network nulls or variogram map nulls.
    #[arg(long, value_name = "SPEC")]
    pub distances: Option<String>,

    /// Parcel coordinates on a sphere (n x 3) for spin nulls, e.g. regions.tsv:sphere_x,sphere_y,sphere_z.
    #[arg(long, value_name = "SPEC")]
    pub sphere: Option<String>,

    /// Hemisphere per parcel (L/R or 0/1), e.g. regions.tsv:hemisphere.
    #[arg(long, value_name = "SPEC")]
    pub hemisphere: Option<String>,

    /// The connectomes are directed.
    #[arg(long)]
    pub directed: bool,
}

impl StudyArgs {
    /// The parsed shared inputs.
    pub fn shared(&self) -> anyhow::Result<SharedInputs> {
        let spec = |s: &Option<String>| -> anyhow::Result<Option<InputSpec>> {
            s.as_deref().map(InputSpec::parse).transpose().map_err(Into::into)
        };
        Ok(SharedInputs {
            map: InputSpec::parse(&self.map)?,
            distances: spec(&self.distances)?,
            sphere: spec(&self.sphere)?,
            hemisphere: spec(&self.hemisphere)?,
        })
    }

    /// The per-subject configuration from these settings and the job options.
    pub fn config(&self, job: &JobOptions) -> SubjectConfig {
        job.config(self.tr, self.directed)
    }
}

/// Run the whole per-subject job: timescales, states along the hierarchy,
/// control energies of every state pair, asymmetry summaries and null
/// models. Writes OUT/SUBJECT/ with one HDF5 file, CSV tables and a JSON
/// summary, all or nothing.
#[derive(Debug, Args)]
#[command(after_help = "Example (the bundled invented data):\n  \
    hierax subject --subject sub-01 --tr 2 \\\n    \
    --connectome demo-data/sub-01/sub-01_connectome.csv \\\n    \
    --series demo-data/sub-01/sub-01_bold.npy \\\n    \
    --map demo-data/atlas/hierarchy.csv \\\n    \
    --confounds demo-data/sub-01/sub-01_confounds.tsv \\\n    \
    --confound-columns global_signal,trans_x,trans_y \\\n    \
    --sphere demo-data/atlas/regions.tsv:sphere_x,sphere_y,sphere_z \\\n    \
    --hemisphere demo-data/atlas/regions.tsv:hemisphere \\\n    \
    --network-nulls 100 --null-model weight-permutation \\\n    \
    --map-nulls 100 --out results\n\n\
    The invented connectomes are 93 % dense, so edge swaps cannot rewire them: dense weighted networks \
    take weight-permutation or length-bin-shuffle nulls.")]
pub struct SubjectArgs {
    /// Subject, sub-<label> with an alphanumeric label (BIDS). Default: the sub- entity of the
    /// connectome's or series' file name; required when they carry none.
    #[arg(long, value_name = "SUB")]
    subject: Option<String>,

    /// Structural connectome, PATH[:KEY].
    #[arg(long, value_name = "SPEC")]
    connectome: String,

    /// Resting-state series (frames x regions), PATH[:KEY].
    #[arg(long, value_name = "SPEC")]
    series: String,

    /// Confounds table with framewise_displacement (BIDS confounds TSV).
    #[arg(long, value_name = "SPEC")]
    confounds: Option<String>,

    #[command(flatten)]
    study: StudyArgs,

    #[command(flatten)]
    job: JobOptions,

    /// Output folder (the subject's folder is created inside).
    #[arg(long, default_value = "hierax-output")]
    out: PathBuf,
}

/// One screen of text about a subject's results.
pub fn print_summary(r: &SubjectResult, written: &Path) {
    use hierax::subject::Outcome;
    let s = &r.link.summary;
    println!(
        "{}: {} regions, {} of {} frames kept",
        r.subject,
        r.names.len(),
        r.n_valid_frames(),
        r.n_frames
    );
    println!(
        "  energy        bottom-up mean {:.4}, top-down mean {:.4}, difference {:+.4}",
        s.mean_bottom_up_energy, s.mean_top_down_energy, s.bottom_up_minus_top_down
    );
    let d = &s.asymmetry_decomposition;
    println!(
        "  asymmetry     potential share {:.4}, potential vs hierarchy Spearman {}",
        d.potential_share,
        d.potential_vs_position_spearman.as_ref().map_or("n/a".into(), |c| format!("{:+.3}", c.r))
    );
    for (o, role) in r.config.outcome_roles() {
        let v = r.outcome(o);
        if o == Outcome::BottomUpMinusTopDown {
            continue;
        }
        let tag = if role.is_finding() { String::new() } else { format!("  [{}]", role.describe()) };
        println!("  outcome       {} = {v:+.4}{tag}", o.name());
    }
    let info = &r.control.info;
    println!(
        "  numerics      Gramian condition {:.3e}, max terminal error {:.2e}",
        info.gramian_condition, info.terminal_error_max
    );
    for t in &r.tests {
        println!(
            "  null test     {} ({}): observed {:+.4}, null mean {:+.4} (SD {:.3e}), p {:.4} (FDR {:.4}, {} nulls)",
            t.key(),
            t.method,
            t.observed,
            t.null_mean,
            t.null_sd,
            t.p_value,
            t.p_fdr,
            t.n_null
        );
    }
    for n in &r.notes {
        println!("  note          {n}");
    }
    println!("  written to    {}", written.display());
}

/// The subject of a run: `--subject`, or the `sub-` entity of the inputs' file names.
fn subject_label(given: Option<&str>, inputs: &[&InputSpec]) -> anyhow::Result<String> {
    if let Some(s) = given {
        hierax::subject::check_entity("sub", s)?;
        return Ok(s.to_string());
    }
    let mut found: Option<(String, &InputSpec)> = None;
    for spec in inputs {
        let name = spec.path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        if let Some(entity) = name.split('_').next().filter(|e| e.starts_with("sub-")) {
            let entity = entity.split('.').next().unwrap_or(entity);
            if hierax::subject::check_entity("sub", entity).is_ok() {
                match &found {
                    Some((first, at)) if first != entity => anyhow::bail!(
                        "{spec}: names subject {entity}, but {at} names {first}; inputs of one subject must agree \
                         (or name the subject with --subject)"
                    ),
                    Some(_) => {}
                    None => found = Some((entity.to_string(), spec)),
                }
            }
        }
    }
    if let Some((entity, _)) = found {
        return Ok(entity);
    }
    anyhow::bail!(
        "--subject: the input file names carry no sub-<label> entity; name the subject with --subject sub-<label>"
    )
}

/// A library error with parameter names spelled as this command's flags.
pub fn with_flag_names(e: SubjectError) -> anyhow::Error {
    match e {
        SubjectError::Param(p) => param_with_flag(&p),
        SubjectError::Timescales { input, source: hierax::timescale::TimescaleError::Param(p) } => {
            anyhow::anyhow!("{input}: timescales: {}", param_with_flag(&p))
        }
        SubjectError::Control { input, source: hierax::control::ControlError::Param(p) } => {
            anyhow::anyhow!("{input}: control: {}", param_with_flag(&p))
        }
        SubjectError::MissingInput { input, needed_by } => {
            anyhow::anyhow!("{needed_by} need {}; none was given", flag_of(input))
        }
        other => other.into(),
    }
}

/// A library parameter error in the command line's words: `--flag VALUE:
/// expected …` (parameters no flag sets keep their library message).
pub fn param_with_flag(p: &hierax::param::ParamError) -> anyhow::Error {
    if p.name == "region_names" {
        return anyhow::anyhow!("{p}");
    }
    anyhow::anyhow!("{} {}: expected {}", flag_of(p.name), p.value, p.expected)
}

/// The flag that sets a library parameter.
pub fn flag_of(name: &str) -> String {
    let flag = match name {
        "tr_s" => "tr",
        "fd_threshold_mm" => "fd-threshold",
        "timescale_column" => "timescale",
        "detrend_order" => "detrend",
        "threads" => "jobs",
        "estimators" => "estimator",
        "knee_band_hz" => "knee-band",
        other => return format!("--{}", other.replace('_', "-")),
    };
    format!("--{flag}")
}

pub fn run(args: SubjectArgs) -> anyhow::Result<ExitCode> {
    let shared = args.study.shared()?;
    let connectome = InputSpec::parse(&args.connectome)?;
    let series = InputSpec::parse(&args.series)?;
    let subject = subject_label(args.subject.as_deref(), &[&connectome, &series])?;
    let inputs = SubjectInputs {
        subject,
        connectome,
        series,
        map: shared.map,
        confounds: args.confounds.as_deref().map(InputSpec::parse).transpose()?,
        distances: shared.distances,
        sphere: shared.sphere,
        hemisphere: shared.hemisphere,
        covariates: BTreeMap::new(),
    };
    let cfg = args.study.config(&args.job).check().map_err(with_flag_names)?;
    super::cohort::check_out(&args.out, &inputs_paths(&inputs))?;
    let loaded = hierax::subject::LoadedSubject::load(&inputs, &cfg).map_err(with_flag_names)?;
    let result = hierax::subject::analyse_subject(&loaded, &cfg, hierax::control::Par::rayon(0))
        .map_err(with_flag_names)?;
    let marker = hierax::export::folder::Marker::new("results", &serde_json::json!({}), &[]);
    super::cohort::prepare_out(&args.out, &inputs_paths(&inputs), &marker, false)?;
    let written = hierax::export::subject::write_subject(&result, &args.out, "subject")?;
    print_summary(&result, &written);
    println!("Research software: results are not for clinical decisions.");
    Ok(ExitCode::SUCCESS)
}

/// Every input file of a subject (for the output-folder checks).
pub fn inputs_paths(i: &SubjectInputs) -> Vec<PathBuf> {
    [
        Some(&i.connectome),
        Some(&i.series),
        Some(&i.map),
        i.confounds.as_ref(),
        i.distances.as_ref(),
        i.sphere.as_ref(),
        i.hemisphere.as_ref(),
    ]
    .into_iter()
    .flatten()
    .map(|s| s.path.clone())
    .collect()
}
