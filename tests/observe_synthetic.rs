//! Observed kinetics and free energy from synthetic trajectories of a known overdamped double
//! well, U = E_b((x/a)² − 1)² with E_b = 4 kT, a = 1, D = 1, generated here by Euler–Maruyama from
//! fixed-seed streams (`escapade::seed::stream`). Fixed seeds; tolerances in standard errors (4σ)
//! plus the stated discretisation biases.

use escapade::observe::{self, ObservedReport, Options, Source, write_profile};
use escapade::potential::{Diffusion, Family, Potential};
use escapade::scenario::Model;
use escapade::seed;
use escapade::theory::mfpt::mfpt;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::sync::OnceLock;

const EB: f64 = 4.0;
/// Integrator step: the Euler–Maruyama invariant density is off by O(D dt U'') ≈ 0.6% in the
/// wells (U'' = 8 E_b = 32), far below σ_U and the rate's statistical error.
const DT: f64 = 2e-4;
/// Steps between recorded samples (sampling interval 2e-3).
const EVERY: u64 = 10;
const TRAJECTORIES: u64 = 4;
/// 4000 time units each: about 470 transitions each way at 1/MFPT ≈ 0.059.
const STEPS: u64 = 20_000_000;

fn well() -> Family {
    Family::DoubleWell {
        eb: EB,
        a: 1.0,
        domain: (-3.0, 3.0),
    }
}

/// One Euler–Maruyama trajectory, x += −U'(x) D dt + sqrt(2 D dt) ξ, recorded every EVERY steps.
fn trajectory(index: u64) -> Vec<f64> {
    let mut rng = seed::stream(2024, index);
    let s = (2.0 * DT).sqrt();
    let mut x = if index.is_multiple_of(2) { -1.0 } else { 1.0 };
    let mut out = Vec::with_capacity((STEPS / EVERY) as usize);
    for k in 1..=STEPS {
        let f = -4.0 * EB * x * (x * x - 1.0);
        x += f * DT + s * rng.sample::<f64, _>(StandardNormal);
        if k.is_multiple_of(EVERY) {
            out.push(x);
        }
    }
    out
}

fn sources() -> &'static Vec<Source> {
    static S: OnceLock<Vec<Source>> = OnceLock::new();
    S.get_or_init(|| {
        (0..TRAJECTORIES)
            .map(|i| Source::Samples {
                name: format!("em{i}"),
                values: trajectory(i),
                dt: DT * EVERY as f64,
            })
            .collect()
    })
}

fn report() -> &'static ObservedReport {
    static R: OnceLock<ObservedReport> = OnceLock::new();
    R.get_or_init(|| observe::analyse(sources(), &Options::default()).unwrap())
}

// (a) The observed rate against the exact rate. With transition-based counting, 1/k_AB is the
// mean first-passage time from the edge of core A to the edge of core B (Hummer, J. Chem. Phys.
// 120, 516 (2004)); the exact overdamped MFPT (Szabo, Schulten & Schulten 1980) comes from
// `escapade::theory::mfpt` with a reflecting wall far out (U = 256 kT there). Tolerance: 4
// standard errors k/sqrt(n) plus 3% for the integrator (O(dt) ≈ 0.6% in the density, more at the
// barrier) and for entries into a core noticed only at the next sample (2e-3 of an MFPT of ~17).
#[test]
fn observed_rate_matches_exact_mfpt_rate() {
    let r = report();
    let k = &r.kinetics;
    eprintln!("cores A {:?} B {:?}", k.core_a, k.core_b);
    let pot = well();
    let d = Diffusion::Constant(1.0);
    for (rate, wall, from, to) in [
        (&k.forward, -3.0, k.core_a.hi, k.core_b.lo),
        (&k.backward, 3.0, k.core_b.lo, k.core_a.hi),
    ] {
        let exact = 1.0 / mfpt(&pot, &d, wall, from, to, &[0.0]).time;
        let n = rate.transitions;
        let est = rate.rate.unwrap();
        let ci = rate.ci95.unwrap();
        eprintln!("n = {n}, k = {est} {ci:?}, exact {exact}");
        assert!(n > 400, "only {n} transitions");
        let se = est / (n as f64).sqrt();
        assert!(
            (est - exact).abs() < 4.0 * se + 0.03 * exact,
            "{est} ± {se} vs exact {exact}"
        );
        // the exact rate also lies inside the reported 95% interval widened by the same 3% bias
        assert!(
            ci[0] < exact * 1.03 && exact < ci[1] * 1.03,
            "{ci:?} vs {exact}"
        );
    }
    // exponential dwell times for a Markovian crossing: CV = 1 with standard error ~1/sqrt(n)
    // (for an exponential, var of the sample sd/mean ≈ 1/n; common practice, no source); 4 of them
    for dwell in [&k.dwell_a, &k.dwell_b] {
        let cv = dwell.cv.unwrap();
        assert!(
            (cv - 1.0).abs() < 4.0 / (dwell.count as f64).sqrt(),
            "CV {cv}, {} dwells",
            dwell.count
        );
    }
    // automatic cores: within 1 kT of the minima at ±1, i.e. |x² − 1| ≤ 1/2: x ∈ [0.707, 1.225],
    // to within the noise of the histogram (a bin or two of width ~0.02)
    assert!((k.core_a.hi + 0.707).abs() < 0.06, "{:?}", k.core_a);
    assert!((k.core_b.lo - 0.707).abs() < 0.06, "{:?}", k.core_b);
    // the boundary variants are reported with a spread
    assert!(k.boundary.forward_spread.unwrap() > 0.0);
}

