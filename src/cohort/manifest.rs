//! The participant list of a cohort and where each participant's files are.
//!
//! A cohort is a BIDS-style folder: `participants.tsv` (column
//! `participant_id` = `sub-<label>`, plus covariates), optionally one
//! `sub-<label>/sub-<label>_sessions.tsv` per subject (column `session_id` =
//! `ses-<label>`, plus per-session covariates such as age at scan), and
//! files found by patterns with `{subject}`, `{session}` and `{run}` standing
//! for the labels (without `sub-`, `ses-`, `run-`).
//!
//! A *unit* is one subject, or one subject × session when the patterns name
//! `{session}`; each unit is analysed and written on its own
//! (`sub-01/` or `sub-01_ses-A/`). A unit with a missing file is that unit's
//! failure, not the cohort's.

use super::CohortError;
use crate::io::{InputSpec, IoError};
use crate::subject::check_entity;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Filename patterns, relative to the cohort folder.
#[derive(Clone, Debug, Serialize, PartialEq, Eq)]
pub struct Patterns {
    /// Structural connectome.
    pub connectome: String,
    /// Resting-state series (frames x regions).
    pub series: String,
    /// Confounds table with `framewise_displacement` (optional input).
    pub confounds: Option<String>,
    /// The run label `{run}` stands for, when a pattern names it.
    pub run: Option<String>,
}

impl Default for Patterns {
    /// `sub-{subject}/sub-{subject}_connectome.csv`,
    /// `sub-{subject}/sub-{subject}_bold.npy`,
    /// `sub-{subject}/sub-{subject}_confounds.tsv`: the layout of the bundled
    /// demo cohort.
    fn default() -> Self {
        Patterns {
            connectome: "sub-{subject}/sub-{subject}_connectome.csv".into(),
            series: "sub-{subject}/sub-{subject}_bold.npy".into(),
            confounds: Some("sub-{subject}/sub-{subject}_confounds.tsv".into()),
            run: None,
        }
    }
}

impl Patterns {
    /// Whether any pattern names `{session}`.
    pub fn has_sessions(&self) -> bool {
        [Some(&self.connectome), Some(&self.series), self.confounds.as_ref()]
            .into_iter()
            .flatten()
            .any(|p| p.contains("{session}"))
    }

    /// Check the placeholders: `{subject}` in every pattern, `{run}` only
    /// with a run label, nothing else in braces.
    ///
    /// # Errors
    /// [`CohortError::Pattern`] naming the pattern.
    pub fn check(&self) -> Result<(), CohortError> {
        for (role, p) in [
            ("connectome", Some(&self.connectome)),
            ("series", Some(&self.series)),
            ("confounds", self.confounds.as_ref()),
        ] {
            let Some(p) = p else { continue };
            let bad = |reason: String| CohortError::Pattern { role, pattern: p.clone(), reason };
            if !p.contains("{subject}") {
                return Err(bad("expected {subject} for the participant label".into()));
            }
            let mut rest = p.as_str();
            while let Some(i) = rest.find('{') {
                let Some(j) = rest[i..].find('}') else { return Err(bad("an unclosed {".into())) };
                let name = &rest[i + 1..i + j];
                if !matches!(name, "subject" | "session" | "run") {
                    return Err(bad(format!(
                        "unknown placeholder {{{name}}}; expected {{subject}}, {{session}} or {{run}}"
                    )));
                }
                if name == "run" && self.run.is_none() {
                    return Err(bad("names {run}: give the run label too".into()));
                }
                rest = &rest[i + j + 1..];
            }
        }
        if let Some(r) = &self.run {
            check_entity("run", &format!("run-{r}"))?;
        }
        Ok(())
    }

    fn resolve(&self, root: &Path, pattern: &str, subject: &str, session: Option<&str>) -> PathBuf {
        let mut p = pattern.replace("{subject}", subject);
        if let Some(s) = session {
            p = p.replace("{session}", s);
        }
        if let Some(r) = &self.run {
            p = p.replace("{run}", r);
        }
        root.join(p)
    }
}

/// How a covariate enters the cohort models.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CovariateKind {
    /// A number in every row (checked).
    Numeric,
    /// Levels, in treatment coding (declared by the user).
    Categorical,
}

