//! CSV, TSV and whitespace-separated text tables.
//!
//! Conventions, stated because tools differ:
//! * Lines whose first non-blank character is `#` are comments; blank lines
//!   are skipped.
//! * The first row is a header when any of its cells is neither a number nor
//!   a missing-value token.
//! * The first column holds row names when, in every data row, it is neither
//!   a number nor a missing-value token (pandas writes its index this way).
//! * Missing-value tokens, case-insensitive: empty cell, `n/a` (BIDS),
//!   `na`, `nan`, `null`. They become NaN and are counted in
//!   [`LoadedArray::notes`](super::LoadedArray); each role's validation then
//!   decides whether NaN is allowed.
//! * `inf`/`-inf` parse as infinities (and fail validation where finiteness
//!   is required).
//! * A KEY selects one column by header name.

use super::{read_bytes, InputSpec, IoError, LoadedArray, StoredType};
use ndarray::Array2;

/// Field separator of a delimited file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Separator {
    /// `,` (`.csv`).
    Comma,
    /// Tab (`.tsv`, the BIDS table format).
    Tab,
    /// Runs of spaces or tabs (`.txt`, as written by `numpy.savetxt` or MATLAB `dlmwrite`).
    Whitespace,
}

enum Cell {
    Number(f64),
    Missing,
    Text,
}

fn classify(cell: &str) -> Cell {
    let t = cell.trim();
    match t.to_ascii_lowercase().as_str() {
        "" | "n/a" | "na" | "nan" | "null" => return Cell::Missing,
        _ => {}
    }
    match t.parse::<f64>() {
        Ok(v) => Cell::Number(v),
        Err(_) => Cell::Text,
    }
}

/// Rows of cells with the 1-based line number each came from.
fn split_records(text: &str, sep: Separator, spec: &InputSpec) -> Result<Vec<(usize, Vec<String>)>, IoError> {
    let mut rows = Vec::new();
    match sep {
        Separator::Whitespace => {
            for (i, line) in text.lines().enumerate() {
                let t = line.trim();
                if t.is_empty() || t.starts_with('#') {
                    continue;
                }
                rows.push((i + 1, t.split_whitespace().map(str::to_string).collect()));
            }
        }
        Separator::Comma | Separator::Tab => {
            let delim = if sep == Separator::Comma { b',' } else { b'\t' };
            let mut reader = csv::ReaderBuilder::new()
                .delimiter(delim)
                .has_headers(false)
                .flexible(true)
                .comment(Some(b'#'))
                .from_reader(text.as_bytes());
            for rec in reader.records() {
                let rec =
                    rec.map_err(|e| IoError::format(&spec.path, format!("not valid delimited text: {e}")))?;
                let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
                if rec.iter().all(|c| c.trim().is_empty()) {
                    continue;
                }
                rows.push((line, rec.iter().map(str::to_string).collect()));
            }
        }
    }
    Ok(rows)
}

/// A delimited file split into header, row names and cells, before any
/// cell is read as a number.
struct TextTable {
    col_names: Option<Vec<String>>,
    row_names: Option<Vec<String>>,
    /// (line, cells of the data columns only).
    rows: Vec<(usize, Vec<String>)>,
    ncol: usize,
    /// 1-based column offset of the first data column in the file.
    first: usize,
}

