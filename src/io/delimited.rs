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

use super::provenance::FileDigest;
use super::{read_bytes, InputSpec, IoError, LoadedArray, StoredType};
use ndarray::Array2;
use rayon::prelude::*;

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

/// A cell as a number, a missing value or text. Numbers are tried first
/// (nearly every cell is one) and nothing is allocated; Rust's parser reads
/// `nan` in any case as NaN, which is the missing-value token. ASCII blanks
/// are trimmed first (fast); other Unicode blanks only when that fails.
fn classify(cell: &str) -> Cell {
    let number = |v: f64| if v.is_nan() { Cell::Missing } else { Cell::Number(v) };
    if let Ok(v) = cell.trim_ascii().parse::<f64>() {
        return number(v);
    }
    let t = cell.trim();
    match t.parse::<f64>() {
        Ok(v) => number(v),
        Err(_) if ["", "n/a", "na", "null"].iter().any(|m| t.eq_ignore_ascii_case(m)) => Cell::Missing,
        Err(_) => Cell::Text,
    }
}

/// Split a line at every `delim` byte into `out`. A byte loop, because cells
/// are short and a vectorised search per cell costs more than it saves.
fn split_at_byte<'s>(line: &'s str, delim: u8, out: &mut Vec<&'s str>) {
    let mut start = 0;
    for (i, &b) in line.as_bytes().iter().enumerate() {
        if b == delim {
            out.push(&line[start..i]);
            start = i + 1;
        }
    }
    out.push(&line[start..]);
}

/// The records of a file, each with the 1-based line it starts on.
enum Records<'a> {
    /// No quote character in the file: a record is a line, split into cells
    /// when visited, so no cell is copied.
    Lines { sep: Separator, lines: Vec<(usize, &'a str)> },
    /// Quoted cells (which may hold separators or line breaks): records
    /// unquoted by the `csv` crate.
    Unquoted(Vec<(usize, Vec<String>)>),
}

impl<'a> Records<'a> {
    fn split(text: &'a str, sep: Separator, spec: &InputSpec) -> Result<Self, IoError> {
        if sep == Separator::Whitespace || !text.contains('"') {
            let delim = if sep == Separator::Comma { b',' } else { b'\t' };
            let blank = |line: &str| match sep {
                Separator::Whitespace => line.trim().is_empty(),
                _ => line.bytes().all(|b| b == delim || b.is_ascii_whitespace()),
            };
            let lines = text
                .lines()
                .enumerate()
                .filter(|(_, line)| !blank(line) && !line.trim_start().starts_with('#'))
                .map(|(i, line)| (i + 1, line))
                .collect();
            return Ok(Records::Lines { sep, lines });
        }
        let delim = if sep == Separator::Comma { b',' } else { b'\t' };
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delim)
            .has_headers(false)
            .flexible(true)
            .comment(Some(b'#'))
            .from_reader(text.as_bytes());
        let mut rows = Vec::new();
        for rec in reader.records() {
            let rec =
                rec.map_err(|e| IoError::format(&spec.path, format!("not valid delimited text: {e}")))?;
            let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
            if rec.iter().all(|c| c.trim().is_empty()) {
                continue;
            }
            rows.push((line, rec.iter().map(str::to_string).collect()));
        }
        Ok(Records::Unquoted(rows))
    }

    fn len(&self) -> usize {
        match self {
            Records::Lines { lines, .. } => lines.len(),
            Records::Unquoted(rows) => rows.len(),
        }
    }

    fn line(&self, i: usize) -> usize {
        match self {
            Records::Lines { lines, .. } => lines[i].0,
            Records::Unquoted(rows) => rows[i].0,
        }
    }

    /// The cells of record `i`, into `cells` (cleared first).
    fn cells<'s>(&'s self, i: usize, cells: &mut Vec<&'s str>) {
        cells.clear();
        match self {
            Records::Lines { sep: Separator::Whitespace, lines } => {
                cells.extend(lines[i].1.split_whitespace())
            }
            Records::Lines { sep: Separator::Comma, lines } => split_at_byte(lines[i].1, b',', cells),
            Records::Lines { sep: Separator::Tab, lines } => split_at_byte(lines[i].1, b'\t', cells),
            Records::Unquoted(rows) => cells.extend(rows[i].1.iter().map(String::as_str)),
        }
    }

    /// The first cell of record `i`, without splitting the rest of the line
    /// (the row-name check visits every record).
    fn first_cell(&self, i: usize) -> &str {
        match self {
            Records::Lines { sep: Separator::Whitespace, lines } => {
                lines[i].1.split_whitespace().next().unwrap_or("")
            }
            Records::Lines { sep, lines } => {
                let delim = if *sep == Separator::Comma { ',' } else { '\t' };
                lines[i].1.split(delim).next().unwrap_or("")
            }
            Records::Unquoted(rows) => rows[i].1.first().map_or("", String::as_str),
        }
    }
}

