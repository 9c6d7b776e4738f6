//! Friction and memory time from velocities (`observe::velocity`) on synthetic trajectories with
//! known γ, m and memory time, generated here by exact updates of linear stochastic equations.
//!
//! Every check is "within 4 bootstrap standard errors of the generating value, plus any stated
//! discretisation bias" (the crate's rule for stochastic tests), and each also checks that the
//! standard error is small enough for the check to mean something.

use escapade::observe::velocity::{
    self, Estimate, Friction, MeanForce, Options, Origin, Route, fd_factor,
};
use escapade::observe::{self, Interval, Source};
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use rand_pcg::Pcg64;

type M2 = [[f64; 2]; 2];

fn mul(a: &M2, b: &M2) -> M2 {
    let mut c = [[0.0; 2]; 2];
    for i in 0..2 {
        for j in 0..2 {
            c[i][j] = a[i][0] * b[0][j] + a[i][1] * b[1][j];
        }
    }
    c
}

fn transpose(a: &M2) -> M2 {
    [[a[0][0], a[1][0]], [a[0][1], a[1][1]]]
}

/// e^{A h} of a 2×2 matrix by Cayley–Hamilton: e^{sh}[c I + S (A − s I)], s = tr A/2,
/// q² = s² − det A, c = cosh qh (cos), S = sinh(qh)/q (sin(|q|h)/|q|), S = h at q = 0.
fn expm(a: &M2, h: f64) -> M2 {
    let s = 0.5 * (a[0][0] + a[1][1]);
    let q2 = s * s - (a[0][0] * a[1][1] - a[0][1] * a[1][0]);
    let (c, sh) = if q2 > 0.0 {
        let q = q2.sqrt();
        ((q * h).cosh(), (q * h).sinh() / q)
    } else if q2 < 0.0 {
        let q = (-q2).sqrt();
        ((q * h).cos(), (q * h).sin() / q)
    } else {
        (1.0, h)
    };
    let e = (s * h).exp();
    [
        [e * (c + sh * (a[0][0] - s)), e * sh * a[0][1]],
        [e * sh * a[1][0], e * (c + sh * (a[1][1] - s))],
    ]
}

/// The exact update over h of a stationary linear SDE dy = A y dt + noise with stationary
/// covariance `eq` (diagonal): y ← E y + L ξ, E = e^{Ah}, L Lᵀ = Σ_eq − E Σ_eq Eᵀ (the
/// covariance of an Ornstein–Uhlenbeck step; Gardiner, Handbook of Stochastic Methods, §4.4.6).
struct Exact {
    e: M2,
    l: M2,
    eq: [f64; 2],
}

impl Exact {
    fn new(a: M2, eq: [f64; 2], h: f64) -> Self {
        let e = expm(&a, h);
        let d = [[eq[0], 0.0], [0.0, eq[1]]];
        let ede = mul(&mul(&e, &d), &transpose(&e));
        let s = [
            [eq[0] - ede[0][0], -ede[0][1]],
            [-ede[1][0], eq[1] - ede[1][1]],
        ];
        let l00 = s[0][0].sqrt();
        let l10 = s[1][0] / l00;
        let l11 = (s[1][1] - l10 * l10).max(0.0).sqrt();
        Self {
            e,
            l: [[l00, 0.0], [l10, l11]],
            eq,
        }
    }

    /// n samples of the first and second components, started from the stationary law.
    fn run(&self, n: usize, rng: &mut Pcg64) -> (Vec<f64>, Vec<f64>) {
        let g = |r: &mut Pcg64| r.sample::<f64, _>(StandardNormal);
        let mut y = [self.eq[0].sqrt() * g(rng), self.eq[1].sqrt() * g(rng)];
        let (mut a, mut b) = (Vec::with_capacity(n), Vec::with_capacity(n));
        for _ in 0..n {
            let (r0, r1) = (g(rng), g(rng));
            y = [
                self.e[0][0] * y[0] + self.e[0][1] * y[1] + self.l[0][0] * r0,
                self.e[1][0] * y[0] + self.e[1][1] * y[1] + self.l[1][0] * r0 + self.l[1][1] * r1,
            ];
            a.push(y[0]);
            b.push(y[1]);
        }
        (a, b)
    }
}

