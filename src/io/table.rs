//! Tidy tables (one row per observation) written as CSV, and JSON summaries.
//!
//! Conventions: comma separated, a header row, numbers in Rust's shortest
//! round-trip form (so a float64 reads back bit-exactly in pandas or R),
//! missing values as `NaN` (read as missing by pandas and R), text quoted
//! only when needed.

use super::atomic::write_atomic;
use super::IoError;
use serde::Serialize;
use std::path::Path;

/// One column of a [`Table`].
#[derive(Clone, Debug, PartialEq)]
pub enum Column {
    /// Floating-point values; NaN is written as `NaN`.
    F64(Vec<f64>),
    /// Integer values.
    I64(Vec<i64>),
    /// Text values.
    Str(Vec<String>),
    /// Integers that may be missing (`NaN` in CSV, NaN in a float64 HDF5 dataset).
    OptI64(Vec<Option<i64>>),
}

impl Column {
    fn len(&self) -> usize {
        match self {
            Column::F64(v) => v.len(),
            Column::I64(v) => v.len(),
            Column::Str(v) => v.len(),
            Column::OptI64(v) => v.len(),
        }
    }

    fn cell(&self, i: usize) -> String {
        match self {
            Column::F64(v) => format_f64(v[i]),
            Column::I64(v) => v[i].to_string(),
            Column::Str(v) => v[i].clone(),
            Column::OptI64(v) => v[i].map_or_else(|| "NaN".to_string(), |x| x.to_string()),
        }
    }
}

/// Format a float for a CSV cell: shortest round-trip digits, `NaN`, `inf`, `-inf`.
pub fn format_f64(v: f64) -> String {
    if v.is_nan() {
        "NaN".into()
    } else if v.is_infinite() {
        if v > 0.0 {
            "inf".into()
        } else {
            "-inf".into()
        }
    } else {
        format!("{v:?}")
    }
}

/// A table of named, equal-length columns.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Table {
    columns: Vec<(String, Column)>,
}

impl Table {
    /// An empty table.
    pub fn new() -> Self {
        Table::default()
    }

    /// Add a column (builder style).
    ///
    /// # Panics
    /// When the column's length differs from the columns already present:
    /// that is a programming error inside hierax, never a user-input error.
    pub fn with(mut self, name: &str, col: Column) -> Self {
        if let Some((_, first)) = self.columns.first() {
            assert_eq!(first.len(), col.len(), "column `{name}` has a different length");
        }
        self.columns.push((name.to_string(), col));
        self
    }

    /// Number of rows.
    pub fn n_rows(&self) -> usize {
        self.columns.first().map_or(0, |(_, c)| c.len())
    }

    /// Column names in order.
    pub fn names(&self) -> Vec<&str> {
        self.columns.iter().map(|(n, _)| n.as_str()).collect()
    }

    /// The column called `name`.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|(n, _)| n == name).map(|(_, c)| c)
    }

    /// Write as CSV, atomically.
    ///
    /// # Errors
    /// [`IoError::Os`] naming `path`.
    pub fn write_csv(&self, path: &Path) -> Result<(), IoError> {
        write_atomic(path, |w| {
            let mut csv = csv::Writer::from_writer(w);
            csv.write_record(self.columns.iter().map(|(n, _)| n.as_str()))?;
            for i in 0..self.n_rows() {
                csv.write_record(self.columns.iter().map(|(_, c)| c.cell(i)))?;
            }
            csv.flush()?;
            Ok(())
        })
    }
}

/// Write any serialisable value as pretty JSON, atomically. Non-finite
/// floats become `null` (JSON has no NaN).
///
/// # Errors
/// [`IoError::Os`] naming `path`.
pub fn write_json<T: Serialize>(path: &Path, value: &T) -> Result<(), IoError> {
    write_atomic(path, |w| {
        serde_json::to_writer_pretty(&mut *w, value).map_err(std::io::Error::other)?;
        w.write_all(b"\n")
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_round_trips_floats_and_marks_nan() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        let x = 0.1 + 0.2;
        Table::new()
            .with("region", Column::Str(vec!["a,b".into(), "c".into()]))
            .with("tau_s", Column::F64(vec![x, f64::NAN]))
            .with("frames", Column::I64(vec![3, 4]))
            .write_csv(&p)
            .unwrap();
        let text = std::fs::read_to_string(&p).unwrap();
        assert_eq!(text, "region,tau_s,frames\n\"a,b\",0.30000000000000004,3\nc,NaN,4\n");
        assert_eq!("0.30000000000000004".parse::<f64>().unwrap().to_bits(), x.to_bits());
    }
}
