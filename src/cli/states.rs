//! `hierax states`: rank regions along a map and split them into states.

use anyhow::Context;
use clap::Args;
use hierax::export::folder::{write_folder, Marker};
use hierax::export::{schema, states, CsvSink, Sink};
use hierax::hierarchy::{build_states, Order, StatesParams};
use hierax::io::provenance::{InputRecord, Provenance};
use hierax::io::table::write_json;
use hierax::io::{read_array, validate, InputSpec};
use std::path::PathBuf;
use std::process::ExitCode;

/// Rank regions along a hierarchy map and split them into K equal-count
/// states (bins). Ascending order puts the lowest map values in state 1 (by
/// convention, towards sensory cortex); ties keep region order; regions
/// whose value is NaN are excluded and listed.
///
/// Writes, all or nothing, regions.csv (map value, rank, state per region),
/// state_vectors.csv (the region x K state vectors), bins.csv (sizes and
/// value ranges), distance.csv (hierarchical distance for every state pair)
/// and states.json (parameters, notes, provenance). States, regions and ranks
/// are counted from 1, as in every hierax output (docs/outputs.md).
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  \
    hierax states demo-data/atlas/hierarchy.csv --bins 8 --out states-output\n\n\
    With 100 regions and 8 bins the first 4 states hold 13 regions and the \
    last 4 hold 12 (numpy array_split).\n\
    Research software: results are not for clinical decisions.")]
pub struct StatesArgs {
    /// The hierarchy map, PATH[:KEY], one value per region.
    #[arg(value_name = "MAP")]
    map: String,

    /// Number of states K (at most the number of regions with a value).
    #[arg(long, value_name = "K")]
    bins: usize,

    /// Rank from the largest value down instead (ties still keep region order).
    #[arg(long)]
    descending: bool,

    /// Scale each state vector to unit Euclidean norm instead of 0/1 indicators.
    #[arg(long)]
    unit_norm: bool,

    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
}

/// Region labels: names from the file, else the one default (`region-001`, …).
pub(crate) fn labels(names: &Option<Vec<String>>, n: usize) -> Vec<String> {
    names.clone().unwrap_or_else(|| hierax::io::default_region_names(n))
}

pub fn run(args: StatesArgs) -> anyhow::Result<ExitCode> {
    let spec = InputSpec::parse(&args.map)?;
    let la = read_array(&spec)?;
    let map = validate::region_map(&la, None)?;
    let params = StatesParams {
        bins: args.bins,
        order: if args.descending { Order::Descending } else { Order::Ascending },
        unit_norm: args.unit_norm,
    };
    let values: Vec<f64> = map.values.to_vec();
    let st = build_states(&values, &params).with_context(|| spec.to_string())?;
    let n = st.n_regions;
    let k = st.k();
    let region = labels(&map.names, n);
    let parameters = serde_json::json!({
        "bins": k, "order": params.order, "unit_norm": params.unit_norm,
        "ties": "stable sort: tied regions keep region order",
        "binning": "numpy array_split of the stable argsort; the first n mod k bins hold one more region",
    });
    let mut prov = Provenance::new("states", parameters.clone());
    let record = InputRecord::of_loaded("map", &la)?;
    let marker = Marker::new("states", &parameters, &[record.sha256.as_str()]);
    prov.inputs.push(record);
    let summary = serde_json::json!({
        "provenance": prov,
        "regions": n,
        "regions_binned": n - st.excluded.len(),
        "excluded_regions": st.excluded.iter().map(|i| i + 1).collect::<Vec<_>>(),
        "sizes": st.sizes(),
        "notes": map.notes.iter().chain(st.notes.iter()).collect::<Vec<_>>(),
    });
    write_folder(&args.out, marker, |dir| {
        let mut csv = CsvSink::new(dir, "");
        csv.table(&schema::MAP_RANKS, &states::map_ranks_table(&region, &values, &st))?;
        csv.table(&schema::STATE_VECTORS, &states::state_vectors_table(&region, &st))?;
        csv.table(&schema::STATE_BINS, &states::bins_table(&values, &st))?;
        csv.table(&schema::STATE_DISTANCE, &states::distance_table(&st))?;
        write_json(&dir.join("states.json"), &summary)
    })?;
    for note in &st.notes {
        eprintln!("hierax: note: {note}");
    }
    println!("{k} states of sizes {:?} written to {}", st.sizes(), args.out.display());
    Ok(ExitCode::SUCCESS)
}