/// A delimited file split into header, row names and records, before any
/// data cell is read as a number.
struct TextTable<'a> {
    col_names: Option<Vec<String>>,
    row_names: Option<Vec<String>>,
    records: Records<'a>,
    /// Index of the first data record (1 after a header).
    start: usize,
    /// Cells per record, row-name column included.
    width: usize,
    ncol: usize,
    /// 1-based column offset of the first data column in the file.
    first: usize,
}

impl TextTable<'_> {
    fn data_rows(&self) -> std::ops::Range<usize> {
        self.start..self.records.len()
    }

    /// The data cells of record `i`, checked to be as many as the first
    /// data row's.
    fn data_cells<'s>(&'s self, spec: &InputSpec, i: usize, cells: &mut Vec<&'s str>) -> Result<(), IoError> {
        self.records.cells(i, cells);
        if cells.len() != self.width {
            return Err(IoError::format(
                &spec.path,
                format!(
                    "line {}: {} cells, expected {} like the first data row",
                    self.records.line(i),
                    cells.len(),
                    self.width
                ),
            ));
        }
        cells.drain(..self.first);
        Ok(())
    }
}

/// The file's text: UTF-8, a byte-order mark dropped.
fn as_text<'a>(spec: &InputSpec, bytes: &'a [u8]) -> Result<&'a str, IoError> {
    let text = std::str::from_utf8(bytes).map_err(|_| IoError::format(&spec.path, "is not UTF-8 text"))?;
    Ok(text.strip_prefix('\u{feff}').unwrap_or(text))
}

fn parse_table<'a>(spec: &InputSpec, sep: Separator, text: &'a str) -> Result<TextTable<'a>, IoError> {
    let records = Records::split(text, sep, spec)?;
    if records.len() == 0 {
        return Err(IoError::format(&spec.path, "holds no data rows"));
    }
    let mut cells = Vec::new();
    records.cells(0, &mut cells);
    let header_row = cells.iter().any(|c| matches!(classify(c), Cell::Text));
    let start = usize::from(header_row);
    if records.len() == start {
        return Err(IoError::format(&spec.path, "has a header but no data rows"));
    }
    let has_row_names = (start..records.len()).all(|i| matches!(classify(records.first_cell(i)), Cell::Text));
    let first = usize::from(has_row_names);
    records.cells(start, &mut cells);
    let width = cells.len();
    if width <= first {
        return Err(IoError::format(&spec.path, "has row names but no numeric columns"));
    }
    let ncol = width - first;
    let col_names = if header_row {
        records.cells(0, &mut cells);
        let mut names: Vec<String> = cells.iter().map(|c| c.trim().to_string()).collect();
        // A header over the row-name column may or may not name it.
        if names.len() == width {
            names.drain(..first);
        } else if names.len() != ncol {
            return Err(IoError::format(
                &spec.path,
                format!("line {}: header has {} names for {ncol} data columns", records.line(0), names.len()),
            ));
        }
        Some(names)
    } else {
        None
    };
    let row_names = has_row_names
        .then(|| (start..records.len()).map(|i| records.first_cell(i).trim().to_string()).collect());
    Ok(TextTable { col_names, row_names, records, start, width, ncol, first })
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

/// Rows per parallel task: enough that splitting costs less than parsing.
const ROWS_PER_TASK: usize = 16;

/// The selected columns of every data row as numbers, rows parsed in
/// parallel into their place in one buffer; returns the values and the
/// count of missing cells. The error reported is the first in file order.
fn parse_numbers(spec: &InputSpec, t: &TextTable, cols: &[usize]) -> Result<(Vec<f64>, usize), IoError> {
    let nrow = t.data_rows().len();
    let mut values = vec![0.0; nrow * cols.len()];
    let outcomes: Vec<Result<usize, IoError>> = values
        .par_chunks_mut(cols.len().max(1))
        .with_min_len(ROWS_PER_TASK)
        .enumerate()
        .map_init(Vec::new, |cells, (r, out)| {
            let i = t.start + r;
            t.data_cells(spec, i, cells)?;
            let mut missing = 0usize;
            for (slot, &j) in out.iter_mut().zip(cols) {
                *slot = match classify(cells[j]) {
                    Cell::Number(v) => v,
                    Cell::Missing => {
                        missing += 1;
                        f64::NAN
                    }
                    Cell::Text => {
                        return Err(IoError::format(
                            &spec.path,
                            format!(
                                "line {}, column {}: `{}` is not a number",
                                t.records.line(i),
                                j + t.first + 1,
                                cells[j].trim()
                            ),
                        ))
                    }
                };
            }
            Ok(missing)
        })
        .collect();
    let mut missing = 0;
    for o in outcomes {
        missing += o?;
    }
    Ok((values, missing))
}

/// Read a delimited table as a matrix of numbers. A KEY naming one column
/// gives a vector; a KEY naming several (`x,y,z`) gives those columns in that
/// order; only the selected columns need to be numeric. The file's SHA-256
/// is taken from the same bytes, beside the parsing.
///
/// # Errors
/// [`IoError::Format`] naming the line and column of a cell that is not a
/// number, or of a row whose length differs from the first;
/// [`IoError::MissingKey`] when KEY names no column.
pub fn read(spec: &InputSpec, sep: Separator) -> Result<LoadedArray, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let (digest, read) = rayon::join(|| FileDigest::of_bytes(&bytes), || read_text(spec, sep, &bytes));
    let mut out = read?;
    out.digest = Some(digest);
    Ok(out)
}

