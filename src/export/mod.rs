//! Writing results: the one place that spells file, column, key and dataset
//! names ([`schema`]), numbers states and regions (from 1, as people count),
//! names regions by default, and owns output folders ([`folder`]).
//!
//! Results reach a format through a [`Sink`]: CSV ([`CsvSink`]) and HDF5
//! ([`H5Sink`]) today; a new format is one more sink. The data dictionary
//! `docs/outputs.md` is generated from the schemas ([`dictionary`]).

pub mod cohort;
pub mod dictionary;
pub mod energy;
pub mod folder;
pub mod schema;
pub mod states;
pub mod subject;

use crate::io::hdf5::{AttrValue, Group};
use crate::io::table::Table;
use crate::io::IoError;
use schema::TableDef;
use std::path::{Path, PathBuf};

/// The number people see for a 0-based index: states, regions, ranks and
/// nulls are all counted from 1 in every output.
pub fn number(index: usize) -> i64 {
    index as i64 + 1
}

pub use crate::io::default_region_names;

/// A destination for tables.
pub trait Sink {
    /// Write one table of `def`.
    ///
    /// # Errors
    /// [`IoError`] when writing fails.
    fn table(&mut self, def: &'static TableDef, table: &Table) -> Result<(), IoError>;
}

/// Tables as CSV files `<prefix>_<stem>.csv` (or `<stem>.csv`) in a folder.
pub struct CsvSink {
    dir: PathBuf,
    prefix: String,
    written: Vec<PathBuf>,
}

impl CsvSink {
    /// CSV files in `dir`, each name starting with `prefix_` unless `prefix` is empty.
    pub fn new(dir: &Path, prefix: &str) -> Self {
        CsvSink { dir: dir.to_path_buf(), prefix: prefix.to_string(), written: Vec::new() }
    }

    /// The file a table of `def` goes to.
    pub fn path_of(&self, def: &TableDef) -> PathBuf {
        if self.prefix.is_empty() {
            self.dir.join(format!("{}.csv", def.stem))
        } else {
            self.dir.join(format!("{}_{}.csv", self.prefix, def.stem))
        }
    }

    /// Files written so far.
    pub fn written(&self) -> &[PathBuf] {
        &self.written
    }
}

impl Sink for CsvSink {
    fn table(&mut self, def: &'static TableDef, table: &Table) -> Result<(), IoError> {
        let path = self.path_of(def);
        table.write_csv(&path)?;
        self.written.push(path);
        Ok(())
    }
}

/// Tables as HDF5 groups at each definition's `h5_path`, one dataset per
/// column with a `columns` attribute; other datasets are added to the named
/// groups directly. [`H5Sink::finish`] gives the root group to write.
pub struct H5Sink {
    root: Group,
    groups: Vec<Group>,
}

impl H5Sink {
    /// An empty file tree.
    pub fn new() -> Self {
        H5Sink { root: Group::new("/"), groups: Vec::new() }
    }

    /// The root group (for attributes).
    pub fn root_mut(&mut self) -> &mut Group {
        &mut self.root
    }

    /// The top-level group `name`, created when first asked for.
    pub fn group(&mut self, name: &str) -> &mut Group {
        let i = match self.groups.iter().position(|g| g.name() == name) {
            Some(i) => i,
            None => {
                self.groups.push(Group::new(name));
                self.groups.len() - 1
            }
        };
        &mut self.groups[i]
    }

    /// The assembled tree.
    pub fn finish(mut self) -> Group {
        for g in self.groups.drain(..) {
            self.root.add_group(g);
        }
        self.root
    }
}

impl Default for H5Sink {
    fn default() -> Self {
        H5Sink::new()
    }
}

impl Sink for H5Sink {
    fn table(&mut self, def: &'static TableDef, table: &Table) -> Result<(), IoError> {
        let Some(path) = def.h5_path else { return Ok(()) };
        let (group, name) = path.split_once('/').unwrap_or(("", path));
        let g = self.group(group);
        g.add_table(name, table).set_attr("row", AttrValue::Str(def.row.to_string()));
        Ok(())
    }
}

/// Several sinks fed the same tables.
pub struct Tee<'a>(pub Vec<&'a mut dyn Sink>);

impl Sink for Tee<'_> {
    fn table(&mut self, def: &'static TableDef, table: &Table) -> Result<(), IoError> {
        for s in self.0.iter_mut() {
            s.table(def, table)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbering_and_default_names() {
        assert_eq!(number(0), 1);
        assert_eq!(default_region_names(2), vec!["region-001", "region-002"]);
    }
}