/// |estimate − truth| ≤ 4 se + bias, and se below `max_rel` of the truth.
fn near(what: &str, e: &Estimate, truth: f64, bias: f64, max_rel: f64) {
    let (value, se) = (e.value, e.se);
    assert!(
        se.is_finite() && se > 0.0 && se < max_rel * truth.abs(),
        "{what}: se {se} vs {truth}"
    );
    assert!(
        (value - truth).abs() <= 4.0 * se + bias,
        "{what}: {value} ± {se} vs {truth} (bias allowance {bias})"
    );
}

fn opts(seed: u64) -> Options {
    Options {
        seed,
        ..Options::default()
    }
}

/// Free particle with memoryless friction: the velocity is Ornstein–Uhlenbeck,
/// v ← v e^{−γΔt} + sqrt(kT/m (1 − e^{−2γΔt})) ξ, C_v(t) = (kT/m) e^{−γt} exactly (Uhlenbeck &
/// Ornstein, Phys. Rev. 36, 823 (1930)), so m, D = kT/(mγ) and γ are known.
#[test]
fn ornstein_uhlenbeck_velocity() {
    let (m, g, dt, n): (f64, f64, f64, usize) = (2.0, 1.0, 0.02, 500_000);
    let c = (-g * dt).exp();
    let s = ((1.0 - c * c) / m).sqrt();
    let mut rng = seed::stream(11, 0);
    let mut v = rng.sample::<f64, _>(StandardNormal) / m.sqrt();
    let vs: Vec<f64> = (0..n)
        .map(|_| {
            v = c * v + s * rng.sample::<f64, _>(StandardNormal);
            v
        })
        .collect();
    let f = velocity::from_velocities(&[&vs], dt, &opts(1)).unwrap();
    assert_eq!(f.origin, Origin::Given);
    assert!(!f.confined && f.window.closed);
    assert_eq!(f.gamma_route, Route::GreenKubo);
    // trapezoid bias of D: (γΔt)²/12 = 3e-5 relative (module doc), far below the noise; the
    // window's truncation e^{−8} likewise. se below 10% of the value: T = 10⁴/γ holds ~10⁴
    // relaxation times, so the relative errors are a few per cent.
    near("m", &f.mass, m, 0.0, 0.1);
    near("D", &f.diffusion, 1.0 / (m * g), 0.0, 0.1);
    near("γ", &f.gamma, g, 0.0, 0.1);
    assert!(f.gamma.ci95[0] < f.gamma.value && f.gamma.value < f.gamma.ci95[1]);
    // memoryless: no lag after 0 resolved, so no exponential fit, and a warning says so
    assert!(f.kernel.fit.is_none(), "{:?}", f.kernel.fit);
    assert!(f.warnings.iter().any(|w| w.contains("memoryless")));
    // the spike's area (1 − e^{−γΔt})/Δt = γ(1 − γΔt/2 + …) (module doc): bias 1% of γ
    near("∫K", &f.kernel.resolved_area, g, 0.01 * g, 0.1);
}

/// Free particle with the exponential memory kernel K(t) = (γ/τ) e^{−t/τ} (the crate's
/// convention, `system::System::memory_time`): the Markovian embedding m v̇ = z,
/// ż = −z/τ − (mγ/τ) v + sqrt(2mγkT)/τ η. Solving the z equation,
/// z(t) = −(mγ/τ) ∫₀^t e^{−(t−s)/τ} v(s) ds + noise, i.e. m v̇ = −m ∫ K(t − s) v(s) ds + R with
/// the K above (Zwanzig, Nonequilibrium Statistical Mechanics, 2001, §2.4 and §3.3; Ceriotti,
/// Bussi & Parrinello, J. Chem. Theory Comput. 6, 1170 (2010) for the embedding in general).
/// Its stationary law is v ~ N(0, kT/m), z ~ N(0, mγkT/τ), independent (the Lyapunov equation,
/// checked in `simulate::engine`'s doc), so the exact update of the (v, z) pair is an
/// Ornstein–Uhlenbeck step.
fn gle(m: f64, g: f64, tau: f64, dt: f64, n: usize, s: u64) -> Vec<f64> {
    let a = [[0.0, 1.0 / m], [-m * g / tau, -1.0 / tau]];
    let ex = Exact::new(a, [1.0 / m, m * g / tau], dt);
    ex.run(n, &mut seed::stream(s, 0)).0
}

