//! Command-line parsing. Each command has its own file holding its clap
//! arguments and a `run` that turns them into library calls.

mod cohort;
mod demo;
mod energy;
mod gradient;
mod inspect;
mod link;
mod states;
mod subject;
mod surrogates;
mod timescales;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// Intrinsic timescales, hierarchy states and network control energy.
///
/// Research software: results are not for clinical decisions.
#[derive(Debug, Parser)]
#[command(name = "hierax", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    Inspect(inspect::InspectArgs),
    // Negative numbers are values (e.g. --fd-threshold -1 reaches the range check).
    #[command(allow_negative_numbers = true)]
    Timescales(Box<timescales::TimescalesArgs>),
    // Negative numbers are values (e.g. --fd-threshold -1 reaches the range check).
    #[command(allow_negative_numbers = true)]
    States(states::StatesArgs),
    Gradient(gradient::GradientArgs),
    Surrogates(surrogates::SurrogatesArgs),
    // Negative numbers are values (e.g. --fd-threshold -1 reaches the range check).
    #[command(allow_negative_numbers = true)]
    Energy(energy::EnergyArgs),
    // Negative numbers are values (e.g. --fd-threshold -1 reaches the range check).
    #[command(allow_negative_numbers = true)]
    Link(link::LinkArgs),
    // Negative numbers are values (e.g. --fd-threshold -1 reaches the range check).
    #[command(allow_negative_numbers = true)]
    Subject(Box<subject::SubjectArgs>),
    Cohort(Box<cohort::CohortArgs>),
    Demo(demo::DemoArgs),
}

/// Parse the command line and run the chosen command.
pub fn run() -> anyhow::Result<ExitCode> {
    let cli = Cli::parse();
    match cli.command {
        Command::Inspect(args) => inspect::run(args),
        Command::Demo(args) => demo::run(args),
        Command::States(args) => states::run(args),
        Command::Gradient(args) => gradient::run(args),
        Command::Surrogates(args) => surrogates::run(args),
        Command::Energy(args) => energy::run(args),
        Command::Timescales(args) => timescales::run(*args),
        Command::Subject(args) => subject::run(*args),
        Command::Cohort(args) => cohort::run(*args),
        Command::Link(args) => link::run(args),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn cli_definition_is_consistent() {
        Cli::command().debug_assert();
    }
}
