//! Position-dependent diffusion recovered from synthetic overdamped trajectories with a known
//! U(x) and D(x) (observe::propagator), and D of a restrained free particle (observe::umbrella).
//!
//! Landscape: U = (E_b/2)(1 + cos(πx/L)), E_b = 2.5 kT, L = 2: barrier at 0, wells at ±2 with
//! curvature U'' = E_b π²/(2L²) = 3.08, reflecting walls at the next barrier tops ±4 (mirror
//! images of the periodic landscape for constant D). 40 bins on [−4, 4] (Δx = 0.2), so the
//! lattice's well bias F''Δx²/4 is 3% (see the propagator module doc); frames every 0.1 time units.

use escapade::observe::propagator::{self, BayesSettings, Bins, LagScan};
use escapade::observe::umbrella;
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::f64::consts::PI;

const EB: f64 = 2.5;
const L: f64 = 2.0;
/// Integrator step and steps per frame.
const DT: f64 = 1e-3;
const EVERY: usize = 100;
const FRAME: f64 = DT * EVERY as f64;
/// 10⁵ frames: 10⁴ time units, about 400 barrier crossings.
const FRAMES: usize = 100_000;
/// Interfaces 9, 19, 29 sit at x = −2 (well), 0 (barrier), 2 (well).
const CHECKED: [usize; 3] = [9, 19, 29];

fn bins() -> Bins {
    Bins::new(-2.0 * L, 2.0 * L, 40).unwrap()
}

fn force(x: f64) -> f64 {
    let a = PI / L;
    EB / 2.0 * a * (a * x).sin()
}

/// D(x) and D'(x).
type Diffusion = fn(f64) -> (f64, f64);

fn constant(_: f64) -> (f64, f64) {
    (1.0, 0.0)
}

/// D rising linearly from 1 at the left wall to 2 at the right wall.
fn ramp(x: f64) -> (f64, f64) {
    (1.5 + x / (4.0 * L), 1.0 / (4.0 * L))
}

/// Itô Euler–Maruyama for dx = (D F + D') dt + sqrt(2D) dW (stationary density e^{−U}),
/// reflected at ±2L, sampled every `EVERY` steps. EM's stationary bias is O(D U'' dt) ≈ 0.6%
/// at most here, far inside the intervals tested.
fn trajectory(seed: u64, d: Diffusion) -> Vec<f64> {
    let mut rng = seed::stream(seed, 0);
    let w = 2.0 * L;
    let mut x = -L;
    let mut out = Vec::with_capacity(FRAMES);
    for _ in 0..FRAMES {
        for _ in 0..EVERY {
            let (dx, ddx) = d(x);
            let z: f64 = rng.sample(StandardNormal);
            x += (dx * force(x) + ddx) * DT + (2.0 * dx * DT).sqrt() * z;
            if x > w {
                x = 2.0 * w - x;
            } else if x < -w {
                x = -2.0 * w - x;
            }
        }
        out.push(x);
    }
    out
}

/// (a) The 95% posterior intervals of D at the wells and the barrier cover the generating D(x),
/// constant and varying 2x. Source of the truth: the generator itself. 20 seeds × 2 profiles × 3
/// interfaces = 120 checks at lag 2 frames (bin-spread bias Δx²/(12DΔt) ≤ 1.7%, well lattice bias
/// ~3%, both well inside the ±10–25% intervals). The issue asks for coverage in at least 90% of
/// 20 seeds: at most 12 misses. At 95% coverage 6 are expected (binomial sd 2.4), so more than 12
/// happens with probability < 1% for independent checks: the bound fails only when the intervals
/// are too narrow or biased. (About 26 s in release.)
#[test]
fn intervals_cover_the_generating_diffusion() {
    let bins = bins();
    let settings = BayesSettings::default();
    let mut misses = Vec::new();
    let mut checks = 0;
    for (name, d) in [
        ("constant", constant as Diffusion),
        ("ramp", ramp as Diffusion),
    ] {
        for s in 1..=20u64 {
            let x = trajectory(1000 + s, d);
            let counts = propagator::count_transitions(&[&x], &bins, 2).unwrap();
            let fit = propagator::bayesian(&counts, &bins, 2.0 * FRAME, &settings).unwrap();
            assert!(
                fit.acceptance > 0.3,
                "{name} seed {s}: acceptance {}",
                fit.acceptance
            );
            for k in CHECKED {
                let i = &fit.diffusion[k];
                let truth = d(i.x).0;
                checks += 1;
                if !(i.ci95[0] <= truth && truth <= i.ci95[1]) {
                    misses.push(format!(
                        "{name} seed {s} x {:.1}: {truth} not in {:?}",
                        i.x, i.ci95
                    ));
                }
            }
        }
    }
    assert_eq!(checks, 120);
    eprintln!("{} of {checks} checks missed", misses.len());
    assert!(misses.len() <= 12, "{} misses: {misses:#?}", misses.len());
}

fn scan(d: Diffusion) -> LagScan {
    let x = trajectory(7, d);
    propagator::lag_scan(
        &[&x],
        FRAME,
        &bins(),
        &[1, 2, 5, 10],
        &BayesSettings::default(),
    )
    .unwrap()
}

