//! Observed-trajectory analyses on trajectories made by an independent generator:
//! `reference/trajectory.py` (pure Python, Mersenne Twister and Euler–Maruyama with dt = 1e-3,
//! no code shared with escapade) wrote `reference/dw3_const.npy` and `reference/dw3_ramp.npy`:
//! U(x) = 3 (x² − 1)² kT, D = 1 or D(x) = 1 + 0.25 (x + 1), reflecting walls at ±2, 200 000
//! positions sampled every 0.05. The generator's step biases the stationary density by about 1%
//! in the wells (D dt U'' = 0.024) and the rates by a few percent; the tolerances below add that.

use escapade::observe::propagator::{self, BayesSettings, Bins};
use escapade::observe::{self, Options, Source};
use escapade::potential::{Diffusion, Family, Potential};
use escapade::theory::mfpt::mfpt;
use std::path::{Path, PathBuf};

const FRAME: f64 = 0.05;

fn file(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("reference")
        .join(name)
}

/// The positions of a 1-D little-endian float32 .npy file as the generator writes it.
fn positions(name: &str) -> Vec<f64> {
    let bytes = std::fs::read(file(name)).unwrap();
    assert_eq!(&bytes[..8], b"\x93NUMPY\x01\x00");
    let header = u16::from_le_bytes([bytes[8], bytes[9]]) as usize;
    let text = std::str::from_utf8(&bytes[10..10 + header]).unwrap();
    assert!(text.contains("'<f4'"), "{text}");
    bytes[10 + header..]
        .chunks_exact(4)
        .map(|c| f64::from(f32::from_le_bytes([c[0], c[1], c[2], c[3]])))
        .collect()
}

fn well() -> Family {
    Family::DoubleWell {
        eb: 3.0,
        a: 1.0,
        domain: (-2.0, 2.0),
    }
}

// The observed rates against the exact ones: with transition-based counting 1/k_AB is the mean
// first-passage time from the edge of core A to the edge of core B (Hummer, J. Chem. Phys. 120,
// 516 (2004)); the exact overdamped MFPT (Szabo, Schulten & Schulten, J. Chem. Phys. 72, 4350
// (1980)) from `theory::mfpt`, reflecting wall at ∓2 as in the generator. Tolerance: 4 standard
// errors k/sqrt(n) plus 5%: the generator's Euler–Maruyama step (a few percent at 3 kT), and core
// entries seen only at the next sample (0.05 of an MFPT of about 10).
#[test]
fn observed_rates_of_the_independent_trajectory_match_the_exact_mfpt() {
    let opts = Options {
        dt: Some(FRAME),
        ..Options::default()
    };
    let r = observe::analyse(&[Source::File(file("dw3_const.npy"))], &opts).unwrap();
    let k = &r.kinetics;
    let d = Diffusion::Constant(1.0);
    for (rate, wall, from, to) in [
        (&k.forward, -2.0, k.core_a.hi, k.core_b.lo),
        (&k.backward, 2.0, k.core_b.lo, k.core_a.hi),
    ] {
        let exact = 1.0 / mfpt(&well(), &d, wall, from, to, &[0.0]).time;
        let n = rate.transitions;
        let est = rate.rate.unwrap();
        eprintln!("n = {n}, k = {est} {:?}, exact {exact}", rate.ci95);
        assert!(n > 300, "only {n} transitions");
        let se = est / (n as f64).sqrt();
        assert!(
            (est - exact).abs() < 4.0 * se + 0.05 * exact,
            "{est} ± {se} vs exact {exact}"
        );
    }
    // the Boltzmann-inverted U within 2σ_U of the exact −ln p at the bin centre (shifted to the
    // same minimum) in at least 85% of bins: σ_U is a bootstrap standard deviation (95% expected
    // within 2σ), less the ~1% density bias of the step and the bin-average vs centre difference
    // (U''h²/24 ≈ 0.01 kT for h ≈ 0.05)
    let fe = &r.free_energy;
    let pot = well();
    let min_u = fe.bins.iter().map(|b| b.u).fold(f64::INFINITY, f64::min);
    let (mut inside, mut total) = (0, 0);
    for b in &fe.bins {
        let Some(sigma) = b.sigma_u else { continue };
        total += 1;
        if (b.u - min_u - pot.u(b.x)).abs() <= 2.0 * sigma + 0.05 {
            inside += 1;
        }
    }
    eprintln!("{inside}/{total} bins within 2σ");
    assert!(total > 40 && inside as f64 >= 0.85 * total as f64);
}

// The Bayesian propagator D (Hummer, New J. Phys. 7, 34 (2005)) at the wells and the barrier of
// both independent trajectories: the generating D inside the reported 95% interval widened by the
// module's stated bin-size bias (its `bin_bias`, a few percent at Δx = 0.1 in the wells).
#[test]
fn propagator_diffusion_of_the_independent_trajectories_covers_the_truth() {
    let bins = Bins::new(-1.6, 1.6, 32).unwrap();
    for (name, truth) in [
        ("dw3_const.npy", (|_x: f64| 1.0) as fn(f64) -> f64),
        ("dw3_ramp.npy", |x: f64| 1.0 + 0.25 * (x + 1.0)),
    ] {
        let x = positions(name);
        assert_eq!(x.len(), 200_000);
        let counts = propagator::count_transitions(&[&x], &bins, 2).unwrap();
        let fit =
            propagator::bayesian(&counts, &bins, 2.0 * FRAME, &BayesSettings::default()).unwrap();
        let slack = 1.0 + fit.bin_bias.max(0.0);
        for at in [-1.0, 0.0, 1.0] {
            let i = fit
                .diffusion
                .iter()
                .min_by(|a, b| (a.x - at).abs().total_cmp(&(b.x - at).abs()))
                .unwrap();
            let d = truth(i.x);
            eprintln!("{name} x {:.2}: D {d} in {:?}?", i.x, i.ci95);
            assert!(
                i.ci95[0] / slack <= d && d <= i.ci95[1] * slack,
                "{name} x {}: {d} not in {:?} (bias {})",
                i.x,
                i.ci95,
                fit.bin_bias
            );
        }
    }
}
