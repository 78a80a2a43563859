//! Running the per-subject job over a cohort: in parallel on one rayon pool,
//! fault-tolerant (a failing unit is recorded and the others go on), each
//! unit written as soon as it is done with only its name and any failure
//! kept in memory (its record is read back from its folder when the cohort
//! tables are written), restartable (a unit whose folder was made with the same
//! parameters from unchanged inputs is not recomputed), and guarded by a lock
//! so that two runs never share an output folder.

use super::{CohortError, Manifest, Participant, UnitError};
use crate::control::Par;
use crate::export::folder::{Marker, MARKER};
use crate::io::provenance::sha256_file;
use crate::io::InputSpec;
use crate::subject::{
    analyse_subject, read_written_unit, LoadedSubject, SubjectInputs, SubjectRecord, SubjectStatus,
    UnitFailure, UnitStatus, ValidSubjectConfig,
};
use rayon::prelude::*;
use serde::Serialize;
use std::path::{Path, PathBuf};

/// Inputs shared by every subject of a cohort (one atlas).
#[derive(Clone, Debug, Serialize)]
pub struct SharedInputs {
    /// Hierarchy map.
    pub map: InputSpec,
    /// Region distances, if any.
    pub distances: Option<InputSpec>,
    /// Sphere coordinates for spin nulls, if any.
    pub sphere: Option<InputSpec>,
    /// Hemisphere labels, if any.
    pub hemisphere: Option<InputSpec>,
}

/// How a cohort run treats earlier outputs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RunOptions<'a> {
    /// Keep units whose folders were made with the same parameters from
    /// unchanged inputs (default true).
    pub resume: bool,
    /// The command, for provenance.
    pub command: &'a str,
}

/// The outcome of a cohort run, in unit-name order: each unit's name and
/// failure, never its results (those are read back from `out/<unit>/` when
/// the cohort tables are written), so memory stays flat however large the
/// cohort.
#[derive(Clone, Debug, Serialize)]
pub struct CohortRun {
    /// The output folder holding one folder per unit that succeeded.
    pub out: PathBuf,
    /// One status per unit.
    pub units: Vec<UnitStatus>,
    /// Every covariate the succeeded units' records carry, sorted.
    pub covariate_names: Vec<String>,
    /// Units kept from an earlier run (not recomputed).
    pub resumed: usize,
}

impl CohortRun {
    /// Number of units that succeeded.
    pub fn n_succeeded(&self) -> usize {
        self.units.iter().filter(|s| s.succeeded()).count()
    }

    /// Number of failed units.
    pub fn n_failed(&self) -> usize {
        self.units.len() - self.n_succeeded()
    }
}

/// The parameters digest that identifies a run's settings.
pub fn parameters_marker(cfg: &ValidSubjectConfig, kind: &str) -> Marker {
    Marker::new(kind, &serde_json::to_value(cfg.params()).unwrap_or_default(), &[])
}

/// The record of a unit folder written earlier, if the folder is complete,
/// was made with the parameters of `cfg` and its inputs are unchanged
/// (SHA-256 of every input recorded in its summary).
pub fn reusable(dir: &Path, unit: &str, cfg: &ValidSubjectConfig) -> Option<SubjectRecord> {
    let marker = Marker::read(dir)?;
    if marker.kind != "subject"
        || marker.version != crate::VERSION
        || marker.parameters_sha256 != parameters_marker(cfg, "subject").parameters_sha256
    {
        return None;
    }
    let v = read_written_unit(dir, unit).ok()?;
    for input in &v.provenance.inputs {
        let spec = InputSpec::parse(&input.spec).ok()?;
        let (digest, _) = sha256_file(&spec.path).ok()?;
        if digest != input.sha256 {
            return None;
        }
    }
    Some(v.record)
}

/// Remove a unit's folder from an earlier run when hierax made it, so a
/// unit that fails now leaves no stale result that looks current.
fn remove_stale(dir: &Path) {
    if dir.join(MARKER).is_file() {
        let _ = std::fs::remove_dir_all(dir);
    }
}

/// The inputs of unit `p` of `manifest`.
pub fn unit_inputs(manifest: &Manifest, p: &Participant, shared: &SharedInputs) -> SubjectInputs {
    let files = manifest.inputs(p);
    SubjectInputs {
        subject: p.subject.clone(),
        connectome: files.connectome,
        series: files.series,
        map: shared.map.clone(),
        confounds: files.confounds,
        distances: shared.distances.clone(),
        sphere: shared.sphere.clone(),
        hemisphere: shared.hemisphere.clone(),
        covariates: manifest.covariates_of(p),
    }
}

