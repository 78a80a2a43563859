//! `hierax timescales`: intrinsic timescales of every region of one series.

use anyhow::bail;
use clap::Args;
use hierax::io::provenance::{FileDigest, InputRecord, Provenance};
use hierax::io::table::write_json;
use hierax::io::validate::{self, Orientation};
use hierax::io::{read_array, Format, InputSpec};
use hierax::timescale::{
    censor_from_displacement, estimate_timescales, BiasCorrection, ColumnSource, Confound, Estimator,
    FitLags, NuisanceSpec, RegionStatus, TimescaleError, TimescaleParams,
};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::Arc;

/// Estimate intrinsic neural timescales of every region of one resting-state
/// series, from its autocorrelation function and power spectrum.
///
/// Writes OUT/timescales.csv (one row per region: each estimate in seconds,
/// its bootstrap standard error, and a QC status) and OUT/timescales.json
/// (every parameter, the inputs with their SHA-256 digests, and a summary).
/// A region that cannot be estimated keeps its row with a non-ok status. A
/// fitted timescale (exponential, spectral knee, AR(1)) that converged but
/// lies outside [TR/10, valid frames x TR], has a non-positive amplitude, or
/// puts the knee outside the fitted band is marked implausible_fit and its
/// cell left empty (the bounds are our choice).
///
/// A float64 .npy series of 16 MiB or more is memory-mapped, not copied:
/// do not modify or truncate it while the command runs.
///
/// Research software: results are not for clinical decisions.
#[derive(Debug, Args)]
#[command(after_help = "Example (the bundled invented data, TR 2 s):\n  \
    hierax timescales demo-data/sub-01/sub-01_bold.npy --tr 2 --orientation time-by-region \\\n    \
    --estimator acw0 --estimator exp-fit --max-lag 60 --detrend 2 \\\n    \
    --confounds demo-data/sub-01/sub-01_confounds.tsv \\\n    \
    --confound-columns trans_x,trans_y,rot_z \\\n    \
    --fd-threshold 0.5 --censor-after 2 --bootstrap 200 --seed 7 --out timescales-example\n\n\
    Exit codes: 0 written (regions with a non-ok status are counted on stderr); 2 bad input, nothing written.")]
pub struct TimescalesArgs {
    /// The series, PATH[:KEY] (.csv/.tsv/.txt, .npy, .npz:array, .h5:/dataset, .mat:variable).
    #[arg(value_name = "SERIES")]
    series: String,

    /// Repetition time in seconds (sampling interval of the frames).
    #[arg(long, value_name = "SECONDS", allow_hyphen_values = true)]
    tr: f64,

    /// Layout of SERIES; needed unless a header names the regions or --regions settles it.
    #[arg(long, value_enum, default_value = "auto")]
    orientation: Orientation,

    /// Number of regions, to settle the orientation of an unlabelled matrix.
    #[arg(long, value_name = "N")]
    regions: Option<usize>,

    /// Estimators to compute (repeat or comma-separate) [default: every estimator].
    #[arg(long, value_enum, value_delimiter = ',')]
    estimator: Vec<Estimator>,

    /// Largest ACF lag in frames [default: frames / 4].
    #[arg(long, value_name = "N")]
    max_lag: Option<usize>,

    /// Do not subtract the mean before other regressors (the ACF itself always demeans).
    #[arg(long)]
    no_demean: bool,

    /// Remove Legendre polynomials up to this degree (fitted on valid frames).
    #[arg(long, value_name = "ORDER")]
    detrend: Option<usize>,

    /// Confounds table (TSV/CSV with a header), one row per frame.
    #[arg(long, value_name = "TABLE")]
    confounds: Option<String>,

    /// Columns of --confounds to regress out, comma separated.
    #[arg(long, value_name = "A,B,...", value_delimiter = ',', requires = "confounds")]
    confound_columns: Vec<String>,

    /// Per-frame 0/1 mask, PATH[:KEY]; 1 keeps a frame.
    #[arg(long, value_name = "SPEC", conflicts_with = "fd_threshold")]
    censor_mask: Option<String>,

