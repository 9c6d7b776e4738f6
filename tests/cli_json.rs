//! The JSON contract of `survey --json` and `rate --json` on every example, the `--set` override,
//! unit conversions at the output boundary (CODATA 2018), and the demo command.

mod common;
use common::json;

use assert_cmd::Command;
use serde_json::Value;

fn examples() -> Vec<std::path::PathBuf> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        // two-coordinate examples have their own contract (tests/plane_cli.rs)
        .filter(|p| !std::fs::read_to_string(p).unwrap().contains("[surface]"))
        .collect();
    v.sort();
    v
}

fn is_num_or_null(v: &Value) -> bool {
    v.is_null() || v.as_f64().is_some_and(f64::is_finite)
}

#[test]
fn rate_json_follows_the_contract_on_every_example() {
    let files = examples();
    assert!(files.len() >= 4);
    for f in files {
        let f = f.to_str().unwrap();
        let v = json(&["rate", f, "--json"]);
        for k in ["energy", "length", "time", "mass"] {
            assert!(v["units"][k].is_string(), "{f}: units.{k}");
        }
        let l = &v["landscape"];
        for k in [
            "reactant",
            "barrier",
            "target",
            "barrier_height",
            "barrier_height_kT",
        ] {
            assert!(l[k].as_f64().is_some(), "{f}: landscape.{k}");
        }
        for k in ["product", "omega_reactant", "omega_barrier", "action"] {
            assert!(l.get(k).is_some_and(is_num_or_null), "{f}: landscape.{k}");
        }
        let r = &v["regime"];
        let name = r["name"].as_str().unwrap();
        assert!(
            [
                "energy-diffusion",
                "turnover",
                "spatial-diffusion",
                "overdamped"
            ]
            .contains(&name),
            "{f}: {name}"
        );
        for k in ["gamma_over_omega_barrier", "delta"] {
            assert!(r.get(k).is_some_and(is_num_or_null), "{f}: regime.{k}");
        }
        assert!(r["warnings"].is_array());
        for k in [
            "tst",
            "tst_exact",
            "kramers",
            "smoluchowski",
            "energy_diffusion",
            "turnover",
            "pgh",
            "mfpt",
            "grote_hynes",
            "well_to_well",
        ] {
            assert!(
                v["rates"].get(k).is_some_and(is_num_or_null),
                "{f}: rates.{k}"
            );
        }
        // the PGH energy loss beside the rate: null exactly when the rate is
        let p = &v["pgh"];
        assert_eq!(p.is_null(), v["rates"]["pgh"].is_null(), "{f}: pgh");
        if !p.is_null() {
            for k in [
                "energy_loss",
                "depopulation",
                "u00_squared",
                "turning_point",
            ] {
                assert!(p[k].as_f64().is_some(), "{f}: pgh.{k}");
            }
            assert!(p["reflected"].is_boolean(), "{f}: pgh.reflected");
        }
        let t = v["mfpt_time"].as_f64().unwrap();
        let k = v["rates"]["mfpt"].as_f64().unwrap();
        // rate = 1/MFPT by construction: rounding only
        assert!((t * k - 1.0).abs() < 1e-12, "{f}");
        let s = json(&["survey", f, "--json"]);
        assert!(s["landscape"]["stationary_points"].is_array());
        assert!(s.get("rates").is_none());
    }
}

// kT at 300 K is 2.4943387854 kJ/mol (R = N_A k_B, CODATA 2018), so E_b in kJ/mol / E_b in kT
// must equal it to rounding.
#[test]
fn molecular_units_convert_with_codata() {
    let f = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/isomerization_kjmol.toml"
    );
    let v = json(&["rate", f, "--json"]);
    let l = &v["landscape"];
    let ratio = l["barrier_height"].as_f64().unwrap() / l["barrier_height_kT"].as_f64().unwrap();
    assert!((ratio - 2.494_338_785_4).abs() < 1e-9, "{ratio}");
    assert_eq!(v["units"]["energy"], "kJ/mol");
}

