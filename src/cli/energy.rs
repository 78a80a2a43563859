//! `hierax energy`: minimum control energy between brain states.

use anyhow::{anyhow, bail, Context};
use clap::Args;
use hierax::control::penalised::{penalised_energy_matrix, PenaltyParams};
use hierax::control::states::states_from_matrix;
use hierax::control::{self, ControlError, Drivers, Par, System, SystemParams};
use hierax::export;
use hierax::export::folder::{write_folder, Marker};
use hierax::hierarchy::{build_states, StatesParams};
use hierax::io::provenance::{InputRecord, Provenance};
use hierax::io::table::write_json;
use hierax::io::validate::{self, ConnectomeRules};
use hierax::io::{read_array, InputSpec};
use std::path::PathBuf;
use std::process::ExitCode;

/// Minimum control energy of every transition between brain states on a
/// linear network model of the connectome, with node controllability metrics.
///
/// The connectome is normalised by its spectral radius with a stability
/// offset c: continuous time Ã = A/(c + λmax) − I, discrete Ã = A/(c + λmax).
/// E[i, j] is the least input energy moving state i to state j in the horizon T.
/// Research software: results are not for clinical decisions.
#[derive(Debug, Args)]
#[command(after_help = "Example (bins of an invented hierarchy map):\n  \
    hierax energy demo-data/sub-01/sub-01_connectome.csv \\\n    \
    --map demo-data/atlas/hierarchy.csv --bins 8 \\\n    \
    --horizon 1 --out energy-example\n\n\
    Writes energy.csv (one row per ordered pair of states), energy_matrix.csv and asymmetry_matrix.csv \
    (rows: initial state, columns: target state), node_metrics.csv, qc.csv and control.json (parameters, \
    input digests, numerical quality). Nodes are numbered from 1.\n\n\
    Results are refused (exit 2, nothing written) when the drivers cannot steer the network within the \
    horizon to working precision: in discrete time when drivers x steps < regions (the Gramian's rank bound), \
    when the Gramian's condition number exceeds 1e-3 / f64 epsilon (about 4.5e12), or when the optimal input \
    misses its target by more than 1e-3 of the largest state norm. Add driver nodes (or use all), lengthen \
    --horizon, or use continuous time. qc.csv and control.json record the condition, its limit and the \
    terminal error (control.json also the route) of every result that passes.")]
pub struct EnergyArgs {
    /// Connectome, PATH[:KEY]: square, non-negative; A[i, j] drives region i from region j.
    #[arg(value_name = "CONNECTOME")]
    connectome: String,

    /// States file, PATH[:KEY]: k x n (one state per row) or n x k; a square file is read one state per row.
    #[arg(long, value_name = "SPEC", conflicts_with_all = ["map", "bins"], required_unless_present = "map")]
    states: Option<String>,

    /// Map to rank regions by (ascending, ties by region order), PATH[:KEY]; needs --bins.
    #[arg(long, value_name = "SPEC", requires = "bins")]
    map: Option<String>,

    /// Number of equal-count bins of the ranked map; state j is the indicator of bin j.
    #[arg(long, value_name = "K", requires = "map")]
    bins: Option<usize>,

    /// Time model of the linear system.
    #[arg(long, value_enum, default_value = "continuous")]
    time_model: hierax::control::TimeModel,

    /// Horizon T (time units, or whole steps in discrete time).
    #[arg(long, value_name = "T", default_value_t = 1.0, allow_negative_numbers = true)]
    horizon: f64,

    /// Stability offset c in A / (c + λmax(A)).
    #[arg(long, value_name = "C", default_value_t = 1.0, allow_negative_numbers = true)]
    stability_offset: f64,

    /// Driver nodes: `all` (default), a list such as 1,4,7-9, or a file PATH[:KEY] of one weight per node.
    #[arg(long, value_name = "LIST|FILE", default_value = "all")]
    drivers: String,

    /// Treat the connectome as directed (no symmetry check; general matrix route).
    #[arg(long)]
    directed: bool,

    /// State-penalised energies as well (Gu et al. 2017): penalised nodes, `all` or a list such as 1-5.
    #[arg(long, value_name = "NODES", requires = "rho")]
    state_penalty: Option<String>,

    /// Weight of the input energy against the state penalty (> 0).
    #[arg(long, value_name = "R", requires = "state_penalty", allow_negative_numbers = true)]
    rho: Option<f64>,

    /// Output directory.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
}

/// Parse `1,4,7-9` (1-based) into 0-based indices.
fn parse_node_list(s: &str) -> Option<Vec<usize>> {
    let mut out = Vec::new();
    for part in s.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        if let Some((a, b)) = part.split_once('-') {
            let (a, b): (usize, usize) = (a.trim().parse().ok()?, b.trim().parse().ok()?);
            if a == 0 || b < a {
                return None;
            }
            out.extend((a..=b).map(|i| i - 1));
        } else {
            let a: usize = part.parse().ok()?;
            if a == 0 {
                return None;
            }
            out.push(a - 1);
        }
    }
    Some(out)
}

