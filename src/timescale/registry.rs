//! The timescale estimators, each defined once by an [`EstimatorDef`]: its
//! name, its columns and the function that computes it. [`REGISTRY`] lists
//! them in table order; the command line, the tables, the data dictionary
//! and the per-region dispatch all read this list, so a new estimator is
//! its definition plus one line here.

use super::estimators::{EstimateStatus, TauBounds};
use super::params::ValidTimescaleParams;

/// What an estimator reads for one region (or one bootstrap replicate).
#[derive(Clone, Copy, Debug)]
pub struct EstimatorInput<'a> {
    /// Sample ACF from lag 0 (`acf[0] = 1`) to the lag bound.
    pub acf: &'a [f64],
    /// Repetition time, s.
    pub tr_s: f64,
    /// The τ this series can support ([`TauBounds`]); a fitted or model
    /// timescale outside is `implausible_fit`.
    pub bounds: TauBounds,
    /// The analysis parameters (fit lags, knee band, ...).
    pub params: &'a ValidTimescaleParams,
    /// Welch spectrum `(frequencies in Hz, density)`, computed when an
    /// estimator in use sets [`EstimatorDef::needs_spectrum`]; `None` when no
    /// segment was fully valid.
    pub spectrum: Option<(&'a [f64], &'a [f64])>,
}

/// One output column of an estimator.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct EstimatorColumn {
    /// Column name in every table (`acw50_interp_s`).
    pub name: &'static str,
    /// Unit (`s`, `Hz`, `1`, `lag`).
    pub unit: &'static str,
    /// What it holds.
    pub meaning: &'static str,
}

/// The columns of an estimator in a definition.
pub const fn col(name: &'static str, unit: &'static str, meaning: &'static str) -> EstimatorColumn {
    EstimatorColumn { name, unit, meaning }
}

/// A timescale estimator, defined once.
#[derive(Clone, Copy, Debug)]
pub struct EstimatorDef {
    /// Name on the command line and in provenance (`acw50`).
    pub name: &'static str,
    /// Prefix of its `<prefix>_status` column.
    pub prefix: &'static str,
    /// One line with its formula's source, for `--help` and the data dictionary.
    pub summary: &'static str,
    /// Timescale columns, seconds: reported only when the status is ok, and
    /// the quantities the bootstrap resamples.
    pub timescales: &'static [EstimatorColumn],
    /// Other columns (fit parameters), shown whenever computed so the
    /// reason for a flag can be read.
    pub details: &'static [EstimatorColumn],
    /// Whether it reads the Welch spectrum.
    pub needs_spectrum: bool,
    /// Fill `out` (its timescale columns, then its details, in order;
    /// NaN on entry) and return ok, or the status that says why the values
    /// are not to be used (values written stay, for inspection).
    pub estimate: fn(&EstimatorInput<'_>, &mut [f64]) -> Result<(), EstimateStatus>,
}

impl EstimatorDef {
    /// Value slots: timescale columns plus details.
    pub const fn slots(&self) -> usize {
        self.timescales.len() + self.details.len()
    }
}

/// Every estimator, in table order. Adding one: its [`EstimatorDef`] (in
/// [`estimators`](super::estimators) or a file beside it) and one line here.
pub const REGISTRY: &[&EstimatorDef] = &[
    &super::estimators::INITIAL_POSITIVE_SUM,
    &super::estimators::ACW50,
    &super::estimators::ACW0,
    &super::estimators::EXP_FIT,
    &super::estimators::SPECTRAL_KNEE,
];

/// Value slots of all estimators together.
pub(crate) const SLOTS: usize = {
    let mut total = 0;
    let mut i = 0;
    while i < REGISTRY.len() {
        total += REGISTRY[i].slots();
        i += 1;
    }
    total
};

/// First value slot of estimator `i` (in [`REGISTRY`] order).
pub(crate) const fn offset(i: usize) -> usize {
    let mut total = 0;
    let mut j = 0;
    while j < i {
        total += REGISTRY[j].slots();
        j += 1;
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_prefixes_and_columns_are_unique() {
        let unique = |mut v: Vec<&str>| {
            let n = v.len();
            v.sort_unstable();
            v.dedup();
            v.len() == n
        };
        assert!(unique(REGISTRY.iter().map(|d| d.name).collect()), "an estimator name is used twice");
        // `ar1` is the prefix of the bias-correction columns.
        let prefixes: Vec<&str> = REGISTRY.iter().map(|d| d.prefix).chain(["ar1"]).collect();
        assert!(unique(prefixes), "a status prefix is used twice");
        let columns: Vec<&str> =
            REGISTRY.iter().flat_map(|d| d.timescales.iter().chain(d.details).map(|c| c.name)).collect();
        assert_eq!(SLOTS, columns.len());
        assert!(unique(columns), "a column name is used twice");
        assert!(REGISTRY
            .iter()
            .all(|d| d.timescales.iter().all(|c| c.unit == "s" && c.name.ends_with("_s"))));
        assert_eq!(offset(REGISTRY.len()), SLOTS);
    }
}
