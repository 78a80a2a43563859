//! All integration tests, built into one binary (see DEVELOPERS.md).

mod bad_input;
mod bad_input_safety;
mod cli;
mod cohort;
mod control;
mod demo_data;
mod hierarchy;
mod io_arrays;
mod io_h5;
mod link;
mod nulls;
mod numbering;
mod stats;
mod subject;
mod timescale;
mod util;
