//! Reading and validating one subject's inputs: the only stage of the job
//! that touches files. Region counts and names are reconciled here, so every
//! later stage works on arrays that agree.

use super::config::ValidSubjectConfig;
use super::SubjectError;
use crate::hierarchy::{SpatialNeed, SphereLayout};
use crate::io::provenance::InputRecord;
use crate::io::validate::{self, ConnectomeRules};
use crate::io::{read_array, InputSpec, IoError};
use crate::timescale::Confound;
use ndarray::Array2;
use serde::Serialize;
use std::collections::BTreeMap;

/// Where one subject's inputs are.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SubjectInputs {
    /// `sub-<label>`, the label alphanumeric (the BIDS label rule).
    pub subject: String,
    /// Structural connectome.
    pub connectome: InputSpec,
    /// Resting-state series.
    pub series: InputSpec,
    /// Hierarchy map, one value per region.
    pub map: InputSpec,
    /// Confounds table (TSV) with `framewise_displacement`, if any.
    pub confounds: Option<InputSpec>,
    /// Region-to-region distances (geometry-aware nulls, variogram or Moran map nulls), if any.
    pub distances: Option<InputSpec>,
    /// Parcel sphere coordinates (n × 3) for spin nulls of the map, if any.
    pub sphere: Option<InputSpec>,
    /// Hemisphere of each parcel (0/L = left, 1/R = right), with `sphere`.
    pub hemisphere: Option<InputSpec>,
    /// Covariates carried into the outputs (`age`, `sex`, ...), as text.
    pub covariates: BTreeMap<String, String>,
}

/// Check a BIDS entity value `<prefix>-<label>`: the label must be one or
/// more ASCII letters or digits (BIDS specification, "label" entities), so it
/// can never climb out of a folder or hide as a dot file.
///
/// # Errors
/// [`IoError::BadLabel`] naming the value.
pub fn check_entity(prefix: &'static str, value: &str) -> Result<(), IoError> {
    let label = value.strip_prefix(prefix).and_then(|r| r.strip_prefix('-'));
    match label {
        Some(l) if !l.is_empty() && l.bytes().all(|b| b.is_ascii_alphanumeric()) => Ok(()),
        _ => Err(IoError::BadLabel { value: value.to_string(), prefix }),
    }
}

/// Check a unit name: `sub-<label>` or `sub-<label>_ses-<label>`, each
/// label alphanumeric (the BIDS label rule).
///
/// # Errors
/// [`IoError::BadLabel`] naming the value.
pub fn check_unit_name(name: &str) -> Result<(), IoError> {
    let mut parts = name.split('_');
    check_entity("sub", parts.next().unwrap_or(""))?;
    if let Some(ses) = parts.next() {
        check_entity("ses", ses)?;
    }
    match parts.next() {
        None => Ok(()),
        Some(_) => Err(IoError::BadLabel { value: name.to_string(), prefix: "sub" }),
    }
}

/// A subject's inputs, read and validated.
#[derive(Clone, Debug)]
pub struct LoadedSubject {
    /// `sub-<label>`.
    pub subject: String,
    /// Region names (from the inputs, or `region-001` …).
    pub names: Vec<String>,
    /// Connectome weights, n × n, zero diagonal.
    pub weights: Array2<f64>,
    /// Series, frames × regions.
    pub series: Array2<f64>,
    /// Map value per region (NaN: excluded from the states).
    pub map: Vec<f64>,
    /// Framewise displacement per frame, when censoring.
    pub framewise_displacement: Option<Vec<f64>>,
    /// Confound columns to regress out.
    pub confounds: Vec<Confound>,
    /// Region distances, if given.
    pub distances: Option<Array2<f64>>,
    /// Parcel layout on the sphere, if given.
    pub sphere: Option<SphereLayout>,
    /// Every input read, with its SHA-256.
    pub inputs: Vec<InputRecord>,
    /// Remarks a user should read (diagonal zeroed, excluded regions, …).
    pub notes: Vec<String>,
    /// Covariates, as text.
    pub covariates: BTreeMap<String, String>,
    /// How each input was given, for error messages.
    pub specs: SubjectInputs,
}

