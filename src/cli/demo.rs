//! `hierax demo`: the whole job on the bundled, invented cohort.

use anyhow::{bail, Context};
use clap::Args;
use hierax::cohort::model::{fit_outcome, group_tests, OUTCOMES};
use hierax::cohort::run::{run_cohort, SharedInputs};
use hierax::cohort::subject::SubjectConfig;
use hierax::cohort::{Manifest, Patterns};
use hierax::io::table::write_json;
use hierax::io::InputSpec;
use indicatif::{ProgressBar, ProgressStyle};
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
    cfg.map_nulls = args.nulls;
    cfg.seed = args.seed;

    println!(
        "hierax demo: {} invented participants from {} (TR {tr_s} s), {} states, {} nulls each",
        manifest.participants.len(),
        args.data.display(),
        cfg.bins,
        args.nulls
    );
    let bar =
        if args.quiet { ProgressBar::hidden() } else { ProgressBar::new(manifest.participants.len() as u64) };
    bar.set_style(
        ProgressStyle::with_template("  {bar:30} {pos}/{len} subjects {elapsed}")
            .unwrap_or(ProgressStyle::default_bar()),
    );
    let run = run_cohort(&manifest, &shared, &cfg, &args.out, &|o| {
        if let Err(e) = &o.result {
            bar.println(format!("hierax: error: {e}"));
        }
        bar.inc(1);
    })?;
    bar.finish_and_clear();

    let covariates = ["age", "sex", "mean_framewise_displacement"];
    let models: Vec<(String, Result<_, String>)> = OUTCOMES
        .iter()
        .map(|(name, f)| (name.to_string(), fit_outcome(&run, *f, &covariates).map_err(|e| e.to_string())))
        .collect();
    let groups = group_tests(&run, 9999, args.seed).map_err(|e| anyhow::anyhow!("cohort tests: {e}"))?;
    run.cohort_table().write_csv(&args.out.join("cohort.csv"))?;
    run.log_table().write_csv(&args.out.join("run_log.csv"))?;
    model_table(&models).write_csv(&args.out.join("age_models.csv"))?;
    {
        use hierax::io::table::{Column, Table};
        Table::new()
            .with("outcome", Column::Str(groups.iter().map(|g| g.outcome.clone()).collect()))
            .with("n", Column::I64(groups.iter().map(|g| g.n as i64).collect()))
            .with("mean", Column::F64(groups.iter().map(|g| g.mean).collect()))
            .with("p_value", Column::F64(groups.iter().map(|g| g.p_value).collect()))
            .with("sign_flips", Column::I64(groups.iter().map(|g| g.permutations as i64).collect()))
            .write_csv(&args.out.join("group_tests.csv"))?;
    }
    write_json(
        &args.out.join("cohort.json"),
        &serde_json::json!({ "config": cfg, "group_tests": groups, "models": models, "run": run }),
    )?;
    let html = hierax::report::cohort::cohort_report(
        "hierax demo: Larkspur Youth Imaging Pilot (INVENTED data)",
        "Every participant, connectome, series and map in this report is invented by examples/make_demo.rs \
         for demonstration; nothing here describes real people.",
        &run,
        &groups,
        &models,
    );
    hierax::io::atomic::write_bytes_atomic(&args.out.join("report.html"), html.as_bytes())?;

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
    println!("  written to    {} (open report.html)", args.out.display());
    println!("Research software: results are not for clinical decisions. The demo data are invented.");
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
