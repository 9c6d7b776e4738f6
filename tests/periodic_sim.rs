//! Long-trajectory measurements on periodic landscapes against exact theory: effective diffusion
//! (Lifson & Jackson, J. Chem. Phys. 36, 2410 (1962)), drift, and hopping rates. Fixed seeds;
//! tolerances in standard errors (4σ) plus stated time-step biases.

mod common;
use common::model;

use escapade::simulate;
use std::sync::atomic::AtomicBool;

/// I0(x) by its power series Σ (x/2)^{2k}/(k!)² (Abramowitz & Stegun 9.6.10); 40 terms reach
/// 1e-16 relative for x ≤ 10.
fn bessel_i0(x: f64) -> f64 {
    let (mut term, mut sum) = (1.0, 1.0);
    for k in 1..40 {
        term *= (x / 2.0).powi(2) / f64::from(k * k);
        sum += term;
    }
    sum
}

const WB: &str = "[particle]\ndiffusion = 1.0\n[potential]\nfamily = \"washboard\"\namplitude = 2.0\nperiod = 1.0\ntilt = 0.0\n[simulation]\nseed = 11\nlong_trajectories = 96\n";

// Untilted washboard U = −A cos(2πx/L), A = 2 kT: D_eff = D/I0(A/kT)² (Lifson–Jackson closed
// form), within 4 standard errors of the estimate (about 2% each over 96 × 48 blocks); the
// time-step bias of the hopping (overdamped Leimkuhler–Matthews at the default dt) is allowed 2%
// (the MFPT tests see ≤ 1%). Drift must vanish within 4σ; forward and
// backward hopping rates must agree within 4 combined standard errors.
#[test]
fn untilted_washboard_effective_diffusion_matches_lifson_jackson() {
    let (m, t) = model(WB, &[]);
    let plan = common::plan(&m, &t).unwrap();
    let k_total = 2.0 * t.rates.mfpt.unwrap();
    let (r, _) = simulate::run_periodic(
        &plan,
        &[0.0],
        -0.5,
        1.0,
        k_total,
        0,
        &AtomicBool::new(false),
    )
    .unwrap();
    let exact = 1.0 / bessel_i0(2.0).powi(2);
    // the standard error from the reported 95% interval (fourth-moment interval of a variance)
    let se = (r.effective_diffusion_ci95[1] - r.effective_diffusion_ci95[0]) / (2.0 * 1.96);
    eprintln!(
        "D_eff {} [{:?}] vs {exact} (se {se}); drift {} {:?}; hops {} / {} ({} {})",
        r.effective_diffusion,
        r.effective_diffusion_ci95,
        r.drift,
        r.drift_ci95,
        r.hop_forward,
        r.hop_backward,
        r.hops_forward,
        r.hops_backward
    );
    assert!(
        (r.effective_diffusion - exact).abs() < 4.0 * se + 0.02 * exact,
        "D_eff {} vs {exact}",
        r.effective_diffusion
    );
    let half = 0.5 * (r.drift_ci95[1] - r.drift_ci95[0]);
    assert!(r.drift.abs() < 4.0 / 1.96 * half, "drift {}", r.drift);
    // Poisson counts: se(k) = k/sqrt(N)
    let se_h = (r.hop_forward.powi(2) / r.hops_forward as f64
        + r.hop_backward.powi(2) / r.hops_backward as f64)
        .sqrt();
    assert!((r.hop_forward - r.hop_backward).abs() < 4.0 * se_h);
}

// Results depend on the seed only.
#[test]
fn periodic_runs_do_not_depend_on_threads() {
    let (m, t) = model(WB, &["simulation.long_trajectories=4"]);
    let plan = common::plan(&m, &t).unwrap();
    let k = 2.0 * t.rates.mfpt.unwrap();
    let stop = AtomicBool::new(false);
    let (a, _) = simulate::run_periodic(&plan, &[0.0], -0.5, 1.0, k, 1, &stop).unwrap();
    let (b, _) = simulate::run_periodic(&plan, &[0.0], -0.5, 1.0, k, 2, &stop).unwrap();
    assert_eq!(a.drift.to_bits(), b.drift.to_bits());
    assert_eq!(
        a.effective_diffusion.to_bits(),
        b.effective_diffusion.to_bits()
    );
    assert_eq!(
        (a.hops_forward, a.hops_backward),
        (b.hops_forward, b.hops_backward)
    );
}

// Two wells per period (depths 5 and 3 kT below the barriers, a small tilt): the sites are both
// minima of a period, and the block length follows the slower L²/2D_eff. Drift, D_eff and the
// hopping rates out of the deep well against the exact overdamped theory (theory::periodic, itself
// checked against mpmath), within 4 standard errors (from the reported 95% intervals) + 3% for
// the block-end bias of D_eff (simulate::periodic::BLOCK_TIMES) and the time-step bias.
#[test]
fn two_wells_per_period_match_the_exact_theory() {
    let text = "[particle]\ndiffusion = 1.0\n[potential]\nexpr = \"-2*cos(4*pi*x) - cos(2*pi*x) - 0.3*x\"\ndomain = [-0.5, 0.5]\nperiodic = 1.0\n[states]\nstart = 0.0\n[simulation]\nseed = 17\nlong_trajectories = 48\n";
    let (m, t) = model(text, &[]);
    let p = t.periodic.as_ref().unwrap();
    let h = p.hopping.as_ref().unwrap();
    assert_eq!(h.period_minima.len(), 2, "{:?}", h.period_minima);
    let plan = common::plan(&m, &t).unwrap();
    let (r, _) = simulate::run_periodic_for(&plan, &t, 0, &AtomicBool::new(false))
        .unwrap()
        .unwrap();
    let check = |theory: f64, sim: f64, ci: [f64; 2], what: &str| {
        let se = (ci[1] - ci[0]) / (2.0 * 1.96);
        eprintln!("{what}: simulated {sim} {ci:?} vs {theory}");
        assert!(
            (sim - theory).abs() < 4.0 * se + 0.03 * theory.abs(),
            "{what}: simulated {sim} {ci:?} vs theory {theory}"
        );
    };
    check(p.drift, r.drift, r.drift_ci95, "drift");
    check(
        p.effective_diffusion.unwrap(),
        r.effective_diffusion,
        r.effective_diffusion_ci95,
        "D_eff",
    );
    check(h.forward, r.hop_forward, r.hop_forward_ci95, "k+");
    check(h.backward, r.hop_backward, r.hop_backward_ci95, "k-");
}
