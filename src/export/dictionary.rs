//! The data dictionary, generated from the schemas so it cannot drift from
//! the code: every file, column, unit and meaning, and every outcome.

use super::schema::ALL_TABLES;
use crate::subject::Outcome;
use std::fmt::Write;

/// `docs/outputs.md` as Markdown.
pub fn markdown() -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# hierax outputs: the data dictionary\n");
    let _ = writeln!(
        s,
        "Generated from `src/export/schema.rs` by the test `data_dictionary_is_current` (run it with \
         `HIERAX_BLESS=1` to rewrite this file). Do not edit by hand.\n"
    );
    let _ = writeln!(
        s,
        "**Conventions.** States, regions, ranks and nulls are counted from 1 in every file. State 1 is \
         the lowest bin of the hierarchy map (the most sensory end with the default ascending order). A \
         transition i -> j is *bottom-up* when i < j. The *asymmetry* of a pair is E[i,j] - E[j,i]: negative \
         on a bottom-up pair means the bottom-up transition is the cheaper one. Missing numbers are `NaN`. \
         Times are in seconds (`_s`). Energies are in the units of the state vectors squared times the \
         inverse Gramian (dimensionless for 0/1 states).\n"
    );
    let _ = writeln!(
        s,
        "Per subject, `sub-<label>/` holds `sub-<label>_<stem>.csv` for each table below marked *subject*, \
         `sub-<label>_summary.json` and `sub-<label>_hierax.h5` (each table also as an HDF5 group at the path \
         shown, one dataset per column, with a `columns` attribute). Per cohort, the output folder holds the \
         tables marked *cohort*, `cohort.json` and `report.html`. Every folder hierax writes carries \
         `.hierax-output.json`, the marker that lets hierax replace it (and nothing else).\n"
    );
    for t in ALL_TABLES {
        let scope = if t.h5_path.is_some() {
            "subject"
        } else if t.row.contains("(hierax states)") {
            "hierax states"
        } else if t.row.contains("(hierax energy)") {
            "hierax energy"
        } else {
            "cohort"
        };
        let _ = writeln!(s, "## `{}` ({scope})\n", t.stem);
        let _ = write!(s, "One row: {}.", t.row);
        if let Some(p) = t.h5_path {
            let _ = write!(s, " HDF5: `{p}`.");
        }
        let _ = writeln!(s);
        let _ = writeln!(s, "\n| column | unit | meaning |\n|---|---|---|");
        for c in t.columns {
            let _ = writeln!(s, "| `{}` | {} | {} |", c.name, c.unit, c.description);
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(s, "## Timescale estimators\n");
    let _ = writeln!(
        s,
        "The `{{estimator columns}}` of `timescales` (from `src/timescale/registry.rs`). A timescale column \
         (unit s) is reported only when its status is ok; the other columns are the fit's parameters, \
         shown whenever the fit converged so the reason for a flag can be read. With \
         `--bias-correction ar1`, `ar1_tau_s`, `ar1_tau_corrected_s` and `ar1_status` follow.\n"
    );
    let _ = writeln!(s, "| estimator | status prefix | column | unit | meaning |\n|---|---|---|---|---|");
    for d in crate::timescale::REGISTRY {
        for c in d.timescales.iter().chain(d.details) {
            let _ =
                writeln!(s, "| `{}` | `{}` | `{}` | {} | {} |", d.name, d.prefix, c.name, c.unit, c.meaning);
        }
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "## Outcomes\n");
    let _ = writeln!(
        s,
        "One number per subject each; `{{outcome}}` columns above take these names. With an undirected \
         network and every node driven equally, the asymmetry is a pure potential difference: \
         `asymmetry_distance_slope` then equals 3/(k+1) x `bottom_up_minus_top_down` and \
         `asymmetry_potential_share` is 1, so neither is tested or modelled as a finding (the summary and \
         `cohort.json` say so).\n"
    );
    let _ = writeln!(s, "| outcome | meaning |\n|---|---|");
    for o in Outcome::ALL {
        let _ = writeln!(s, "| `{}` | {} |", o.name(), o.description());
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `docs/outputs.md` must be what the schemas say; `HIERAX_BLESS=1` rewrites it.
    #[test]
    fn data_dictionary_is_current() {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/outputs.md");
        let want = markdown();
        if std::env::var_os("HIERAX_BLESS").is_some() {
            std::fs::create_dir_all(path.parent().unwrap()).unwrap();
            std::fs::write(&path, &want).unwrap();
        }
        let have = std::fs::read_to_string(&path).unwrap_or_default();
        assert!(
            have == want,
            "docs/outputs.md is stale: run HIERAX_BLESS=1 cargo test data_dictionary_is_current"
        );
    }
}