fn memory_case(tau: f64, s: u64) -> Friction {
    let (m, g, dt, n) = (1.0, 1.0, 0.04, 800_000);
    let vs = gle(m, g, tau, dt, n, s);
    let f = velocity::from_velocities(&[&vs], dt, &opts(s)).unwrap();
    assert!(
        !f.confined && f.window.closed,
        "τ = {tau}: {:?}",
        f.warnings
    );
    // D = kT/(m ∫K) = kT/(mγ) for the free GLE; trapezoid and window errors as above (< 0.1%);
    // se below 10%: T = 3.2·10⁴ holds thousands of VACF decay times
    near("GK γ", &f.gamma, g, 0.0, 0.1);
    near("m", &f.mass, m, 0.0, 0.1);
    let fit = f.kernel.fit.as_ref().expect("the kernel is resolved");
    assert!(fit.points >= 5, "{fit:?}");
    // the inversion's discretisation error beyond lag 0 is O(Δt²/τ²) ≤ 0.6% (unit test
    // `exponential_kernel_inverts` finds < 0.1% at Δt = τ/100), allowed as 1% of the value;
    // se below 15% of the value: the kernel's tail is noisier than D
    near("kernel γ", &fit.gamma, g, 0.01 * g, 0.15);
    near("kernel τ", &fit.memory_time, tau, 0.01 * tau, 0.15);
    f
}

/// τγ = 0.5: over-damped memory, the VACF still oscillates once (roots −1 ± i).
#[test]
fn exponential_memory_short() {
    memory_case(0.5, 21);
}

/// τγ = 2: long memory, a ringing VACF (roots (−1 ± i√7)/4): ∫C/∫|C| well below 1 but the
/// particle is free.
#[test]
fn exponential_memory_long() {
    let f = memory_case(2.0, 22);
    assert!(f.integral_ratio < 0.9, "{}", f.integral_ratio);
}

/// Free Langevin particle sampled in position: (x, v) advance exactly by
/// v' = v e^{−γΔt} + ..., x' = x + v (1 − e^{−γΔt})/γ + ..., with var x-noise
/// (kT/(mγ²))(2γΔt − 3 + 4e^{−γΔt} − e^{−2γΔt}), var v-noise (kT/m)(1 − e^{−2γΔt}) and their
/// covariance (kT/(mγ))(1 − e^{−γΔt})² (Chandrasekhar, Rev. Mod. Phys. 15, 1 (1943), ch. II;
/// re-derived here from the Itô integrals).
fn langevin_positions(m: f64, g: f64, dt: f64, n: usize, s: u64) -> Vec<f64> {
    let e = (-g * dt).exp();
    let vxx = (2.0 * g * dt - 3.0 + 4.0 * e - e * e) / (m * g * g);
    let vvv = (1.0 - e * e) / m;
    let cxv = (1.0 - e).powi(2) / (m * g);
    let l00 = vxx.sqrt();
    let l10 = cxv / l00;
    let l11 = (vvv - l10 * l10).sqrt();
    let mut rng = seed::stream(s, 0);
    let mut gauss = move || rng.sample::<f64, _>(StandardNormal);
    let (mut x, mut v) = (0.0, gauss() / m.sqrt());
    (0..n)
        .map(|_| {
            let (r0, r1) = (gauss(), gauss());
            x += v * (1.0 - e) / g + l00 * r0;
            v = e * v + l10 * r0 + l11 * r1;
            x
        })
        .collect()
}

