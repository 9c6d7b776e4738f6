//! The JSON of the extended capabilities through the binary: periodic landscapes (drift,
//! effective diffusion, hopping), profile uncertainty, well-to-well counts and memory friction.
//! Physics checks against outside sources live in periodic_theory.rs, periodic_sim.rs,
//! uncertainty.rs, well_to_well.rs and memory.rs; here the numbers are checked for consistency
//! between commands and with their own intervals (common practice, no source).

mod common;
use common::json;

use serde_json::Value;

fn example(name: &str) -> String {
    format!("{}/examples/{name}", env!("CARGO_MANIFEST_DIR"))
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

// A formula with `periodic` and the washboard family describe the same U = −A cos(2πx/L) − F x:
// the periodic analysis must agree. Both are quadratures of the same exact function, converged to
// 1e-11 (theory::periodic::PERIODIC_TOL), so 1e-8 relative.
#[test]
fn periodic_formula_equals_the_washboard_family() {
    let dir = std::env::temp_dir().join(format!("escapade-periodic-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let expr = dir.join("expr.toml");
    std::fs::write(
        &expr,
        "[particle]\ndiffusion = 0.7\n[potential]\nexpr = \"-3*cos(2*pi*x/1.5) - 0.8*x\"\ndomain = [-0.75, 0.75]\nperiodic = 1.5\n[states]\nstart = 0.0\n",
    )
    .unwrap();
    let a = json(&["rate", expr.to_str().unwrap(), "--json"]);
    let fam = dir.join("family.toml");
    std::fs::write(
        &fam,
        "[particle]\ndiffusion = 0.7\n[potential]\nfamily = \"washboard\"\namplitude = 3.0\nperiod = 1.5\ntilt = 0.8\n",
    )
    .unwrap();
    let b = json(&["rate", fam.to_str().unwrap(), "--json"]);
    let (pa, pb) = (&a["periodic"], &b["periodic"]);
    for k in ["drift", "effective_diffusion", "tilt", "period"] {
        let (x, y) = (f(&pa[k]), f(&pb[k]));
        assert!((x / y - 1.0).abs() < 1e-8, "{k}: {x} vs {y}");
    }
    for k in ["forward", "backward", "mfpt", "barrier_forward"] {
        let (x, y) = (f(&pa["hopping"][k]), f(&pb["hopping"][k]));
        assert!((x / y - 1.0).abs() < 1e-8, "hopping.{k}: {x} vs {y}");
    }
    // tilt F = 0.8 kT per unit length, one well per period: k+/k− = e^{FL} exactly (detailed
    // balance, theory::periodic module doc)
    let ratio = f(&pa["hopping"]["forward"]) / f(&pa["hopping"]["backward"]);
    assert!((ratio / (0.8f64 * 1.5).exp() - 1.0).abs() < 1e-9);
    let _ = std::fs::remove_dir_all(&dir);
}

// The simulated drift, D_eff and hopping rates of the periodic example agree with the exact
// overdamped theory within 4 standard errors (from the reported 95% intervals) plus 2% for the
// time-step bias (the overdamped MFPT tests see ≤ 1%).
#[test]
fn periodic_example_simulation_matches_theory() {
    let v = json(&[
        "compare",
        &example("ratchet_colloid_periodic.toml"),
        "--json",
        "--quiet",
        "--set",
        "simulation.trajectories=200",
    ]);
    let (t, s) = (&v["periodic"], &v["simulation"]["periodic"]);
    let check = |theory: f64, sim: f64, ci: &Value, what: &str| {
        let (lo, hi) = (f(&ci[0]), f(&ci[1]));
        let se = (hi - lo) / (2.0 * 1.96);
        assert!(
            (sim - theory).abs() < 4.0 * se + 0.02 * theory.abs(),
            "{what}: simulated {sim} [{lo}, {hi}] vs theory {theory}"
        );
    };
    check(f(&t["drift"]), f(&s["drift"]), &s["drift_ci95"], "drift");
    check(
        f(&t["effective_diffusion"]),
        f(&s["effective_diffusion"]),
        &s["effective_diffusion_ci95"],
        "D_eff",
    );
    check(
        f(&t["hopping"]["forward"]),
        f(&s["hop_forward"]),
        &s["hop_forward_ci95"],
        "k+",
    );
    check(
        f(&t["hopping"]["backward"]),
        f(&s["hop_backward"]),
        &s["hop_backward_ci95"],
        "k-",
    );
}

// A table with sigma_U: every reported interval is ordered (68% inside 95%) and the 95% interval
// of 1/MFPT holds its unperturbed value (the example's noise is small and smooth).
#[test]
fn table_with_sigma_reports_rate_intervals() {
    let v = json(&["rate", &example("pmf_table.toml"), "--json"]);
    let u = &v["uncertainty"];
    assert!(f(&u["draws"]) >= 40.0);
    let rates = u["rates"].as_array().unwrap();
    let mfpt = rates.iter().find(|r| r["key"] == "mfpt").unwrap();
    let (c, lo, hi) = (
        f(&mfpt["central"]),
        f(&mfpt["ci95"][0]),
        f(&mfpt["ci95"][1]),
    );
    assert!(lo < c && c < hi, "{lo} {c} {hi}");
    assert!((c / f(&v["rates"]["mfpt"]) - 1.0).abs() < 1e-12);
    for r in rates {
        let (a, b, x, y) = (
            f(&r["ci95"][0]),
            f(&r["ci68"][0]),
            f(&r["ci68"][1]),
            f(&r["ci95"][1]),
        );
        assert!(a <= b && b <= x && x <= y, "{r}");
    }
    assert!(u["barrier_height_kT"]["ci95"].is_array());
}

// Weak friction: the well-to-well row is set against the counted transitions, the escape rows
// against the escape rate, and the counted well-to-well rate lies clearly below the escape rate
// (Mel'nikov's factor A(δ)/A(2δ) ≈ 0.6 here; tests/well_to_well.rs checks the value).
#[test]
fn well_to_well_is_set_against_counted_transitions() {
    let v = json(&[
        "compare",
        &example("weak_friction_well_to_well.toml"),
        "--json",
        "--quiet",
        "--set",
        "simulation.trajectories=400",
    ]);
    let s = &v["simulation"];
    let ww = f(&s["well_to_well"]["rate"]);
    assert!(ww < 0.85 * f(&s["rate"]), "{ww} vs {}", s["rate"]);
    let rows = v["comparison"].as_array().unwrap();
    let row = |k: &str| rows.iter().find(|r| r["method"] == k).unwrap();
    assert_eq!(row("well_to_well")["against"], "well-to-well");
    assert_eq!(row("turnover")["against"], "escape");
    assert_eq!(row("pgh")["against"], "escape");
    let r = f(&row("well_to_well")["ratio_to_simulation"]);
    assert!((r - f(&v["rates"]["well_to_well"]) / ww).abs() < 1e-12);
}

// Memory friction is simulated with the memory integrator and set against Grote–Hynes.
#[test]
fn memory_example_runs_the_memory_integrator() {
    let v = json(&[
        "compare",
        &example("memory_solvent_reduced.toml"),
        "--json",
        "--quiet",
        "--set",
        "simulation.trajectories=300",
    ]);
    assert_eq!(v["simulation"]["scheme"], "baoab-memory");
    assert!(f(&v["rates"]["grote_hynes"]) > f(&v["rates"]["kramers"]));
    // the simulated escape is within Grote–Hynes' documented accuracy (finite-barrier band of
    // report::accuracy_band), and the memoryless formulas are not trusted here
    let rows = v["comparison"].as_array().unwrap();
    let row = |k: &str| rows.iter().find(|r| r["method"] == k).unwrap();
    assert!(f(&v["simulation"]["rate"]) > 0.0);
    assert_eq!(
        row("grote_hynes")["consistent"],
        true,
        "{}",
        row("grote_hynes")
    );
    assert_eq!(row("kramers")["valid"], false);
    // PGH is redone for the same kernel and stays trusted
    assert_eq!(
        v["regime"]["trusted"],
        serde_json::json!(["pgh", "grote_hynes"])
    );
}

// Past the critical tilt (F > 2πA/L) the washboard has no minimum: `rate` reports the running
// state (drift and D_eff, no hopping) instead of failing. The mobility v/F of a tilted washboard
// rises from its Lifson–Jackson value to the free D as F grows (from memory), so
// D_LJ·F < v < D·F; that brackets the drift independently of the quadrature's details.
#[test]
fn running_state_past_the_critical_tilt() {
    let dir = std::env::temp_dir().join(format!("escapade-running-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("wb.toml");
    std::fs::write(
        &file,
        "[particle]\ndiffusion = 0.5\n[potential]\nfamily = \"washboard\"\namplitude = 2.0\nperiod = 1.0\ntilt = 20.0\n",
    )
    .unwrap();
    let v = json(&["rate", file.to_str().unwrap(), "--json"]);
    assert!(v.get("landscape").is_none() && v.get("rates").is_none());
    let p = &v["periodic"];
    assert!(p["hopping"].is_null());
    let (drift, lj) = (f(&p["drift"]), f(&p["effective_diffusion_untilted"]));
    assert!(lj * 20.0 < drift && drift < 0.5 * 20.0, "{drift}");
    // a force scan across the critical tilt (2π·2 ≈ 12.6) keeps going and marks the running points
    let s = json(&[
        "scan",
        file.to_str().unwrap(),
        "--vary",
        "potential.tilt",
        "--from",
        "0",
        "--to",
        "20",
        "--points",
        "3",
        "--json",
    ]);
    let pts = s["points"].as_array().unwrap();
    assert_eq!(pts[0]["regime"], "overdamped");
    assert_eq!(pts[2]["regime"], "running");
    assert!(pts[2]["rates"]["mfpt"].is_null());
    assert!((f(&pts[2]["periodic"]["drift"]) / drift - 1.0).abs() < 1e-12);
    let _ = std::fs::remove_dir_all(&dir);
}
