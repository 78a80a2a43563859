//! `hierax demo`: the whole job on the bundled, invented cohort.

use super::cohort::{run_and_report, Reporting};
use anyhow::{bail, Context};
use clap::Args;
use hierax::cohort::{CovariateKind, Manifest, Patterns, SharedInputs};
use hierax::io::InputSpec;
use hierax::subject::SubjectConfig;
use std::path::PathBuf;
use std::process::ExitCode;

/// Run the whole job on the bundled demo cohort (invented data): timescales,
/// states, control energies, asymmetries, network and map nulls for every
/// participant, then the cohort table, age models and an HTML report.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  hierax demo --out demo-output\n\n\
    Writes demo-output/sub-XX/ (HDF5, CSV, JSON per participant), cohort.csv, run_log.csv,\n\
    age_models.csv, group_tests.csv, cohort.json and report.html. The demo data are invented.")]
pub struct DemoArgs {
    /// Folder for the outputs (created if needed).
    #[arg(long, default_value = "demo-output")]
    out: PathBuf,

    /// Folder holding the demo cohort.
    #[arg(long, default_value = "demo-data")]
    data: PathBuf,

    /// Rewired networks and spun maps per participant.
    #[arg(long, default_value_t = 100, value_name = "M")]
    nulls: usize,

    /// Number of states along the hierarchy.
    #[arg(long, default_value_t = 10, value_name = "K")]
    bins: usize,

    /// Seed of every random draw.
    #[arg(long, default_value_t = 0)]
    seed: u64,

    /// Do not show a progress bar.
    #[arg(long)]
    quiet: bool,
}

pub fn run(args: DemoArgs) -> anyhow::Result<ExitCode> {
    let dataset_path = args.data.join("dataset.json");
    let text = std::fs::read_to_string(&dataset_path)
        .with_context(|| format!("{}: cannot read (is --data the demo folder?)", dataset_path.display()))?;
    let dataset: serde_json::Value =
        serde_json::from_str(&text).with_context(|| format!("{}: not valid JSON", dataset_path.display()))?;
    let Some(tr_s) = dataset["repetition_time_s"].as_f64() else {
        bail!("{}: repetition_time_s: expected a number of seconds", dataset_path.display());
    };
    let manifest = Manifest::discover(&args.data, &Patterns::default())?;
    let atlas = args.data.join("atlas");
    let shared = SharedInputs {
        map: InputSpec::new(atlas.join("hierarchy.csv"), None),
        distances: Some(InputSpec::new(atlas.join("distances.npy"), None)),
        sphere: Some(InputSpec::new(atlas.join("regions.tsv"), Some("sphere_x,sphere_y,sphere_z"))),
        hemisphere: Some(InputSpec::new(atlas.join("regions.tsv"), Some("hemisphere"))),
    };
    let mut cfg = SubjectConfig::new(tr_s);
    cfg.bins = args.bins;
    cfg.confound_columns = ["global_signal", "trans_x", "trans_y", "trans_z", "rot_x", "rot_y", "rot_z"]
        .map(String::from)
        .to_vec();
    cfg.network_nulls = args.nulls;
    // The invented connectomes are 93 % dense, like streamline counts: edge swaps cannot rewire
    // them, so the demo reassigns weights among edges of similar length instead.
    cfg.null_model = hierax::stats::nulls::NullModel::named("length-bin-shuffle");
    cfg.map_nulls = args.nulls;
    cfg.seed = args.seed;

    println!(
        "hierax demo: {} invented participants from {} (TR {tr_s} s), {} states, {} nulls each",
        manifest.participants.len(),
        args.data.display(),
        cfg.bins,
        args.nulls
    );
    let code = run_and_report(
        manifest,
        &shared,
        &cfg,
        &args.out,
        &[
            ("age", CovariateKind::Numeric),
            ("sex", CovariateKind::Categorical),
            ("mean_framewise_displacement", CovariateKind::Numeric),
        ],
        &Reporting {
            title: "hierax demo: Larkspur Youth Imaging Pilot (INVENTED data)",
            intro: "Every participant, connectome, series and map in this report is invented by examples/make_demo.rs \
                    for demonstration; nothing here describes real people.",
            quiet: args.quiet,
            command: "demo",
            inputs: vec![args.data.clone()],
            shard: None,
            resume: true,
            overwrite: true,
        },
    )?;
    println!("The demo data are invented.");
    Ok(code)
}
