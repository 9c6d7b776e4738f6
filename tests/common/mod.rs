//! Helpers shared by the integration tests (each test file uses a part of them).
#![allow(dead_code)]

use escapade::scenario::{Model, Override};
use escapade::theory::{self, TheoryReport};
use std::path::Path;

/// A scenario from TOML text with `--set`-style overrides, and its theory.
pub fn model(text: &str, sets: &[&str]) -> (Model, TheoryReport) {
    let o: Vec<Override> = sets.iter().map(|s| Override::parse(s).unwrap()).collect();
    let m = Model::from_text(text, "test", Path::new("."), &o).unwrap();
    let t = theory::analyse(&m).unwrap();
    (m, t)
}

/// Runs the binary with `args` and parses its JSON output (the run must succeed).
pub fn json(args: &[&str]) -> serde_json::Value {
    let out = assert_cmd::Command::cargo_bin("escapade")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}
