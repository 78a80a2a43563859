//! Statistics for relations between maps, pair tables and cohorts.
//!
//! * [`correlation`]: Pearson and Spearman coefficients with their
//!   t-distribution p-values and Fisher z intervals.
//! * [`inference`]: permutation p-values (Phipson & Smyth 2010) and the
//!   Benjamini–Hochberg false discovery rate (1995).
//! * [`regression`]: least-squares lines.
//! * [`nulls`]: rewired networks (degree-, strength- and geometry-preserving).
//!
//! Conventions are those of scipy 1.14 / statsmodels 0.14 unless stated, and
//! the tests compare against fixtures produced by them.

pub mod correlation;
mod error;
pub mod inference;
pub mod nulls;
pub mod regression;

pub use error::StatsError;