/// Whether the settings have the inputs they need: distances for
/// geometry-aware network nulls and variogram/Moran map nulls, sphere
/// coordinates for spin nulls, a confounds table for confound columns. A
/// cohort calls this once before any unit runs, so a setting that would fail
/// every unit fails once with the real reason.
///
/// # Errors
/// [`SubjectError::MissingInput`] naming the input and what needs it.
pub fn check_study_inputs(
    cfg: &ValidSubjectConfig,
    distances: bool,
    sphere: bool,
    confounds: bool,
) -> Result<(), SubjectError> {
    let p = cfg.params();
    let map_needs_distances = p.map_nulls > 0 && p.map_null_method.needs() == SpatialNeed::Distances;
    let needs_distances = (p.network_nulls > 0 && p.null_model.needs_distances()) || map_needs_distances;
    if needs_distances && !distances {
        let needed_by = if map_needs_distances {
            format!("{} map nulls", p.map_null_method)
        } else {
            format!("{} network nulls", p.null_model.label())
        };
        return Err(SubjectError::MissingInput { input: "distances", needed_by });
    }
    if p.map_nulls > 0 && p.map_null_method.needs() == SpatialNeed::Sphere && !sphere {
        return Err(SubjectError::MissingInput {
            input: "sphere",
            needed_by: format!("{} map nulls", p.map_null_method),
        });
    }
    if !confounds && !p.confound_columns.is_empty() {
        return Err(SubjectError::MissingInput {
            input: "confounds",
            needed_by: format!("the confound columns {}", p.confound_columns.join(",")),
        });
    }
    Ok(())
}

impl LoadedSubject {
    /// Read and validate every input the settings need.
    ///
    /// # Errors
    /// [`SubjectError`] naming the file and field at fault; a missing input
    /// the settings need ([`SubjectError::MissingInput`]).
    pub fn load(inputs: &SubjectInputs, cfg: &ValidSubjectConfig) -> Result<Self, SubjectError> {
        check_unit_name(&inputs.subject)?;
        let p = cfg.params();
        check_study_inputs(
            cfg,
            inputs.distances.is_some(),
            inputs.sphere.is_some(),
            inputs.confounds.is_some(),
        )?;

        let mut notes = Vec::new();
        let mut records = Vec::new();
        let conn_la = read_array(&inputs.connectome)?;
        let rules = ConnectomeRules { directed: p.directed, ..Default::default() };
        let conn = validate::connectome(&conn_la, &rules)?;
        let n = conn.weights.nrows();
        notes.extend(conn.notes.iter().map(|s| format!("connectome: {s}")));
        records.push(InputRecord::of_loaded("connectome", &conn_la)?);
        drop(conn_la);

        let series_la = read_array(&inputs.series)?;
        records.push(InputRecord::of_loaded("series", &series_la)?);
        let series = validate::series(series_la, p.orientation, Some(n))?;
        let map_la = read_array(&inputs.map)?;
        records.push(InputRecord::of_loaded("map", &map_la)?);
        let map = validate::region_map(&map_la, Some(n))?;
        notes.extend(map.notes.iter().map(|s| format!("map: {s}")));
        let names =
            reconcile_names(inputs, conn.names.as_deref(), series.names.as_deref(), map.names.as_deref(), n)?;
        let n_frames = series.data.nrows();

        let (framewise_displacement, confounds) = match &inputs.confounds {
            Some(spec) => {
                records.push(InputRecord::of("confounds", spec)?);
                read_confounds(spec, n_frames, &p.confound_columns, p.fd_threshold_mm.is_some())?
            }
            None => (None, Vec::new()),
        };
        let distances = match &inputs.distances {
            Some(spec) => {
                let la = read_array(spec)?;
                records.push(InputRecord::of_loaded("distances", &la)?);
                let d = la.into_matrix()?;
                if d.dim() != (n, n) {
                    return Err(IoError::invalid(
                        spec,
                        "distances",
                        format!(
                            "expected {n} x {n} like the connectome, found {} x {}",
                            d.nrows(),
                            d.ncols()
                        ),
                    )
                    .into());
                }
                if let Some(v) = d.iter().find(|v| !(v.is_finite() && **v >= 0.0)) {
                    return Err(IoError::invalid(
                        spec,
                        "distances",
                        format!("expected finite distances >= 0, found {v}"),
                    )
                    .into());
                }
                Some(d)
            }
            None => None,
        };
        let sphere =
            match (&inputs.sphere, p.map_nulls > 0 && p.map_null_method.needs() == SpatialNeed::Sphere) {
                (Some(spec), true) => {
                    let la = read_array(spec)?;
                    records.push(InputRecord::of_loaded("sphere", &la)?);
                    let coords = la.into_matrix()?;
                    let hemi = match &inputs.hemisphere {
                        Some(h) => {
                            records.push(InputRecord::of("hemisphere", h)?);
                            Some(hemisphere_codes(h)?)
                        }
                        None => None,
                    };
                    // 0.02: tolerance on the unit-sphere radius, as the spin module documents.
                    let layout = SphereLayout::new(&coords, hemi.as_deref(), 0.02).map_err(|source| {
                        SubjectError::Hierarchy { stage: "sphere", input: spec.to_string(), source }
                    })?;
                    Some(layout)
                }
                _ => None,
            };
        Ok(LoadedSubject {
            subject: inputs.subject.clone(),
            names,
            weights: conn.weights,
            series: series.data,
            map: map.values.to_vec(),
            framewise_displacement,
            confounds,
            distances,
            sphere,
            inputs: records,
            notes,
            covariates: inputs.covariates.clone(),
            specs: inputs.clone(),
        })
    }