    /// Censor frames whose framewise displacement (column --fd-column of --confounds) exceeds MM.
    #[arg(long, value_name = "MM", requires = "confounds")]
    fd_threshold: Option<f64>,

    /// Column of --confounds holding framewise displacement.
    #[arg(long, value_name = "NAME", default_value = "framewise_displacement")]
    fd_column: String,

    /// Also censor the K frames after each frame above --fd-threshold (Power et al. 2012).
    #[arg(long, value_name = "K", requires = "fd_threshold", default_value_t = 0)]
    censor_after: usize,

    /// Minimum valid frames for a region to be estimated [default: 2 x max-lag].
    #[arg(long, value_name = "N")]
    min_frames: Option<usize>,

    /// Lags of the exponential fit, FIRST:LAST [default: 1 to the first lag with ACF <= 0].
    #[arg(long, value_name = "FIRST:LAST")]
    fit_lags: Option<String>,

    /// Welch segment length in frames [default: min(256, frames), shortened under censoring until
    /// fully valid segments cover half the valid frames; the length used is in timescales.json].
    #[arg(long, value_name = "N")]
    welch_segment: Option<usize>,

    /// Frequency band of the knee fit, LOW:HIGH in Hz [default: all positive frequencies].
    #[arg(long, value_name = "LOW:HIGH")]
    knee_band: Option<String>,

    /// Moving-block bootstrap replicates for standard errors (0 = none).
    #[arg(long, value_name = "N", default_value_t = 0)]
    bootstrap: usize,

    /// Bootstrap block length in frames [default: ceil(frames / 10)].
    #[arg(long, value_name = "N")]
    block_frames: Option<usize>,

    /// Seed of the bootstrap.
    #[arg(long, value_name = "S", default_value_t = 0)]
    seed: u64,

    /// Finite-sample bias correction.
    #[arg(long, value_enum, default_value = "none")]
    bias_correction: BiasCorrection,

    /// Worker threads [default: one per core].
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,

    /// Output folder (created); receives timescales.csv and timescales.json.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
}

fn pair<T: std::str::FromStr>(flag: &str, s: &str) -> anyhow::Result<(T, T)> {
    let parts: Vec<&str> = s.split(':').collect();
    if let [a, b] = parts[..] {
        if let (Ok(a), Ok(b)) = (a.trim().parse(), b.trim().parse()) {
            return Ok((a, b));
        }
    }
    bail!("--{flag} `{s}`: expected two numbers as A:B")
}

