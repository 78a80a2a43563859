//! The `hierax` command. All science lives in the library; this binary only
//! parses arguments (module `cli`) and reports errors.
//!
//! Exit codes: 0 success; 1 some subjects failed (the rest were written);
//! 2 usage error or fatal error (nothing partial was written).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    match cli::run() {
        Ok(code) => code,
        Err(err) => {
            // One line: the error and its causes, joined by ": ".
            eprintln!("hierax: error: {err:#}");
            ExitCode::from(2)
        }
    }
}
