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

    /// Unit `p`'s files under `root`.
    fn files(&self, root: &Path, p: &Participant) -> UnitFiles {
        let spec = |pattern: &str| InputSpec::new(self.resolve_for(root, pattern, p), None);
        UnitFiles {
            connectome: spec(&self.connectome),
            series: spec(&self.series),
            confounds: self.confounds.as_deref().map(spec),
        }
    }

    /// The first of unit `p`'s files that does not exist, as a reason.
    fn first_missing(&self, root: &Path, p: &Participant) -> Option<String> {
        [
            ("connectome", Some(&self.connectome)),
            ("series", Some(&self.series)),
            ("confounds", self.confounds.as_ref()),
        ]
        .into_iter()
        .filter_map(|(role, pattern)| pattern.map(|pat| (role, pat)))
        .find_map(|(role, pattern)| {
            let path = self.resolve_for(root, pattern, p);
            (!path.is_file())
                .then(|| format!("{role}: {}: no such file (pattern `{pattern}`)", path.display()))
        })
    }

    fn resolve_for(&self, root: &Path, pattern: &str, p: &Participant) -> PathBuf {
        let label = &p.subject_id()[4..];
        let session = p.session_id().map(|s| &s[4..]);
        self.resolve(root, pattern, label, session)
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

/// One unit (subject, or subject × session). Its input paths are not
/// stored but resolved from the patterns when the unit runs
/// ([`Manifest::inputs`]), its session is read from its name, and its
/// covariates are kept as one tab-joined text, one cell per column of
/// [`Manifest::covariate_names`] (empty where its tables lack the column), so
/// a cohort holds about 120 bytes per unit.
#[derive(Clone, Debug, Serialize)]
pub struct Participant {
    /// `sub-<label>` or `sub-<label>_ses-<label>`: the unit's name, folder and file prefix.
    pub subject: String,
    /// The covariate cells, tab-joined (a TSV cell holds no tab).
    covariates: Box<str>,
    /// Why the unit cannot run (a missing file), if so.
    pub missing: Option<Box<str>>,
}

impl Participant {
    /// `sub-<label>`: the unit's name without its session.
    pub fn subject_id(&self) -> &str {
        self.subject.split("_ses-").next().unwrap_or(&self.subject)
    }

    /// `ses-<label>`, when the unit is a session.
    pub fn session_id(&self) -> Option<&str> {
        self.subject.find("_ses-").map(|i| &self.subject[i + 1..])
    }

    /// Covariate cell `j` (empty where absent).
    fn cell(&self, j: usize) -> &str {
        self.covariates.split('\t').nth(j).unwrap_or("")
    }
}

/// A cohort: its folder, patterns and units, sorted by name.
#[derive(Clone, Debug, Serialize)]
pub struct Manifest {
    /// The cohort folder.
    pub root: PathBuf,
    /// Where each unit's files are.
    pub patterns: Patterns,
    /// Every covariate column of the participants (and sessions) tables, sorted.
    pub covariate_names: Vec<String>,
    /// Units sorted by name (the order shards slice).
    pub participants: Vec<Participant>,
}

/// A unit's input files: connectome, series and (if any) confounds.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct UnitFiles {
    /// Structural connectome.
    pub connectome: InputSpec,
    /// Resting-state series.
    pub series: InputSpec,
    /// Confounds table, if any.
    pub confounds: Option<InputSpec>,
}

/// Column names in order of first appearance, with their indices.
#[derive(Default)]
struct Columns {
    names: Vec<String>,
    index: std::collections::HashMap<String, usize>,
}

impl Columns {
    fn index(&mut self, name: &str) -> usize {
        if let Some(&j) = self.index.get(name) {
            return j;
        }
        self.names.push(name.to_string());
        self.index.insert(name.to_string(), self.names.len() - 1);
        self.names.len() - 1
    }

    fn len(&self) -> usize {
        self.names.len()
    }

    /// The names sorted, and for each sorted position its first-appearance index.
    fn sorted(self) -> (Vec<String>, Vec<usize>) {
        let mut order: Vec<usize> = (0..self.names.len()).collect();
        order.sort_by(|&a, &b| self.names[a].cmp(&self.names[b]));
        (order.iter().map(|&j| self.names[j].clone()).collect(), order)
    }
}

