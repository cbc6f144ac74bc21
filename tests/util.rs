//! Shared helpers for the integration tests.
#![allow(dead_code)]

use std::path::PathBuf;
use std::process::{Command, Output};

/// Path of a shipped lattice file.
pub fn lattice(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("lattices")
        .join(name)
}

/// Path of a test fixture.
pub fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("data")
        .join(name)
}

/// Run the `groundcount` binary with arguments.
pub fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_groundcount"))
        .args(args)
        .output()
        .expect("the groundcount binary runs")
}

/// Run the binary with arguments that end in `--format json`; assert success and parse
/// standard output.
pub fn run_json(args: &[&str]) -> serde_json::Value {
    let o = run(args);
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).expect("the command prints JSON")
}