fn read_text(spec: &InputSpec, sep: Separator, bytes: &[u8]) -> Result<LoadedArray, IoError> {
    let t = parse_table(spec, sep, as_text(spec, bytes)?)?;
    let cols = select_columns(spec, &t)?;
    let (values, missing) = parse_numbers(spec, &t, &cols)?;
    let nrow = t.data_rows().len();
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

/// Every data row's cells, row lengths checked, for the text readers below.
fn text_rows<'s>(spec: &InputSpec, t: &'s TextTable) -> Result<Vec<Vec<&'s str>>, IoError> {
    t.data_rows()
        .map(|i| {
            let mut cells = Vec::new();
            t.data_cells(spec, i, &mut cells)?;
            Ok(cells)
        })
        .collect()
}

/// Describe each data column of a delimited table as `name (numeric)` or
/// `name (text)`, for tables that mix both (e.g. a regions table with a
/// hemisphere column): select numeric ones with `PATH:col1,col2`.
///
/// # Errors
/// The errors of [`read`] for a malformed file.
pub fn describe_columns(spec: &InputSpec, sep: Separator) -> Result<Vec<String>, IoError> {
    let bytes = read_bytes(&spec.path)?;
    let t = parse_table(spec, sep, as_text(spec, &bytes)?)?;
    let rows = text_rows(spec, &t)?;
    let names: Vec<String> = t
        .col_names
        .clone()
        .unwrap_or_else(|| (1..=t.ncol).map(|j| format!("column {}", j + t.first)).collect());
    Ok(names
        .iter()
        .enumerate()
        .map(|(j, n)| {
            let text = rows.iter().any(|r| matches!(classify(r[j]), Cell::Text));
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
    let bytes = read_bytes(&spec.path)?;
    let t = parse_table(spec, sep, as_text(spec, &bytes)?)?;
    let cols = select_columns(spec, &t)?;
    if spec.key.is_none() || cols.len() != 1 {
        return Err(IoError::Spec {
            spec: spec.to_string(),
            reason: "name exactly one column as PATH:COLUMN".into(),
        });
    }
    Ok(text_rows(spec, &t)?.iter().map(|r| r[cols[0]].trim().to_string()).collect())
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
    fn quoted_cells_crlf_lines_and_blanks_read_as_without_them() {
        // The same matrix written four ways: plain, CRLF with an indented comment, quoted cells
        // (read by the csv crate), and padded with ASCII and Unicode blanks.
        let plain = "a,b\n1,2.5\n-3e2,nan\n";
        let crlf = "  # made by hand\r\na,b\r\n1,2.5\r\n\r\n-3e2,nan\r\n";
        let quoted = "\"a\",\"b\"\n\"1\",2.5\n-3e2,\"nan\"\n";
        let padded = "a , b\n 1 ,\u{a0}2.5\n-3e2\t, NaN \n";
        let (_d, plain_spec) = write_tmp("p.csv", plain);
        let want = read(&plain_spec, Separator::Comma).unwrap();
        assert_eq!(want.data.shape(), &[2, 2]);
        let (sha, bytes) = crate::io::provenance::sha256_file(&plain_spec.path).unwrap();
        assert_eq!(want.digest, Some(FileDigest { sha256: sha, bytes }));
        for body in [crlf, quoted, padded] {
            let (_d, spec) = write_tmp("m.csv", body);
            let got = read(&spec, Separator::Comma).unwrap();
            assert_eq!(got.col_names, want.col_names, "{body:?}");
            assert_eq!(got.data.shape(), want.data.shape(), "{body:?}");
            for (g, w) in got.data.iter().zip(want.data.iter()) {
                assert!(g == w || (g.is_nan() && w.is_nan()), "{body:?}: {g} vs {w}");
            }
        }
    }

    #[test]
    fn the_first_bad_line_is_reported_when_rows_are_parsed_in_parallel() {
        // 2,000 rows parse in many parallel tasks; two bad rows, the earlier must be named.
        let mut body = String::new();
        for i in 1..=2000 {
            body.push_str(&match i {
                700 => "1,oops\n".to_string(),
                1500 => "1\n".to_string(),
                _ => format!("{i},{}\n", i * 2),
            });
        }
        let (_d, spec) = write_tmp("m.csv", &body);
        let e = read(&spec, Separator::Comma).unwrap_err().to_string();
        assert!(e.contains("line 700, column 2: `oops` is not a number"), "{e}");
        let la = read(&write_tmp("ok.csv", "1,2\n3,4\n").1, Separator::Comma).unwrap();
        assert_eq!(la.data.as_slice().unwrap(), &[1.0, 2.0, 3.0, 4.0]);
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