/// A table row: its 1-based line and its cells.
type Row = (usize, Vec<String>);

/// A session label with its covariates.
type Session = (String, BTreeMap<String, String>);

/// A tab-separated table: its text and header; rows are split one at a
/// time as they are visited, so a table of 10,000 participants is never
/// held as 10,000 rows of cells (blank and `#` lines skipped; a UTF-8
/// byte-order mark, as spreadsheets write, is dropped).
struct Tsv {
    path: PathBuf,
    text: String,
    header: Vec<String>,
    /// 0-based index of the header line.
    header_line: usize,
}

impl Tsv {
    fn read(path: &Path) -> Result<Self, CohortError> {
        let mut text = std::fs::read_to_string(path).map_err(|e| IoError::os(path, "cannot read", e))?;
        if text.starts_with('\u{feff}') {
            text.drain(..'\u{feff}'.len_utf8());
        }
        let (header_line, header) =
            Self::lines_of(&text).next().ok_or_else(|| IoError::format(path, "holds no header row"))?;
        let header: Vec<String> = header.split('\t').map(|h| h.trim().to_string()).collect();
        Ok(Tsv { path: path.to_path_buf(), text, header, header_line })
    }

    fn lines_of(text: &str) -> impl Iterator<Item = (usize, &str)> {
        text.lines().enumerate().filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'))
    }

    /// Rows after the header, each checked to have the header's width.
    fn rows(&self) -> impl Iterator<Item = Result<Row, CohortError>> + '_ {
        Self::lines_of(&self.text).filter(|(i, _)| *i > self.header_line).map(|(i, line)| {
            let cells: Vec<String> = line.split('\t').map(|c| c.trim().to_string()).collect();
            if cells.len() != self.header.len() {
                return Err(CohortError::BadRow {
                    path: self.path.clone(),
                    line: i + 1,
                    reason: format!("{} cells, expected {} like the header", cells.len(), self.header.len()),
                });
            }
            Ok((i + 1, cells))
        })
    }
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
        let tsv = Tsv::read(&table)?;
        let header = &tsv.header;
        let id_col = id_column(&table, header, "participant_id")?;
        // Covariate columns in order of first appearance; sorted at the end.
        let mut names = Columns::default();
        let mut participants: Vec<Participant> = Vec::with_capacity(Tsv::lines_of(&tsv.text).count());
        for row in tsv.rows() {
            let (line, cells) = row?;
            let subject = cells[id_col].clone();
            let bad = |reason: String| CohortError::BadRow { path: table.clone(), line, reason };
            check_entity("sub", &subject).map_err(|e| bad(format!("participant_id: {e}")))?;
            let base: Vec<(usize, &str)> = header
                .iter()
                .zip(&cells)
                .enumerate()
                .filter(|(j, _)| *j != id_col)
                .map(|(_, (h, c))| (names.index(h), c.as_str()))
                .collect();
            // Each unit: its session (if any) and its extra cells by column index.
            type Unit = (Option<String>, Vec<(usize, String)>);
            let units: Vec<Unit> = if patterns.has_sessions() {
                sessions_of(root, &subject)?
                    .into_iter()
                    .map(|(ses, extra)| {
                        (Some(ses), extra.into_iter().map(|(h, c)| (names.index(&h), c)).collect())
                    })
                    .collect()
            } else {
                vec![(None, Vec::new())]
            };
            for (session_id, extra) in &units {
                let name = match session_id {
                    Some(s) => format!("{subject}_{s}"),
                    None => subject.clone(),
                };
                let mut cov: Vec<&str> = vec![""; names.len()];
                for &(j, c) in &base {
                    cov[j] = c;
                }
                for (j, c) in extra {
                    cov[*j] = c;
                }
                let mut unit =
                    Participant { subject: name, covariates: cov.join("\t").into(), missing: None };
                unit.missing = patterns.first_missing(root, &unit).map(String::into_boxed_str);
                participants.push(unit);
            }
        }
        let (covariate_names, order) = names.sorted();
        for p in &mut participants {
            let sorted: Vec<&str> = order.iter().map(|&j| p.cell(j)).collect();
            p.covariates = sorted.join("\t").into();
        }
        participants.sort_unstable_by(|a, b| a.subject.cmp(&b.subject));
        // A participant listed twice gives two units of the same name, next to each other once
        // sorted (found this way, not with a set of every name, to keep memory small).
        if let Some(w) = participants.windows(2).find(|w| w[0].subject == w[1].subject) {
            let id = w[1].subject_id().to_string();
            let line = tsv
                .rows()
                .filter_map(Result::ok)
                .filter(|(_, cells)| cells[id_col] == id)
                .nth(1)
                .map_or(0, |(line, _)| line);
            return Err(CohortError::BadRow {
                path: table,
                line,
                reason: format!("participant `{id}` is listed twice"),
            });
        }
        Ok(Manifest { root: root.to_path_buf(), patterns: patterns.clone(), covariate_names, participants })
    }

    /// Unit `p`'s input files, resolved from the patterns.
    pub fn inputs(&self, p: &Participant) -> UnitFiles {
        self.patterns.files(&self.root, p)
    }

    /// Unit `p`'s covariate `name` as text (empty where its tables lack the
    /// column), if any table of the cohort has that column.
    pub fn covariate<'a>(&self, p: &'a Participant, name: &str) -> Option<&'a str> {
        let j = self.covariate_names.binary_search_by(|n| n.as_str().cmp(name)).ok()?;
        Some(p.cell(j))
    }

    /// Every covariate of unit `p` (its tables' columns), plus
    /// `participant_id` and `session_id` for a session unit.
    pub fn covariates_of(&self, p: &Participant) -> BTreeMap<String, String> {
        let mut out: BTreeMap<String, String> = self
            .covariate_names
            .iter()
            .zip(p.covariates.split('\t'))
            .map(|(n, c)| (n.clone(), c.to_string()))
            .collect();
        if let Some(s) = p.session_id() {
            out.insert("participant_id".into(), p.subject_id().to_string());
            out.insert("session_id".into(), s.to_string());
        }
        out
    }

    /// Unit `p`'s age in years, if its tables have a numeric `age`.
    pub fn age(&self, p: &Participant) -> Option<f64> {
        self.covariate(p, "age").and_then(|a| a.trim().parse().ok())
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
            let present = self.participants.iter().any(|p| self.covariate(p, name).is_some());
            if !present && !self.participants.is_empty() {
                return Err(CohortError::Covariate {
                    column: name.into(),
                    reason: format!(
                        "is not a column of participants.tsv (or the sessions tables); found: {}",
                        self.covariate_names.join(", ")
                    ),
                });
            }
            if kind == CovariateKind::Categorical {
                continue;
            }
            for p in &self.participants {
                let v = self.covariate(p, name).map(str::trim).unwrap_or("");
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
        Ok(Manifest {
            root: self.root.clone(),
            patterns: self.patterns.clone(),
            covariate_names: self.covariate_names.clone(),
            participants,
        })
    }
}

