//! Memory friction: the generalised Langevin equation with an exponential kernel
//! K(t) = (γ/τ)e^{−t/τ}, simulated by Markovian embedding (PHYSICS.md §5). Stationary moments,
//! rates against Grote–Hynes, the memoryless limit, determinism and the plan's rules. Fixed seeds;
//! tolerances in standard errors (4σ) plus stated biases; no retries.

mod common;
use common::batch_mean;

use escapade::report::SimulationResult;
use escapade::scenario::{Model, Override};
use escapade::simulate::engine::{Kind, Params, Start, sample_states};
use escapade::simulate::force::{ConstD, Grid, GridForce};
use escapade::simulate::{self, Plan, RunOptions, SimError, run_ensemble};
use escapade::stats::{Outcome, summarise};
use escapade::theory::{self, TheoryReport};
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::path::Path;
use std::sync::atomic::AtomicBool;

fn model(text: &str, sets: &[String]) -> (Model, TheoryReport) {
    let o: Vec<Override> = sets.iter().map(|s| Override::parse(s).unwrap()).collect();
    let m = Model::from_text(text, "test", Path::new("."), &o).unwrap();
    let t = theory::analyse(&m.system).unwrap();
    (m, t)
}

fn brute(m: &Model, t: &TheoryReport, threads: usize) -> (Plan, Vec<Outcome>) {
    let plan = common::plan(m, t).unwrap();
    let opts = RunOptions {
        threads,
        ..RunOptions::default()
    };
    let r = run_ensemble(&plan, &opts, &AtomicBool::new(false), |_, _| {}).unwrap();
    (plan, r.outcomes)
}

// Harmonic well U = κx²/2 (κ = 4, m = 2, γ = 1, τ = 0.5): the embedded stationary law
// exp(−[m v²/2 + U + τ z²/(2mγ)]/kT) (PHYSICS.md §5; the Lyapunov check is in engine.rs) gives
// ⟨m v²⟩ = ⟨κ x²⟩ = τ⟨z²⟩/(mγ) = kT. The quadratic is tabulated through the grid force, whose
// Hermite cubics represent U' = κx exactly (a formula or the double well is not harmonic). The
// O-step is exact, so the only bias is the splitting's O(dt²) one, (ω dt)² ≈ 2e-4 relative at
// dt = 0.01, allowed on top of 4 batch-mean standard errors (about 1% each here).
#[test]
fn stationary_moments_in_a_harmonic_well() {
    let (kappa, mass, gamma, tau, dt) = (4.0, 2.0, 1.0, 0.5, 0.01);
    let grid = Grid::build_scaled(&|x| kappa * x, &|_| kappa, -20.0, 20.0, 1e-12, -1.0);
    let force = GridForce(grid);
    let p = Params {
        kind: Kind::BaoabMemory,
        dt,
        max_steps: u64::MAX,
        seed: 17,
        target: f64::INFINITY,
        dir: 1.0,
        lo: -20.0,
        hi: 20.0,
        mass,
        gamma,
        memory_time: tau,
        start: Start::At(0.0),
    };
    let path = sample_states(&p, &force, &ConstD(1.0), 0, 0.0, 4_000_000, 4);
    let bias = (kappa / mass) * dt * dt;
    let checks: [(&str, Vec<f64>); 3] = [
        ("<m v^2>", path.iter().map(|s| mass * s.v * s.v).collect()),
        ("<k x^2>", path.iter().map(|s| kappa * s.x * s.x).collect()),
        (
            "tau <z^2> / (m gamma)",
            path.iter()
                .map(|s| tau * s.z * s.z / (mass * gamma))
                .collect(),
        ),
    ];
    for (what, xs) in checks {
        let (m, se) = batch_mean(&xs);
        println!("{what} = {m} ± {se}");
        assert!((m - 1.0).abs() < 4.0 * se + bias, "{what} = {m} ± {se}");
    }
}

const DW: &str = "[particle]\nmass = 1.0\nfriction = 1.0\nmemory_time = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 10.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nseed = 23\n";