pub fn run(args: TimescalesArgs) -> anyhow::Result<ExitCode> {
    let spec = InputSpec::parse(&args.series)?;
    // A large .npy series is read in place from the page cache (no copy, no
    // fresh memory to clear) and digested on a second thread meanwhile.
    let map = map_large_npy(&spec);
    let owned;
    let (series, series_digest) = match map
        .as_ref()
        .and_then(|m| Some((m, hierax::io::npy::view_f64_matrix(m)?)))
    {
        Some((map, view)) => {
            let bytes = Arc::clone(map);
            let job = std::thread::spawn(move || FileDigest::of_bytes(&bytes));
            (validate::series_view(&spec, view, args.orientation, args.regions)?, SeriesDigest::Pending(job))
        }
        None => {
            let la = read_array(&spec)?;
            let record = InputRecord::of_loaded("series", &la)?;
            owned = validate::series(la, args.orientation, args.regions)?;
            (owned.view(), SeriesDigest::Taken(record))
        }
    };
    let mut inputs = Vec::new();
    let (n_frames, n_regions) = series.data.dim();
    let names: Vec<String> =
        series.names.clone().unwrap_or_else(|| hierax::io::default_region_names(n_regions));

    // Confounds table: every column by header name.
    let mut confounds: Vec<Confound> = Vec::new();
    let mut fd: Option<Vec<f64>> = None;
    if let Some(raw) = &args.confounds {
        let cspec = InputSpec::parse(raw)?;
        let table = read_array(&cspec)?;
        let mut names: Vec<&str> = args.confound_columns.iter().map(String::as_str).collect();
        if args.fd_threshold.is_some() {
            names.push(&args.fd_column);
        }
        let mut values = validate::frame_columns(&table, n_frames, &names)?;
        if args.fd_threshold.is_some() {
            fd = values.pop();
        }
        for (name, v) in args.confound_columns.iter().zip(values) {
            confounds.push(Confound { name: name.clone(), values: v });
        }
        inputs.push(InputRecord::of_loaded("confounds", &table)?);
    }

    let (valid, censoring) = if let Some(raw) = &args.censor_mask {
        let mspec = InputSpec::parse(raw)?;
        let la = read_array(&mspec)?;
        let v = validate::frame_mask(&la, n_frames)?;
        inputs.push(InputRecord::of_loaded("censor_mask", &la)?);
        (Some(v), serde_json::json!({"source": "mask", "spec": mspec.to_string()}))
    } else if let (Some(thr), Some(fd)) = (args.fd_threshold, &fd) {
        let v = censor_from_displacement(fd, thr, args.censor_after).map_err(|e| {
            let at = format!("{}: column `{}`", args.confounds.as_deref().unwrap_or(""), args.fd_column);
            match e {
                TimescaleError::Param(p) => super::subject::param_with_flag(&p).context(at),
                other => anyhow::Error::new(other).context(at),
            }
        })?;
        (
            Some(v),
            serde_json::json!({"source": "framewise_displacement", "column": args.fd_column,
                               "threshold_mm": thr, "censor_after": args.censor_after}),
        )
    } else {
        (None, serde_json::json!({"source": "none"}))
    };

    let mut params = TimescaleParams::new(args.tr);
    params.estimators =
        if args.estimator.is_empty() { Estimator::ALL.to_vec() } else { args.estimator.clone() };
    params.max_lag = args.max_lag;
    params.nuisance = NuisanceSpec {
        demean: !args.no_demean,
        detrend_order: args.detrend,
        confounds: args.confound_columns.clone(),
    };
    params.min_frames = args.min_frames;
    if let Some(s) = &args.fit_lags {
        let (first, last) = pair::<usize>("fit-lags", s)?;
        params.fit_lags = FitLags::Range { first, last };
    }
    params.welch_segment = args.welch_segment;
    if let Some(s) = &args.knee_band {
        params.knee_band_hz = Some(pair::<f64>("knee-band", s)?);
    }
    params.bootstrap = args.bootstrap;
    params.block_frames = args.block_frames;
    params.seed = args.seed;
    params.bias_correction = args.bias_correction;
    params.threads = args.jobs;
    let valid_params = params.check(n_frames).map_err(|e| with_flags(e, &spec))?;
    let result = estimate_timescales(series.data, &names, valid.as_deref(), &confounds, &valid_params)
        .map_err(|e| {
            let by = if e.blames_censoring() {
                args.censor_mask.as_ref().or(args.confounds.as_ref())
            } else if e.blames_confounds(&args.confound_columns) {
                args.confounds.as_ref()
            } else {
                None
            };
            match by {
                Some(c) => anyhow::Error::new(e).context(c.clone()),
                None => with_flags(e, &spec),
            }
        })?;

    let ok = result.regions.iter().filter(|r| r.status == RegionStatus::Ok).count();
    if ok == 0 {
        let first = result.regions.first().map(|r| r.status.as_str()).unwrap_or("no regions");
        bail!(
            "{spec}: no region could be estimated (first region: {first}; {} valid of {} frames, --min-frames {})",
            result.n_valid_frames,
            n_frames,
            valid_params.min_frames()
        );
    }
    let mut in_use: Vec<ColumnSource> =
        valid_params.estimators().iter().map(|e| ColumnSource::Estimator(*e)).collect();
    if valid_params.bias_correction() == BiasCorrection::Ar1 {
        in_use.push(ColumnSource::Ar1);
    }
    let table = hierax::export::subject::timescale_table(&result, &in_use);
    let mut status_counts = std::collections::BTreeMap::<String, usize>::new();
    for r in &result.regions {
        *status_counts.entry(result.qc_string(r)).or_default() += 1;
    }
    inputs.insert(0, series_digest.finish(&spec)?);
    let mut prov = Provenance::new(
        "timescales",
        serde_json::json!({"timescale": valid_params, "censoring": censoring,
                           "orientation": series.orientation}),
    );
    prov.inputs = inputs;
    let summary = serde_json::json!({
        "n_regions": n_regions,
        "n_frames": n_frames,
        "n_valid_frames": result.n_valid_frames,
        "n_regions_flagged": result.n_flagged(),
        "welch_segment_frames": result.welch_segment_frames,
        "tau_bounds_s": {"min": valid_params.tr_s() / 10.0,
                         "max": result.n_valid_frames as f64 * valid_params.tr_s(),
                         "rule": "a fitted timescale outside [TR/10, valid frames x TR] is implausible_fit"},
        "status_counts": status_counts,
        "notes": series.notes,
        "columns": table.names(),
    });
    let csv = args.out.join("timescales.csv");
    let json = args.out.join("timescales.json");
    let digests: Vec<String> = prov.inputs.iter().map(|r| r.sha256.clone()).collect();
    let marker = hierax::export::folder::Marker::new(
        "timescales",
        &prov.parameters,
        &digests.iter().map(String::as_str).collect::<Vec<_>>(),
    );
    // Both files or neither: assembled in a hidden folder, renamed into place.
    hierax::export::folder::write_folder(&args.out, marker, |dir| {
        table.write_csv(&dir.join("timescales.csv"))?;
        write_json(&dir.join("timescales.json"), &serde_json::json!({"provenance": prov, "summary": summary}))
    })?;
    let flagged = result.n_flagged();
    if flagged > 0 {
        eprintln!(
            "hierax: warning: {flagged} of {n_regions} regions have a non-ok status (see the `status` column of {})",
            csv.display()
        );
    }
    println!("wrote {} and {}", csv.display(), json.display());
    Ok(ExitCode::SUCCESS)
}

