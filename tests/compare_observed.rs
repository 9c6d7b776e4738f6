//! `compare --observed` end to end: trajectories of a known overdamped double well
//! U = E_b((x/a)² − 1)² (E_b = 3.5 kT, a = 1, D = 1, reduced units), made by the crate's own
//! Euler–Maruyama engine with fixed seeds, are read by `observe --profile --scenario-out`, and the
//! scenario it writes is compared with the same trajectories.

mod common;

use escapade::potential::{Diffusion, Family};
use escapade::simulate::engine::{Kind, Params, Start, sample_path};
use escapade::simulate::force::ConstD;
use escapade::theory::mfpt::mfpt;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

const EB: f64 = 3.5;
/// Integrator step: the Euler–Maruyama invariant density is off by O(D dt U'') ≈ 0.6% in the
/// wells (U'' = 8 E_b = 28), below the rate's statistical error (~7%).
const DT: f64 = 2e-4;
/// Steps between written samples (a sampling interval of 0.01).
const EVERY: u64 = 50;
/// Two trajectories of 4000 time units: about 300 transitions each way at 1/MFPT ≈ 0.078.
const DURATION: f64 = 4000.0;

fn well(eb: f64) -> Family {
    Family::DoubleWell {
        eb,
        a: 1.0,
        domain: (-3.0, 3.0),
    }
}

/// Writes one overdamped trajectory ("t,x" lines) of `duration` in the well of height `eb`.
fn write_trajectory(path: &Path, eb: f64, duration: f64, seed: u64, x0: f64) {
    let p = Params {
        kind: Kind::EulerMaruyama,
        dt: DT,
        max_steps: u64::MAX,
        seed,
        target: f64::INFINITY,
        dir: 1.0,
        lo: -3.0,
        hi: 3.0,
        mass: 1.0,
        gamma: 1.0,
        memory_time: 0.0,
        start: Start::At(x0),
    };
    let steps = (duration / DT).round() as u64;
    let path_xs = sample_path(&p, &well(eb), &ConstD(1.0), 0, x0, steps, EVERY);
    let mut text = String::from("t,x\n");
    for (i, (x, _)) in path_xs.iter().enumerate() {
        text.push_str(&format!(
            "{},{x:.6}\n",
            (i as u64 + 1) as f64 * DT * EVERY as f64
        ));
    }
    std::fs::write(path, text).unwrap();
}

fn dir() -> PathBuf {
    let d = Path::new(env!("CARGO_TARGET_TMPDIR")).join("compare_observed");
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The trajectories and the scenario `observe` writes on their free energy (made once).
fn setup() -> &'static (Vec<String>, String) {
    static S: OnceLock<(Vec<String>, String)> = OnceLock::new();
    S.get_or_init(|| {
        let d = dir();
        let trajs: Vec<String> = (1..=2)
            .map(|seed| {
                let p = d.join(format!("run{seed}.csv"));
                write_trajectory(&p, EB, DURATION, seed, -1.0);
                p.to_str().unwrap().to_string()
            })
            .collect();
        // the trajectories' units and the particle's D (the dynamics is not in the positions)
        let model = d.join("model.toml");
        std::fs::write(
            &model,
            "[particle]\ndiffusion = 1.0\n\n[potential]\nfamily = \"double-well\"\nbarrier = 3.5\nhalf_width = 1.0\n",
        )
        .unwrap();
        let (profile, scenario) = (d.join("profile.csv"), d.join("observed.toml"));
        let mut args = vec!["observe".to_string()];
        args.extend(trajs.iter().cloned());
        for a in [
            "--scenario",
            model.to_str().unwrap(),
            "--profile",
            profile.to_str().unwrap(),
            "--scenario-out",
            scenario.to_str().unwrap(),
            "--quiet",
        ] {
            args.push(a.to_string());
        }
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        common::stdout(&args);
        (trajs, scenario.to_str().unwrap().to_string())
    })
}

