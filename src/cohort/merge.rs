//! Joining the outputs of shards (or of any earlier runs into one folder)
//! into one cohort, from the written files alone, refusing outputs made with
//! different parameters or hierax versions.

use super::{CohortError, CohortRun, RunLock};
use crate::export::folder::Marker;
use crate::subject::{read_written_unit, UnitStatus};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// What a shard leaves beside its unit folders: the status of each of its
/// units (failures included), its parameters and version.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct ShardLog {
    /// `I/N`.
    pub shard: String,
    /// hierax version.
    pub version: String,
    /// The run's parameters.
    pub parameters: serde_json::Value,
    /// Each unit's name and, when it failed, why.
    pub units: Vec<UnitStatus>,
}

/// The file name of shard `index` of `count`'s log.
pub fn shard_log_name(index: usize, count: usize) -> String {
    format!("shard-{index:04}-of-{count:04}.json")
}

/// Name the first difference between two parameter sets, as `key: a vs b`.
fn difference(a: &serde_json::Value, b: &serde_json::Value) -> String {
    match (a.as_object(), b.as_object()) {
        (Some(x), Some(y)) => {
            for (k, va) in x {
                let vb = y.get(k).unwrap_or(&serde_json::Value::Null);
                if va != vb {
                    return format!("{k} = {va} vs {vb}");
                }
            }
            for k in y.keys() {
                if !x.contains_key(k) {
                    return format!("{k} only in one of them");
                }
            }
            "none found".into()
        }
        _ => format!("{a} vs {b}"),
    }
}

/// Gather every unit of `out`: records from the unit folders' summaries,
/// failures from the shard logs. Refuses while another run holds a lock, and
/// when units were made with different parameters or hierax versions,
/// naming the difference.
///
/// # Errors
/// [`CohortError::Locked`], [`CohortError::Mixed`], [`CohortError::Io`].
pub fn gather(out: &Path) -> Result<(CohortRun, serde_json::Value), CohortError> {
    if !out.is_dir() {
        return Err(crate::io::IoError::format(
            out,
            "expected a hierax cohort output folder; there is no such folder",
        )
        .into());
    }
    if Marker::read(out).is_none() {
        return Err(crate::io::IoError::format(
            out,
            format!(
                "not a hierax cohort output (it has no {}); nothing to merge",
                crate::export::folder::MARKER
            ),
        )
        .into());
    }
    if let Some(l) = RunLock::others(out).into_iter().next() {
        return Err(CohortError::Locked {
            path: l,
            reason: "a run is still writing this folder; merge when it has finished".into(),
        });
    }
    let mut first: Option<(String, String, serde_json::Value)> = None;
    let mut check = |who: &str, version: &str, params: &serde_json::Value| -> Result<(), CohortError> {
        match &first {
            None => {
                first = Some((who.to_string(), version.to_string(), params.clone()));
                Ok(())
            }
            Some((w0, v0, p0)) => {
                if v0 != version {
                    return Err(CohortError::Mixed {
                        path: out.to_path_buf(),
                        reason: format!("{w0} was made by hierax {v0}, {who} by hierax {version}; merge refuses mixed versions"),
                    });
                }
                if p0 != params {
                    return Err(CohortError::Mixed {
                        path: out.to_path_buf(),
                        reason: format!(
                            "{w0} and {who} were made with different parameters ({}); merge refuses mixed runs",
                            difference(p0, params)
                        ),
                    });
                }
                Ok(())
            }
        }
    };
    let mut statuses: std::collections::BTreeMap<String, UnitStatus> = Default::default();
    let mut covariates = std::collections::BTreeSet::new();
    let entries = std::fs::read_dir(out).map_err(|e| crate::io::IoError::os(out, "cannot list", e))?;
    let mut names: Vec<(String, std::path::PathBuf)> =
        entries.flatten().map(|e| (e.file_name().to_string_lossy().into_owned(), e.path())).collect();
    names.sort();
    for (name, path) in &names {
        if name.starts_with("shard-") && name.ends_with(".json") {
            let text =
                std::fs::read_to_string(path).map_err(|e| crate::io::IoError::os(path, "cannot read", e))?;
            let log: ShardLog = serde_json::from_str(&text)
                .map_err(|e| crate::io::IoError::format(path, format!("not a shard log: {e}")))?;
            check(&format!("shard {}", log.shard), &log.version, &log.parameters)?;
            for s in log.units.into_iter().filter(|s| !s.succeeded()) {
                statuses.insert(s.subject.clone(), s);
            }
        }
    }
    for (name, path) in &names {
        let Some(marker) = Marker::read(path) else { continue };
        if marker.kind != "subject" {
            continue;
        }
        let v = read_written_unit(path, name)?;
        check(name, &v.provenance.version, &v.provenance.parameters)?;
        // Only the covariate names are kept; the cohort tables read the record again, one unit at
        // a time.
        let record = v.record;
        covariates.extend(record.covariates.into_keys());
        statuses.insert(name.clone(), UnitStatus { subject: name.clone(), failure: None });
    }
    let Some((_, _, params)) = first else {
        return Err(crate::io::IoError::format(
            out,
            "holds no unit folders or shard logs of hierax; nothing to merge",
        )
        .into());
    };
    let run = CohortRun {
        out: out.to_path_buf(),
        units: statuses.into_values().collect(),
        covariate_names: covariates.into_iter().collect(),
        resumed: 0,
    };
    Ok((run, params))
}
