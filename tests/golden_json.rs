//! The JSON output of every example, compared number for number with the files in
//! `tests/golden/`. Internal changes (refactors, new modules) must leave every key and every
//! number as it was; a change that alters them on purpose rewrites the files with
//! `ESCAPADE_BLESS=1 cargo test --release --test golden_json` and says why in its commit (and,
//! for simulated numbers, in the README's reproducibility promise).
//!
//! Only `wall_seconds` (a clock reading) and `source` (the scenario's path) are left out of the
//! comparison; two-coordinate outputs are compared to 1e-9 relative (see `check`). Simulations run with
//! `--threads 2`, but their numbers do not depend on the thread count (tests/simulation.rs).

mod common;
use common::{example, stdout};

use serde_json::Value;
use std::path::{Path, PathBuf};

fn examples() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    v.sort();
    v
}

/// Removes clock readings, which differ between runs, and the scenario's path, which differs
/// between checkouts.
fn strip_clock(v: &mut Value) {
    match v {
        Value::Object(m) => {
            m.remove("wall_seconds");
            m.remove("source");
            m.values_mut().for_each(strip_clock);
        }
        Value::Array(a) => a.iter_mut().for_each(strip_clock),
        _ => {}
    }
}

/// The first place where two JSON trees differ (numbers compared exactly), as a key path.
fn first_difference(path: &str, a: &Value, b: &Value, rel: f64) -> Option<String> {
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            for k in x.keys().chain(y.keys()) {
                let p = format!("{path}.{k}");
                match (x.get(k), y.get(k)) {
                    (Some(u), Some(v)) => {
                        if let Some(d) = first_difference(&p, u, v, rel) {
                            return Some(d);
                        }
                    }
                    (u, v) => return Some(format!("{p}: {u:?} vs {v:?}")),
                }
            }
            None
        }
        (Value::Array(x), Value::Array(y)) => {
            if x.len() != y.len() {
                return Some(format!("{path}: length {} vs {}", x.len(), y.len()));
            }
            x.iter()
                .zip(y)
                .enumerate()
                .find_map(|(i, (u, v))| first_difference(&format!("{path}[{i}]"), u, v, rel))
        }
        (Value::Number(x), Value::Number(y)) => {
            // exact (rel = 0): the same computation must give the same bits
            let (u, v) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            ((u - v).abs() > rel * u.abs().max(v.abs())).then(|| format!("{path}: {x} vs {y}"))
        }
        _ => (a != b).then(|| format!("{path}: {a} vs {b}")),
    }
}

/// Runs the binary and compares its JSON with the golden file `name` (or writes it when blessing).
fn check(name: &str, args: &[&str]) -> Option<String> {
    let mut got: Value = serde_json::from_str(&stdout(args)).unwrap();
    strip_clock(&mut got);
    let file = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/golden")
        .join(format!("{name}.json"));
    if std::env::var_os("ESCAPADE_BLESS").is_some() {
        std::fs::create_dir_all(file.parent().unwrap()).unwrap();
        std::fs::write(&file, serde_json::to_string_pretty(&got).unwrap() + "\n").unwrap();
        return None;
    }
    let text = std::fs::read_to_string(&file)
        .unwrap_or_else(|e| panic!("{}: {e} (bless with ESCAPADE_BLESS=1)", file.display()));
    let want: Value = serde_json::from_str(&text).unwrap();
    // Two-coordinate outputs go through faer's sparse Cholesky, whose SIMD kernels are chosen at
    // run time by CPU features, so another CPU may round differently in the last bits; 1e-9 is
    // far above that rounding (~1e-13 after refinement) and far below any change of method.
    let rel = if name.starts_with("muller_brown") {
        1e-9
    } else {
        0.0
    };
    first_difference("", &want, &got, rel).map(|d| format!("{name}{d}"))
}

fn assert_all(diffs: Vec<Option<String>>) {
    let diffs: Vec<String> = diffs.into_iter().flatten().collect();
    assert!(diffs.is_empty(), "JSON changed:\n{}", diffs.join("\n"));
}

#[test]
fn survey_and_rate_json_of_every_example_are_unchanged() {
    let mut diffs = Vec::new();
    for path in examples() {
        let stem = path.file_stem().unwrap().to_str().unwrap().to_string();
        let p = path.to_str().unwrap();
        diffs.push(check(&format!("{stem}.survey"), &["survey", p, "--json"]));
        diffs.push(check(&format!("{stem}.rate"), &["rate", p, "--json"]));
    }
    assert_all(diffs);
}

/// Simulation and comparison on the examples that run in about a second each (brute force with
/// every integrator family: BAOAB, BAOAB with memory, overdamped Leimkuhler–Matthews).
#[test]
fn compare_json_of_the_quick_examples_is_unchanged() {
    let mut diffs = Vec::new();
    for stem in [
        "colloid_trap_um",
        "defect_hop_ev",
        "double_well_reduced",
        "memory_solvent_reduced",
        "metastable_cubic_turnover",
    ] {
        let p = example(&format!("{stem}.toml"));
        let p = p.to_str().unwrap();
        diffs.push(check(
            &format!("{stem}.compare"),
            &["compare", p, "--json", "--threads", "2"],
        ));
    }
    assert_all(diffs);
}

/// A scan with simulation at every point (per-point seeds, fits) and a theory-only scan.
#[test]
fn scan_json_is_unchanged() {
    let p = example("double_well_reduced.toml");
    let p = p.to_str().unwrap();
    let theory = [
        "scan",
        p,
        "--vary",
        "particle.friction",
        "--from",
        "0.01",
        "--to",
        "30",
        "--points",
        "7",
        "--log",
        "--json",
    ];
    let mut simulated = theory.to_vec();
    simulated[9] = "3";
    simulated.extend([
        "--simulate",
        "--threads",
        "2",
        "--set",
        "simulation.trajectories=60",
    ]);
    assert_all(vec![
        check("double_well_reduced.scan", &theory),
        check("double_well_reduced.scan_simulated", &simulated),
    ]);
}
