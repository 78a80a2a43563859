//! Checks that turn a [`LoadedArray`] into an input of a given role:
//! connectome, regional time series, regional map or frame mask.
//!
//! Each check either returns the validated value with notes for the user, or
//! an [`IoError::Invalid`] naming the file, the role and what was expected.
//! Checks are written positively (`x >= 0`) so that NaN always fails.

use super::{InputSpec, IoError, LoadedArray};
use ndarray::{Array1, Array2, ArrayView2};
use serde::Serialize;

/// What to do with a non-zero diagonal (self-connections) of a connectome.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum DiagonalPolicy {
    /// Set it to zero and say so in the notes (default: self-loops carry no
    /// meaning in a tractography connectome; common practice, no source).
    #[default]
    Zero,
    /// Keep it as stored.
    Keep,
    /// Refuse the file.
    Reject,
}

/// How a connectome is checked.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct ConnectomeRules {
    /// Whether the network is declared directed (no symmetry check).
    pub directed: bool,
    /// Allowed asymmetry, relative: `|a_ij - a_ji| <= tol * max|a|`.
    pub symmetry_tolerance: f64,
    /// Handling of the diagonal.
    pub diagonal: DiagonalPolicy,
}

impl Default for ConnectomeRules {
    /// Undirected, relative symmetry tolerance 1e-8, diagonal zeroed.
    fn default() -> Self {
        ConnectomeRules { directed: false, symmetry_tolerance: 1e-8, diagonal: DiagonalPolicy::Zero }
    }
}