/// Load, analyse and write one unit into `out/<unit>/`.
///
/// # Errors
/// [`UnitError`] naming the stage that failed, with its cause as the source.
pub fn run_unit(
    inputs: &SubjectInputs,
    cfg: &ValidSubjectConfig,
    out: &Path,
    command: &str,
) -> Result<SubjectRecord, UnitError> {
    let loaded = LoadedSubject::load(inputs, cfg).map_err(UnitError::Load)?;
    let result = analyse_subject(&loaded, cfg, Par::Seq).map_err(UnitError::Analyse)?;
    drop(loaded);
    let dir = crate::export::subject::write_subject(&result, out, command).map_err(UnitError::Write)?;
    Ok(SubjectRecord::of(&result, dir))
}

/// [`run_unit`], with a failure recorded as the unit's status (and any stale
/// folder of an earlier run of the unit removed).
pub fn run_one(inputs: &SubjectInputs, cfg: &ValidSubjectConfig, out: &Path, command: &str) -> SubjectStatus {
    match run_unit(inputs, cfg, out, command) {
        Ok(record) => SubjectStatus { subject: inputs.subject.clone(), record: Some(record), failure: None },
        Err(e) => {
            remove_stale(&out.join(&inputs.subject));
            SubjectStatus {
                subject: inputs.subject.clone(),
                record: None,
                failure: Some(e.failure(&inputs.subject)),
            }
        }
    }
}

/// Run the per-subject job for every unit of `manifest` on the current rayon
/// pool, writing `out/<unit>/`. `progress` is called once per finished unit.
/// The caller holds the output folder's lock ([`RunLock`]).
///
/// # Errors
/// None today beyond what each unit records; the `Result` is kept for
/// run-level failures.
pub fn run_cohort(
    manifest: Manifest,
    shared: &SharedInputs,
    cfg: &ValidSubjectConfig,
    out: &Path,
    opts: RunOptions<'_>,
    progress: &(dyn Fn(&SubjectStatus) + Sync),
) -> Result<CohortRun, CohortError> {
    remove_dead_staging(out);
    let covariates = std::sync::Mutex::new(std::collections::BTreeSet::<String>::new());
    let resumed = std::sync::atomic::AtomicUsize::new(0);
    // During the run only each unit's failure (none for a success) is kept;
    // the names come from the manifest afterwards.
    let failures: Vec<Option<UnitFailure>> = manifest
        .participants
        .par_iter()
        .map(|p| {
            let dir = out.join(&p.subject);
            let (status, kept) = if let Some(why) = &p.missing {
                remove_stale(&dir);
                let failure = UnitError::Inputs(why.to_string()).failure(&p.subject);
                (SubjectStatus { subject: p.subject.clone(), record: None, failure: Some(failure) }, false)
            } else if let Some(record) = opts.resume.then(|| reusable(&dir, &p.subject, cfg)).flatten() {
                (SubjectStatus { subject: p.subject.clone(), record: Some(record), failure: None }, true)
            } else {
                (run_one(&unit_inputs(&manifest, p, shared), cfg, out, opts.command), false)
            };
            progress(&status);
            if let Some(r) = &status.record {
                let mut seen = covariates.lock().unwrap_or_else(|e| e.into_inner());
                for k in r.covariates.keys() {
                    if !seen.contains(k) {
                        seen.insert(k.clone());
                    }
                }
            }
            if kept {
                resumed.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            }
            // The record is on disk; only a failure stays in memory.
            status.failure
        })
        .collect();
    let units = manifest
        .participants
        .into_iter()
        .zip(failures)
        .map(|(p, failure)| UnitStatus { subject: p.subject, failure })
        .collect();
    Ok(CohortRun {
        out: out.to_path_buf(),
        units,
        covariate_names: covariates.into_inner().unwrap_or_else(|e| e.into_inner()).into_iter().collect(),
        resumed: resumed.into_inner(),
    })
}

/// Whether process `pid` is alive on this host.
fn alive(pid: u32) -> bool {
    Path::new(&format!("/proc/{pid}")).exists()
}

fn host() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .map(|h| h.trim().to_string())
        .or_else(|_| std::env::var("HOSTNAME"))
        .unwrap_or_else(|_| "unknown-host".into())
}

/// Remove what runs that died (their process is gone) left half-written:
/// staging folders `.<unit>.<pid>.partial`, which carry our marker from
/// their start, and temporaries `.<file>.<pid>.partial` of the cohort-level
/// files ([`COHORT_LEVEL_FILES`](crate::export::cohort::COHORT_LEVEL_FILES)).
/// A live run's staging, and anything else, is left alone.
pub fn remove_dead_staging(out: &Path) {
    let Ok(entries) = std::fs::read_dir(out) else { return };
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let Some(stem) = name.strip_prefix('.').and_then(|n| n.strip_suffix(".partial")) else { continue };
        let Some((target, pid)) = stem.rsplit_once('.') else { continue };
        let Ok(pid) = pid.parse::<u32>() else { continue };
        if pid == std::process::id() || alive(pid) {
            continue;
        }
        let path = e.path();
        if path.is_dir() && path.join(MARKER).is_file() {
            let _ = std::fs::remove_dir_all(&path);
        } else if path.is_file() && crate::export::cohort::COHORT_LEVEL_FILES.contains(&target) {
            let _ = std::fs::remove_file(&path);
        }
    }
}

