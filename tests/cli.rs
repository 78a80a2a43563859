//! The binary end to end: what a user types and sees.

use crate::util::{hierax, repo_root, run, write};

#[test]
fn inspect_reports_a_csv_connectome() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "c.csv", "a,b,c\n0,1,2\n1,0,3\n2,3,0\n");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("a symmetric connectome of 3 regions"), "{text}");
    assert!(text.contains("columns     a, b, c"), "{text}");
}

#[test]
fn inspect_unknown_extension_is_one_line_and_exit_2() {
    let out = run(hierax().args(["inspect", "conn.xlsx"]));
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("unknown file type `.xlsx`"), "{err}");
}

#[test]
fn inspect_lists_the_variables_of_a_mat_file_without_a_key() {
    let p = crate::util::data("arrays/mixed.mat");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("entries; name one as"), "{text}");
    assert!(text.contains("(cell)"), "{text}");
}

#[test]
fn inspect_lists_the_datasets_of_an_h5_file_without_a_key() {
    let p = crate::util::data("h5/default.h5");
    let out = run(hierax().arg("inspect").arg(&p));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("entries; name one as") && text.contains("float64"), "{text}");
}

#[test]
fn inspect_reads_every_fixture_and_demo_file() {
    // Every committed fixture and demo input must be understood by `inspect`
    // (containers are listed, tables with text columns described).
    let root = crate::util::repo_root();
    let mut paths = Vec::new();
    for dir in ["tests/data/arrays", "tests/data/h5", "demo-data/atlas", "demo-data/sub-01"] {
        for e in std::fs::read_dir(root.join(dir)).unwrap().flatten() {
            let p = e.path();
            let ext = p.extension().and_then(|x| x.to_str()).unwrap_or("");
            if ["npy", "npz", "mat", "h5", "csv", "tsv"].contains(&ext) {
                paths.push(p);
            }
        }
    }
    assert!(paths.len() >= 40, "found only {} files", paths.len());
    let out = run(hierax().arg("inspect").args(&paths));
    assert!(out.status.success(), "inspect failed on a fixture");
}

/// Split one pasted shell command into words (whitespace, single quotes).
fn shell_words(line: &str) -> Vec<String> {
    let (mut words, mut cur, mut quoted, mut any) = (Vec::new(), String::new(), false, false);
    for ch in line.chars() {
        match ch {
            '\'' => {
                quoted = !quoted;
                any = true;
            }
            c if c.is_whitespace() && !quoted => {
                if any || !cur.is_empty() {
                    words.push(std::mem::take(&mut cur));
                }
                any = false;
            }
            c => cur.push(c),
        }
    }
    if any || !cur.is_empty() {
        words.push(cur);
    }
    words
}

/// The example commands of a help text, as a shell would read them when pasted: a command starts
/// with `  hierax` (or `  sh`) and continues while a line ends with a backslash. Every indented
/// line of the example block must belong to a command, so a line wrapped by the help formatter
/// (which would paste as a second, broken command) fails the test.
fn help_examples(help: &str) -> Vec<String> {
    let Some(start) = help.lines().position(|l| l.starts_with("Example")) else { return Vec::new() };
    let mut out = Vec::new();
    let mut lines = help.lines().skip(start + 1).peekable();
    while let Some(l) = lines.next() {
        if !l.starts_with("  ") {
            continue; // prose
        }
        assert!(
            l.starts_with("  hierax ") || l.starts_with("  sh "),
            "help line is not a command start: {l:?}"
        );
        let mut cmd = l.trim().to_string();
        while cmd.ends_with('\\') {
            cmd.pop();
            let next = lines.next().unwrap_or_else(|| panic!("continuation missing after {cmd:?}"));
            assert!(next.starts_with("    "), "continuation not indented: {next:?}");
            cmd.push(' ');
            cmd.push_str(next.trim());
        }
        out.push(cmd);
    }
    out
}

#[test]
fn every_help_example_pastes_and_runs() {
    let dir = tempfile::tempdir().unwrap();
    std::os::unix::fs::symlink(repo_root().join("demo-data"), dir.path().join("demo-data")).unwrap();
    let commands: &[&[&str]] = &[
        &["inspect"],
        &["timescales"],
        &["states"],
        &["gradient"],
        &["surrogates"],
        &["energy"],
        &["link"],
        &["subject"],
        &["cohort", "run"],
        &["cohort", "merge"],
        &["cohort", "sbatch"],
        &["demo"],
    ];
    let mut ran = 0;
    for c in commands {
        let help = run(hierax().args(*c).arg("--help"));
        let text = String::from_utf8(help.stdout).unwrap();
        let examples = help_examples(&text);
        assert!(!examples.is_empty(), "{c:?} --help has no example");
        for ex in examples.iter().filter(|e| e.starts_with("hierax ")) {
            let words = shell_words(ex);
            let o = run(hierax().current_dir(dir.path()).args(&words[1..]));
            assert!(o.status.success(), "example failed: {ex}\n{}", String::from_utf8_lossy(&o.stderr));
            ran += 1;
        }
    }
    assert!(ran >= 18, "only {ran} examples ran");
}