/// A validated connectome.
#[derive(Clone, Debug)]
pub struct Connectome {
    /// Weights `A[i, j]`: from node `j` to node `i` when directed (column
    /// drives row, as in `dx/dt = A x`).
    pub weights: Array2<f64>,
    /// Region names from the file, if any.
    pub names: Option<Vec<String>>,
    /// Whether it was declared directed.
    pub directed: bool,
    /// Nodes with no connection at all (zero row and column).
    pub isolated: Vec<usize>,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

/// Region names carried by a file: column names, else row names; when both
/// are present they must agree.
fn names_of(la: &LoadedArray) -> Result<Option<Vec<String>>, IoError> {
    match (&la.row_names, &la.col_names) {
        (Some(r), Some(c)) if r != c => Err(IoError::invalid(
            &la.spec,
            "region names",
            "row names and column names differ; expected the same regions in the same order",
        )),
        (_, Some(c)) => Ok(Some(c.clone())),
        (Some(r), None) => Ok(Some(r.clone())),
        (None, None) => Ok(None),
    }
}

fn first_bad<F: Fn(f64) -> bool>(m: &Array2<f64>, ok: F) -> Option<((usize, usize), f64)> {
    m.indexed_iter().find(|(_, &v)| !ok(v)).map(|(ij, &v)| (ij, v))
}

/// Check a connectome: 2-D, square, at least 2 nodes, finite, non-negative,
/// symmetric within tolerance unless directed, diagonal handled by policy.
///
/// # Errors
/// [`IoError::Invalid`] naming the first offending entry (1-based row and column).
pub fn connectome(la: &LoadedArray, rules: &ConnectomeRules) -> Result<Connectome, IoError> {
    let field = "connectome";
    let bad = |msg: String| IoError::invalid(&la.spec, field, msg);
    if la.data.ndim() != 2 {
        return Err(bad(format!("expected a square 2-D matrix, found shape {:?}", la.data.shape())));
    }
    let mut w = la.matrix()?;
    let (r, c) = w.dim();
    if r != c {
        return Err(bad(format!("expected a square matrix, found {r} x {c}")));
    }
    if r < 2 {
        return Err(bad(format!("expected at least 2 regions, found {r}")));
    }
    if let Some(((i, j), v)) = first_bad(&w, f64::is_finite) {
        return Err(bad(format!("expected finite weights, found {v} at row {}, column {}", i + 1, j + 1)));
    }
    if let Some(((i, j), v)) = first_bad(&w, |v| v >= 0.0) {
        return Err(bad(format!(
            "expected non-negative weights, found {v} at row {}, column {}",
            i + 1,
            j + 1
        )));
    }
    let mut notes = Vec::new();
    if !rules.directed {
        let scan = crate::linalg::asymmetry(w.view());
        let tol = rules.symmetry_tolerance * scan.scale;
        let worst = (scan.largest, scan.at.0, scan.at.1);
        if worst.0 > tol {
            return Err(bad(format!(
                "expected a symmetric matrix (undirected), but entries ({}, {}) and ({}, {}) differ by {:e} \
                 (tolerance {:e}); declare it directed if it is",
                worst.1 + 1,
                worst.2 + 1,
                worst.2 + 1,
                worst.1 + 1,
                worst.0,
                tol
            )));
        }
        if worst.0 > 0.0 {
            // Symmetrise exactly so that downstream symmetric solvers see a symmetric matrix.
            let t = w.t().to_owned();
            w = (&w + &t) * 0.5;
            notes.push(format!("asymmetry up to {:e} averaged out", worst.0));
        }
    }
    let diag_nonzero = (0..r).filter(|&i| w[[i, i]] != 0.0).count();
    if diag_nonzero > 0 {
        match rules.diagonal {
            DiagonalPolicy::Zero => {
                for i in 0..r {
                    w[[i, i]] = 0.0;
                }
                notes.push(format!("{diag_nonzero} non-zero diagonal entries (self-connections) set to 0"));
            }
            DiagonalPolicy::Keep => notes.push(format!("{diag_nonzero} non-zero diagonal entries kept")),
            DiagonalPolicy::Reject => {
                return Err(bad(format!("expected a zero diagonal, found {diag_nonzero} non-zero entries")))
            }
        }
    }
    let isolated: Vec<usize> =
        (0..r).filter(|&i| (0..r).all(|j| i == j || (w[[i, j]] == 0.0 && w[[j, i]] == 0.0))).collect();
    if !isolated.is_empty() {
        notes.push(format!(
            "{} isolated region(s) with no connections: {}",
            isolated.len(),
            isolated.iter().map(|i| (i + 1).to_string()).collect::<Vec<_>>().join(", ")
        ));
    }
    let names = names_of(la)?;
    if let Some(n) = &names {
        if n.len() != r {
            return Err(bad(format!("{} region names for {r} regions", n.len())));
        }
    }
    Ok(Connectome { weights: w, names, directed: rules.directed, isolated, notes })
}

/// How a time-series matrix is laid out.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, serde::Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
pub enum Orientation {
    /// Decide from the region count, or from a header of region names.
    #[default]
    Auto,
    /// Rows are time points, columns regions (the BIDS-derivatives convention).
    TimeByRegion,
    /// Rows are regions, columns time points.
    RegionByTime,
}

/// A guess at the layout of an unlabelled `rows × cols` series, for
/// messages only (never used to read data): a dimension above 10,000 is
/// vertices or grayordinates, not frames (resting-state runs hold at most a
/// few thousand frames; common practice, no source), so it is the region
/// axis; otherwise the longer axis is taken as frames, as for parcellated
/// series.
pub fn likely_orientation(rows: usize, cols: usize) -> Orientation {
    const MANY: usize = 10_000;
    if cols > MANY && cols > rows {
        Orientation::TimeByRegion
    } else if rows > MANY && rows > cols {
        Orientation::RegionByTime
    } else if rows >= cols {
        Orientation::TimeByRegion
    } else {
        Orientation::RegionByTime
    }
}

/// A validated regional time series, always time × region.
#[derive(Clone, Debug)]
pub struct Series {
    /// Values, frames × regions.
    pub data: Array2<f64>,
    /// Region names, if the file has them.
    pub names: Option<Vec<String>>,
    /// How the orientation was settled.
    pub orientation: String,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

/// Check a time series and put it in time × region order. The loaded array
/// is consumed, so its values are not held twice.
///
/// With [`Orientation::Auto`] the layout is settled by `n_regions` when it is
/// known and only one axis matches it, or by a header of region names (which
/// names columns, so rows are time); otherwise the file is refused, because
/// guessing would silently swap regions and frames.
///
/// Non-finite values are allowed here (censoring and QC handle them per
/// region) and counted in the notes.
///
/// # Errors
/// [`IoError::Invalid`] when the array is not 2-D, no axis matches
/// `n_regions`, or the orientation cannot be settled.
pub fn series(
    la: LoadedArray,
    orientation: Orientation,
    n_regions: Option<usize>,
) -> Result<Series, IoError> {
    let spec = la.spec.clone();
    if la.data.ndim() != 2 {
        return Err(IoError::invalid(
            &spec,
            SERIES_FIELD,
            format!("expected a 2-D matrix (time points x regions), found shape {:?}", la.data.shape()),
        ));
    }
    let (rows, cols) = (la.data.shape()[0], la.data.shape()[1]);
    let (transpose, how) =
        series_layout(&spec, (rows, cols), orientation, n_regions, la.col_names.is_some())?;
    let names = if transpose { la.row_names.clone() } else { la.col_names.clone() };
    let mut notes = la.notes.clone();
    // Consume the loaded array so its values are held once (a transpose needs one copy).
    let m = la.into_matrix()?;
    let data = if transpose { m.t().as_standard_layout().into_owned() } else { m };
    if let (Some(n), Some(names)) = (n_regions, &names) {
        if names.len() != n {
            return Err(IoError::invalid(
                &spec,
                SERIES_FIELD,
                format!("{} region names for {n} regions", names.len()),
            ));
        }
    }
    notes.extend(nonfinite_note(data.view()));
    Ok(Series { data, names, orientation: how.to_string(), notes })
}

/// A validated time series borrowed from memory the caller holds (a
/// memory-mapped `.npy` file): the same checks as [`series`], with
/// region-by-time data turned by a transposed view instead of a copy.
#[derive(Clone, Debug)]
pub struct SeriesView<'a> {
    /// Values, frames × regions (any strides).
    pub data: ArrayView2<'a, f64>,
    /// Region names, if the file has them.
    pub names: Option<Vec<String>>,
    /// How the orientation was settled.
    pub orientation: String,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

impl Series {
    /// The series as a [`SeriesView`] (names and notes copied).
    pub fn view(&self) -> SeriesView<'_> {
        SeriesView {
            data: self.data.view(),
            names: self.names.clone(),
            orientation: self.orientation.clone(),
            notes: self.notes.clone(),
        }
    }
}

/// [`series`] for a matrix borrowed from `spec`'s file (which has no region
/// names: a `.npy` array).
///
/// # Errors
/// As [`series`].
pub fn series_view<'a>(
    spec: &InputSpec,
    view: ArrayView2<'a, f64>,
    orientation: Orientation,
    n_regions: Option<usize>,
) -> Result<SeriesView<'a>, IoError> {
    let (transpose, how) = series_layout(spec, view.dim(), orientation, n_regions, false)?;
    let data = if transpose { view.reversed_axes() } else { view };
    let notes = nonfinite_note(data).into_iter().collect();
    Ok(SeriesView { data, names: None, orientation: how.to_string(), notes })
}

