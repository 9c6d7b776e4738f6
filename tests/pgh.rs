//! The Pollak–Grabert–Hänggi turnover rate (src/theory/pgh.rs): the energy loss against mpmath for
//! the cubic well, its limits, and the rate against simulation across the turnover.

mod common;

use common::model;
use escapade::theory::turnover;

/// The cubic family with E_b = 6 kT, L = 1.5 (width = 2L/3 = 1, barrier at x = 1), m = 1.
const CUBIC: &str = "[particle]\nmass = 1.0\nfriction = 1.0\n[potential]\nfamily = \"cubic\"\nbarrier = 6.0\nwidth = 1.0\n[states]\nstart = 0.0\n";

fn reference() -> serde_json::Value {
    serde_json::from_str(include_str!("../reference/pgh_values.json")).unwrap()
}

// Δ for the cubic well at γ/ω_b from 0.01 to 30 against reference/pgh.py (mpmath, 30 digits):
// closed-form sech² orbit and a frequency integral, a route independent of the code's numerical
// orbit and time-domain filter. The code's step is 1/400 of the fastest local period, with
// second-order errors ~5e-7 (module doc): 1e-5.
#[test]
fn energy_loss_matches_mpmath_for_the_cubic_well() {
    for case in reference()["cubic"].as_array().unwrap() {
        let g = case["gamma"].as_f64().unwrap();
        let (_, t) = model(CUBIC, &[&format!("particle.friction={g:?}")]);
        let p = t.pgh.unwrap();
        let want = case["delta"].as_f64().unwrap();
        let u00 = case["u00_squared"].as_f64().unwrap();
        assert!(
            (p.energy_loss / want - 1.0).abs() < 1e-5,
            "γ = {g}: {} vs {want}",
            p.energy_loss
        );
        assert!((p.u00_squared / u00 - 1.0).abs() < 1e-12);
        // the rate is Υ (λ‡/ω_b) k_TST = Υ k_Kramers
        let k = t.rates.kramers.unwrap() * turnover::depopulation(want);
        assert!((t.rates.pgh.unwrap() / k - 1.0).abs() < 1e-5);
    }
}

// Small γ: Δ → γ I_b (Mel'nikov's energy loss, Mel'nikov & Meshkov 1986), so PGH meets
// Mel'nikov–Meshkov, and both meet energy diffusion: at γ/ω_b = 1e-8 the O(γ/ω_b) correction to Δ
// and to λ₊/ω_b is 1e-8, and A(δ)/δ − 1 ≈ −0.82 sqrt(δ) ≈ −5.4e-4 (δ = γ I_b ≈ 4.3e-7), so PGH/ED
// within 1e-3 and PGH/MM within 1e-5 (the discretisation of Δ).
#[test]
fn weak_friction_limit_is_energy_diffusion() {
    let wb = (13.5f64 * 6.0 / 1.5 / 1.5).sqrt();
    let g = 1e-8 * wb;
    let (_, t) = model(CUBIC, &[&format!("particle.friction={g:?}")]);
    let r = t.rates;
    assert!((r.pgh.unwrap() / r.turnover.unwrap() - 1.0).abs() < 1e-5);
    assert!((r.pgh.unwrap() / r.energy_diffusion.unwrap() - 1.0).abs() < 1e-3);
}

// Large γ: Δ does not grow with γ but tends to a fixed fraction of E_b (about 0.77 E_b for the
// cubic well, reference/pgh_values.json), so Υ → 1 and PGH → Kramers only when E_b ≫ kT. At
// E_b = 40 kT and γ/ω_b = 30, Δ ≈ 31 kT and 1 − Υ ≈ 2 e^{−Δ/4}/sqrt(πΔ) ≈ 9e-5 (Mel'nikov 1991,
// PHYSICS.md §4): PGH/Kramers within 2e-4. At 6 kT the same friction leaves Υ ≈ 0.84, the known
// shortfall of PGH at low barriers, which the check below pins with the mpmath Δ.
#[test]
fn strong_friction_limit_is_kramers_for_high_barriers() {
    let wb = |eb: f64| (13.5 * eb / 1.5 / 1.5f64).sqrt();
    let g = 30.0 * wb(40.0);
    let (_, t) = model(
        CUBIC,
        &["potential.barrier=40.0", &format!("particle.friction={g:?}")],
    );
    let p = t.pgh.unwrap();
    // Δ/E_b depends on γ/ω_b only for the cubic well (everything scales with E_b)
    let at6 = reference()["cubic"][6]["delta"].as_f64().unwrap();
    assert!((p.energy_loss / 40.0 / (at6 / 6.0) - 1.0).abs() < 1e-5);
    let r = t.rates;
    assert!((r.pgh.unwrap() / r.kramers.unwrap() - 1.0).abs() < 2e-4);
    let (_, t6) = model(
        CUBIC,
        &[&format!("particle.friction={:?}", 30.0 * wb(6.0))],
    );
    let ups = t6.rates.pgh.unwrap() / t6.rates.kramers.unwrap();
    assert!((ups / turnover::depopulation(at6) - 1.0).abs() < 1e-5 && ups < 0.9);
}
