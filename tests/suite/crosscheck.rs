//! Independent cross-checks run as part of the test suite, against
//! general-purpose reference libraries installed by `scripts/setup.sh`
//! into `.venv`. A missing venv is a failure with the fix in the message,
//! never a silent skip.

use std::path::PathBuf;
use std::process::Command;

use crate::util::root;

/// The venv's Python, or a failure telling the user how to make it.
fn venv_python() -> PathBuf {
    let p = root().join(".venv/bin/python");
    assert!(p.exists(), "{} is missing: run scripts/setup.sh first (it installs the reference libraries)", p.display());
    p
}

/// An example binary built next to the test binaries by `cargo test`.
fn example(name: &str) -> PathBuf {
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_termvel"));
    let p = bin.parent().expect("target dir").join("examples").join(name);
    if !p.exists() {
        // `cargo test` builds examples; a filtered run may not have.
        let status = Command::new(env!("CARGO"))
            .args(["build", "--example", name])
            .args(if bin.to_string_lossy().contains("/release/") { vec!["--release"] } else { vec![] })
            .current_dir(root())
            .status()
            .expect("cargo runs");
        assert!(status.success());
    }
    p
}

#[test]
fn candump_reader_agrees_with_python_can() {
    // Every frame of tests/data/candump/*.log read by termvel and by the
    // python-can package must agree in time, id, flags and data, apart from
    // the documented differences the script names (see its header).
    let out = Command::new(venv_python())
        .arg(root().join("tests/crosscheck_python_can.py"))
        .arg(example("dump-frames"))
        .current_dir(root())
        .output()
        .expect("python runs");
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "cross-check failed:\n{text}\n{}", String::from_utf8_lossy(&out.stderr));
    let summary = text.lines().find(|l| l.starts_with("summary:")).expect("a summary line");
    assert!(summary.contains("failures: 0"), "{summary}");
    let compared: u64 = summary
        .split("frames compared equal: ")
        .nth(1)
        .and_then(|s| s.split(';').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or(0);
    assert!(compared > 20_000, "{summary}");
}
