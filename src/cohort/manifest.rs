//! The participant list of a cohort and where each participant's files are.

use super::CohortError;
use crate::io::{InputSpec, IoError};
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Filename patterns, relative to the cohort folder, with `{id}` standing for
/// the participant label (without `sub-`).
#[derive(Clone, Debug, Serialize, PartialEq, Eq)]
pub struct Patterns {
    /// Structural connectome.
    pub connectome: String,
    /// Resting-state series (frames x regions).
    pub series: String,
    /// Confounds table with `framewise_displacement` (optional input).
    pub confounds: Option<String>,
}

impl Default for Patterns {
    /// `sub-{id}/sub-{id}_connectome.csv`, `sub-{id}/sub-{id}_bold.npy`,
    /// `sub-{id}/sub-{id}_confounds.tsv`: the layout of the bundled demo cohort.
    fn default() -> Self {
        Patterns {
            connectome: "sub-{id}/sub-{id}_connectome.csv".into(),
            series: "sub-{id}/sub-{id}_bold.npy".into(),
            confounds: Some("sub-{id}/sub-{id}_confounds.tsv".into()),
        }
    }
}

/// One participant and their inputs.
#[derive(Clone, Debug, Serialize)]
pub struct Participant {
    /// `sub-<label>`.
    pub subject: String,
    /// Structural connectome.
    pub connectome: InputSpec,
    /// Resting-state series.
    pub series: InputSpec,
    /// Confounds table, if any.
    pub confounds: Option<InputSpec>,
    /// Every other column of the participants table, as text (`age`, `sex`, ...).
    pub covariates: BTreeMap<String, String>,
}

impl Participant {
    /// The participant's age in years, if the table has a numeric `age`.
    pub fn age(&self) -> Option<f64> {
        self.covariates.get("age").and_then(|a| a.trim().parse().ok())
    }
}

/// A cohort: its folder and participants, in table order.
#[derive(Clone, Debug, Serialize)]
pub struct Manifest {
    /// The cohort folder.
    pub root: PathBuf,
    /// Participants in the order of the participants table.
    pub participants: Vec<Participant>,
}

fn resolve(root: &Path, pattern: &str, label: &str) -> PathBuf {
    root.join(pattern.replace("{id}", label))
}

impl Manifest {
    /// Read `root/participants.tsv` and locate each participant's inputs by
    /// `patterns`.
    ///
    /// # Errors
    /// [`CohortError::MissingColumn`] without `participant_id`,
    /// [`CohortError::BadRow`] for a malformed row or duplicate participant,
    /// [`CohortError::MissingInput`] when a pattern points to no file.
    pub fn discover(root: &Path, patterns: &Patterns) -> Result<Self, CohortError> {
        let table = root.join("participants.tsv");
        let text = std::fs::read_to_string(&table).map_err(|e| IoError::os(&table, "cannot read", e))?;
        let mut lines = text.lines().enumerate().filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'));
        let (_, header) = lines.next().ok_or_else(|| IoError::format(&table, "holds no header row"))?;
        let header: Vec<&str> = header.split('\t').map(str::trim).collect();
        let id_col = header.iter().position(|h| *h == "participant_id").ok_or_else(|| {
            CohortError::MissingColumn { path: table.clone(), column: "participant_id".into() }
        })?;
        let mut participants: Vec<Participant> = Vec::new();
        for (i, line) in lines {
            let cells: Vec<&str> = line.split('\t').map(str::trim).collect();
            if cells.len() != header.len() {
                return Err(CohortError::BadRow {
                    path: table.clone(),
                    line: i + 1,
                    reason: format!("{} cells, expected {} like the header", cells.len(), header.len()),
                });
            }
            let subject = cells[id_col].to_string();
            let label = subject.strip_prefix("sub-").ok_or_else(|| CohortError::BadRow {
                path: table.clone(),
                line: i + 1,
                reason: format!("participant_id `{subject}` does not start with `sub-`"),
            })?;
            if participants.iter().any(|p| p.subject == subject) {
                return Err(CohortError::BadRow {
                    path: table.clone(),
                    line: i + 1,
                    reason: format!("participant `{subject}` is listed twice"),
                });
            }
            let locate = |role: &'static str, pattern: &str| -> Result<InputSpec, CohortError> {
                let path = resolve(root, pattern, label);
                if path.is_file() {
                    Ok(InputSpec::new(path, None))
                } else {
                    Err(CohortError::MissingInput {
                        subject: subject.clone(),
                        role,
                        path,
                        pattern: pattern.into(),
                    })
                }
            };
            let connectome = locate("connectome", &patterns.connectome)?;
            let series = locate("series", &patterns.series)?;
            let confounds = match &patterns.confounds {
                Some(p) => Some(locate("confounds", p)?),
                None => None,
            };
            let covariates = header
                .iter()
                .zip(&cells)
                .enumerate()
                .filter(|(j, _)| *j != id_col)
                .map(|(_, (h, c))| (h.to_string(), c.to_string()))
                .collect();
            participants.push(Participant { subject, connectome, series, confounds, covariates });
        }
        Ok(Manifest { root: root.to_path_buf(), participants })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn discovers_participants_and_reports_missing_files() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        std::fs::write(root.join("participants.tsv"), "participant_id\tage\tsex\nsub-01\t9.5\tF\n").unwrap();
        std::fs::create_dir(root.join("sub-01")).unwrap();
        std::fs::write(root.join("sub-01/sub-01_connectome.csv"), "0,1\n1,0\n").unwrap();
        let patterns = Patterns { confounds: None, ..Default::default() };
        let e = Manifest::discover(root, &patterns).unwrap_err().to_string();
        assert!(e.starts_with("sub-01: series: ") && e.contains("sub-01_bold.npy: no such file"), "{e}");
        std::fs::write(root.join("sub-01/sub-01_bold.npy"), "").unwrap();
        let m = Manifest::discover(root, &patterns).unwrap();
        assert_eq!(m.participants.len(), 1);
        assert_eq!(m.participants[0].age(), Some(9.5));
        assert_eq!(m.participants[0].covariates["sex"], "F");
    }
}
