//! `hierax inspect`: read inputs and print what was understood.

use anyhow::Context;
use clap::Args;
use hierax::io::validate::{self, ConnectomeRules, Orientation};
use hierax::io::{delimited, hdf5, mat, npy, read_array, Format, InputSpec, LoadedArray};
use std::process::ExitCode;

/// Read each input and print what hierax understood: shape, stored type,
/// names, summary statistics, likely role and any problems.
#[derive(Debug, Args)]
#[command(after_help = "Examples:\n  \
    hierax inspect demo-data/sub-01/sub-01_connectome.csv\n  \
    hierax inspect demo-data/sub-01/sub-01_bold.npy demo-data/atlas/distances.npy\n  \
    hierax inspect demo-data/sub-01/sub-01_confounds.tsv:framewise_displacement\n  \
    hierax inspect --as series --count 100 demo-data/sub-01/sub-01_bold.npy\n\n\
    Also reads .mat (PATH:variable), .h5 (PATH:/dataset) and .npz (PATH:array).")]
pub struct InspectArgs {
    /// Inputs as PATH[:KEY] (KEY: .npz array, .h5/.mat dataset or variable, CSV/TSV column).
    #[arg(required = true, value_name = "PATH[:KEY]")]
    inputs: Vec<String>,

    /// Print one JSON object per input instead of text.
    #[arg(long)]
    json: bool,

    /// Check every input in this role and fail (exit 2) on the first problem.
    #[arg(long = "as", value_enum, value_name = "ROLE")]
    role: Option<Role>,

    /// With --as connectome: the network is directed (no symmetry check).
    #[arg(long)]
    directed: bool,

    /// With --as series: layout of the matrix.
    #[arg(long, value_enum, default_value = "auto")]
    orientation: Orientation,

    /// With --as series, map or mask: the expected number of regions (series,
    /// map) or frames (mask).
    #[arg(long, value_name = "N")]
    count: Option<usize>,
}

/// The role an input is checked in.
#[derive(Clone, Copy, Debug, clap::ValueEnum)]
enum Role {
    /// A square, non-negative structural connectome.
    Connectome,
    /// A regional time series (frames x regions).
    Series,
    /// One value per region.
    Map,
    /// A 0/1 per-frame censoring mask.
    Mask,
}

/// Validate `la` in `role`; the notes of a passing check.
fn check_role(la: &LoadedArray, role: Role, args: &InspectArgs) -> Result<Vec<String>, hierax::io::IoError> {
    match role {
        Role::Connectome => {
            let rules = ConnectomeRules { directed: args.directed, ..Default::default() };
            validate::connectome(la, &rules).map(|c| c.notes)
        }
        Role::Series => validate::series(la.clone(), args.orientation, args.count).map(|s| {
            let mut notes =
                vec![format!("{} frames x {} regions, {}", s.data.nrows(), s.data.ncols(), s.orientation)];
            notes.extend(s.notes);
            notes
        }),
        Role::Map => validate::region_map(la, args.count).map(|m| m.notes),
        Role::Mask => {
            let n = args.count.unwrap_or(la.data.len());
            validate::frame_mask(la, n)
                .map(|m| vec![format!("{} of {} frames kept", m.iter().filter(|k| **k).count(), m.len())])
        }
    }
}

fn summary(la: &LoadedArray) -> serde_json::Value {
    // One pass, no copy of the values (a series can be as large as memory allows).
    let (mut n, mut zeros, mut sum) = (0usize, 0usize, 0.0f64);
    let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
    for &v in la.data.iter() {
        zeros += usize::from(v == 0.0);
        if v.is_finite() {
            n += 1;
            sum += v;
            min = min.min(v);
            max = max.max(v);
        }
    }
    let (min, max, mean) = if n == 0 { (f64::NAN, f64::NAN, f64::NAN) } else { (min, max, sum / n as f64) };
    serde_json::json!({
        "min": min, "max": max, "mean": mean,
        "non_finite": la.data.len() - n,
        "zeros": zeros,
    })
}

/// The role a 2-D array most likely plays, and what checking it as such finds.
fn role_guess(la: &LoadedArray) -> (String, Vec<String>) {
    let shape = la.data.shape();
    match shape {
        [n] => (format!("a regional map or per-frame vector ({n} values)"), vec![]),
        [r, c] if r == c => match validate::connectome(la, &ConnectomeRules::default()) {
            Ok(conn) => (format!("a symmetric connectome of {r} regions"), conn.notes),
            Err(e) => {
                let directed = ConnectomeRules { directed: true, ..Default::default() };
                match validate::connectome(la, &directed) {
                    Ok(conn) => (
                        format!("a square {r} x {c} matrix: a directed connectome (not symmetric)"),
                        conn.notes,
                    ),
                    Err(_) => (format!("a square {r} x {c} matrix"), vec![e.to_string()]),
                }
            }
        },
        [r, c] if la.col_names.is_some() => {
            (format!("a time series of {r} frames x {c} regions (header names the columns)"), vec![])
        }
        [r, c] => (
            format!(
                "a {r} x {c} matrix: as a time series, {} (pass --orientation to other commands to be sure)",
                match validate::likely_orientation(*r, *c) {
                    Orientation::RegionByTime => "probably regions x frames",
                    _ => "probably frames x regions",
                }
            ),
            vec![],
        ),
        _ => (format!("a {}-D array", shape.len()), vec![]),
    }
}