    /// Number of regions.
    pub fn n_regions(&self) -> usize {
        self.weights.nrows()
    }
}

/// One list of region names for every table: the connectome's, else the
/// series', else the map's, else `region-001` …; names given by two inputs
/// must agree.
fn reconcile_names(
    inputs: &SubjectInputs,
    conn: Option<&[String]>,
    series: Option<&[String]>,
    map: Option<&[String]>,
    n: usize,
) -> Result<Vec<String>, IoError> {
    let labelled: Vec<(String, &[String])> = [
        (inputs.connectome.to_string(), conn),
        (inputs.series.to_string(), series),
        (inputs.map.to_string(), map),
    ]
    .into_iter()
    .filter_map(|(l, v)| v.map(|v| (l, v)))
    .collect();
    if let Some((first_label, first)) = labelled.first() {
        for (label, other) in &labelled[1..] {
            validate::names_agree((first_label, first), (label, other))?;
        }
        return Ok(first.to_vec());
    }
    Ok(crate::io::default_region_names(n))
}

/// Read a confounds table: the displacement column (if censoring) and the
/// named confound columns. Finiteness is checked by the timescale module on
/// the frames it keeps.
fn read_confounds(
    spec: &InputSpec,
    n_frames: usize,
    columns: &[String],
    want_fd: bool,
) -> Result<(Option<Vec<f64>>, Vec<Confound>), SubjectError> {
    let la = read_array(spec)?;
    let mut names: Vec<&str> = columns.iter().map(String::as_str).collect();
    if want_fd {
        names.push("framewise_displacement");
    }
    let mut values = validate::frame_columns(&la, n_frames, &names)?;
    let fd = if want_fd { values.pop() } else { None };
    let confounds =
        columns.iter().zip(values).map(|(c, v)| Confound { name: c.clone(), values: v }).collect();
    Ok((fd, confounds))
}

/// Hemisphere of each parcel as 0 (left) or 1 (right), from numbers or from
/// text labels `L`/`R`/`left`/`right` (any case) in a delimited column.
///
/// # Errors
/// [`IoError`] when the file cannot be read or a label is neither.
pub fn hemisphere_codes(spec: &InputSpec) -> Result<Vec<f64>, IoError> {
    if let Ok(la) = read_array(spec) {
        return Ok(la.vector()?.to_vec());
    }
    let sep = match spec.format()? {
        crate::io::Format::Delimited(sep) => sep,
        _ => return Ok(read_array(spec)?.vector()?.to_vec()),
    };
    let labels = crate::io::delimited::read_labels(spec, sep)?;
    labels
        .iter()
        .enumerate()
        .map(|(i, l)| match l.to_ascii_lowercase().as_str() {
            "l" | "left" | "lh" | "0" => Ok(0.0),
            "r" | "right" | "rh" | "1" => Ok(1.0),
            _ => Err(IoError::invalid(
                spec,
                "hemisphere",
                format!("expected L/R (or 0/1), found `{l}` at region {}", i + 1),
            )),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_follow_the_bids_rule() {
        for ok in ["sub-01", "sub-A7x"] {
            assert!(check_entity("sub", ok).is_ok(), "{ok}");
        }
        assert!(check_unit_name("sub-01_ses-2").is_ok());
        assert!(check_unit_name("sub-01_ses-").is_err() && check_unit_name("sub-01_ses-1_x").is_err());
        for bad in ["sub-", "sub-../x", "../victim", "", "sub-a_b", "sub-x/../../v", "01", "ses-01", "sub-é"]
        {
            let e = check_entity("sub", bad).unwrap_err().to_string();
            assert!(e.contains("letters or digits"), "{bad}: {e}");
        }
    }
}