/// A free Langevin particle (m = γ = 1) sampled every `dt` in position, analysed through central
/// differences: γ within 4 se of the stated biased value γ f(2γΔt) (exact for the central
/// difference of this process, so no extra allowance) and D of the true 1/(mγ) (its trapezoid
/// sum telescopes; module doc), each se below `max_rel`. Returns the result and f(2γΔt).
fn fd_case(dt: f64, n: usize, s: u64, max_rel: f64) -> (Friction, f64) {
    let (m, g) = (1.0, 1.0);
    let x = langevin_positions(m, g, dt, n, s);
    let f = velocity::from_positions(&[&x], dt, &opts(s)).unwrap();
    assert_eq!(f.origin, Origin::CentralDifference);
    let factor = fd_factor(g * dt);
    near("γ", &f.gamma, g * factor, 0.0, max_rel);
    near("D", &f.diffusion, 1.0 / (m * g), 0.0, max_rel);
    near("m", &f.mass, m / factor, 0.0, max_rel);
    (f, factor)
}

/// Fine sampling (γΔt = 0.01, T = 10⁴/γ: se below 10%): the stated bias is 0.7% and no sampling
/// warning is given.
#[test]
fn finite_difference_fine() {
    let (f, factor) = fd_case(0.01, 1_000_000, 31, 0.1);
    // the stated bias, evaluated at the estimated γ: d(f − 1)/dγ = −(2/3)Δt, so 4 se of γ move
    // it by < 1e-3
    let stated = f.fd_bias.expect("finite differences state their bias");
    assert!((stated - (factor - 1.0)).abs() < 1e-3, "{stated}");
    assert!(
        !f.warnings.iter().any(|w| w.contains("not small")),
        "{:?}",
        f.warnings
    );
}

/// Coarse sampling (γΔt = 0.25, T = 5·10⁴/γ: se below 5%): the central difference lowers γ by
/// f(0.5) − 1 = −14.8%; the estimate sits on the stated biased value, far from the true γ, and
/// a warning says why.
#[test]
fn finite_difference_coarse() {
    let (f, _) = fd_case(0.25, 200_000, 32, 0.05);
    assert!(
        (f.gamma.value - 1.0).abs() > 4.0 * f.gamma.se,
        "the bias should be visible"
    );
    assert!(
        f.warnings.iter().any(|w| w.contains("not small against")),
        "{:?}",
        f.warnings
    );
}

/// The observed mean force of positions `xs`: the free energy of `observe::analyse` (pass 2,
/// U = −ln p with its block-bootstrap σ_U), smoothed by `MeanForce`. The cores lie where no
/// sample goes (the kinetics are not needed here).
fn observed_force(xs: &[f64], dt: f64) -> MeanForce {
    let far = [
        Interval {
            lo: -1000.0,
            hi: -900.0,
        },
        Interval {
            lo: 900.0,
            hi: 1000.0,
        },
    ];
    let o = observe::Options {
        cores: Some(far),
        ..observe::Options::default()
    };
    let src = Source::Samples {
        name: "test".into(),
        values: xs.to_vec(),
        dt,
    };
    let r = observe::analyse(&[src], &o).unwrap();
    MeanForce::from_free_energy(&r.free_energy).expect("a profile")
}

