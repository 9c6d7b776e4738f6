//! Value stability: for fixed seeds, the outcomes of a few trajectories per integrator, one
//! forward flux sampling estimate, one reactive-flux estimate and one uncertainty draw summary
//! are pinned to the numbers this release gives. The README's reproducibility promise says what
//! may change them; a change that does must be deliberate, update these numbers and say so in
//! its commit and in the README.
//!
//! The pinned numbers are this project's own outputs (no outside source): the test guards
//! reproducibility, not correctness, which the statistical tests check.

mod common;
use common::{example, json, stdout};

/// First-passage steps of trajectories 0..5, read from the record file of a run of five.
fn first_passage_steps(file: &str, sets: &[&str]) -> Vec<(u64, u64)> {
    let dir = std::env::temp_dir().join(format!("escapade-stability-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let name = format!("{file}{}", sets.join("_")).replace(['=', '.'], "-");
    let records = dir.join(format!("{name}.csv"));
    let _ = std::fs::remove_file(&records);
    let path = example(file);
    let mut args = vec![
        "-q",
        "simulate",
        path.to_str().unwrap(),
        "--set",
        "simulation.trajectories=5",
        "--threads",
        "2",
        "--records",
        records.to_str().unwrap(),
    ];
    for s in sets {
        args.extend(["--set", s]);
    }
    stdout(&args);
    let text = std::fs::read_to_string(&records).unwrap();
    let mut v: Vec<(u64, u64)> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("index"))
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            assert_eq!(f[3], "escaped", "{l}");
            (f[0].parse().unwrap(), f[1].parse().unwrap())
        })
        .collect();
    v.sort_unstable();
    v
}

#[test]
fn baoab_first_passages_are_pinned() {
    assert_eq!(
        first_passage_steps("double_well_reduced.toml", &[]),
        [(0, 71200), (1, 337222), (2, 9518), (3, 224561), (4, 251457)]
    );
}

#[test]
fn baoab_with_memory_first_passages_are_pinned() {
    assert_eq!(
        first_passage_steps("memory_solvent_reduced.toml", &[]),
        [(0, 89005), (1, 4564), (2, 26822), (3, 28525), (4, 61677)]
    );
}

#[test]
fn overdamped_first_passages_are_pinned() {
    assert_eq!(
        first_passage_steps(
            "colloid_trap_um.toml",
            &["simulation.scheme=leimkuhler-matthews"]
        ),
        [
            (0, 95920),
            (1, 201645),
            (2, 54742),
            (3, 296614),
            (4, 817481)
        ]
    );
    assert_eq!(
        first_passage_steps(
            "colloid_trap_um.toml",
            &["simulation.scheme=euler-maruyama"]
        ),
        [
            (0, 95918),
            (1, 201646),
            (2, 54743),
            (3, 296614),
            (4, 817481)
        ]
    );
}

fn simulated(file: &str, sets: &[&str]) -> serde_json::Value {
    let path = example(file);
    let mut args = vec!["simulate", path.to_str().unwrap(), "--json"];
    for s in sets {
        args.extend(["--set", s]);
    }
    json(&args)["simulation"].clone()
}

#[test]
fn ffs_estimate_is_pinned() {
    let s = simulated(
        "colloid_deep_trap_15kt.toml",
        &["simulation.trials=200", "simulation.replicas=4"],
    );
    assert_eq!(s["method"], "ffs");
    assert_eq!(s["rate"].as_f64(), Some(9.267648041146647e-06));
    assert_eq!(s["rate_ci95"][0].as_f64(), Some(4.6140744203516995e-06));
}

#[test]
fn reactive_flux_estimate_is_pinned() {
    let s = simulated(
        "double_well_reduced.toml",
        &[
            "simulation.method=reactive-flux",
            "simulation.trajectories=400",
        ],
    );
    assert_eq!(s["method"], "reactive-flux");
    assert_eq!(
        s["reactive_flux"]["kappa"].as_f64(),
        Some(0.46299999999999997)
    );
    assert_eq!(s["rate"].as_f64(), Some(0.00048659364587772056));
}

#[test]
fn uncertainty_draws_are_pinned() {
    let path = example("pmf_table.toml");
    let u = json(&["rate", path.to_str().unwrap(), "--json"])["uncertainty"].clone();
    assert_eq!(u["draws"], 400);
    assert_eq!(
        u["barrier_height_kT"]["draws_median"].as_f64(),
        Some(6.211221853342868)
    );
    assert_eq!(
        u["rates"][1]["draws_ci95"][1].as_f64(),
        Some(0.0040399157204413306)
    );
}
