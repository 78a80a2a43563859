//! Helpers for integration tests: a temporary folder and the real binary.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The built `hierax` binary.
pub fn hierax() -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_hierax"));
    cmd.current_dir(repo_root());
    cmd
}

/// The repository root (where `demo-data/` and `tests/data/` live).
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A path under `tests/data/`.
pub fn data(rel: &str) -> PathBuf {
    repo_root().join("tests").join("data").join(rel)
}

/// Run and capture; print both streams when the test fails.
pub fn run(cmd: &mut Command) -> Output {
    let out = cmd.output().expect("hierax binary runs");
    eprintln!("--- stdout\n{}", String::from_utf8_lossy(&out.stdout));
    eprintln!("--- stderr\n{}", String::from_utf8_lossy(&out.stderr));
    out
}

/// Every file below `dir`, relative, sorted.
pub fn files_below(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        if let Ok(rd) = std::fs::read_dir(&d) {
            for e in rd.flatten() {
                let p = e.path();
                if p.is_dir() {
                    stack.push(p);
                } else {
                    out.push(p.strip_prefix(dir).unwrap().to_path_buf());
                }
            }
        }
    }
    out.sort();
    out
}

/// Write `body` to `dir/name` and return the path.
pub fn write(dir: &Path, name: &str, body: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, body).unwrap();
    p
}