/// A particle in a harmonic well, ω² = 1, memoryless friction γ = 0.5: (x, v) is a stationary
/// linear process with Σ_eq = diag(kT/(mω²), kT/m), updated exactly as above. ∫C_v = 0, so
/// Green–Kubo gives no γ; the kernel inversion with the observed mean force gives the spike of
/// area (1 − e^{−γΔt})/Δt, turned into the memoryless γ.
#[test]
fn harmonic_well_falls_back_to_the_kernel() {
    let (m, w2, g, dt) = (1.0, 1.0, 0.5, 0.01);
    let a = [[0.0, 1.0], [-w2, -g]];
    let ex = Exact::new(a, [1.0 / (m * w2), 1.0 / m], dt);
    let (xs, vs) = ex.run(1_000_000, &mut seed::stream(41, 0));
    let o = Options {
        force: Some(observed_force(&xs, dt)),
        ..opts(5)
    };
    let f = velocity::from_velocities_and_positions(&[&vs], &[&xs], dt, &o).unwrap();
    let phi = f.force.as_ref().expect("a force term").share;
    assert!(f.confined, "φ {phi:?}");
    // held in the well: the force takes the whole velocity correlation (φ → 1 as W → ∞; the
    // window W ≈ 8 τ_abs leaves a few per cent), 4 se
    assert!((phi.value - 1.0).abs() < 0.05 + 4.0 * phi.se, "{phi:?}");
    assert!(f.warnings.iter().any(|w| w.contains("mean force takes")));
    assert_eq!(f.gamma_route, Route::KernelArea);
    // the memoryless γ of the spike is exact for an exponential VACF; the well bends C at
    // O(ω²Δt²) = 1e-4 and the spline's U′ is off by its smoothing bias (a few 0.1% on a
    // parabola over 10⁴ relaxation times): 1% allowed; se below 15%
    near("γ", &f.gamma, g, 0.01 * g, 0.15);
    // the written scenario takes it (a force term, se ≤ 20%)
    assert_eq!(f.for_scenario().friction, Some(f.gamma.value));
}

/// The same well sampled in position: confinement is found from the observed force, and the
/// kernel's γ carries the central difference's bias f(2γΔt) − 1 = −0.3% (module doc), inside 1%.
#[test]
fn harmonic_well_from_positions() {
    let (w2, g, dt) = (1.0, 0.5, 0.01);
    let ex = Exact::new([[0.0, 1.0], [-w2, -g]], [1.0 / w2, 1.0], dt);
    let (xs, _) = ex.run(1_000_000, &mut seed::stream(42, 0));
    let o = Options {
        force: Some(observed_force(&xs, dt)),
        ..opts(6)
    };
    let f = velocity::from_positions(&[&xs], dt, &o).unwrap();
    assert!(f.confined && f.kernel.force_term, "{:?}", f.force);
    assert_ne!(f.gamma_route, Route::GreenKubo);
    near("γ", &f.gamma, g, 0.01 * g, 0.15);
}

/// Underdamped particle in U = E_b (x² − 1)² (kT = 1, m = 1; ω₀² = U″(±1) = 8E_b) by BAOAB
/// (Leimkuhler & Matthews, Appl. Math. Res. Express 2013, 34), step `h`, every step sampled;
/// with `memory` = Some(τ) the friction is the exponential kernel K = (γ/τ) e^{−t/τ}, its
/// Markovian embedding (v, z) (as for `gle` above) advanced by its exact Ornstein–Uhlenbeck step
/// in place of BAOAB's O step.
fn double_well(
    eb: f64,
    g: f64,
    memory: Option<f64>,
    h: f64,
    n: usize,
    s: u64,
) -> (Vec<f64>, Vec<f64>) {
    let force = |x: f64| -4.0 * eb * x * (x * x - 1.0);
    let c = (-g * h).exp();
    let sc = (1.0 - c * c).sqrt();
    let ou = memory.map(|tau| Exact::new([[0.0, 1.0], [-g / tau, -1.0 / tau]], [1.0, g / tau], h));
    let mut rng = seed::stream(s, 0);
    let mut gauss = move || rng.sample::<f64, _>(StandardNormal);
    let (mut x, mut v) = (-1.0, gauss());
    let mut z = memory.map_or(0.0, |tau| (g / tau).sqrt() * gauss());
    let mut f = force(x);
    let (mut xs, mut vs) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for _ in 0..n {
        v += 0.5 * h * f;
        x += 0.5 * h * v;
        match &ou {
            None => v = c * v + sc * gauss(),
            Some(e) => {
                let (r0, r1) = (gauss(), gauss());
                (v, z) = (
                    e.e[0][0] * v + e.e[0][1] * z + e.l[0][0] * r0,
                    e.e[1][0] * v + e.e[1][1] * z + e.l[1][0] * r0 + e.l[1][1] * r1,
                );
            }
        }
        x += 0.5 * h * v;
        f = force(x);
        v += 0.5 * h * f;
        xs.push(x);
        vs.push(v);
    }
    (xs, vs)
}