/// `compare SCENARIO --observed TRAJ... --json` with extra arguments.
fn compare(extra: &[&str]) -> Value {
    let (trajs, scenario) = setup();
    let mut args = vec!["compare", scenario.as_str(), "--json", "--quiet"];
    args.extend(extra);
    args.push("--observed");
    args.extend(trajs.iter().map(String::as_str));
    common::json(&args)
}

// The observed rate against the generating model's exact rate, and the verdict. With
// transition-based counting 1/k_AB is the mean first-passage time from core A to the near edge
// of core B (Hummer, J. Chem. Phys. 120, 516 (2004)); the exact overdamped MFPT (Gardiner,
// Handbook of Stochastic Methods, Sec. 5.2; Hänggi, Talkner & Borkovec, Rev. Mod. Phys. 62, 251
// (1990)) from the minimum at −1 to that edge, reflecting wall at −3 (U = 224 kT there), comes
// from `escapade::theory::mfpt`. Starting at the minimum rather than at A's edge changes the
// MFPT by the relaxation time in A (~1/U'' = 0.036 against ~13).
#[test]
fn observed_rate_covers_the_exact_rate_and_the_model_agrees() {
    let v = compare(&[]);
    let o = &v["observed"];
    assert_eq!(o["direction"], "A → B", "{o}");
    let n = o["transitions"].as_u64().unwrap();
    assert!(n > 200, "only {n} transitions");
    assert!(o["exposure"].as_f64().unwrap() > 0.3 * 2.0 * DURATION);
    let k = o["rate"].as_f64().unwrap();
    let ci: Vec<f64> = o["rate_ci95"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    let edge = o["core_to"]["lo"].as_f64().unwrap();
    let exact = 1.0
        / mfpt(
            &well(EB),
            &Diffusion::Constant(1.0),
            -3.0,
            -1.0,
            edge,
            &[0.0],
        )
        .time;
    eprintln!("k = {k} {ci:?}, exact {exact}, n = {n}");
    // the 95% interval (±2 standard errors of ln k, 1/sqrt(n) ≈ 6%) widened by 2% for the
    // integrator's O(dt) bias and entries into a core noticed only at the next sample
    // (0.01 of an MFPT of ~13)
    assert!(
        ci[0] < exact * 1.02 && exact < ci[1] * 1.02,
        "{ci:?} vs exact {exact}"
    );
    // the model written from the observed profile reproduces the observed rate: its simulation
    // within z ≤ 1.96 on ln k, and its exact 1/MFPT within the observed interval widened by its
    // accuracy band and the profile's σ_U
    let s = &o["simulation"];
    assert_eq!(s["agrees"], true, "{s}");
    let mfpt_row = o["theories"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["method"] == "mfpt")
        .unwrap();
    assert_eq!(mfpt_row["consistent"], true, "{mfpt_row}");
    let verdict = o["verdict"].as_str().unwrap();
    assert!(
        verdict.starts_with("the model reproduces the observed A → B rate")
            && verdict.contains("mfpt"),
        "{verdict}"
    );
    // the model's target (the product minimum) lies inside core B: no warning about the match
    let w = o["warnings"].to_string();
    assert!(!w.contains("the model's"), "{w}");
    // the model's exact 1/MFPT to B's near edge is reported, a few % above its rate to the
    // product minimum (the downhill time from the edge to the minimum; computed, not pinned)
    let to_edge = o["model_rate_to_core_edge"].as_f64().unwrap();
    let to_target = v["rates"]["mfpt"].as_f64().unwrap();
    assert!(
        to_edge > to_target && to_edge < 1.1 * to_target,
        "{to_edge} vs {to_target}"
    );
}

// A model whose D is 5 times the trajectories' has rates 5 times too high (k ∝ D in the
// overdamped limit; Kramers 1940): the verdict must say the model does not describe the data.
#[test]
fn a_model_with_five_times_the_diffusion_disagrees() {
    let v = compare(&["--set", "particle.diffusion=5"]);
    let o = &v["observed"];
    let s = &o["simulation"];
    assert_eq!(s["agrees"], false, "{s}");
    // 5 × the agreeing model's simulated/observed ratio, itself within ~15% of 1 (statistical
    // errors of ~6% on each rate and the few % between B's edge and the product minimum)
    let r = s["ratio_to_observed"].as_f64().unwrap();
    assert!(r > 3.5 && r < 7.0, "{r}");
    let verdict = o["verdict"].as_str().unwrap();
    assert!(verdict.contains("does not describe the data"), "{verdict}");
    let mfpt_row = o["theories"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["method"] == "mfpt")
        .unwrap();
    assert_eq!(mfpt_row["consistent"], false, "{mfpt_row}");
}

// A target short of core B (between the barrier at 0 and B's near edge near 0.7) measures
// another first passage: a warning names both positions and gives the model's rate to the edge.
#[test]
fn a_target_short_of_the_arrival_core_is_named() {
    let v = compare(&["--set", "states.target=0.3"]);
    let w = v["observed"]["warnings"].to_string();
    assert!(
        w.contains("short of core B's near edge") && w.contains("1/MFPT"),
        "{w}"
    );
}

// Without --observed the compare JSON has no "observed" key (the golden files stay as they are).
#[test]
fn no_observed_key_without_trajectories() {
    let (_, scenario) = setup();
    let v = common::json(&["compare", scenario, "--json", "--quiet"]);
    assert!(v.get("observed").is_none());
    assert!(v.get("verdict").is_some());
}

// A trajectory that never leaves one well (E_b = 12 kT, 50 time units against an MFPT of
// ~1e4): with the cores given there is no rate, only its upper bound, and the verdict says why;
// without cores there is no second minimum to place them, and the error is one line.
#[test]
fn no_transition_gives_no_rate_and_says_so() {
    let (_, scenario) = setup();
    let stuck = dir().join("stuck.csv");
    write_trajectory(&stuck, 12.0, 50.0, 7, -1.0);
    let stuck = stuck.to_str().unwrap();
    let v = common::json(&[
        "compare",
        scenario,
        "--json",
        "--quiet",
        "--cores=-1.3:-0.7,0.7:1.3",
        "--observed",
        stuck,
    ]);
    let o = &v["observed"];
    assert_eq!(o["transitions"], 0, "{o}");
    assert!(o["rate"].is_null() && o["rate_ci95"].is_null(), "{o}");
    assert!(o["upper95"].as_f64().unwrap() > 0.0);
    assert!(o["simulation"].is_null());
    assert!(
        o["theories"]
            .as_array()
            .unwrap()
            .iter()
            .all(|r| r["ratio_to_observed"].is_null() && r["consistent"] == false)
    );
    let verdict = o["verdict"].as_str().unwrap();
    assert!(verdict.starts_with("no A → B transition"), "{verdict}");
    // the table says it too
    let text = common::stdout(&[
        "compare",
        scenario,
        "--quiet",
        "--cores=-1.3:-0.7,0.7:1.3",
        "--observed",
        stuck,
    ]);
    assert!(
        text.contains("observed verdict: no A → B transition"),
        "{text}"
    );
    let out = assert_cmd::Command::cargo_bin("escapade")
        .unwrap()
        .args(["compare", scenario, "--quiet", "--observed", stuck])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(err.contains("--cores"), "{err}");
}

// A model started in the right-hand well escapes to the left: the observed direction set against
// it is B → A (the core holding the reactant is left), with B → A's own count and rate.
#[test]
fn a_reactant_in_core_b_is_set_against_the_b_to_a_rate() {
    let v = compare(&["--set", "states.start=1.0"]);
    let o = &v["observed"];
    assert_eq!(o["direction"], "B → A", "{o}");
    assert!(o["core_from"]["lo"].as_f64().unwrap() > 0.0, "{o}");
    assert!(o["core_to"]["hi"].as_f64().unwrap() < 0.0, "{o}");
    assert!(o["transitions"].as_u64().unwrap() > 200, "{o}");
    assert!(!o["warnings"].to_string().contains("the model's"), "{o}");
    assert!(o["verdict"].as_str().unwrap().contains("B → A"), "{o}");
}