// Reactive flux at E_b = 10 kT against the Grote–Hynes transmission κ = λ_r/ω_b (Grote & Hynes,
// J. Chem. Phys. 73, 2715 (1980); λ_r the root of λ² + λγ/(1 + λτ) = ω_b²), for γ/ω_b = 2 and 5
// with τω_b = 0.5 and 2. As for the memoryless Kramers check in tests/rare_events.rs, the exact 1-D
// transmission lies below the parabolic-barrier value by finite-barrier terms of order kT/E_b:
// allowed 10% below, plus 4σ.
#[test]
fn reactive_flux_transmission_matches_grote_hynes() {
    let wb = 40f64.sqrt(); // ω_b² = |U''(0)|/m = 4 E_b / a² for the double well
    for (g, tw) in [(2.0, 0.5), (5.0, 2.0)] {
        let sets = [
            format!("particle.friction={}", g * wb),
            format!("particle.memory_time={}", tw / wb),
            "simulation.method=reactive-flux".to_string(),
        ];
        let (m, t) = model(DW, &sets);
        let plan = common::plan(&m, &t).unwrap();
        assert_eq!(plan.scheme, "baoab-memory");
        let (r, wall, threads) =
            simulate::run_rare(&plan, &m.system, &t, 0, &AtomicBool::new(false)).unwrap();
        let s = SimulationResult::rare(&plan, r, wall, threads);
        let k = s.details.reactive_flux.as_ref().unwrap();
        assert!(k.plateau_reached, "gamma/wb {g}, tau wb {tw}: plateau");
        assert_eq!(t.landscape.omega_barrier.unwrap(), wb);
        let gh = theory::kramers::lambda_grote_hynes(g * wb, wb, tw / wb) / wb;
        let kr = theory::kramers::lambda_plus(g * wb, wb) / wb;
        let se = (k.kappa_ci95[1] - k.kappa_ci95[0]) / (2.0 * 1.96);
        println!(
            "gamma/wb {g}, tau wb {tw}: kappa {} ± {se}, GH {gh}, Kramers {kr}",
            k.kappa
        );
        // memory matters here: κ is far (≥ 9σ) above Kramers' memoryless λ₊/ω_b
        assert!(k.kappa - kr > 4.0 * se, "kappa {} vs Kramers {kr}", k.kappa);
        let r = k.kappa / gh;
        assert!(
            r > 1.0 - 0.10 - 4.0 * se / gh && r < 1.0 + 4.0 * se / gh,
            "gamma/wb {g}, tau wb {tw}: kappa {} ± {se} vs lambda_r/omega_b {gh}",
            k.kappa
        );
    }
}

/// Simulated rate and its standard error (censored-exponential MLE, relative error 1/sqrt(escapes)).
fn rate(plan: &Plan, out: &[Outcome]) -> (f64, f64) {
    let s = summarise(out, plan.params.dt, plan.params.max_steps);
    (s.rate, s.rate / (s.escaped as f64).sqrt())
}

const UD: &str = "[particle]\nmass = 1.0\nfriction = 1.0\nmemory_time = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 6.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nmethod = \"brute-force\"\ntrajectories = 2000\nseed = 31\n";

// Brute-force escape (the lock-step lanes with memory) at E_b = 6 kT, γ/ω_b = 2, τω_b = 0.5.
// (1) Against k_GH = (λ_r/ω_b) k_TST (Grote & Hynes, J. Chem. Phys. 73, 2715 (1980)): as for
// Kramers at the same barrier and friction in tests/simulation.rs, the rate measured as 1/MFPT
// sits below the asymptotic formula by finite-barrier terms of order kT/E_b (about 8% in the
// overdamped limit): allowed 12% below, plus 4σ. (2) Against the reactive-flux rate κ k_TST,exact
// of the same dynamics (the per-step integrator through another code path), which carries the
// finite-barrier terms too: within 4 combined standard errors plus 2% for the difference between
// an escape rate to the product minimum and the barrier-top flux (recrossing after the plateau and
// the slide to the minimum, both of order 1/(ω t_escape) ≈ 1e-3 here, and the step-detection bias
// of first passage, ~1% as for FFS in tests/rare_events.rs). (3) Against forward flux sampling.
#[test]
fn brute_force_rate_matches_grote_hynes_at_6_kt() {
    let wb = 24f64.sqrt();
    let sets = [
        format!("particle.friction={}", 2.0 * wb),
        format!("particle.memory_time={}", 0.5 / wb),
        "simulation.trajectories=3000".to_string(),
    ];
    let (m, t) = model(UD, &sets);
    let (plan, out) = brute(&m, &t, 0);
    assert_eq!(plan.params.kind, Kind::BaoabMemory);
    let (k, se) = rate(&plan, &out);
    let gh = t.rates.grote_hynes.unwrap();
    let r = k / gh;
    assert!(
        r > 1.0 - 0.12 - 4.0 * se / gh && r < 1.0 + 4.0 * se / gh,
        "brute force {k} ± {se} vs Grote-Hynes {gh}"
    );
    let mut fsets = sets.to_vec();
    fsets[2] = "simulation.method=reactive-flux".to_string();
    fsets.push("simulation.trajectories=20000".to_string());
    let (m, t) = model(UD, &fsets);
    let fplan = common::plan(&m, &t).unwrap();
    let (res, wall, threads) =
        simulate::run_rare(&fplan, &m.system, &t, 0, &AtomicBool::new(false)).unwrap();
    let f = SimulationResult::rare(&fplan, res, wall, threads);
    let fse = (f.rate_ci95[1] - f.rate_ci95[0]) / (2.0 * 1.96);
    println!(
        "brute force {k} ± {se}, reactive flux {} ± {fse}, GH {gh}, Kramers {}",
        f.rate,
        t.rates.kramers.unwrap()
    );
    assert!(
        (k - f.rate).abs() < 4.0 * (se * se + fse * fse).sqrt() + 0.02 * f.rate,
        "brute force {k} ± {se} vs reactive flux {} ± {fse}",
        f.rate
    );
    // (3) Forward flux sampling, whose stored states carry the memory force: within 4 combined
    // standard errors plus its 1% time-step allowance (tests/rare_events.rs, FFS_DT_BIAS).
    let mut ssets = sets.to_vec();
    ssets[2] = "simulation.method=ffs".to_string();
    ssets.push("simulation.trials=5000".to_string());
    let (m, t) = model(UD, &ssets);
    let splan = common::plan(&m, &t).unwrap();
    let (res, wall, threads) =
        simulate::run_rare(&splan, &m.system, &t, 0, &AtomicBool::new(false)).unwrap();
    let ffs = SimulationResult::rare(&splan, res, wall, threads);
    let reps = ffs.details.ffs.as_ref().unwrap().replica_rates.len() as f64;
    let tq = StudentsT::new(0.0, 1.0, reps - 1.0)
        .unwrap()
        .inverse_cdf(0.975);
    let sse = 0.5 * (ffs.rate_ci95[1] - ffs.rate_ci95[0]) / tq;
    println!("ffs {} ± {sse}", ffs.rate);
    assert!(
        (k - ffs.rate).abs() < 4.0 * (se * se + sse * sse).sqrt() + 0.01 * k,
        "brute force {k} ± {se} vs FFS {} ± {sse}",
        ffs.rate
    );
}