/// The sessions of `subject`: `sub-X/sub-X_sessions.tsv` when present (its
/// columns become per-session covariates), else the `ses-*` folders.
fn sessions_of(root: &Path, subject: &str) -> Result<Vec<Session>, CohortError> {
    let table = root.join(subject).join(format!("{subject}_sessions.tsv"));
    if table.is_file() {
        let tsv = Tsv::read(&table)?;
        let header = &tsv.header;
        let id = id_column(&table, header, "session_id")?;
        let mut out: Vec<Session> = Vec::new();
        for row in tsv.rows() {
            let (line, cells) = row?;
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
        assert_eq!(m.age(&m.participants[1]), Some(9.5));
        assert_eq!(m.covariates_of(&m.participants[0])["sex"], "M");
        assert_eq!(m.inputs(&m.participants[0]).series.path, root.join("sub-01/sub-01_bold.npy"));
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
        assert_eq!(m.age(&m.participants[1]), Some(11.3));
        assert_eq!(m.covariate(&m.participants[1], "sex"), Some("F"));
        let cov = m.covariates_of(&m.participants[1]);
        assert_eq!((cov["participant_id"].as_str(), cov["session_id"].as_str()), ("sub-01", "ses-2"));
        assert_eq!(m.covariate_names, ["age", "sex"]);
        assert_eq!(m.inputs(&m.participants[1]).series.path, root.join("sub-01/ses-2/b.npy"));
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
