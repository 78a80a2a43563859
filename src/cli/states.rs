//! `hierax states`: rank regions along a map and split them into states.

use anyhow::Context;
use clap::Args;
use hierax::hierarchy::{build_states, Order, StatesParams};
use hierax::io::provenance::{InputRecord, Provenance};
use hierax::io::table::{write_json, Column, Table};
use hierax::io::{read_array, validate, InputSpec};
use std::path::PathBuf;
use std::process::ExitCode;

/// Rank regions along a hierarchy map and split them into K equal-count
/// states (bins). Ascending order puts the lowest map values in state 1 (by
/// convention, towards sensory cortex); ties keep region order; regions
/// whose value is NaN are excluded and listed.
///
/// Writes regions.csv (value, rank, state per region), states.csv (the
/// region x K state vectors), bins.csv (sizes and value ranges),
/// distance.csv (hierarchical distance j - i for every state pair) and
/// states.json (parameters, notes, provenance).
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  \
    hierax states atlas_map.csv:myelin --bins 8 --out out/states\n\n\
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

/// Region labels: names from the file, else 1-based indices.
pub(crate) fn labels(names: &Option<Vec<String>>, n: usize) -> Vec<String> {
    names.clone().unwrap_or_else(|| (1..=n).map(|i| i.to_string()).collect())
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
    let opt = |v: Option<usize>| v.map_or_else(|| "NaN".to_string(), |x| (x + 1).to_string());

    let regions = Table::new()
        .with("region_index", Column::I64((1..=n as i64).collect()))
        .with("region", Column::Str(region.clone()))
        .with("value", Column::F64(values.clone()))
        .with("rank", Column::Str(st.rank.iter().map(|&r| opt(r)).collect()))
        .with("state", Column::Str(st.bin_of.iter().map(|&b| opt(b)).collect()));
    let mut matrix = Table::new().with("region", Column::Str(region));
    for j in 0..k {
        matrix = matrix.with(&format!("state_{}", j + 1), Column::F64(st.matrix.column(j).to_vec()));
    }
    let bin_range =
        |b: &Vec<usize>, f: fn(f64, f64) -> f64| b.iter().map(|&i| values[i]).reduce(f).unwrap_or(f64::NAN);
    let mut start = 0i64;
    let (mut first, mut last) = (Vec::new(), Vec::new());
    for s in st.sizes() {
        first.push(start + 1);
        last.push(start + s as i64);
        start += s as i64;
    }
    let bins = Table::new()
        .with("state", Column::I64((1..=k as i64).collect()))
        .with("size", Column::I64(st.sizes().iter().map(|&s| s as i64).collect()))
        .with("first_rank", Column::I64(first))
        .with("last_rank", Column::I64(last))
        .with("min_value", Column::F64(st.bins.iter().map(|b| bin_range(b, f64::min)).collect()))
        .with("max_value", Column::F64(st.bins.iter().map(|b| bin_range(b, f64::max)).collect()));
    let (mut from, mut to, mut dist) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..k {
        for j in 0..k {
            from.push(i as i64 + 1);
            to.push(j as i64 + 1);
            dist.push(st.distance[[i, j]] as i64);
        }
    }
    let distance = Table::new()
        .with("from_state", Column::I64(from))
        .with("to_state", Column::I64(to))
        .with("hierarchical_distance", Column::I64(dist));

    let mut prov = Provenance::new(
        "states",
        serde_json::json!({
            "bins": k, "order": params.order, "unit_norm": params.unit_norm,
            "ties": "stable sort: tied regions keep region order",
            "binning": "numpy array_split of the stable argsort; the first n mod k bins hold one more region",
        }),
    );
    prov.inputs.push(InputRecord::of("map", &spec)?);
    let summary = serde_json::json!({
        "provenance": prov,
        "regions": n,
        "regions_binned": n - st.excluded.len(),
        "excluded_regions": st.excluded.iter().map(|i| i + 1).collect::<Vec<_>>(),
        "sizes": st.sizes(),
        "notes": map.notes.iter().chain(st.notes.iter()).collect::<Vec<_>>(),
    });
    regions.write_csv(&args.out.join("regions.csv"))?;
    matrix.write_csv(&args.out.join("states.csv"))?;
    bins.write_csv(&args.out.join("bins.csv"))?;
    distance.write_csv(&args.out.join("distance.csv"))?;
    write_json(&args.out.join("states.json"), &summary)?;
    for note in &st.notes {
        eprintln!("hierax: note: {note}");
    }
    println!("{k} states of sizes {:?} written to {}", st.sizes(), args.out.display());
    Ok(ExitCode::SUCCESS)
}