// τ → 0 (τ = 1e-4/ω_b, far below dt) is memoryless friction: brute-force rates of the memory and the
// memoryless BAOAB engine at E_b = 4 kT, γ/ω_b = 1, agree within 4 combined standard errors
// (1.4% each with 10 000 trajectories). The memory engine's O(τ/dt) departure from BAOAB's O-step
// is 1e-2 of its own noise and negligible beside that.
#[test]
fn vanishing_memory_equals_the_memoryless_engine() {
    let wb = 16f64.sqrt();
    let common = [
        "potential.barrier=4".to_string(),
        format!("particle.friction={wb}"),
        "simulation.dynamics=underdamped".to_string(),
        "simulation.trajectories=10000".to_string(),
    ];
    let text = UD.replace("memory_time = 1.0\n", "");
    let (m0, t0) = model(&text, &common);
    let (p0, o0) = brute(&m0, &t0, 0);
    let mut sets = common.to_vec();
    sets.push(format!("particle.memory_time={}", 1e-4 / wb));
    let (m1, t1) = model(UD, &sets);
    let (p1, o1) = brute(&m1, &t1, 0);
    assert_eq!((p0.scheme, p1.scheme), ("baoab", "baoab-memory"));
    assert_eq!(p0.params.dt, p1.params.dt);
    let ((k0, s0), (k1, s1)) = (rate(&p0, &o0), rate(&p1, &o1));
    println!("memoryless {k0} ± {s0}, tau -> 0 {k1} ± {s1}");
    assert!(
        (k0 - k1).abs() < 4.0 * (s0 * s0 + s1 * s1).sqrt(),
        "memoryless {k0} ± {s0} vs tau -> 0 {k1} ± {s1}"
    );
}

// Every number a trajectory uses (including its memory force) comes from its own stream: the
// outcomes are identical on 1 and 2 threads.
#[test]
fn memory_results_do_not_depend_on_the_thread_count() {
    let sets = [
        "potential.barrier=3".to_string(),
        "particle.friction=3".to_string(),
        "particle.memory_time=0.2".to_string(),
        "simulation.trajectories=300".to_string(),
    ];
    let (m, t) = model(UD, &sets);
    let (_, one) = brute(&m, &t, 1);
    let (_, two) = brute(&m, &t, 2);
    assert_eq!(one.len(), 300);
    assert_eq!(one, two);
}

// The plan's rules for memory: underdamped by default even at high friction (where memoryless
// friction defaults to overdamped), explicit overdamped dynamics refused on its key, and the memory
// time in the fingerprint so records of another τ cannot be resumed.
#[test]
fn memory_plan_rules() {
    let high = [
        "particle.friction=60".to_string(),
        "simulation.method=auto".to_string(),
    ];
    let (m, t) = model(UD, &high);
    let plan = common::plan(&m, &t).unwrap();
    assert_eq!(plan.scheme, "baoab-memory");
    assert_eq!(plan.params.memory_time, 1.0);
    let mut od = high.to_vec();
    od.push("simulation.dynamics=overdamped".to_string());
    let (m, t) = model(UD, &od);
    match common::plan(&m, &t) {
        Err(SimError::Key { key, message }) => {
            assert_eq!(key, "simulation.dynamics");
            assert!(message.contains("memory_time") && !message.contains('\n'));
        }
        other => panic!("{other:?}"),
    }
    let (m2, t2) = model(
        UD,
        &[high[0].clone(), "particle.memory_time=1.5".to_string()],
    );
    let plan2 = common::plan(&m2, &t2).unwrap();
    assert_ne!(plan.fingerprint, plan2.fingerprint);
}
