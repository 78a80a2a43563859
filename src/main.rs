//! The `hierax` command. All science lives in the library; this binary only
//! parses arguments (module `cli`) and reports errors.
//!
//! Exit codes: 0 success; 1 some subjects failed (the rest were written);
//! 2 usage error or fatal error (nothing partial was written).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    ignore_file_size_signal();
    return_large_buffers_to_the_system();
    match cli::run() {
        Ok(code) => code,
        Err(err) => {
            eprintln!("hierax: error: {}", one_line(&err));
            ExitCode::from(2)
        }
    }
}

/// The error and its causes joined by ": ", skipping a cause whose text the
/// line already holds (library errors often print their source inline).
fn one_line(err: &anyhow::Error) -> String {
    let mut line = String::new();
    for cause in err.chain() {
        let text = cause.to_string();
        if line.contains(&text) {
            continue;
        }
        if !line.is_empty() {
            line.push_str(": ");
        }
        line.push_str(&text);
    }
    line.replace('\n', " ")
}

/// Under a file-size limit (`ulimit -f`) the kernel kills a writer with
/// SIGXFSZ, leaving no message. Ignored, the write fails with EFBIG instead,
/// which our writers report and clean up like a full disk.
#[cfg(unix)]
fn ignore_file_size_signal() {
    // SAFETY: setting a signal's disposition to SIG_IGN at start-up, before any thread exists, has
    // no memory-safety preconditions.
    unsafe {
        libc::signal(libc::SIGXFSZ, libc::SIG_IGN);
    }
}

#[cfg(not(unix))]
fn ignore_file_size_signal() {}

/// glibc serves allocations above its mmap threshold (128 KiB) by mmap and
/// returns them on free, but raises the threshold each time such a block is
/// freed. After the first subject, each subject's multi-megabyte buffers
/// (series, matrices, FFT work) come from the heap arenas instead, whose
/// fragmentation made a cohort's peak memory creep up with its length.
/// Fixing the threshold keeps large buffers on mmap, so peak memory follows
/// what is live (measured: 10,000 units within a few percent of 100).
#[cfg(all(target_os = "linux", target_env = "gnu"))]
fn return_large_buffers_to_the_system() {
    // SAFETY: mallopt only changes allocator tuning; called at start-up before any thread exists.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, 128 * 1024);
    }
}

#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
fn return_large_buffers_to_the_system() {}
