//! Helpers shared by the integration tests (each test file uses a part of them).
#![allow(dead_code)]

use escapade::scenario::{Model, Override};
use escapade::simulate::{Plan, RunOptions, SimError, run_ensemble};
use escapade::stats::summarise;
use escapade::theory::{self, TheoryReport};
use std::path::Path;
use std::sync::atomic::AtomicBool;

/// A scenario from TOML text with `--set`-style overrides, and its theory.
pub fn model(text: &str, sets: &[&str]) -> (Model, TheoryReport) {
    let o: Vec<Override> = sets.iter().map(|s| Override::parse(s).unwrap()).collect();
    let m = Model::from_text(text, "test", Path::new("."), &o).unwrap();
    let t = theory::analyse(&m.system).unwrap();
    (m, t)
}

/// The simulation plan of a scenario, as the commands build it.
pub fn plan(m: &Model, t: &TheoryReport) -> Result<Plan, SimError> {
    let settings = m.simulation.clone().unwrap_or_default();
    Plan::new(&m.system, &settings, &m.units.names.time, t)
}

/// Runs the binary with `args` and parses its JSON output (the run must succeed).
pub fn json(args: &[&str]) -> serde_json::Value {
    serde_json::from_str(&stdout(args)).unwrap()
}

/// Runs the binary with `args` (no backtrace requested, so a user error prints one line).
pub fn run(args: &[&str]) -> std::process::Output {
    assert_cmd::Command::cargo_bin("escapade")
        .unwrap()
        .env_remove("RUST_BACKTRACE")
        .args(args)
        .output()
        .unwrap()
}

/// Runs the binary with `args` and returns its standard output (the run must succeed).
pub fn stdout(args: &[&str]) -> String {
    let out = run(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// The path of a file in examples/.
pub fn example(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join(name)
}

/// Mean and its standard error by batch means (50 batches), for correlated samples.
pub fn batch_mean(xs: &[f64]) -> (f64, f64) {
    let nb = 50;
    let len = xs.len() / nb;
    let means: Vec<f64> = (0..nb)
        .map(|b| xs[b * len..(b + 1) * len].iter().sum::<f64>() / len as f64)
        .collect();
    let m = means.iter().sum::<f64>() / nb as f64;
    let var = means.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (nb - 1) as f64;
    (m, (var / nb as f64).sqrt())
}

/// The brute-force escape rate of a scenario and its standard error k/sqrt(escapes) (Poisson).
pub fn brute_force_rate(m: &Model, t: &TheoryReport) -> (f64, f64) {
    let plan = plan(m, t).unwrap();
    let run = run_ensemble(
        &plan,
        &RunOptions::default(),
        &AtomicBool::new(false),
        |_, _| {},
    )
    .unwrap();
    let s = summarise(&run.outcomes, plan.params.dt, plan.params.max_steps);
    (s.rate, s.rate / (s.escaped as f64).sqrt())
}