fn parse_table(spec: &InputSpec, sep: Separator) -> Result<TextTable, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let text = String::from_utf8(bytes).map_err(|_| IoError::format(&spec.path, "is not UTF-8 text"))?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
    let mut rows = split_records(text, sep, spec)?;
    if rows.is_empty() {
        return Err(IoError::format(&spec.path, "holds no data rows"));
    }
    let header_row = rows[0].1.iter().any(|c| matches!(classify(c), Cell::Text));
    let header = if header_row { Some(rows.remove(0)) } else { None };
    if rows.is_empty() {
        return Err(IoError::format(&spec.path, "has a header but no data rows"));
    }
    let has_row_names = rows.iter().all(|(_, r)| matches!(r.first().map(|c| classify(c)), Some(Cell::Text)));
    let first = usize::from(has_row_names);
    let width = rows[0].1.len();
    if width <= first {
        return Err(IoError::format(&spec.path, "has row names but no numeric columns"));
    }
    let ncol = width - first;
    let col_names = match header {
        None => None,
        Some((line, h)) => {
            let mut names: Vec<String> = h.iter().map(|c| c.trim().to_string()).collect();
            // A header over the row-name column may or may not name it.
            if names.len() == width {
                names.drain(..first);
            } else if names.len() != ncol {
                return Err(IoError::format(
                    &spec.path,
                    format!("line {line}: header has {} names for {ncol} data columns", names.len()),
                ));
            }
            Some(names)
        }
    };
    let mut row_names = Vec::new();
    let mut data_rows = Vec::with_capacity(rows.len());
    for (line, mut row) in rows {
        if row.len() != width {
            return Err(IoError::format(
                &spec.path,
                format!("line {line}: {} cells, expected {width} like the first data row", row.len()),
            ));
        }
        if has_row_names {
            row_names.push(row[0].trim().to_string());
        }
        row.drain(..first);
        data_rows.push((line, row));
    }
    Ok(TextTable { col_names, row_names: has_row_names.then_some(row_names), rows: data_rows, ncol, first })
}

/// The data columns a KEY selects: one name, or several separated by commas.
fn select_columns(spec: &InputSpec, t: &TextTable) -> Result<Vec<usize>, IoError> {
    let Some(key) = &spec.key else {
        return Ok((0..t.ncol).collect());
    };
    let names = t.col_names.as_ref().ok_or_else(|| IoError::MissingKey {
        path: spec.path.clone(),
        kind: "column",
        key: key.clone(),
        available: "(no header row)".into(),
    })?;
    key.split(',')
        .map(|k| {
            let k = k.trim();
            names.iter().position(|n| n == k).ok_or_else(|| IoError::MissingKey {
                path: spec.path.clone(),
                kind: "column",
                key: k.to_string(),
                available: names.join(", "),
            })
        })
        .collect()
}

/// Read a delimited table as a matrix of numbers. A KEY naming one column
/// gives a vector; a KEY naming several (`x,y,z`) gives those columns in that
/// order; only the selected columns need to be numeric.
///
/// # Errors
/// [`IoError::Format`] naming the line and column of a cell that is not a
/// number, or of a row whose length differs from the first;
/// [`IoError::MissingKey`] when KEY names no column.
pub fn read(spec: &InputSpec, sep: Separator) -> Result<LoadedArray, IoError> {
    let t = parse_table(spec, sep)?;
    let cols = select_columns(spec, &t)?;
    let mut values = Vec::with_capacity(t.rows.len() * cols.len());
    let mut missing = 0usize;
    for (line, row) in &t.rows {
        for &j in &cols {
            let cell = &row[j];
            match classify(cell) {
                Cell::Number(v) => values.push(v),
                Cell::Missing => {
                    missing += 1;
                    values.push(f64::NAN);
                }
                Cell::Text => {
                    return Err(IoError::format(
                        &spec.path,
                        format!("line {line}, column {}: `{}` is not a number", j + t.first + 1, cell.trim()),
                    ))
                }
            }
        }
    }
    let nrow = t.rows.len();
    let data = if spec.key.is_some() && cols.len() == 1 {
        ndarray::Array1::from(values).into_dyn()
    } else {
        Array2::from_shape_vec((nrow, cols.len()), values).expect("row lengths checked").into_dyn()
    };
    let mut out = LoadedArray::new(spec.clone(), data, StoredType::Text);
    out.col_names = t.col_names.as_ref().map(|names| cols.iter().map(|&j| names[j].clone()).collect());
    out.row_names = t.row_names;
    if missing > 0 {
        out.notes.push(format!("{missing} missing cell(s) (empty, n/a, NA, NaN) read as NaN"));
    }
    Ok(out)
}

/// Describe each data column of a delimited table as `name (numeric)` or
/// `name (text)`, for tables that mix both (e.g. a regions table with a
/// hemisphere column): select numeric ones with `PATH:col1,col2`.
///
/// # Errors
/// The errors of [`read`] for a malformed file.
pub fn describe_columns(spec: &InputSpec, sep: Separator) -> Result<Vec<String>, IoError> {
    let t = parse_table(spec, sep)?;
    let names: Vec<String> = t
        .col_names
        .clone()
        .unwrap_or_else(|| (1..=t.ncol).map(|j| format!("column {}", j + t.first)).collect());
    Ok(names
        .iter()
        .enumerate()
        .map(|(j, n)| {
            let text = t.rows.iter().any(|(_, r)| matches!(classify(&r[j]), Cell::Text));
            format!("{n} ({})", if text { "text" } else { "numeric" })
        })
        .collect())
}

