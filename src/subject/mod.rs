//! The whole per-subject job, as a library pipeline that does no I/O beyond
//! reading its inputs ([`LoadedSubject::load`]):
//!
//! 1. timescales ([`stages::timescales`], module `timescale`): censor frames by
//!    framewise displacement (Power et al. 2012), regress confounds, estimate
//!    each region's intrinsic timescale;
//! 2. states ([`stages::states`], module `hierarchy`): rank the map into k
//!    equal-count states;
//! 3. control ([`stages::control`], module `control`): the k × k
//!    minimum-energy matrix and node metrics from one decomposition;
//! 4. link ([`stages::link`], module `link`): pair table, summaries, the
//!    asymmetry split into a potential and a circulation;
//! 5. network nulls ([`stages::network_nulls`], module `stats::nulls`);
//! 6. map nulls ([`stages::map_nulls`], `hierarchy` surrogates);
//! 7. tests ([`stages::null_tests`], module `stats::inference`): permutation
//!    p-values and Benjamini–Hochberg FDR over the family of tests.
//!
//! [`analyse_subject`] runs them in order and returns one typed
//! [`SubjectResult`]; the `export` module writes it. Outcomes that are fixed
//! functions of others under the chosen settings are named as such
//! ([`outcomes`]) and never enter the test family as second findings.

pub mod config;
mod error;
pub mod load;
pub mod outcomes;
pub mod record;
pub mod result;
pub mod stages;

pub use config::{NullModel, SubjectConfig, ValidSubjectConfig};
pub use error::SubjectError;
pub use load::{
    check_entity, check_study_inputs, check_unit_name, hemisphere_codes, LoadedSubject, SubjectInputs,
};
pub use outcomes::{NullFamily, Outcome, OutcomeRole};
pub use record::{
    read_record, read_written_unit, SubjectRecord, SubjectStatus, UnitFailure, UnitStage, UnitStatus,
    WrittenUnit,
};
pub use result::{NullTest, SubjectResult};

use crate::control::Par;

/// Run the per-subject job on loaded inputs. `par` is the parallelism of the
/// network's decomposition; nulls run on the caller's rayon pool (a cohort
/// runs its subjects on the same pool, so no pool is ever nested).
///
/// # Errors
/// [`SubjectError`] naming the stage, the input at fault and the cause.
pub fn analyse_subject(
    s: &LoadedSubject,
    cfg: &ValidSubjectConfig,
    par: Par,
) -> Result<SubjectResult, SubjectError> {
    let mut notes = s.notes.clone();
    let timescales = stages::timescales(s, cfg)?;
    if timescales.n_flagged > 0 {
        notes.push(format!(
            "timescales: {} region(s) have no valid {} (see the {}_status column)",
            timescales.n_flagged,
            timescales.column,
            timescales.estimator.prefix()
        ));
    }
    let states = stages::states(s, cfg)?;
    notes.extend(states.notes.iter().map(|n| format!("states: {n}")));
    let (control, sys) = stages::control(s, &states, cfg, par)?;
    notes.extend(control.info.warnings.iter().map(|w| format!("control: {w}")));
    let link = stages::link(&s.map, &states, &timescales.tau, &control.energy)?;
    let share = link.summary.asymmetry_decomposition.potential_share;
    if cfg.asymmetry_is_potential() {
        notes.push(format!(
            "link: the asymmetry is a pure potential difference under these settings (undirected network, every \
             node driven equally), so asymmetry_distance_slope = 3/(k+1) x bottom_up_minus_top_down and is not \
             tested as a second finding (potential share {share:.12})"
        ));
        let kept = share > 1.0 - 1e-6;
        if !kept {
            notes.push(format!(
                "link: warning: the potential share {share:.9} should be 1 under these settings; the energies \
                 may have lost precision (see gramian_condition)"
            ));
        }
    }
    if let Some(p) = &control.closed_form_potential {
        // The Hodge potential must equal the closed form up to its constant: a check of the energies.
        let phi = &link.summary.asymmetry_decomposition.potential;
        let mean = p.iter().sum::<f64>() / p.len() as f64;
        let scale = p.iter().fold(0.0f64, |m, v| m.max((v - mean).abs())).max(f64::MIN_POSITIVE);
        let err = p.iter().zip(phi).fold(0.0f64, |m, (a, b)| m.max((a - mean - b).abs())) / scale;
        let close = err <= 1e-6;
        if !close {
            notes.push(format!(
                "link: warning: the asymmetry potential differs from its closed form by {err:.2e} (relative); the \
                 energies may have lost precision"
            ));
        }
    }
    let network_nulls = stages::network_nulls(s, &states, &link, cfg)?;
    let map_nulls = stages::map_nulls(s, &sys, &timescales.tau, cfg)?;
    for run in network_nulls.iter().chain(map_nulls.iter()) {
        if run.rows.len() < run.requested {
            notes.push(format!(
                "{} nulls: {} of {} were unusable and skipped",
                run.family.label(),
                run.requested - run.rows.len(),
                run.requested
            ));
        }
    }
    let observed: Vec<(Outcome, f64)> = {
        let src = outcomes::OutcomeSource {
            summary: &link.summary,
            timescale_hierarchy_spearman: link.timescale_hierarchy.as_ref().map(|c| c.r),
        };
        Outcome::ALL.iter().map(|o| (*o, o.value(&src))).collect()
    };
    let runs: Vec<&result::NullRun> = network_nulls.iter().chain(map_nulls.iter()).collect();
    let tests = stages::null_tests(&observed, &runs)?;
    Ok(SubjectResult {
        subject: s.subject.clone(),
        names: s.names.clone(),
        covariates: s.covariates.clone(),
        inputs: s.inputs.clone(),
        config: cfg.clone(),
        n_frames: s.series.nrows(),
        map: s.map.clone(),
        timescales,
        states,
        control,
        link,
        network_nulls,
        map_nulls,
        tests,
        notes,
    })
}
