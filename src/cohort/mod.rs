//! Cohorts: which participants there are, where their files live, and running
//! the per-subject job over all of them. This module only orchestrates; every
//! computation lives in the science modules it calls.
//!
//! A cohort is described by a BIDS-style `participants.tsv` (column
//! `participant_id` = `sub-<label>`, plus covariates such as `age` and `sex`)
//! and filename patterns that locate each participant's inputs, e.g.
//! `sub-{id}/sub-{id}_connectome.csv` where `{id}` is the label without the
//! `sub-` prefix.

mod error;
pub mod manifest;
pub mod model;
pub mod run;
pub mod subject;

pub use error::CohortError;
pub use manifest::{Manifest, Participant, Patterns};
