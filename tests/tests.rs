//! All integration tests, built into one binary (see DEVELOPERS.md).

mod cli;
mod timescale;
mod util;