/// One unit (subject, or subject × session) and its inputs.
#[derive(Clone, Debug, Serialize)]
pub struct Participant {
    /// `sub-<label>` or `sub-<label>_ses-<label>`: the unit's name, folder and file prefix.
    pub subject: String,
    /// `sub-<label>`.
    pub subject_id: String,
    /// `ses-<label>`, when the cohort has sessions.
    pub session_id: Option<String>,
    /// Structural connectome.
    pub connectome: InputSpec,
    /// Resting-state series.
    pub series: InputSpec,
    /// Confounds table, if any.
    pub confounds: Option<InputSpec>,
    /// Every other column of the participants (and sessions) table, as text.
    pub covariates: BTreeMap<String, String>,
    /// Why the unit cannot run (a missing file), if so.
    pub missing: Option<String>,
}

impl Participant {
    /// The unit's age in years, if the tables have a numeric `age`.
    pub fn age(&self) -> Option<f64> {
        self.covariates.get("age").and_then(|a| a.trim().parse().ok())
    }
}

/// A cohort: its folder and units, sorted by name.
#[derive(Clone, Debug, Serialize)]
pub struct Manifest {
    /// The cohort folder.
    pub root: PathBuf,
    /// Units sorted by name (the order shards slice).
    pub participants: Vec<Participant>,
}

/// A table row: its 1-based line and its cells.
type Row = (usize, Vec<String>);

/// A session label with its covariates.
type Session = (String, BTreeMap<String, String>);

/// A tab-separated table: header and rows (blank and `#` lines skipped; a
/// UTF-8 byte-order mark, as spreadsheets write, is dropped).
fn read_tsv(path: &Path) -> Result<(Vec<String>, Vec<Row>), CohortError> {
    let text = std::fs::read_to_string(path).map_err(|e| IoError::os(path, "cannot read", e))?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
    let mut lines = text.lines().enumerate().filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'));
    let (_, header) = lines.next().ok_or_else(|| IoError::format(path, "holds no header row"))?;
    let header: Vec<String> = header.split('\t').map(|h| h.trim().to_string()).collect();
    let mut rows = Vec::new();
    for (i, line) in lines {
        let cells: Vec<String> = line.split('\t').map(|c| c.trim().to_string()).collect();
        if cells.len() != header.len() {
            return Err(CohortError::BadRow {
                path: path.to_path_buf(),
                line: i + 1,
                reason: format!("{} cells, expected {} like the header", cells.len(), header.len()),
            });
        }
        rows.push((i + 1, cells));
    }
    Ok((header, rows))
}

fn id_column(path: &Path, header: &[String], column: &str) -> Result<usize, CohortError> {
    header
        .iter()
        .position(|h| h == column)
        .ok_or_else(|| CohortError::MissingColumn { path: path.to_path_buf(), column: column.into() })
}

