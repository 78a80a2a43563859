//! `hierax link`: pair table and asymmetry summaries from an energy matrix.

use anyhow::{anyhow, bail};
use clap::Args;
use hierax::export::folder::{write_folder, Marker};
use hierax::export::subject::pairs_table;
use hierax::export::{schema, CsvSink, Sink};
use hierax::hierarchy::{build_states, StatesParams};
use hierax::io::provenance::{InputRecord, Provenance};
use hierax::io::table::write_json;
use hierax::io::validate;
use hierax::io::{read_array, InputSpec};
use hierax::link;
use std::path::PathBuf;
use std::process::ExitCode;

/// Build the pair table of every ordered state pair (direction, hierarchical
/// distance, energy, asymmetry, timescale shift) from a k x k energy matrix
/// whose states are ordered along the hierarchy, and summarise it.
#[derive(Debug, Args)]
#[command(after_help = "Examples (the bundled invented data):\n  \
    hierax energy demo-data/sub-01/sub-01_connectome.csv \\\n    \
    --map demo-data/atlas/hierarchy.csv --bins 10 --out energy-output\n  \
    hierax timescales demo-data/sub-01/sub-01_bold.npy --tr 2 --orientation time-by-region \\\n    \
    --out timescales-output\n  \
    hierax link --energy energy-output/energy_matrix.csv \\\n    \
    --timescales timescales-output/timescales.csv:ips_tau_s \\\n    \
    --map demo-data/atlas/hierarchy.csv --bins 10 --out link-output\n\n\
    States are counted from 1 in pairs.csv, as in every hierax output.")]
pub struct LinkArgs {
    /// Energy matrix (k x k, row = initial state, column = target state), PATH[:KEY].
    #[arg(long, value_name = "SPEC")]
    energy: String,

    /// Mean timescale of each state (k values, seconds).
    #[arg(long, value_name = "SPEC", conflicts_with_all = ["timescales", "map"])]
    state_timescales: Option<String>,

    /// Regional timescales (one per region, e.g. timescales.csv:ips_tau_s); needs --map and --bins.
    #[arg(long, value_name = "SPEC", requires_all = ["map", "bins"])]
    timescales: Option<String>,

    /// Hierarchy map used to bin the regional timescales into states.
    #[arg(long, value_name = "SPEC")]
    map: Option<String>,

    /// Number of states (must match the energy matrix).
    #[arg(long, value_name = "K")]
    bins: Option<usize>,

    /// Output folder.
    #[arg(long, default_value = "hierax-link")]
    out: PathBuf,
}

pub fn run(args: LinkArgs) -> anyhow::Result<ExitCode> {
    let espec = InputSpec::parse(&args.energy)?;
    let energy = hierax::export::energy::read_state_matrix(&espec)?;
    let mut inputs = vec![InputRecord::of("energy", &espec)?];
    let k = energy.nrows();
    let state_tau: Option<Vec<f64>> = if let Some(s) = &args.state_timescales {
        let spec = InputSpec::parse(s)?;
        inputs.push(InputRecord::of("state timescales", &spec)?);
        Some(read_array(&spec)?.vector()?.to_vec())
    } else if let Some(t) = &args.timescales {
        let (mspec, bins) = match (&args.map, args.bins) {
            (Some(m), Some(b)) => (InputSpec::parse(m)?, b),
            _ => bail!("--timescales needs --map and --bins"),
        };
        if bins != k {
            bail!("--bins {bins}: the energy matrix {espec} has {k} states");
        }
        let tspec = InputSpec::parse(t)?;
        let tau = read_array(&tspec)?.vector()?.to_vec();
        let map = validate::region_map(&read_array(&mspec)?, Some(tau.len()))?;
        let states = build_states(&map.values.to_vec(), &StatesParams::new(bins))
            .map_err(|e| anyhow!("{mspec}: {e}"))?;
        inputs.push(InputRecord::of("timescales", &tspec)?);
        inputs.push(InputRecord::of("map", &mspec)?);
        Some(link::bin_means(&tau, &states.bins).map_err(|e| anyhow!("{tspec}: {e}"))?)
    } else {
        None
    };
    let table = link::pair_table(&energy, state_tau.as_deref()).map_err(|e| anyhow!("{espec}: {e}"))?;
    let summary = link::summarise(&table).map_err(|e| anyhow!("{espec}: {e}"))?;
    let parameters = serde_json::json!({ "states": k });
    let mut prov = Provenance::new("link", parameters.clone());
    let digests: Vec<&str> = inputs.iter().map(|r| r.sha256.as_str()).collect();
    let marker = Marker::new("link", &parameters, &digests);
    prov.inputs = inputs.clone();
    write_folder(&args.out, marker, |dir| {
        CsvSink::new(dir, "").table(&schema::PAIRS, &pairs_table(&table))?;
        write_json(&dir.join("link.json"), &serde_json::json!({ "summary": summary, "provenance": prov }))
    })?;
    println!(
        "{k} states: bottom-up mean {:.4}, top-down mean {:.4}, asymmetry slope {:+.4} per bin (Spearman {:+.3})",
        summary.mean_bottom_up_energy,
        summary.mean_top_down_energy,
        summary.asymmetry_vs_distance_line.slope,
        summary.asymmetry_vs_distance_spearman.r
    );
    if let Some(c) = summary.asymmetry_vs_timescale_shift_spearman {
        println!("  asymmetry vs timescale shift: Spearman {:+.3} (p {:.2e})", c.r, c.p_value);
    }
    println!("  written to {}", args.out.display());
    Ok(ExitCode::SUCCESS)
}