const SERIES_FIELD: &str = "time series";

/// Whether a `rows × cols` series must be transposed to time × region, and
/// how that was settled (see [`series`]).
fn series_layout(
    spec: &InputSpec,
    (rows, cols): (usize, usize),
    orientation: Orientation,
    n_regions: Option<usize>,
    has_header: bool,
) -> Result<(bool, &'static str), IoError> {
    let bad = |msg: String| IoError::invalid(spec, SERIES_FIELD, msg);
    let transpose = match orientation {
        Orientation::TimeByRegion => false,
        Orientation::RegionByTime => true,
        Orientation::Auto => match n_regions {
            Some(n) if cols == n && rows != n => false,
            Some(n) if rows == n && cols != n => true,
            Some(n) if rows == n && cols == n => {
                return Err(bad(format!(
                    "is {rows} x {cols}, square with {n} regions, so its orientation cannot be told; \
                     pass --orientation time-by-region or region-by-time"
                )))
            }
            Some(n) => {
                return Err(bad(format!(
                    "is {rows} x {cols}, but neither axis has the {n} regions of the other inputs"
                )))
            }
            None if has_header => false,
            None => {
                return Err(bad(format!(
                    "is {rows} x {cols} with no header of region names and no region count from another \
                     input; pass --orientation time-by-region (BIDS) or region-by-time"
                )))
            }
        },
    };
    let how = match (orientation, transpose) {
        (Orientation::Auto, false) => "time x region (settled from the region count or header)",
        (Orientation::Auto, true) => "region x time in the file, transposed (settled from the region count)",
        (_, false) => "time x region (as declared)",
        (_, true) => "region x time in the file, transposed (as declared)",
    };
    Ok((transpose, how))
}

/// The note counting non-finite values, if there are any (counted over
/// frames in parallel: for a large series this is a pass over all of it).
fn nonfinite_note(data: ArrayView2<'_, f64>) -> Option<String> {
    use rayon::prelude::*;
    let nonfinite: usize = (0..data.nrows())
        .into_par_iter()
        .map(|t| data.row(t).iter().filter(|v| !v.is_finite()).count())
        .sum();
    (nonfinite > 0)
        .then(|| format!("{nonfinite} non-finite value(s); affected regions or frames are handled by QC"))
}