impl Manifest {
    /// Read `root/participants.tsv` (and the sessions tables when the
    /// patterns name `{session}`) and locate each unit's inputs.
    ///
    /// # Errors
    /// [`CohortError::MissingColumn`], [`CohortError::BadRow`] for a
    /// malformed row, a label outside the BIDS rule or a duplicate; a missing
    /// input file is recorded on its unit instead.
    pub fn discover(root: &Path, patterns: &Patterns) -> Result<Self, CohortError> {
        patterns.check()?;
        let table = root.join("participants.tsv");
        let (header, rows) = read_tsv(&table)?;
        let id_col = id_column(&table, &header, "participant_id")?;
        let mut participants: Vec<Participant> = Vec::new();
        for (line, cells) in rows {
            let subject = cells[id_col].clone();
            let bad = |reason: String| CohortError::BadRow { path: table.clone(), line, reason };
            check_entity("sub", &subject).map_err(|e| bad(format!("participant_id: {e}")))?;
            let label = &subject[4..];
            if participants.iter().any(|p| p.subject_id == subject) {
                return Err(bad(format!("participant `{subject}` is listed twice")));
            }
            let base: BTreeMap<String, String> = header
                .iter()
                .zip(&cells)
                .enumerate()
                .filter(|(j, _)| *j != id_col)
                .map(|(_, (h, c))| (h.clone(), c.clone()))
                .collect();
            let sessions: Vec<(Option<String>, BTreeMap<String, String>)> = if patterns.has_sessions() {
                sessions_of(root, &subject)?
                    .into_iter()
                    .map(|(ses, extra)| {
                        let mut cov = base.clone();
                        cov.extend(extra);
                        (Some(ses), cov)
                    })
                    .collect()
            } else {
                vec![(None, base.clone())]
            };
            for (session_id, covariates) in sessions {
                let ses_label = session_id.as_deref().map(|s| &s[4..]);
                let name = match &session_id {
                    Some(s) => format!("{subject}_{s}"),
                    None => subject.clone(),
                };
                let mut missing = None;
                let mut locate = |role: &'static str, pattern: &str| -> InputSpec {
                    let path = patterns.resolve(root, pattern, label, ses_label);
                    if !path.is_file() && missing.is_none() {
                        missing =
                            Some(format!("{role}: {}: no such file (pattern `{pattern}`)", path.display()));
                    }
                    InputSpec::new(path, None)
                };
                let connectome = locate("connectome", &patterns.connectome);
                let series = locate("series", &patterns.series);
                let confounds = patterns.confounds.as_deref().map(|p| locate("confounds", p));
                participants.push(Participant {
                    subject: name,
                    subject_id: subject.clone(),
                    session_id,
                    connectome,
                    series,
                    confounds,
                    covariates,
                    missing,
                });
            }
        }
        participants.sort_by(|a, b| a.subject.cmp(&b.subject));
        Ok(Manifest { root: root.to_path_buf(), participants })
    }

    /// Check the covariates the models use, before any unit runs: each is a
    /// column of the tables, and a numeric one holds a finite number of
    /// magnitude below 1e15 (a plausibility bound, our choice) in every row
    /// (`n/a` and empty cells are allowed and leave the unit out of the
    /// models). Categorical covariates must be declared.
    ///
    /// # Errors
    /// [`CohortError::Covariate`] naming the column, the unit and the value.
    pub fn check_covariates(&self, covariates: &[(&str, CovariateKind)]) -> Result<(), CohortError> {
        for &(name, kind) in covariates {
            let present = self.participants.iter().any(|p| p.covariates.contains_key(name));
            if !present && !self.participants.is_empty() {
                let mut have: Vec<&String> =
                    self.participants.iter().flat_map(|p| p.covariates.keys()).collect();
                have.sort();
                have.dedup();
                return Err(CohortError::Covariate {
                    column: name.into(),
                    reason: format!(
                        "is not a column of participants.tsv (or the sessions tables); found: {}",
                        have.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
                    ),
                });
            }
            if kind == CovariateKind::Categorical {
                continue;
            }
            for p in &self.participants {
                let v = p.covariates.get(name).map(|s| s.trim()).unwrap_or("");
                if v.is_empty() || v == "n/a" {
                    continue;
                }
                let ok = v.parse::<f64>().ok().filter(|x| x.is_finite() && x.abs() < 1e15);
                if ok.is_none() {
                    return Err(CohortError::Covariate {
                        column: name.into(),
                        reason: format!(
                            "{}: `{v}` is not a plausible number (decimal point, not comma); declare the column \
                             categorical if it holds levels",
                            p.subject
                        ),
                    });
                }
            }
        }
        Ok(())
    }

    /// The deterministic shard `index` of `count` (1-based, as `--shard 3/40`):
    /// units `i` with `i mod count = index − 1` in name order, so shards are
    /// balanced and their union is the whole cohort.
    ///
    /// # Errors
    /// [`CohortError::Shard`] unless 1 ≤ index ≤ count.
    pub fn shard(&self, index: usize, count: usize) -> Result<Manifest, CohortError> {
        if !(count >= 1 && index >= 1 && index <= count) {
            return Err(CohortError::Shard { index, count });
        }
        let participants = self
            .participants
            .iter()
            .enumerate()
            .filter(|(i, _)| i % count == index - 1)
            .map(|(_, p)| p.clone())
            .collect();
        Ok(Manifest { root: self.root.clone(), participants })
    }
}

