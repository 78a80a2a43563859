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
use ndarray::{Array2, IxDyn};

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

/// Read a delimited table as a matrix of numbers.
///
/// # Errors
/// [`IoError::Format`] naming the line and column of a cell that is not a
/// number, or of a row whose length differs from the first;
/// [`IoError::MissingKey`] when KEY names no column.
pub fn read(spec: &InputSpec, sep: Separator) -> Result<LoadedArray, IoError> {
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

    let mut col_names = header.map(|(line, h)| {
        let names: Vec<String> = h.iter().map(|c| c.trim().to_string()).collect();
        (line, names)
    });
    if let Some((line, names)) = &mut col_names {
        // A header over the row-name column may or may not name it.
        if names.len() == width {
            names.drain(..first);
        } else if names.len() != ncol {
            return Err(IoError::format(
                &spec.path,
                format!("line {line}: header has {} names for {ncol} data columns", names.len()),
            ));
        }
    }
    let col_names = col_names.map(|(_, n)| n);

    let mut values = Vec::with_capacity(rows.len() * ncol);
    let mut row_names = Vec::new();
    let mut missing = 0usize;
    for (line, row) in &rows {
        if row.len() != width {
            return Err(IoError::format(
                &spec.path,
                format!("line {line}: {} cells, expected {width} like the first data row", row.len()),
            ));
        }
        if has_row_names {
            row_names.push(row[0].trim().to_string());
        }
        for (j, cell) in row[first..].iter().enumerate() {
            match classify(cell) {
                Cell::Number(v) => values.push(v),
                Cell::Missing => {
                    missing += 1;
                    values.push(f64::NAN);
                }
                Cell::Text => {
                    return Err(IoError::format(
                        &spec.path,
                        format!("line {line}, column {}: `{}` is not a number", j + first + 1, cell.trim()),
                    ))
                }
            }
        }
    }
    let matrix = Array2::from_shape_vec((rows.len(), ncol), values).expect("row lengths checked");

    let mut out = match &spec.key {
        None => LoadedArray::new(spec.clone(), matrix.into_dyn(), StoredType::Text),
        Some(key) => {
            let names = col_names.as_ref().ok_or_else(|| IoError::MissingKey {
                path: spec.path.clone(),
                kind: "column",
                key: key.clone(),
                available: "(no header row)".into(),
            })?;
            let j = names.iter().position(|n| n == key).ok_or_else(|| IoError::MissingKey {
                path: spec.path.clone(),
                kind: "column",
                key: key.clone(),
                available: names.join(", "),
            })?;
            let col = matrix.column(j).to_owned();
            let n = col.len();
            let mut la = LoadedArray::new(
                spec.clone(),
                col.into_shape_with_order(IxDyn(&[n])).expect("1-D"),
                StoredType::Text,
            );
            la.col_names = Some(vec![key.clone()]);
            la
        }
    };
    if out.col_names.is_none() {
        out.col_names = col_names;
    }
    if has_row_names {
        out.row_names = Some(row_names);
    }
    if missing > 0 {
        out.notes.push(format!("{missing} missing cell(s) (empty, n/a, NA, NaN) read as NaN"));
    }
    Ok(out)
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