#[test]
fn set_overrides_a_value() {
    let f = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/double_well_reduced.toml"
    );
    let v = json(&["rate", f, "--json", "--set", "potential.barrier=9.5"]);
    assert!((v["landscape"]["barrier_height"].as_f64().unwrap() - 9.5).abs() < 1e-12);
    let v = json(&[
        "rate",
        f,
        "--json",
        "--set",
        "particle.friction=50",
        "--set",
        "particle.mass=2",
    ]);
    assert_eq!(v["regime"]["name"], "overdamped");
}

#[test]
fn demo_runs_and_prints_a_table() {
    let out = Command::cargo_bin("escapade")
        .unwrap()
        .arg("demo")
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("regime:") && text.contains("Kramers"));
    let v = json(&["demo", "--json"]);
    assert!(v["rates"]["turnover"].as_f64().unwrap() > 0.0);
}

/// `compare --json` on every example (400 trajectories to keep the suite fast): the contract's keys,
/// and the acceptance check — the simulated rate is consistent with the exact MFPT rate
/// (overdamped) or the turnover rate (underdamped, E_b >= 6 kT) within the documented accuracy of
/// those theories (report::accuracy_band: the MFPT to the time-step bias of 1%, asymptotic rates
/// to the finite-barrier correction kT/E_b).
#[test]
fn compare_json_follows_the_contract_and_agrees_on_every_example() {
    for f in examples() {
        let f = f.to_str().unwrap();
        let v = json(&[
            "compare",
            f,
            "--json",
            "--quiet",
            "--set",
            "simulation.trajectories=400",
        ]);
        let s = &v["simulation"];
        let method = s["method"].as_str().unwrap();
        assert!(
            ["brute-force", "ffs", "reactive-flux"].contains(&method),
            "{f}"
        );
        for k in [
            "trajectories",
            "rate",
            "total_steps",
            "wall_seconds",
            "dt",
            "seed",
        ] {
            assert!(s[k].as_f64().is_some(), "{f}: simulation.{k}");
        }
        // brute-force counts are numbers for brute force and null for the rare-event methods
        for k in ["escaped", "censored", "mfpt", "mfpt_se"] {
            assert!(s.get(k).is_some_and(is_num_or_null), "{f}: simulation.{k}");
            assert_eq!(
                s[k].is_number(),
                method == "brute-force",
                "{f}: simulation.{k}"
            );
        }
        assert!(s["rate_ci95"].as_array().is_some_and(|a| a.len() == 2));
        assert!(s["dynamics"].is_string());
        let rows = v["comparison"].as_array().unwrap();
        // nine rates, and Grote–Hynes with memory friction
        let expected = 9 + usize::from(v["rates"]["grote_hynes"].is_number());
        assert_eq!(rows.len(), expected, "{f}");
        for r in rows {
            for k in ["method", "valid"] {
                assert!(r.get(k).is_some(), "{f}: comparison.{k}");
            }
            assert!(r.get("rate").is_some_and(is_num_or_null));
            assert!(r.get("ratio_to_simulation").is_some_and(is_num_or_null));
            assert!(r.get("ratio_ci95").is_some());
        }
        // with memory friction the trusted theory is Grote–Hynes (Grote & Hynes 1980)
        let key = if s["dynamics"] == "overdamped" {
            "mfpt"
        } else if v["rates"]["grote_hynes"].is_number() {
            "grote_hynes"
        } else {
            "turnover"
        };
        let row = rows.iter().find(|r| r["method"] == key).unwrap();
        assert_eq!(row["consistent"], true, "{f}: {key} vs simulation: {row}");
        assert!(v["verdict"].as_str().unwrap().contains(key), "{f}");
    }
}

#[test]
fn simulate_json_has_units_landscape_and_simulation_only() {
    let f = concat!(env!("CARGO_MANIFEST_DIR"), "/examples/colloid_trap_um.toml");
    let v = json(&[
        "simulate",
        f,
        "--json",
        "--quiet",
        "--set",
        "simulation.trajectories=100",
    ]);
    assert!(v["units"].is_object() && v["landscape"].is_object() && v["simulation"].is_object());
    assert!(v.get("rates").is_none() && v.get("comparison").is_none());
    assert_eq!(v["simulation"]["dynamics"], "overdamped");
}