/// The sessions of `subject`: `sub-X/sub-X_sessions.tsv` when present (its
/// columns become per-session covariates), else the `ses-*` folders.
fn sessions_of(root: &Path, subject: &str) -> Result<Vec<Session>, CohortError> {
    let table = root.join(subject).join(format!("{subject}_sessions.tsv"));
    if table.is_file() {
        let (header, rows) = read_tsv(&table)?;
        let id = id_column(&table, &header, "session_id")?;
        let mut out: Vec<Session> = Vec::new();
        for (line, cells) in rows {
            let ses = cells[id].clone();
            check_entity("ses", &ses).map_err(|e| CohortError::BadRow {
                path: table.clone(),
                line,
                reason: format!("session_id: {e}"),
            })?;
            let cov = header
                .iter()
                .zip(&cells)
                .enumerate()
                .filter(|(j, _)| *j != id)
                .map(|(_, (h, c))| (h.clone(), c.clone()))
                .collect();
            out.push((ses, cov));
        }
        return Ok(out);
    }
    let dir = root.join(subject);
    let mut out = Vec::new();
    if let Ok(entries) = std::fs::read_dir(&dir) {
        for e in entries.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            if e.path().is_dir() && check_entity("ses", &name).is_ok() {
                out.push((name, BTreeMap::new()));
            }
        }
    }
    out.sort();
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cohort(root: &Path, participants: &str) {
        std::fs::write(root.join("participants.tsv"), participants).unwrap();
    }

    #[test]
    fn discovers_units_and_records_missing_files_per_unit() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        // A spreadsheet's byte-order mark is accepted.
        cohort(root, "\u{feff}participant_id\tage\tsex\nsub-02\t9.5\tF\nsub-01\t11\tM\n");
        for s in ["sub-01", "sub-02"] {
            std::fs::create_dir(root.join(s)).unwrap();
            std::fs::write(root.join(format!("{s}/{s}_connectome.csv")), "0,1\n1,0\n").unwrap();
        }
        std::fs::write(root.join("sub-01/sub-01_bold.npy"), "").unwrap();
        let patterns = Patterns { confounds: None, ..Default::default() };
        let m = Manifest::discover(root, &patterns).unwrap();
        assert_eq!(
            m.participants.iter().map(|p| p.subject.as_str()).collect::<Vec<_>>(),
            ["sub-01", "sub-02"]
        );
        assert!(m.participants[0].missing.is_none());
        let miss = m.participants[1].missing.as_deref().unwrap();
        assert!(miss.starts_with("series: ") && miss.contains("sub-02_bold.npy: no such file"), "{miss}");
        assert_eq!(m.participants[1].age(), Some(9.5));
    }

    #[test]
    fn sessions_come_from_the_sessions_table_with_their_covariates() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        cohort(root, "participant_id\tsex\nsub-01\tF\n");
        std::fs::create_dir_all(root.join("sub-01")).unwrap();
        std::fs::write(root.join("sub-01/sub-01_sessions.tsv"), "session_id\tage\nses-1\t9.1\nses-2\t11.3\n")
            .unwrap();
        let patterns = Patterns {
            connectome: "sub-{subject}/ses-{session}/c.csv".into(),
            series: "sub-{subject}/ses-{session}/b.npy".into(),
            confounds: None,
            run: None,
        };
        let m = Manifest::discover(root, &patterns).unwrap();
        let names: Vec<&str> = m.participants.iter().map(|p| p.subject.as_str()).collect();
        assert_eq!(names, ["sub-01_ses-1", "sub-01_ses-2"]);
        assert_eq!(m.participants[1].age(), Some(11.3));
        assert_eq!(m.participants[1].covariates["sex"], "F");
    }

    #[test]
    fn labels_patterns_covariates_and_shards_are_checked() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        cohort(root, "participant_id\tage\nsub-x/../../victim\t9\n");
        let e = Manifest::discover(root, &Patterns::default()).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("letters or digits"), "{e}");
        let p = Patterns { series: "bold.npy".into(), ..Default::default() };
        assert!(p.check().unwrap_err().to_string().contains("expected {subject}"));
        let p = Patterns { series: "sub-{subject}/{id}.npy".into(), ..Default::default() };
        assert!(p.check().unwrap_err().to_string().contains("unknown placeholder {id}"));

        cohort(root, "participant_id\tage\tsex\nsub-01\t9\tF\nsub-02\t20,5\tM\nsub-03\tn/a\tM\n");
        let m = Manifest::discover(root, &Patterns::default()).unwrap();
        let e = m.check_covariates(&[("age", CovariateKind::Numeric)]).unwrap_err().to_string();
        assert!(e.contains("age") && e.contains("sub-02: `20,5`"), "{e}");
        let e = m.check_covariates(&[("iq", CovariateKind::Numeric)]).unwrap_err().to_string();
        assert!(e.contains("iq") && e.contains("found: age, sex"), "{e}");
        assert!(m.check_covariates(&[("sex", CovariateKind::Numeric)]).is_err());
        m.check_covariates(&[("sex", CovariateKind::Categorical)]).unwrap();

        // Shards: disjoint, balanced, and together the whole cohort, for several counts.
        for count in 1..=4 {
            let mut all: Vec<String> = Vec::new();
            for i in 1..=count {
                all.extend(m.shard(i, count).unwrap().participants.into_iter().map(|p| p.subject));
            }
            all.sort();
            assert_eq!(all, ["sub-01", "sub-02", "sub-03"]);
        }
        assert!(m.shard(0, 3).is_err() && m.shard(4, 3).is_err());
    }
}
