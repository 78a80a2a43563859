//! # hierax
//!
//! Intrinsic neural timescales, hierarchy-ordered brain states and linear
//! network control energy, for single subjects and for cohorts.
//!
//! The modules mirror the science and data flows one way through them:
//!
//! ```text
//! io  ->  timescale / hierarchy / control  ->  link  ->  stats  ->  subject  ->  export  ->  cohort  ->  report
//! ```
//!
//! * [`io`]: readers for the field's file formats behind one `PATH[:KEY]`
//!   input spec, validation of connectomes and series, atomic writers, the
//!   per-subject HDF5 file and provenance.
//! * [`timescale`]: autocorrelation and intrinsic-timescale estimators.
//! * [`hierarchy`]: ranking regions along a map and building brain states.
//! * [`control`]: network control energy of state transitions.
//! * [`link`]: pair tables of state transitions, energy asymmetries,
//!   hierarchical distance and timescale shifts, per-subject summaries.
//! * [`stats`]: correlations, permutation p-values, FDR, network nulls.
//! * [`subject`]: the per-subject job as a pipeline of stages returning one
//!   typed result ([`subject::analyse_subject`]).
//! * [`export`]: every output file, column and dataset name, defined once;
//!   output folders hierax owns; the data dictionary.
//! * [`cohort`]: participant lists, runs over many subjects, cohort tests and
//!   models.
//! * [`param`]: the one shape of a rejected parameter.
//! * `registry` (internal): the one mechanism behind every list of
//!   interchangeable methods (estimators, null models, surrogate methods).
//! * [`report`]: HTML reports with SVG figures.
//!
//! This is research software. Its results are not for clinical decisions.

#![forbid(unsafe_code)]

pub mod cohort;
pub mod control;
pub mod export;
pub mod hierarchy;
pub mod io;
pub(crate) mod linalg;
pub mod link;
pub mod param;
mod registry;
pub mod report;
pub mod stats;
pub mod subject;
pub mod timescale;

/// The hierax version written into every output file.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
