//! Reports: self-contained HTML pages with inline SVG figures.
//!
//! No mathematics lives here; figures draw numbers computed elsewhere. The
//! output needs no network and no JavaScript, so it opens from a file on any
//! machine and can be archived with the results.

pub mod cohort;
pub mod html;
pub mod svg;