/// A double well (E_b = 3 kT, ω₀² = 24) with memoryless friction γ: given velocities and their
/// positions. Before the observed force entered the inversion, γ = 2 took the Green–Kubo route
/// (∫C/∫|C| ≈ 0.09) and came out near 27.
fn double_well_case(g: f64, h: f64, n: usize, s: u64) -> Friction {
    let (xs, vs) = double_well(3.0, g, None, h, n, s);
    let o = Options {
        force: Some(observed_force(&xs, h)),
        ..opts(s)
    };
    let f = velocity::from_velocities_and_positions(&[&vs], &[&xs], h, &o).unwrap();
    assert!(f.confined, "{:?}", f.force);
    assert_eq!(f.gamma_route, Route::KernelArea, "{:?}", f.kernel.fit);
    eprintln!(
        "γ = {g}: {:?} (Green–Kubo {:?}, φ {:?}, ∫C/∫|C| {})",
        f.gamma,
        f.gamma_green_kubo,
        f.force.as_ref().map(|t| t.share),
        f.integral_ratio
    );
    // BAOAB's O step makes the free VACF e^{−γt} exactly, so the memoryless γ of the spike is
    // γ up to the O(h²) splitting error in the well (ω₀²h² ≤ 0.1%) and the spline's smoothing
    // bias of U′; 2% allowed for both, 4 se beside it; se below 10%
    near("γ", &f.gamma, g, 0.02 * g, 0.1);
    assert!(
        f.gamma.ci95[0] < g * 1.02 && g * 0.98 < f.gamma.ci95[1],
        "{:?}",
        f.gamma
    );
    assert_eq!(f.for_scenario().friction, Some(f.gamma.value));
    f
}

#[test]
fn double_well_weak_friction() {
    let f = double_well_case(2.0, 0.005, 2_000_000, 51);
    // Green–Kubo is far off here (the case that failed before): reported, not used
    assert!(f.gamma_green_kubo.value > 4.0, "{:?}", f.gamma_green_kubo);
}

#[test]
fn double_well_strong_friction() {
    double_well_case(20.0, 0.005, 2_000_000, 52);
}

/// A double well (E_b = 3 kT) with the exponential memory kernel (γ = 5, τ = 0.1): the kernel
/// inversion with the observed force resolves the memory; its fit gives γ and τ.
#[test]
fn double_well_with_memory() {
    let (g, tau, h) = (5.0, 0.1, 0.005);
    let (xs, vs) = double_well(3.0, g, Some(tau), h, 2_000_000, 53);
    let o = Options {
        force: Some(observed_force(&xs, h)),
        ..opts(53)
    };
    let f = velocity::from_velocities_and_positions(&[&vs], &[&xs], h, &o).unwrap();
    let fit = f.kernel.fit.as_ref().expect("memory resolved");
    eprintln!(
        "memory: γ {:?} τ {:?} points {} (Green–Kubo {:?}, φ {:?})",
        fit.gamma,
        fit.memory_time,
        fit.points,
        f.gamma_green_kubo,
        f.force.as_ref().map(|t| t.share)
    );
    assert_eq!(f.gamma_route, Route::KernelFit);
    // discretisation of the inversion O(h²/τ²) = 0.25% (unit test `exponential_kernel_inverts`)
    // plus the spline's U′ bias: 2% allowed; se below 15% (the kernel's tail is noisy)
    near("kernel γ", &fit.gamma, g, 0.02 * g, 0.15);
    near("kernel τ", &fit.memory_time, tau, 0.02 * tau, 0.15);
}