/// A validated regional map (one value per region). NaN marks a region with
/// no value; it is kept and reported, never silently filled.
#[derive(Clone, Debug)]
pub struct RegionMap {
    /// Values per region.
    pub values: Array1<f64>,
    /// Region names, if the file has them.
    pub names: Option<Vec<String>>,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

/// Check a regional map against the expected region count.
///
/// # Errors
/// [`IoError::Invalid`] when it is not a vector, its length differs from
/// `n_regions`, or a value is infinite.
pub fn region_map(la: &LoadedArray, n_regions: Option<usize>) -> Result<RegionMap, IoError> {
    let values = la.vector()?;
    if let Some(n) = n_regions {
        if values.len() != n {
            return Err(IoError::invalid(
                &la.spec,
                "map",
                format!("expected one value for each of {n} regions, found {}", values.len()),
            ));
        }
    }
    if let Some(i) = values.iter().position(|v| v.is_infinite()) {
        return Err(IoError::invalid(
            &la.spec,
            "map",
            format!("expected finite values, found {} at region {}", values[i], i + 1),
        ));
    }
    let names = la
        .row_names
        .clone()
        .or_else(|| la.col_names.as_ref().filter(|c| c.len() == values.len() && c.len() > 1).cloned());
    let mut notes = Vec::new();
    let missing = values.iter().filter(|v| v.is_nan()).count();
    if missing > 0 {
        notes.push(format!("{missing} region(s) without a value (NaN)"));
    }
    Ok(RegionMap { values, names, notes })
}

/// Check a per-frame 0/1 mask (1 = keep the frame) of `n_frames` frames.
///
/// # Errors
/// [`IoError::Invalid`] for a wrong length or a value other than 0 or 1.
pub fn frame_mask(la: &LoadedArray, n_frames: usize) -> Result<Vec<bool>, IoError> {
    let v = la.vector()?;
    if v.len() != n_frames {
        return Err(IoError::invalid(
            &la.spec,
            "censoring mask",
            format!("expected {n_frames} frames, found {}", v.len()),
        ));
    }
    v.iter()
        .enumerate()
        .map(|(i, &x)| {
            if x == 1.0 {
                Ok(true)
            } else if x == 0.0 {
                Ok(false)
            } else {
                Err(IoError::invalid(
                    &la.spec,
                    "censoring mask",
                    format!("expected 0 or 1, found {x} at frame {}", i + 1),
                ))
            }
        })
        .collect()
}

/// Pick named columns of a per-frame table (e.g. a BIDS confounds TSV) with
/// one row per frame. Values are returned as read: non-finite cells (BIDS
/// writes `n/a` for the first frame's displacement) are left for the
/// consumer, which knows which frames it uses.
///
/// # Errors
/// [`IoError::Invalid`] when the row count differs from `n_frames`;
/// [`IoError::MissingKey`] naming the columns the table has.
pub fn frame_columns(la: &LoadedArray, n_frames: usize, names: &[&str]) -> Result<Vec<Vec<f64>>, IoError> {
    let m = la.matrix()?;
    if m.nrows() != n_frames {
        return Err(IoError::invalid(
            &la.spec,
            "per-frame table",
            format!("expected {n_frames} rows (one per frame), found {}", m.nrows()),
        ));
    }
    let header = la.col_names.clone().unwrap_or_default();
    names
        .iter()
        .map(|name| {
            let j = header.iter().position(|c| c == name).ok_or_else(|| IoError::MissingKey {
                path: la.spec.path.clone(),
                kind: "column",
                key: name.to_string(),
                available: if header.is_empty() { "(no header row)".into() } else { header.join(", ") },
            })?;
            Ok(m.column(j).to_vec())
        })
        .collect()
}

/// Check that two inputs name the same regions in the same order.
///
/// # Errors
/// [`IoError::Invalid`] naming the first position where they differ.
pub fn names_agree(a: (&str, &[String]), b: (&str, &[String])) -> Result<(), IoError> {
    if a.1.len() != b.1.len() {
        return Err(IoError::invalid(
            b.0,
            "region names",
            format!("{} names, but {} has {}", b.1.len(), a.0, a.1.len()),
        ));
    }
    if let Some(i) = (0..a.1.len()).find(|&i| a.1[i] != b.1[i]) {
        return Err(IoError::invalid(
            b.0,
            "region names",
            format!(
                "region {} is `{}`, but in {} it is `{}`; expected the same regions in the same order",
                i + 1,
                b.1[i],
                a.0,
                a.1[i]
            ),
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_guess_for_grayordinates_and_parcels() {
        // 1,200 frames x 91,282 grayordinates, and its transpose; parcellated 1,200 x 400 both ways.
        assert_eq!(likely_orientation(1200, 91_282), Orientation::TimeByRegion);
        assert_eq!(likely_orientation(91_282, 1200), Orientation::RegionByTime);
        assert_eq!(likely_orientation(1200, 400), Orientation::TimeByRegion);
        assert_eq!(likely_orientation(400, 1200), Orientation::RegionByTime);
    }
    use crate::io::{InputSpec, StoredType};
    use ndarray::array;

    fn la(m: Array2<f64>) -> LoadedArray {
        LoadedArray::new(InputSpec::new("x.csv", None), m.into_dyn(), StoredType::Text)
    }

    #[test]
    fn connectome_checks_name_the_entry() {
        let e =
            connectome(&la(array![[0., 1.], [2., 0.]]), &ConnectomeRules::default()).unwrap_err().to_string();
        assert!(e.starts_with("x.csv: connectome: expected a symmetric"), "{e}");
        let e = connectome(&la(array![[0., -1.], [-1., 0.]]), &ConnectomeRules::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("non-negative") && e.contains("row 1, column 2"), "{e}");
        let e = connectome(&la(array![[0., f64::NAN], [1., 0.]]), &ConnectomeRules::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("finite"), "{e}");
        let e = connectome(&la(array![[0., 1., 2.], [1., 0., 2.]]), &ConnectomeRules::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("2 x 3"), "{e}");
    }

    #[test]
    fn connectome_diagonal_and_isolated_nodes() {
        let c =
            connectome(&la(array![[5., 1., 0.], [1., 0., 0.], [0., 0., 0.]]), &ConnectomeRules::default())
                .unwrap();
        assert_eq!(c.weights[[0, 0]], 0.0);
        assert_eq!(c.isolated, vec![2]);
        assert_eq!(c.notes.len(), 2);
        let directed = ConnectomeRules { directed: true, ..Default::default() };
        assert!(connectome(&la(array![[0., 1.], [2., 0.]]), &directed).is_ok());
    }

    #[test]
    fn series_orientation_is_settled_or_refused() {
        let m = Array2::<f64>::zeros((10, 3));
        assert_eq!(series(la(m.clone()), Orientation::Auto, Some(3)).unwrap().data.dim(), (10, 3));
        assert_eq!(series(la(m.t().to_owned()), Orientation::Auto, Some(3)).unwrap().data.dim(), (10, 3));
        let e = series(la(m.clone()), Orientation::Auto, None).unwrap_err().to_string();
        assert!(e.contains("--orientation"), "{e}");
        let e = series(la(m), Orientation::Auto, Some(4)).unwrap_err().to_string();
        assert!(e.contains("neither axis has the 4 regions"), "{e}");
    }

    #[test]
    fn a_borrowed_series_is_checked_and_turned_like_an_owned_one() {
        let mut m = Array2::from_shape_fn((10, 3), |(t, r)| (t * 3 + r) as f64);
        m[[4, 1]] = f64::NAN;
        let spec = InputSpec::new("s.npy", None);
        for (file, orientation, n) in [
            (m.clone(), Orientation::Auto, Some(3)),
            (m.t().to_owned(), Orientation::Auto, Some(3)),
            (m.t().to_owned(), Orientation::RegionByTime, None),
            (m.clone(), Orientation::TimeByRegion, None),
        ] {
            let owned = series(la(file.clone()), orientation, n).unwrap();
            let view = series_view(&spec, file.view(), orientation, n).unwrap();
            assert!(view.data.iter().zip(owned.data.iter()).all(|(a, b)| a.to_bits() == b.to_bits()));
            assert_eq!(view.data.dim(), (10, 3));
            assert_eq!((&view.orientation, &view.notes), (&owned.orientation, &owned.notes));
            assert_eq!(view.notes, ["1 non-finite value(s); affected regions or frames are handled by QC"]);
        }
        let e = series_view(&spec, m.view(), Orientation::Auto, None).unwrap_err().to_string();
        assert!(e.contains("--orientation"), "{e}");
    }

    #[test]
    fn mask_and_names() {
        let v =
            LoadedArray::new(InputSpec::new("m.tsv", None), array![1., 0., 2.].into_dyn(), StoredType::Text);
        assert!(frame_mask(&v, 3).unwrap_err().to_string().contains("found 2 at frame 3"));
        let a = vec!["L1".to_string(), "L2".to_string()];
        let b = vec!["L1".to_string(), "R2".to_string()];
        let e = names_agree(("conn.csv", &a), ("map.csv", &b)).unwrap_err().to_string();
        assert!(e.contains("region 2 is `R2`"), "{e}");
    }
}