/// −ln of the exact probability density averaged over [lo, lo + h] (Simpson's rule, 64 panels).
fn exact_bin_u(lo: f64, h: f64, ln_z: f64) -> f64 {
    let pot = well();
    let n = 64;
    let f = |i: usize| (-pot.u(lo + h * i as f64 / n as f64)).exp();
    let mut s = f(0) + f(n);
    for i in 1..n {
        s += if i % 2 == 1 { 4.0 } else { 2.0 } * f(i);
    }
    let integral = s * h / (3.0 * n as f64);
    -(integral / h).ln() + ln_z
}

// (b) The Boltzmann-inverted U against the exact bin-averaged −ln p (no free constant: both are
// normalised densities). σ_U is a bootstrap standard deviation, so about 95% of bins should lie
// within 2σ; we ask for 90%: with ~200 bins the binomial scatter of the fraction is ~1.5%, and the
// bootstrap σ itself is rough in the sparse tails.
#[test]
fn inverted_free_energy_within_sigma() {
    let r = report();
    let fe = &r.free_energy;
    let pot = well();
    // Z = ∫ e^{−U} over [−3, 3] (the tails beyond hold e^{−256}), Simpson with 6000 panels
    let n = 6000;
    let f = |i: usize| (-pot.u(-3.0 + 6.0 * i as f64 / n as f64)).exp();
    let mut s = f(0) + f(n);
    for i in 1..n {
        s += if i % 2 == 1 { 4.0 } else { 2.0 } * f(i);
    }
    let ln_z = (s * 6.0 / (3.0 * n as f64)).ln();
    let h = fe.bin_width;
    let mut inside = 0;
    let mut total = 0;
    for b in &fe.bins {
        let Some(sigma) = b.sigma_u else { continue };
        let exact = exact_bin_u(b.x - 0.5 * h, h, ln_z);
        total += 1;
        if (b.u - exact).abs() <= 2.0 * sigma {
            inside += 1;
        }
    }
    eprintln!(
        "{inside}/{total} bins within 2σ; τ_int {} samples, {} blocks of {}",
        r.correlation.tau_int, fe.blocks, fe.block_samples
    );
    assert!(total > 50, "{total} bins");
    assert!(
        inside as f64 >= 0.9 * total as f64,
        "{inside}/{total} within 2σ"
    );
    // τ_int of the position: ρ(t) ≈ e^{−(k_AB + k_BA) t} for hopping between symmetric wells, so
    // τ_int ≈ 1/(2k) (common practice, no source); within 30% (the in-well relaxation adds a
    // little, and the window's statistical error is ~10% here)
    let k = r.kinetics.forward.rate.unwrap();
    let tau = r.correlation.tau_int * DT * EVERY as f64;
    assert!(
        (tau * 2.0 * k - 1.0).abs() < 0.3,
        "τ_int {tau} vs 1/(2k) {}",
        0.5 / k
    );
}

// The profile table reads back as a scenario's [potential] table (columns x, U, sigma_U in the
// scenario's energy unit, here kT).
#[test]
fn profile_table_reads_back_as_a_scenario() {
    let r = report();
    let dir = std::env::temp_dir().join(format!("escapade-observe-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut out = Vec::new();
    let rows = write_profile(&r.free_energy, 1.0, &mut out).unwrap();
    std::fs::write(dir.join("observed.csv"), &out).unwrap();
    let text = "[particle]\ndiffusion = 1.0\n[potential]\ntable = \"observed.csv\"\n[states]\nstart = -1.0\n";
    let m = Model::from_text(text, "observed.toml", &dir, &[]).unwrap();
    assert!(rows > 50);
    // the table was shifted to a minimum of 0; the barrier at 0 is E_b above the wells within
    // the noise (σ_U at the barrier ~0.1 kT, plus the spline through noisy points): 0.5 kT
    let p = &m.system.potential;
    let barrier = p.u(0.0) - p.u(-1.0).min(p.u(1.0));
    assert!((barrier - EB).abs() < 0.5, "barrier {barrier}");
    std::fs::remove_dir_all(&dir).ok();
}