/// Read one column of a delimited table as text labels (e.g. a hemisphere
/// column of `L`/`R`). The KEY must name exactly one column.
///
/// # Errors
/// [`IoError::Spec`] without a single-column key, [`IoError::MissingKey`]
/// when it names no column, and the errors of [`read`] for a malformed file.
pub fn read_labels(spec: &InputSpec, sep: Separator) -> Result<Vec<String>, IoError> {
    let t = parse_table(spec, sep)?;
    let cols = select_columns(spec, &t)?;
    if spec.key.is_none() || cols.len() != 1 {
        return Err(IoError::Spec {
            spec: spec.to_string(),
            reason: "name exactly one column as PATH:COLUMN".into(),
        });
    }
    Ok(t.rows.iter().map(|(_, r)| r[cols[0]].trim().to_string()).collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn write_tmp(name: &str, body: &str) -> (tempfile::TempDir, InputSpec) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join(name);
        std::fs::File::create(&p).unwrap().write_all(body.as_bytes()).unwrap();
        (dir, InputSpec::new(p, None))
    }

    #[test]
    fn header_row_names_comments_and_missing() {
        let (_d, spec) = write_tmp("m.csv", "# made by hand\n,a,b\nr1,1,2\nr2,n/a,4.5\n");
        let la = read(&spec, Separator::Comma).unwrap();
        assert_eq!(la.data.shape(), &[2, 2]);
        assert_eq!(la.col_names.as_deref(), Some(&["a".to_string(), "b".to_string()][..]));
        assert_eq!(la.row_names.as_deref(), Some(&["r1".to_string(), "r2".to_string()][..]));
        assert!(la.data[[1, 0]].is_nan());
        assert_eq!(la.data[[1, 1]], 4.5);
        assert_eq!(la.notes.len(), 1);
    }

    #[test]
    fn headerless_whitespace_and_column_key() {
        let (_d, spec) = write_tmp("m.txt", "1 2  3\n4\t5 6\n");
        let la = read(&spec, Separator::Whitespace).unwrap();
        assert_eq!(la.data.shape(), &[2, 3]);
        assert!(la.col_names.is_none());
        let (_d2, mut spec) = write_tmp("c.tsv", "framewise_displacement\ttrans_x\n0.1\t1\nn/a\t2\n");
        spec.key = Some("framewise_displacement".into());
        let la = read(&spec, Separator::Tab).unwrap();
        assert_eq!(la.data.shape(), &[2]);
        assert_eq!(la.data[[0]], 0.1);
        spec.key = Some("trans_x,framewise_displacement".into());
        let la = read(&spec, Separator::Tab).unwrap();
        assert_eq!(la.data.shape(), &[2, 2]);
        assert_eq!(la.data[[1, 0]], 2.0);
    }

    #[test]
    fn only_selected_columns_must_be_numbers_and_labels_read_as_text() {
        let (_d, mut spec) = write_tmp("r.tsv", "region\themi\tx\nA\tL\t1.5\nB\tR\t2\n");
        assert!(read(&spec, Separator::Tab).is_err());
        spec.key = Some("x".into());
        assert_eq!(read(&spec, Separator::Tab).unwrap().data.len(), 2);
        spec.key = Some("hemi".into());
        assert_eq!(read_labels(&spec, Separator::Tab).unwrap(), vec!["L", "R"]);
    }

    #[test]
    fn ragged_and_text_cells_name_the_line() {
        let (_d, spec) = write_tmp("m.csv", "1,2\n3\n");
        let e = read(&spec, Separator::Comma).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("expected 2"), "{e}");
        let (_d, spec) = write_tmp("m.csv", "a,b\n1,2\n3,x\n");
        let e = read(&spec, Separator::Comma).unwrap_err().to_string();
        assert!(e.contains("line 3, column 2: `x` is not a number"), "{e}");
    }
}