fn looks_like_list(s: &str) -> bool {
    s.chars().all(|c| c.is_ascii_digit() || c == ',' || c == '-' || c.is_whitespace())
}

pub fn run(args: EnergyArgs) -> anyhow::Result<ExitCode> {
    let conn_spec = InputSpec::parse(&args.connectome)?;
    let la = read_array(&conn_spec)?;
    let rules = ConnectomeRules { directed: args.directed, ..Default::default() };
    let conn = validate::connectome(&la, &rules)?;
    let n = conn.weights.nrows();
    if !conn.isolated.is_empty() {
        bail!(
            "{conn_spec}: connectome: region(s) {} have no connection; a disconnected region cannot take part in \
             network control (remove it or use a parcellation without it)",
            conn.isolated.iter().map(|i| (i + 1).to_string()).collect::<Vec<_>>().join(", ")
        );
    }
    let mut inputs = vec![InputRecord::of_loaded("connectome", &la)?];
    drop(la);
    let mut notes = conn.notes.clone();

    // States.
    let (states, state_source) = if let Some(s) = &args.states {
        let spec = InputSpec::parse(s)?;
        let sla = read_array(&spec)?;
        inputs.push(InputRecord::of_loaded("states", &sla)?);
        let m = sla.into_matrix()?;
        let (x, transposed) = states_from_matrix(m.view(), n).map_err(|e| anyhow!("{spec}: {e}"))?;
        if transposed && m.nrows() == m.ncols() {
            notes.push("square states file read as one state per row".into());
        }
        (x, format!("file {spec}"))
    } else {
        let (mspec, k) = match (&args.map, args.bins) {
            (Some(m), Some(k)) => (InputSpec::parse(m)?, k),
            _ => bail!("give --states SPEC, or --map SPEC with --bins K"),
        };
        let mla = read_array(&mspec)?;
        inputs.push(InputRecord::of_loaded("map", &mla)?);
        let map = validate::region_map(&mla, Some(n))?;
        if let (Some(cn), Some(mn)) = (&conn.names, &map.names) {
            validate::names_agree((&conn_spec.to_string(), cn), (&mspec.to_string(), mn))?;
        }
        let built =
            build_states(&map.values.to_vec(), &StatesParams::new(k)).map_err(|e| anyhow!("{mspec}: {e}"))?;
        notes.extend(built.notes.iter().cloned());
        (
            built.matrix.clone(),
            format!("indicators of {k} equal-count bins of {mspec} (numpy array_split of a stable ascending sort)"),
        )
    };
    let k = states.ncols();

    // Drivers.
    let d = args.drivers.trim();
    let mut drivers_file = None;
    let drivers = if d.eq_ignore_ascii_case("all") {
        Drivers::All
    } else if looks_like_list(d) {
        Drivers::Nodes(parse_node_list(d).ok_or_else(|| {
            anyhow!(
                "--drivers `{d}`: expected `all`, a list of node numbers from 1 such as 1,4,7-9, or a file"
            )
        })?)
    } else {
        let spec = InputSpec::parse(d)?;
        let wla = read_array(&spec)?;
        inputs.push(InputRecord::of_loaded("drivers", &wla)?);
        let w = wla.vector()?;
        drivers_file = Some(spec.to_string());
        Drivers::Weights(w.to_vec())
    };

    let mut params = SystemParams::new();
    params.time_model = args.time_model;
    params.horizon = args.horizon;
    params.stability_offset = args.stability_offset;
    params.drivers = drivers;
    let valid = params.check(n).map_err(|e| match (e, &drivers_file) {
        (ControlError::Drivers(m), Some(file)) => anyhow!("{file}: drivers: {m}"),
        (e, _) => control_error(e),
    })?;
    let sys = System::new(conn.weights.view(), args.directed, &valid, Par::rayon(0))
        .map_err(|e| anyhow!("{conn_spec}: {e}"))?;

    let (energy, info) = control::energy_matrix(&sys, states.view()).context("energy")?;
    let asym = control::asymmetry(energy.view());
    let metrics = control::node_metrics(&sys)?;
    let penalised = match (&args.state_penalty, args.rho) {
        (Some(nodes), Some(rho)) => {
            let nodes = nodes.trim();
            let list = if nodes.eq_ignore_ascii_case("all") {
                None
            } else {
                Some(parse_node_list(nodes).ok_or_else(|| {
                    anyhow!("--state-penalty `{nodes}`: expected `all` or a list of node numbers such as 1-5")
                })?)
            };
            let pen = PenaltyParams { nodes: list, rho }.check(n).map_err(control_error)?;
            Some(penalised_energy_matrix(&sys, states.view(), &pen).context("state-penalised energy")?)
        }
        _ => None,
    };

    // Tables, all built before anything is written.
    let tidy = export::energy::pairs_table(energy.view(), penalised.as_ref().map(|p| p.0.view()));
    let names: Vec<String> = conn.names.clone().unwrap_or_else(|| hierax::io::default_region_names(n));
    let nodes = export::energy::node_metrics_table(&names, valid.input_weights(), &metrics);
    let mut qc_names = vec![
        "gramian_condition",
        "gramian_condition_limit",
        "terminal_error_max",
        "terminal_error_relative",
        "state_norm_max",
        "spectral_radius",
    ];
    let mut qc_vals = vec![
        info.gramian_condition,
        info.condition_limit,
        info.terminal_error_max,
        info.terminal_error_relative,
        info.state_norm_max,
        sys.spectral_radius(),
    ];
    if let Some((_, pi)) = &penalised {
        qc_names.extend(["penalised_costate_pivot_ratio", "penalised_terminal_error_max"]);
        qc_vals.extend([pi.costate_pivot_ratio, pi.terminal_error_max]);
    }
    let measures: Vec<(&str, f64)> = qc_names.iter().copied().zip(qc_vals).collect();
    let qc = export::energy::qc_table(&measures);
    let mut warnings = info.warnings.clone();
    if let Some((_, pi)) = &penalised {
        warnings.extend(pi.warnings.iter().cloned());
    }
    let parameters = serde_json::json!({
        "system": valid.params(),
        "directed": args.directed,
        "states": state_source,
        "n_states": k,
        "n_regions": n,
        "state_penalty": args.state_penalty,
        "rho": args.rho,
        "energy_convention": "E[i, j] = minimum input energy int ||u||^2 dt from state i to state j in horizon T",
        "node_metrics_convention": metrics.convention,
    });
    let digests: Vec<String> = inputs.iter().map(|r| r.sha256.clone()).collect();
    let marker = Marker::new("energy", &parameters, &digests.iter().map(String::as_str).collect::<Vec<_>>());
    let mut prov = Provenance::new("energy", parameters);
    prov.inputs = inputs;
    let json = serde_json::json!({
        "provenance": prov,
        "qc": info,
        "penalised_qc": penalised.as_ref().map(|p| &p.1),
        "spectral_radius": sys.spectral_radius(),
        "warnings": warnings,
        "notes": notes.iter().chain(metrics.notes.iter()).collect::<Vec<_>>(),
    });

    let out = &args.out;
    // All six files or none: assembled in a hidden folder, renamed into place.
    write_folder(out, marker, |dir| {
        tidy.write_csv(&dir.join("energy.csv"))?;
        export::energy::state_matrix_table(energy.view()).write_csv(&dir.join("energy_matrix.csv"))?;
        export::energy::state_matrix_table(asym.view()).write_csv(&dir.join("asymmetry_matrix.csv"))?;
        nodes.write_csv(&dir.join("node_metrics.csv"))?;
        qc.write_csv(&dir.join("qc.csv"))?;
        write_json(&dir.join("control.json"), &json)
    })?;

    for w in &warnings {
        eprintln!("hierax: warning: {w}");
    }
    println!(
        "{k} states x {k} transitions on {n} regions ({} route): Gramian condition {:.3e}, \
         terminal error up to {:.3e}; wrote {}",
        info.route.name(),
        info.gramian_condition,
        info.terminal_error_max,
        out.display()
    );
    Ok(ExitCode::SUCCESS)
}

/// A control error with library parameter names spelled as flags.
fn control_error(e: ControlError) -> anyhow::Error {
    match e {
        ControlError::Param(p) => super::subject::param_with_flag(&p),
        other => other.into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn node_lists_parse_one_based() {
        assert_eq!(parse_node_list("1,4,7-9"), Some(vec![0, 3, 6, 7, 8]));
        assert_eq!(parse_node_list(""), Some(vec![]));
        assert_eq!(parse_node_list("0"), None);
        assert_eq!(parse_node_list("5-3"), None);
        assert!(looks_like_list("1, 2"));
        assert!(!looks_like_list("w.csv"));
    }
}