/// (b) Lag-time independence: at lags of 1, 2, 5 and 10 frames the medians agree within the
/// intervals (the module's own criterion: spread of the medians ≤ the mean 95% width) at every
/// interface, and each lag's interval at the checked interfaces covers the generating D.
/// Source: a Markovian diffusion has one D at every lag (Hummer 2005).
#[test]
fn bayesian_d_does_not_depend_on_the_lag() {
    for (name, d) in [
        ("constant", constant as Diffusion),
        ("ramp", ramp as Diffusion),
    ] {
        let scan = scan(d);
        assert!(
            scan.warning.is_none(),
            "{name}: {:?} at {:?}",
            scan.warning,
            scan.inconsistent
        );
        for fit in &scan.fits {
            for k in CHECKED {
                let i = &fit.diffusion[k];
                let truth = d(i.x).0;
                assert!(
                    i.ci95[0] <= truth && truth <= i.ci95[1],
                    "{name} lag {}: D({}) = {truth} not in {:?}",
                    fit.lag_frames,
                    i.x,
                    i.ci95
                );
            }
        }
        assert!(scan.max_relative_spread.is_finite());
    }
}

/// (c) The conditional-moment estimate is biased low in a well at long lags: the spread of a
/// displacement saturates at the well's variance. For an Ornstein–Uhlenbeck well of curvature k,
/// Var(Δx | x) = (1 − e^{−2kDΔt})/k, so the estimate is D(1 − e^{−2kDΔt})/(2kDΔt): 0.74 D at 1
/// frame and 0.16 D at 10 frames (k = 3.08; the cosine well is softer away from its bottom, so
/// the measured values lie somewhat higher). Checked: below D by more than 4 SE at 10 frames and
/// falling with the lag by more than 4 combined SE, while the Bayesian D at that lag covers D.
#[test]
fn conditional_moments_show_their_lag_bias() {
    let x = trajectory(11, constant);
    let bins = bins();
    let short = propagator::conditional_moments(&[&x], FRAME, &bins, 1).unwrap();
    let long = propagator::conditional_moments(&[&x], FRAME, &bins, 10).unwrap();
    // Bins 9 and 30 have centres −2.1 and 2.1, beside the wells' bottoms.
    for b in [9, 30] {
        let (s, l) = (&short.bins[b], &long.bins[b]);
        let (ds, ses) = (s.d.unwrap(), s.d_se.unwrap());
        let (dl, sel) = (l.d.unwrap(), l.d_se.unwrap());
        assert!(
            dl < 1.0 - 4.0 * sel,
            "bin {b}: long-lag D {dl} ± {sel} not below 1"
        );
        assert!(
            ds - dl > 4.0 * (ses * ses + sel * sel).sqrt(),
            "bin {b}: {ds} vs {dl}"
        );
        // The raw second moment adds the squared drift, so it is never below the corrected one.
        assert!(l.d_raw.unwrap() >= dl);
    }
    let counts = propagator::count_transitions(&[&x], &bins, 10).unwrap();
    let fit =
        propagator::bayesian(&counts, &bins, 10.0 * FRAME, &BayesSettings::default()).unwrap();
    for k in [9, 29] {
        let i = &fit.diffusion[k];
        assert!(
            i.ci95[0] <= 1.0 && 1.0 <= i.ci95[1],
            "Bayesian D({}) {:?}",
            i.x,
            i.ci95
        );
    }
}

/// Exact Ornstein–Uhlenbeck samples of U = k(x − c)²/2 with constant D, every `interval`.
fn restrained(seed: u64, k: f64, d: f64, c: f64, interval: f64, n: usize) -> Vec<f64> {
    let mut rng = seed::stream(seed, 0);
    let decay = (-k * d * interval).exp();
    let spread = ((1.0 - decay * decay) / k).sqrt();
    let mut x = c;
    (0..n)
        .map(|_| {
            x = c + (x - c) * decay + spread * rng.sample::<f64, _>(StandardNormal);
            x
        })
        .collect()
}

/// (d) A restrained free particle: for the Ornstein–Uhlenbeck process C(t) = var e^{−kDt},
/// ∫C = var/(kD) and var = 1/k, so var²/∫C = D exactly (Woolf & Roux 1994; Hummer 2005).
/// Tolerance: 4 batch-means SE plus the known truncation bias, the neglected exponential tail
/// e^{−kD·window} of the integral (the trapezoid's own error (kDΔt)²/12 ≈ 3e-5 is negligible).
#[test]
fn umbrella_window_recovers_d_of_a_restrained_free_particle() {
    let (k, d, c, interval) = (4.0, 0.5, 1.3, 0.01);
    let x = restrained(21, k, d, c, interval, 1_000_000);
    let w = umbrella::window_diffusion(&x, interval, k).unwrap();
    let tail = (-k * d * w.window_frames as f64 * interval).exp();
    assert!(
        (w.d - d).abs() < 4.0 * w.d_se + d * tail,
        "D = {} ± {} (window {} frames, {})",
        w.d,
        w.d_se,
        w.window_frames,
        w.truncation
    );
    assert!(
        w.d_ci95[0] < d && d < w.d_ci95[1] + d * tail,
        "{:?}",
        w.d_ci95
    );
    // The standard error is a real error bar: a few percent for 10⁴ relaxation times, not 0.
    assert!(w.d_se > 0.001 * d && w.d_se < 0.1 * d, "se {}", w.d_se);
    assert!((w.mean - c).abs() < 0.05, "mean {}", w.mean);
    assert!(w.warnings.is_empty(), "{:?}", w.warnings);
    // Told the wrong spring (variance 1/4 against 1/k = 1/2), it warns.
    let wrong = umbrella::window_diffusion(&x, interval, 2.0).unwrap();
    assert_eq!(wrong.warnings.len(), 1);
    assert_eq!(wrong.d, w.d);
}
