//! Rare-event methods: forward flux sampling against the exact overdamped MFPT at high barriers and
//! against brute force, its independence of the interfaces, and the reactive-flux transmission
//! coefficient against Kramers. Fixed seeds; tolerances in standard errors (4σ) plus stated biases.

mod common;
use common::{brute_force_rate, model};

use escapade::report::SimulationResult;
use escapade::scenario::Model;
use escapade::simulate::{self, Method};
use escapade::theory::TheoryReport;
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::sync::atomic::AtomicBool;

fn rare(m: &Model, t: &TheoryReport) -> SimulationResult {
    let plan = common::plan(m, t).unwrap();
    assert_ne!(plan.method, Method::BruteForce);
    let (r, wall, threads) =
        simulate::run_rare(&plan, &m.system, t, 0, &AtomicBool::new(false)).unwrap();
    SimulationResult::rare(&plan, r, wall, threads)
}

/// Standard error of an FFS rate from its replica spread (the 95% half-width over the t quantile).
fn ffs_se(s: &SimulationResult) -> f64 {
    let r = s.details.ffs.as_ref().unwrap().replica_rates.len() as f64;
    let tq = StudentsT::new(0.0, 1.0, r - 1.0)
        .unwrap()
        .inverse_cdf(0.975);
    0.5 * (s.rate_ci95[1] - s.rate_ci95[0]) / tq
}

/// Interface crossings between steps are detected with the Brownian-bridge probability, which is
/// exact for Euler–Maruyama increments and approximate for the Leimkuhler–Matthews noise; the
/// remaining time-step bias of the rate is allowed 1% (without the bridge it was 1–2% low over the
/// 10–16 stages at 12–20 kT). The underdamped comparison uses the same allowance.
const FFS_DT_BIAS: f64 = 0.01;

const OD: &str = "[particle]\ndiffusion = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 12.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nseed = 41\n";

// The exact MFPT (quadrature checked against mpmath to 1e-8) gives the reference rate 1/T.
#[test]
fn ffs_matches_the_exact_mfpt_rate_at_12_and_20_kt() {
    for eb in ["12", "20"] {
        let (m, t) = model(OD, &[&format!("potential.barrier={eb}")]);
        let s = rare(&m, &t);
        assert_eq!(s.method, "ffs", "auto picks FFS at {eb} kT");
        let exact = t.rates.mfpt.unwrap();
        let se = ffs_se(&s);
        let dev = (s.rate - exact).abs();
        assert!(
            dev < 4.0 * se + FFS_DT_BIAS * exact,
            "{eb} kT: FFS {} ± {se} vs exact {exact}",
            s.rate
        );
    }
}

// The estimate must not depend on the number and placement of interfaces beyond its error bars:
// automatic interfaces against a hand-made set of different number and spacing, at 10 kT.
#[test]
fn ffs_does_not_depend_on_the_interfaces() {
    let (m, t) = model(
        OD,
        &[
            "potential.barrier=10",
            "simulation.method=ffs",
            "simulation.trials=4000",
        ],
    );
    let auto = rare(&m, &t);
    let (m2, t2) = model(
        OD,
        &[
            "potential.barrier=10",
            "simulation.method=ffs",
            "simulation.trials=4000",
            "simulation.seed=42",
            "simulation.interfaces=[-0.75, -0.6, -0.5, -0.4, -0.3, -0.2, -0.1, 0.0, 0.2]",
        ],
    );
    let given = rare(&m2, &t2);
    let n_auto = auto.details.ffs.as_ref().unwrap().interfaces.len();
    let n_given = given.details.ffs.as_ref().unwrap().interfaces.len();
    assert_ne!(n_auto, n_given);
    let se = (ffs_se(&auto).powi(2) + ffs_se(&given).powi(2)).sqrt();
    assert!(
        (auto.rate - given.rate).abs() < 4.0 * se,
        "auto {} vs given {} (se {se})",
        auto.rate,
        given.rate
    );
}

const UD: &str = "[particle]\nmass = 1.0\nfriction = 0.25\n[potential]\nfamily = \"double-well\"\nbarrier = 6.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\ntrajectories = 2000\nseed = 9\n";

// Underdamped FFS (states carry velocities) against brute force at 6 kT, weak (γ/ω_b = 0.05) and
// strong (γ/ω_b = 2) friction: the difference within 4 combined standard errors plus the FFS
// time-step bias.
#[test]
fn underdamped_ffs_matches_brute_force() {
    for g in ["0.25", "10"] {
        let f = format!("particle.friction={g}");
        let (m, t) = model(UD, &[&f, "simulation.method=ffs"]);
        let ffs = rare(&m, &t);
        let (m, t) = model(UD, &[&f, "simulation.method=brute-force"]);
        let (bf_rate, bf_se) = brute_force_rate(&m, &t);
        let se = (ffs_se(&ffs).powi(2) + bf_se * bf_se).sqrt();
        assert!(
            (ffs.rate - bf_rate).abs() < 4.0 * se + FFS_DT_BIAS * bf_rate,
            "gamma {g}: FFS {} vs brute force {bf_rate} (se {se})",
            ffs.rate
        );
    }
}

// Reactive flux at moderate-to-high friction, E_b = 10 kT: the plateau κ against Kramers'
// λ₊/ω_b (Kramers 1940). The exact 1-D transmission differs from λ₊/ω_b by finite-barrier terms of
// order kT/E_b (seen 3% low at γ/ω_b = 0.7): allowed 10% below, plus 4σ.
#[test]
fn reactive_flux_transmission_matches_kramers() {
    let text = "[particle]\nmass = 1.0\nfriction = 5.0\n[potential]\nfamily = \"double-well\"\nbarrier = 10.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nmethod = \"reactive-flux\"\nseed = 5\n";
    for g in ["5", "15"] {
        let (m, t) = model(text, &[&format!("particle.friction={g}")]);
        let s = rare(&m, &t);
        let k = s.details.reactive_flux.as_ref().unwrap();
        assert!(k.plateau_reached, "gamma {g}: plateau");
        let wb = t.landscape.omega_barrier.unwrap();
        let gamma: f64 = g.parse().unwrap();
        let kramers = escapade::theory::kramers::lambda_plus(gamma, wb) / wb;
        let se = (k.kappa_ci95[1] - k.kappa_ci95[0]) / (2.0 * 1.96);
        let r = k.kappa / kramers;
        assert!(
            r > 1.0 - 0.10 - 4.0 * se / kramers && r < 1.0 + 4.0 * se / kramers,
            "gamma {g}: kappa {} vs lambda+/omega_b {kramers}",
            k.kappa
        );
        // the rate is kappa times the exact TST rate
        assert!((s.rate / (k.kappa * t.rates.tst_exact.unwrap()) - 1.0).abs() < 1e-12);
    }
}

// Brute force far beyond the budget is refused with the expected cost and a pointer to FFS.
#[test]
fn brute_force_beyond_the_budget_is_refused() {
    let (m, t) = model(
        OD,
        &["potential.barrier=25", "simulation.method=brute-force"],
    );
    let e = common::plan(&m, &t).unwrap_err().to_string();
    assert!(
        e.contains("expected brute-force cost") && e.contains("ffs"),
        "{e}"
    );
    let (m, t) = model(OD, &["potential.barrier=3"]);
    assert_eq!(common::plan(&m, &t).unwrap().method, Method::BruteForce);
}