/// A lock file that keeps a second run off an output folder. A lock left by
/// a process that died on this host is taken over; one held by a live
/// process, or by another host, is refused. Removed when dropped.
#[derive(Debug)]
pub struct RunLock {
    path: PathBuf,
}

impl RunLock {
    /// Take `out/.hierax-lock` (or `.hierax-lock-<name>` for a shard).
    ///
    /// # Errors
    /// [`CohortError::Locked`] naming the holder.
    pub fn acquire(out: &Path, name: Option<&str>) -> Result<Self, CohortError> {
        let path = out.join(match name {
            Some(n) => format!(".hierax-lock-{n}"),
            None => ".hierax-lock".to_string(),
        });
        let me = format!("{} {}\n", std::process::id(), host());
        for _ in 0..2 {
            match std::fs::OpenOptions::new().write(true).create_new(true).open(&path) {
                Ok(mut f) => {
                    use std::io::Write;
                    f.write_all(me.as_bytes())
                        .map_err(|e| crate::io::IoError::os(&path, "cannot write", e))?;
                    return Ok(RunLock { path });
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                    let text = std::fs::read_to_string(&path).unwrap_or_default();
                    let mut it = text.split_whitespace();
                    let pid = it.next().and_then(|p| p.parse::<u32>().ok());
                    let their_host = it.next().unwrap_or("").to_string();
                    let stale = their_host == host() && pid.is_some_and(|p| !alive(p));
                    if !stale {
                        return Err(CohortError::Locked {
                            path,
                            reason: format!(
                                "another hierax run (process {} on {}) is writing this folder; wait for it, or \
                                 remove the lock if you are sure it is gone",
                                pid.map_or("?".into(), |p| p.to_string()),
                                if their_host.is_empty() { "an unknown host" } else { &their_host }
                            ),
                        });
                    }
                    let _ = std::fs::remove_file(&path);
                }
                Err(e) => return Err(crate::io::IoError::os(&path, "cannot create", e).into()),
            }
        }
        Err(CohortError::Locked { path, reason: "could not take the lock".into() })
    }

    /// Live locks of other runs in `out` (for merge).
    pub fn others(out: &Path) -> Vec<PathBuf> {
        let Ok(entries) = std::fs::read_dir(out) else { return Vec::new() };
        entries
            .flatten()
            .filter(|e| e.file_name().to_string_lossy().starts_with(".hierax-lock"))
            .filter(|e| {
                let text = std::fs::read_to_string(e.path()).unwrap_or_default();
                let mut it = text.split_whitespace();
                let pid = it.next().and_then(|p| p.parse::<u32>().ok());
                let h = it.next().unwrap_or("");
                !(h == host() && pid.is_some_and(|p| !alive(p)))
            })
            .map(|e| e.path())
            .collect()
    }
}

impl Drop for RunLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_live_lock_is_refused_and_a_dead_one_taken_over() {
        let dir = tempfile::tempdir().unwrap();
        let lock = RunLock::acquire(dir.path(), None).unwrap();
        let e = RunLock::acquire(dir.path(), None).unwrap_err().to_string();
        assert!(e.contains("another hierax run"), "{e}");
        drop(lock);
        // A lock of a process that cannot exist: 4194999 is above Linux's largest pid_max (2^22).
        std::fs::write(dir.path().join(".hierax-lock"), format!("4194999 {}\n", host())).unwrap();
        let _l = RunLock::acquire(dir.path(), None).unwrap();
        // Dead staging folders of ours go; live ones and unmarked look-alikes stay.
        let dead = dir.path().join(".sub-01.4194999.partial");
        std::fs::create_dir(&dead).unwrap();
        std::fs::write(dead.join(MARKER), "{}").unwrap();
        let users = dir.path().join(".notes.4194999.partial");
        std::fs::create_dir(&users).unwrap();
        let mine = dir.path().join(format!(".sub-02.{}.partial", std::process::id()));
        std::fs::create_dir(&mine).unwrap();
        std::fs::write(mine.join(MARKER), "{}").unwrap();
        // A dead run's temporary of a cohort-level file goes; a file of the same shape we do not
        // write stays.
        let dead_table = dir.path().join(".cohort.csv.4194999.partial");
        std::fs::write(&dead_table, "subject\n").unwrap();
        let users_file = dir.path().join(".mine.csv.4194999.partial");
        std::fs::write(&users_file, "x\n").unwrap();
        remove_dead_staging(dir.path());
        assert!(!dead.exists() && mine.exists() && users.exists());
        assert!(!dead_table.exists() && users_file.exists());
    }
}