fn preview(names: &[String]) -> String {
    let head: Vec<&str> = names.iter().take(5).map(String::as_str).collect();
    if names.len() > 5 {
        format!("{} ... ({} in all)", head.join(", "), names.len())
    } else {
        head.join(", ")
    }
}

/// For an HDF5, MAT or NPZ file named without a key, the entries it holds (and
/// for a table mixing text and numbers, its columns), one
/// line each; `None` for other inputs.
fn contents(spec: &InputSpec) -> Result<Option<Vec<String>>, hierax::io::IoError> {
    if spec.key.is_some() {
        return Ok(None);
    }
    match spec.format()? {
        Format::Hdf5 => Ok(Some(hdf5::list_datasets(&spec.path)?.iter().map(|d| d.to_string()).collect())),
        Format::Mat if hdf5::is_hdf5_file(&spec.path)? => {
            Ok(Some(hdf5::list_datasets(&spec.path)?.iter().map(|d| d.to_string()).collect()))
        }
        Format::Mat => Ok(Some(mat::list_variables(&spec.path)?.iter().map(|v| v.to_string()).collect())),
        Format::Npz => Ok(Some(npy::list_npz(&spec.path)?)),
        Format::Delimited(sep) => {
            // A table mixing text and numeric columns is described column by column.
            let cols = delimited::describe_columns(spec, sep)?;
            if cols.iter().any(|c| c.ends_with("(text)")) {
                Ok(Some(cols))
            } else {
                Ok(None)
            }
        }
        _ => Ok(None),
    }
}

pub fn run(args: InspectArgs) -> anyhow::Result<ExitCode> {
    let mut failed = 0usize;
    for raw in &args.inputs {
        // A container named without a key: list what it holds unless it holds exactly one array.
        if let Ok(spec) = InputSpec::parse(raw) {
            match contents(&spec) {
                Ok(Some(entries)) if entries.len() != 1 && args.role.is_none() => {
                    if args.json {
                        let v = serde_json::json!({ "input": spec.to_string(), "contents": entries });
                        println!("{}", serde_json::to_string(&v).context("cannot encode JSON")?);
                    } else {
                        println!("{spec}");
                        let how = if matches!(spec.format(), Ok(Format::Delimited(_))) {
                            "columns, some of them text; select numeric ones as"
                        } else {
                            "entries; name one as"
                        };
                        let key = if how.starts_with("columns") { "COL1,COL2" } else { "KEY" };
                        println!("  holds       {} {how} {}:{key}", entries.len(), spec.path.display());
                        for e in &entries {
                            println!("    {e}");
                        }
                    }
                    continue;
                }
                Ok(_) => {}
                Err(e) => {
                    eprintln!("hierax: error: {e}");
                    failed += 1;
                    continue;
                }
            }
        }
        let result = InputSpec::parse(raw).and_then(|spec| read_array(&spec));
        let la = match result {
            Ok(la) => la,
            Err(e) => {
                eprintln!("hierax: error: {e}");
                failed += 1;
                continue;
            }
        };
        let (role, problems) = match args.role {
            Some(r) => match check_role(&la, r, &args) {
                Ok(notes) => (format!("a valid {}", format!("{r:?}").to_lowercase()), notes),
                Err(e) => {
                    eprintln!("hierax: error: {e}");
                    failed += 1;
                    continue;
                }
            },
            None => role_guess(&la),
        };
        let stats = summary(&la);
        if args.json {
            let v = serde_json::json!({
                "input": la.spec.to_string(),
                "stored_type": la.stored.to_string(),
                "sparse": la.sparse,
                "shape": la.data.shape(),
                "row_names": la.row_names,
                "column_names": la.col_names,
                "summary": stats,
                "role": role,
                "notes": la.notes.iter().chain(problems.iter()).collect::<Vec<_>>(),
            });
            println!("{}", serde_json::to_string(&v).context("cannot encode JSON")?);
        } else {
            println!("{}", la.spec);
            println!(
                "  stored as   {}{}, shape {:?}",
                la.stored,
                if la.sparse { " (sparse)" } else { "" },
                la.data.shape()
            );
            println!("  looks like  {role}");
            if let Some(n) = &la.col_names {
                println!("  columns     {}", preview(n));
            }
            if let Some(n) = &la.row_names {
                println!("  rows        {}", preview(n));
            }
            println!(
                "  values      min {}, max {}, mean {:.6}, {} non-finite, {} zeros",
                stats["min"],
                stats["max"],
                stats["mean"].as_f64().unwrap_or(f64::NAN),
                stats["non_finite"],
                stats["zeros"]
            );
            for note in la.notes.iter().chain(problems.iter()) {
                println!("  note        {note}");
            }
        }
    }
    Ok(if failed == 0 { ExitCode::SUCCESS } else { ExitCode::from(2) })
}
