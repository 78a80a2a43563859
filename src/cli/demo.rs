//! `hierax demo`: the whole job on the bundled, invented cohort.

use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

/// Run the whole job on the bundled demo cohort (invented data) and write
/// every output under --out.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  hierax demo --out demo-output")]
pub struct DemoArgs {
    /// Folder for the outputs (created if needed).
    #[arg(long, default_value = "demo-output")]
    out: PathBuf,

    /// Folder holding the demo cohort.
    #[arg(long, default_value = "demo-data")]
    data: PathBuf,
}

pub fn run(args: DemoArgs) -> anyhow::Result<ExitCode> {
    anyhow::bail!(
        "the demo cohort in {} is not generated yet (writing to {} skipped)",
        args.data.display(),
        args.out.display()
    )
}