/// Series files at least this large are memory-mapped rather than read
/// (below it a read costs little). Our choice.
const MAP_MIN_BYTES: u64 = 16 << 20;

/// `spec`'s file mapped read-only, when it is a `.npy` file (no key) of at
/// least [`MAP_MIN_BYTES`]; `None` otherwise or when mapping fails, and the
/// file is read instead (which also reports any error).
fn map_large_npy(spec: &InputSpec) -> Option<Arc<memmap2::Mmap>> {
    if spec.key.is_some() || !matches!(spec.format(), Ok(Format::Npy)) {
        return None;
    }
    let file = std::fs::File::open(&spec.path).ok()?;
    if file.metadata().ok()?.len() < MAP_MIN_BYTES {
        return None;
    }
    // SAFETY: the map is read-only and hierax never writes its inputs. The
    // one hazard is another process changing the file while hierax runs:
    // the values read would change with it, and a truncated file would end
    // the process with SIGBUS (numpy's mmap_mode="r" has the same contract).
    // The docs of the timescales command say not to modify an input in use.
    let map = unsafe { memmap2::MmapOptions::new().populate().map(&file) }.ok()?;
    Some(Arc::new(map))
}

/// The series input's record: taken while reading, or being taken from the
/// mapped file on another thread.
enum SeriesDigest {
    Taken(InputRecord),
    Pending(std::thread::JoinHandle<FileDigest>),
}

impl SeriesDigest {
    fn finish(self, spec: &InputSpec) -> anyhow::Result<InputRecord> {
        match self {
            SeriesDigest::Taken(r) => Ok(r),
            SeriesDigest::Pending(job) => {
                let d = job.join().map_err(|_| anyhow::anyhow!("{spec}: digesting the file failed"))?;
                Ok(InputRecord::of_digest("series", spec, d))
            }
        }
    }
}

/// A timescale error with library parameter names replaced by flags.
fn with_flags(e: TimescaleError, spec: &InputSpec) -> anyhow::Error {
    match e {
        TimescaleError::Param(p) => super::subject::param_with_flag(&p).context(spec.to_string()),
        other => anyhow::Error::new(other).context(spec.to_string()),
    }
}
